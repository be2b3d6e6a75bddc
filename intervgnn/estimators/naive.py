"""Naive estimator: condition on the treatment as if it had been observed."""

from __future__ import annotations

import numpy as np

from ..graph import CausalGraph
from ..query import Query
from ..table import Table
from .base import Estimator, check_alpha, check_fit_inputs

__all__ = ["NaiveEstimator"]


class NaiveEstimator(Estimator):
    """Answer P(Y | do(X=x), given) with the frequencies of Y among rows where X=x and the evidence hold.

    This is what correlation alone says: it ignores the causal diagram and
    the rows' regimes. It is right when nothing confounds X and Y, and
    wrong, often badly, when something does; it shows in the harness what
    causal reasoning buys.

    Parameters
    ----------
    alpha : float, default 0.5
        Additive smoothing per target state (so that a state never seen
        among the matching rows keeps a small probability). With no
        matching row at all the answer is uniform.

    Examples
    --------
    >>> import intervgnn as ig
    >>> net = ig.load_network("greenhouse")
    >>> naive = NaiveEstimator().fit(net.sample(20000, seed=0), net.graph)
    >>> p = naive.query("Yield", do={"Irrigation": "high"})["good"]
    >>> abs(p - 0.2248) < 0.015   # the exact P(good | Irrigation=high); under do() it is 0.268
    True
    """

    name = "naive"

    def __init__(self, alpha: float = 0.5):
        self.alpha = alpha

    def _check_settings(self) -> None:
        check_alpha(self.alpha)

    def fit(self, table: Table, graph: CausalGraph) -> NaiveEstimator:
        self._check_settings()
        table = check_fit_inputs(table, graph)
        self._clear_fitted()
        self.graph_ = graph
        self.states_ = table.states
        self.codes_ = table.codes
        self.columns_ = {v: j for j, v in enumerate(table.variables)}
        self._keep_fitted_rows(table, graph)  # for bootstrap intervals
        return self

    def _answer(self, q: Query):
        rows = np.ones(self.codes_.shape[0], dtype=bool)
        for v, s in list(q.do) + list(q.given):
            rows &= self.codes_[:, self.columns_[v]] == self.states_[v].index(s)
        shape = [len(self.states_[t]) for t in q.targets]
        flat = np.zeros(int(rows.sum()), dtype=np.int64)
        for t in q.targets:
            flat = flat * len(self.states_[t]) + self.codes_[rows, self.columns_[t]]
        counts = np.bincount(flat, minlength=int(np.prod(shape))).astype(np.float64) + float(self.alpha)
        if counts.sum() <= 0:
            counts[:] = 1.0
        return (counts / counts.sum()).reshape(shape)
