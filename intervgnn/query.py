"""Validation of query arguments shared by the exact engine and every estimator."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from .errors import QueryError

__all__ = ["Query", "make_query", "describe", "check_assignment"]


@dataclass(frozen=True)
class Query:
    """A validated query P(targets | do(...), given).

    Attributes hold variable names and state *names*; ``do`` and ``given``
    are tuples of ``(variable, state)`` pairs in the order the user gave.
    """

    targets: tuple[str, ...]
    do: tuple[tuple[str, str], ...] = ()
    given: tuple[tuple[str, str], ...] = ()

    @property
    def do_dict(self) -> dict[str, str]:
        return dict(self.do)

    @property
    def given_dict(self) -> dict[str, str]:
        return dict(self.given)

    def describe(self) -> str:
        """Readable notation, e.g. ``P(Y | do(X=a), Z=c)``."""
        return describe(self.targets, self.do_dict, self.given_dict)


def describe(targets: Sequence[str], do: Mapping[str, str] | None = None, given: Mapping[str, str] | None = None) -> str:
    """Readable notation for a query, e.g. ``P(Y | do(X=a), Z=c)``."""
    parts = []
    if do:
        parts.append("do(" + ", ".join(f"{k}={v}" for k, v in do.items()) + ")")
    if given:
        parts.append(", ".join(f"{k}={v}" for k, v in given.items()))
    cond = " | " + ", ".join(parts) if parts else ""
    return f"P({', '.join(targets)}{cond})"


def _check_var(states: Mapping[str, Sequence[str]], name: object, role: str) -> str:
    if not isinstance(name, str) or name not in states:
        known = ", ".join(sorted(states))
        raise QueryError(f"unknown {role} variable '{name}'; variables are: {known}")
    return name


def _check_state(states: Mapping[str, Sequence[str]], var: str, state: object) -> str:
    st = states[var]
    if not isinstance(state, str) or state not in st:
        raise QueryError(f"unknown state '{state}' for variable '{var}'; states are: {', '.join(sorted(st))}")
    return state


def check_assignment(states: Mapping[str, Sequence[str]], assignment, role: str = "intervened") -> dict[str, str]:
    """Validate a ``{variable: state}`` mapping; return it as a dict.

    Raises
    ------
    QueryError
        Not a mapping, unknown variable or unknown state.
    """
    if assignment is None:
        return {}
    if not isinstance(assignment, Mapping):
        raise QueryError(f"{role} values must map variable names to state names, got {type(assignment).__name__}")
    for v, s in assignment.items():
        _check_state(states, _check_var(states, v, role), s)
    return dict(assignment)


def make_query(
    states: Mapping[str, Sequence[str]],
    target: str | Sequence[str],
    do: Mapping[str, str] | None = None,
    given: Mapping[str, str] | None = None,
) -> Query:
    """Validate a query against the variables and states it will be asked of.

    Parameters
    ----------
    states : mapping of str to sequence of str
        State names per variable.
    target : str or sequence of str
        One variable, or several for a joint distribution.
    do : mapping, optional
        Intervened variables and the states they are set to.
    given : mapping, optional
        Observed evidence, variable to state.

    Returns
    -------
    Query

    Raises
    ------
    QueryError
        Unknown variable or state, an empty or repeated target, or a
        variable with two roles (target, intervened, observed).
    """
    targets = [target] if isinstance(target, str) else list(target)
    if not targets:
        raise QueryError("a query needs at least one target variable")
    for t in targets:
        _check_var(states, t, "target")
    if len(set(targets)) != len(targets):
        dup = next(t for t in targets if targets.count(t) > 1)
        raise QueryError(f"target '{dup}' is listed twice")
    do = check_assignment(states, do, "intervened")
    given = check_assignment(states, given, "observed")
    for t in targets:
        if t in do:
            raise QueryError(f"'{t}' is both a target and intervened on")
        if t in given:
            raise QueryError(f"'{t}' is both a target and observed")
    for v in do:
        if v in given:
            raise QueryError(f"'{v}' is both intervened on and observed")
    return Query(tuple(targets), tuple(do.items()), tuple(given.items()))
