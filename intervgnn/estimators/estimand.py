"""Estimand plug-in: evaluate the identification formula on the empirical distribution of the rows."""

from __future__ import annotations

import functools

import numpy as np

from ..errors import DataError, NotIdentified, did_you_mean
from ..graph import CausalGraph
from ..query import Query
from ..table import Table
from .base import Estimator, check_alpha, check_fit_inputs

__all__ = ["EstimandEstimator", "counts_oracle", "network_oracle"]

FORMULAS = ("simplest", "complete")


def counts_oracle(table: Table, alpha: float = 0.0):
    """``oracle(vars)``: the empirical joint of ``vars`` over the observational rows (additive ``alpha``)."""
    rows = table.codes[~table.intervened.any(axis=1)] if not table.is_observational else table.codes
    col = {v: j for j, v in enumerate(table.variables)}
    cards = {v: len(s) for v, s in table.states.items()}

    @functools.lru_cache(maxsize=4096)
    def oracle(variables: tuple[str, ...]) -> np.ndarray:
        shape = [cards[v] for v in variables]
        flat = np.zeros(rows.shape[0], dtype=np.int64)
        for v in variables:
            flat = flat * cards[v] + rows[:, col[v]]
        counts = np.bincount(flat, minlength=int(np.prod(shape))).astype(np.float64) + alpha
        total = counts.sum()
        return (counts / total if total > 0 else counts).reshape(shape)

    return oracle


def network_oracle(net):
    """``oracle(vars)``: the exact observational joint of ``vars`` from a network."""

    @functools.lru_cache(maxsize=4096)
    def oracle(variables: tuple[str, ...]) -> np.ndarray:
        return net.query(list(variables)).probs

    return oracle


class EstimandEstimator(Estimator):
    """The classical estimand approach: identify, then plug the empirical distribution into the estimand.

    The query is first identified on the diagram (bidirected edges are
    hidden common causes). Where the back-door or front-door criterion
    applies its formula is used, otherwise the estimand of the complete
    algorithm (ID / IDC). The formula is evaluated on the frequencies of the
    observational rows. A query that is not identifiable raises
    :class:`~intervgnn.errors.UnsupportedQuery` naming the hedge.

    Parameters
    ----------
    alpha : float, default 0.0
        Additive smoothing of the joint counts behind each probability.
    formula : {"simplest", "complete"}
        Evaluate the simplest formula (default) or the complete algorithm's estimand.
    """

    name = "estimand"

    def __init__(self, alpha: float = 0.0, formula: str = "simplest"):
        self.alpha = alpha
        self.formula = formula

    def _check_settings(self) -> None:
        check_alpha(self.alpha)
        if self.formula not in FORMULAS:
            raise DataError(f"unknown formula '{self.formula}'{did_you_mean(self.formula, FORMULAS)}; formulas are: {', '.join(FORMULAS)}")

    def fit(self, table: Table, graph: CausalGraph) -> EstimandEstimator:
        self._check_settings()
        table = check_fit_inputs(table, graph)
        self._clear_fitted()
        self.graph_ = graph
        self.states_ = table.states
        self.oracle_ = counts_oracle(table, float(self.alpha))
        self._keep_fitted_rows(table, graph)  # for bootstrap intervals
        return self

    def identification(self, target, do, given=None):
        from ..identify import identify

        return identify(self.graph_, target, do, given)

    def _answer(self, q: Query):
        if not q.do:
            # no intervention: the observational conditional is its own estimand
            from ..identify import Prob, evaluate

            fixed = {v: self.states_[v].index(s) for v, s in q.given}
            expr = Prob(q.targets, tuple(fixed))
            arr = evaluate(expr, self.oracle_, fixed, q.targets)
            return arr / arr.sum() if arr.sum() > 0 else np.full(arr.shape, 1.0 / arr.size)
        ident = self.identification(q.targets, [v for v, _ in q.do], [v for v, _ in q.given])
        if not ident.identifiable:
            raise NotIdentified(ident)
        fixed = {v: self.states_[v].index(s) for v, s in list(q.do) + list(q.given)}
        arr = ident.evaluate(self.oracle_, fixed, use="formula" if self.formula == "simplest" else "estimand")
        if arr.sum() <= 0:
            return np.full(arr.shape, 1.0 / arr.size)
        # the verdict lists the targets in the diagram's order; the answer's axes follow the query's
        return np.transpose(arr, [ident.targets.index(t) for t in q.targets])
