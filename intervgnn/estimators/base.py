"""The contract every estimator keeps."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from ..distribution import Distribution
from ..errors import DataError, NotFittedError, QueryError
from ..graph import CausalGraph
from ..query import Query, make_query
from ..table import Table

__all__ = ["Estimator", "check_fit_inputs", "check_alpha"]


def check_alpha(alpha, allow_auto: bool = False) -> None:
    """Raise DataError unless ``alpha`` is a non-negative number (or ``"auto"`` where allowed)."""
    if allow_auto and alpha == "auto":
        return
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) or not alpha >= 0:
        expected = "a non-negative number or 'auto'" if allow_auto else "a non-negative number"
        raise DataError(f"alpha must be {expected}, got {alpha!r}")


def check_fit_inputs(table: Table, graph: CausalGraph) -> Table:
    """Check that ``table`` has exactly the graph's variables; return it with columns in graph order.

    Raises
    ------
    DataError
        A graph variable missing from the data, or a data column not in the graph.
    """
    if not isinstance(table, Table):
        raise DataError(f"fit expects a Table, got {type(table).__name__}")
    if not isinstance(graph, CausalGraph):
        raise DataError(f"fit expects a CausalGraph, got {type(graph).__name__}")
    missing = [v for v in graph.nodes if v not in table.variables]
    if missing:
        raise DataError(f"variable '{missing[0]}' is in the graph but not in the data")
    extra = [v for v in table.variables if v not in graph]
    if extra:
        raise DataError(f"column '{extra[0]}' is in the data but not in the graph")
    if table.n_rows == 0:
        raise DataError("the data have no rows")
    return table if table.variables == graph.nodes else table.select(graph.nodes)


class Estimator:
    """Base class: ``fit(table, graph)`` learns, ``query`` answers, ``effect`` contrasts.

    Subclasses store their settings in ``__init__`` (nothing else), learn in
    ``fit`` (which returns ``self``; learned attributes end in ``_``; a
    second ``fit`` starts from scratch), and implement :meth:`_answer`. A
    query never changes the estimator.
    """

    #: short name used by the harness and the command line
    name = "estimator"

    def fit(self, table: Table, graph: CausalGraph) -> Estimator:  # pragma: no cover - abstract
        raise NotImplementedError

    def _check_settings(self) -> None:
        """Raise an :class:`~intervgnn.errors.IntervgnnError` naming a bad setting.

        ``fit`` calls it first; the harness calls it when it reads a config,
        so that a bad setting stops a sweep before any run starts.
        """

    # ---------------------------------------------------------------- query
    def _check_fitted(self) -> None:
        if not hasattr(self, "states_"):
            raise NotFittedError(f"this {type(self).__name__} is not fitted yet; call fit(table, graph) first")

    def query(
        self,
        target: str | Sequence[str],
        do: Mapping[str, str] | None = None,
        given: Mapping[str, str] | None = None,
    ) -> Distribution:
        """Estimate P(target | do(...), given).

        Raises
        ------
        NotFittedError
            Before ``fit``.
        QueryError
            Unknown variable or state, or a variable with two roles.
        UnsupportedQuery
            This estimator cannot answer this kind of query.
        """
        self._check_fitted()
        q = make_query(self.states_, target, do, given)
        probs = self._answer(q)
        return Distribution(
            q.targets, [self.states_[t] for t in q.targets], probs, description=q.describe(), identified=self._identified(q)
        )

    def _answer(self, q: Query):  # pragma: no cover - abstract
        raise NotImplementedError

    def _identified(self, q: Query) -> bool | None:
        """Whether the query is identifiable on the diagram (None: not checked, no hidden common causes)."""
        return None

    def effect(self, outcome: str, treatment: str, a: str, b: str, state: str, given: Mapping[str, str] | None = None) -> float:
        """The contrast P(outcome=state | do(treatment=a)) - P(outcome=state | do(treatment=b)).

        Raises
        ------
        QueryError
            Unknown variable or state.
        """
        self._check_fitted()
        if outcome not in self.states_:
            raise QueryError(f"unknown target variable '{outcome}'; variables are: {', '.join(sorted(self.states_))}")
        if state not in self.states_[outcome]:
            raise QueryError(
                f"unknown state '{state}' for variable '{outcome}'; states are: {', '.join(sorted(self.states_[outcome]))}"
            )
        pa = self.query(outcome, do={treatment: a}, given=given)[state]
        pb = self.query(outcome, do={treatment: b}, given=given)[state]
        return pa - pb

    def __repr__(self) -> str:
        settings = ", ".join(f"{k}={v!r}" for k, v in self.get_params().items())
        return f"{type(self).__name__}({settings})"

    def get_params(self) -> dict:
        """The settings given to ``__init__`` (scikit-learn style)."""
        import inspect

        sig = inspect.signature(type(self).__init__)
        return {k: getattr(self, k) for k in sig.parameters if k != "self" and hasattr(self, k)}
