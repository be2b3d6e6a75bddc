r"""Sufficient statistics of discrete rows for the intervention-aware ELBO.

For discrete data the ELBO of :class:`~intervgnn.models.InterventionalVGAE`
decomposes over families: node :math:`i`'s likelihood and KL terms in a row
depend only on :math:`(x_i, x_{\mathrm{pa}(i)})` and on whether :math:`i`
was set by intervention in that row; with hidden common causes, the term of a
confounded component depends only on its members' families and on which of
them were intervened. So the ELBO of :math:`n` rows is a count-weighted sum
over the *distinct* family configurations (here: *cells*) and distinct
component configurations, which one vectorised counting pass finds. Training
on them costs the same at :math:`10^3` or :math:`10^7` rows.

A *cell* is one (node, parent configuration, own state) seen in at least one
row where the node was not intervened. Parent configurations are numbered in
mixed radix with the first parent most significant (numpy's C order), the
same order as the axes of a CPT ``(*parents, node)``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..errors import DataError

__all__ = ["FamilyCells", "GroupCells", "count_cells", "config_index", "MAX_FAMILY_CELLS"]

#: largest (parent configurations x states) of one family that can be numbered in int64
MAX_FAMILY_CELLS = 2**62
#: families with at most this many possible cells are counted with a dense bincount
_DENSE_CELLS = 2**22


def config_index(codes: np.ndarray, cols: Sequence[int], cards: Sequence[int]) -> np.ndarray:
    """Mixed-radix index of the values in ``cols`` of every row (first column most significant).

    Examples
    --------
    >>> config_index(np.array([[1, 2], [0, 1]]), [0, 1], [2, 3]).tolist()
    [5, 1]
    """
    idx = np.zeros(codes.shape[0], dtype=np.int64)
    for c, k in zip(cols, cards):
        idx = idx * int(k) + codes[:, c]
    return idx


@dataclass
class GroupCells:
    """Distinct configurations of one confounded component.

    Attributes
    ----------
    members : tuple of int
        Node indices of the component.
    cell : numpy.ndarray
        ``[R, len(members)]``: per distinct configuration, each member's cell
        index (into :attr:`FamilyCells.node` etc.), or -1 where the member was
        intervened (it then neither generates its value nor hears the latent).
    count : numpy.ndarray
        ``[R]`` rows per configuration.
    fold_count : numpy.ndarray or None
        ``[K, R]`` the same per fold of rows.
    """

    members: tuple[int, ...]
    cell: np.ndarray
    count: np.ndarray
    fold_count: np.ndarray | None = None


@dataclass
class FamilyCells:
    """The distinct family configurations of a set of rows, with their counts.

    Attributes
    ----------
    parents : list of list of int
        Parent node indices of every node (graph order).
    cards : list of int
        Number of states of every node.
    node, cfg, state : numpy.ndarray
        ``[C]``: the node, parent configuration and own state of each cell,
        sorted by node, then configuration, then state.
    count : numpy.ndarray
        ``[C]`` rows in which the node was not intervened and its family took
        this configuration.
    fold_count : numpy.ndarray or None
        ``[K, C]`` the same per fold of rows (when folds were given).
    groups : list of GroupCells
        One per confounded component (empty without hidden common causes).
    n_rows : int
        Rows counted.
    """

    parents: list[list[int]]
    cards: list[int]
    node: np.ndarray
    cfg: np.ndarray
    state: np.ndarray
    count: np.ndarray
    fold_count: np.ndarray | None = None
    groups: list[GroupCells] = field(default_factory=list)
    n_rows: int = 0

    @property
    def num_cells(self) -> int:
        return int(self.node.size)

    def node_slice(self, v: int) -> slice:
        """The cells of node ``v`` (cells are sorted by node)."""
        lo, hi = np.searchsorted(self.node, [v, v + 1])
        return slice(int(lo), int(hi))

    def configs(self, v: int) -> int:
        """Number of parent configurations of node ``v``."""
        return int(np.prod([self.cards[p] for p in self.parents[v]])) if self.parents[v] else 1

    def dense(self, v: int, weights: np.ndarray | None = None) -> np.ndarray:
        """Counts of node ``v`` as a dense ``[configurations, states]`` table.

        ``weights`` (``[C]``) replaces :attr:`count`, e.g. one fold's counts.
        """
        sl = self.node_slice(v)
        w = self.count if weights is None else weights
        out = np.zeros((self.configs(v), self.cards[v]))
        np.add.at(out, (self.cfg[sl], self.state[sl]), w[sl])
        return out

    def subset(self, nodes) -> FamilyCells:
        """The cells of ``nodes`` only, without confounded components (same node numbering)."""
        keep = np.isin(self.node, np.asarray(list(nodes), dtype=np.int64))
        return FamilyCells(
            parents=self.parents, cards=self.cards, node=self.node[keep], cfg=self.cfg[keep],
            state=self.state[keep], count=self.count[keep],
            fold_count=None if self.fold_count is None else self.fold_count[:, keep], n_rows=self.n_rows,
        )

    def heldout(self, fold: int) -> np.ndarray:
        """Cell counts of the rows *outside* ``fold`` (what a model cross-fitted on that fold trains on)."""
        if self.fold_count is None:
            raise ValueError("these cells were counted without folds")
        return self.count - self.fold_count[fold]

    def group_heldout(self, fold: int) -> list[np.ndarray]:
        """Per component, configuration counts of the rows outside ``fold``."""
        return [g.count - g.fold_count[fold] for g in self.groups]


def count_cells(
    codes: np.ndarray,
    intervened: np.ndarray,
    parents: Sequence[Sequence[int]],
    cards: Sequence[int],
    groups: Sequence[Sequence[int]] = (),
    folds: np.ndarray | None = None,
    num_folds: int = 0,
    regime_aware: bool = True,
) -> FamilyCells:
    """Count the distinct family (and component) configurations of rows, in one vectorised pass.

    Parameters
    ----------
    codes, intervened : numpy.ndarray
        ``[n, N]`` state codes and regime mask, columns in node order.
    parents : sequence of sequences of int
        Parent indices of each node.
    cards : sequence of int
        Number of states of each node.
    groups : sequence of sequences of int
        Confounded components (node indices), each of two or more nodes.
    folds : numpy.ndarray, optional
        ``[n]`` fold id of every row, in ``range(num_folds)``; fold counts
        are then kept as well.
    num_folds : int
        Number of folds (with ``folds``).
    regime_aware : bool
        True: a node's cell counts only rows where the node was not
        intervened (the intervention-aware ELBO). False counts every row (the
        regime-blind ablation).

    Returns
    -------
    FamilyCells
    """
    codes = np.asarray(codes)
    n, num_nodes = codes.shape
    columns = np.ascontiguousarray(codes.T)  # one contiguous array per variable: the loops below read columns
    use = (~np.asarray(intervened, dtype=bool)).T if regime_aware else np.ones((num_nodes, n), dtype=bool)
    folds = None if folds is None else np.asarray(folds, dtype=np.int64)
    k_folds = max(int(num_folds), 1) if folds is not None else 1
    in_group = {i for g in groups for i in g}
    nodes, cfgs, states, counts, folded = [], [], [], [], []
    row_cell: dict[int, np.ndarray] = {}
    offset = 0
    for v in range(num_nodes):
        pa = list(parents[v])
        k = int(cards[v])
        n_cfg = int(np.prod([cards[p] for p in pa], dtype=object)) if pa else 1
        if n_cfg * k >= MAX_FAMILY_CELLS:
            raise DataError(
                f"node {v} has {n_cfg} parent configurations; families beyond {MAX_FAMILY_CELLS} cells cannot be counted"
            )
        keep = use[v]
        every = bool(keep.all())
        key = np.zeros(n, dtype=np.int64)
        for p in pa:
            key *= int(cards[p])
            key += columns[p]
        key *= k
        key += columns[v]
        if not every:
            key = key[keep]
        if n_cfg * k <= _DENSE_CELLS:  # counting by bincount is linear in the rows; np.unique sorts them
            seen = np.flatnonzero(np.bincount(key, minlength=n_cfg * k))
            index = np.full(n_cfg * k, -1, dtype=np.int64)
            index[seen] = np.arange(seen.size)
            uniq, inverse = seen, index[key]
        else:
            uniq, inverse = np.unique(key, return_inverse=True)
            inverse = inverse.reshape(-1)
        cfg, state = np.divmod(uniq, k)
        m = len(cfg)
        if folds is None:
            counts.append(np.bincount(inverse, minlength=m).astype(np.float64))
        else:  # all folds in one pass: cell-major, fold-minor
            by_fold = np.bincount(inverse * k_folds + (folds if every else folds[keep]), minlength=m * k_folds)
            by_fold = by_fold.reshape(m, k_folds).T.astype(np.float64)
            folded.append(by_fold)
            counts.append(by_fold.sum(axis=0))
        nodes.append(np.full(m, v, dtype=np.int64))
        cfgs.append(cfg.astype(np.int64))
        states.append(state.astype(np.int64))
        if v in in_group:
            ids = np.full(n, -1, dtype=np.int64)
            ids[keep] = inverse + offset
            row_cell[v] = ids
        offset += m
    cells = FamilyCells(
        parents=[list(p) for p in parents],
        cards=[int(c) for c in cards],
        node=np.concatenate(nodes) if nodes else np.zeros(0, dtype=np.int64),
        cfg=np.concatenate(cfgs) if cfgs else np.zeros(0, dtype=np.int64),
        state=np.concatenate(states) if states else np.zeros(0, dtype=np.int64),
        count=np.concatenate(counts) if counts else np.zeros(0),
        fold_count=np.concatenate(folded, axis=1) if folds is not None and folded else None,
        n_rows=n,
    )
    for g in groups:
        members = tuple(int(i) for i in g)
        table = np.stack([row_cell[i] for i in members], axis=1)
        uniq, inverse = np.unique(table, axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
        count = np.bincount(inverse, minlength=len(uniq)).astype(np.float64)
        fold_count = None
        if folds is not None:
            fold_count = np.stack([np.bincount(inverse[folds == f], minlength=len(uniq)) for f in range(num_folds)]).astype(np.float64)
        cells.groups.append(GroupCells(members, uniq.astype(np.int64), count, fold_count))
    return cells
