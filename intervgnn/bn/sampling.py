"""Vectorised ancestral sampling, observational or under do()."""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ..errors import DataError
from ..graph import CausalGraph
from ..query import check_seed

__all__ = ["AncestralSampler", "check_sample_size", "MAX_SAMPLE_CELLS"]

_CHUNK = 1 << 16  # rows per block: keeps the temporaries in cache

#: the most rows x variables one call may draw: 2 GiB of int64 codes
MAX_SAMPLE_CELLS = 2**28


def check_sample_size(n: int, n_variables: int) -> None:
    """Raise DataError if ``n`` rows of ``n_variables`` exceed :data:`MAX_SAMPLE_CELLS` (before allocating)."""
    cells = int(n) * int(n_variables)
    if cells > MAX_SAMPLE_CELLS:
        most = MAX_SAMPLE_CELLS // max(int(n_variables), 1)
        raise DataError(
            f"{int(n):,} rows of {n_variables} variables are {cells:,} values, more than one call may draw "
            f"({MAX_SAMPLE_CELLS:,} values, 2 GiB of codes); draw at most {most:,} rows at a time "
            "and join the tables with Table.concat"
        )


class AncestralSampler:
    """Draws rows generation by generation, all rows of a block at once.

    Parameters
    ----------
    graph : CausalGraph
        The DAG; CPT axes follow ``graph.parents(v)`` then ``v``.
    cpts : mapping of str to numpy.ndarray
        CPTs, each row summing to one (rows are renormalised for sampling).

    Notes
    -----
    For each variable the parent configuration of every row is turned into a
    flat row index of the CPT; the state is then ``sum_j [u >= F_j]`` for a
    uniform ``u`` and the cumulative sums ``F_j`` of that CPT row (inverse
    CDF). The Python loop runs over variables, never over rows.
    """

    def __init__(self, graph: CausalGraph, cpts: Mapping[str, np.ndarray]):
        self.graph = graph
        self._order = graph.topological_order()
        self._col = {v: i for i, v in enumerate(graph.nodes)}
        self._cum: dict[str, list[np.ndarray]] = {}
        self._strides: dict[str, list[tuple[int, int]]] = {}
        for v in graph.nodes:
            cpt = np.asarray(cpts[v], dtype=np.float64)
            k = cpt.shape[-1]
            rows = cpt.reshape(-1, k)
            cum = np.cumsum(rows, axis=1)
            cum = cum / cum[:, -1:]
            # thresholds for states 1..k-1 (state 0 needs none)
            self._cum[v] = [np.ascontiguousarray(cum[:, j]) for j in range(k - 1)]
            pa = graph.parents(v)
            cards = cpt.shape[:-1]
            strides = np.cumprod((1,) + cards[::-1])[:-1][::-1] if pa else ()
            self._strides[v] = [(self._col[p], int(s)) for p, s in zip(pa, strides)]

    def sample_codes(self, n: int, do: Mapping[str, int] | None = None, seed=None) -> np.ndarray:
        """Integer codes ``[n, V]`` in ``graph.nodes`` column order (a column-major array).

        Parameters
        ----------
        n : int
            Number of rows.
        do : mapping of str to int, optional
            Intervened variables and their state codes.
        seed : int or numpy.random.Generator, optional
            The same seed gives the same rows.

        Raises
        ------
        DataError
            A seed that is not a non-negative whole number (or a Generator),
            or more than :data:`MAX_SAMPLE_CELLS` rows x variables.
        """
        do = dict(do or {})
        V = len(self.graph.nodes)
        check_sample_size(n, V)
        rng = np.random.default_rng(check_seed(seed, allow_none=True, allow_generator=True))
        # column-major: each variable's codes are contiguous
        out = np.empty((V, n), dtype=np.int64)
        for start in range(0, n, _CHUNK):
            stop = min(n, start + _CHUNK)
            m = stop - start
            cols: dict[int, np.ndarray] = {}
            for v in self._order:
                j = self._col[v]
                if v in do:
                    cols[j] = np.full(m, do[v], dtype=np.int64)
                    continue
                u = rng.random(m)
                strides = self._strides[v]
                state = np.zeros(m, dtype=np.int64)
                if strides:
                    c0, s0 = strides[0]
                    idx = cols[c0] * s0
                    for c, s in strides[1:]:
                        if s == 1:
                            idx += cols[c]
                        else:
                            idx += cols[c] * s
                    for thr in self._cum[v]:
                        state += u >= thr[idx]
                else:
                    for thr in self._cum[v]:
                        state += u >= thr[0]
                cols[j] = state
            for j, col in cols.items():
                out[j, start:stop] = col
        return out.T
