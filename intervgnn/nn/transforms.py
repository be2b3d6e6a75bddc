"""A PyG transform that applies do(...) to a graph."""

from __future__ import annotations

import numbers
from collections.abc import Iterable, Mapping
from typing import Any, Callable

import torch
from torch import Tensor
from torch_geometric.data import Data, HeteroData
from torch_geometric.transforms import BaseTransform

from ..errors import LayerInputError
from .functional import _edge_keys, drop_parent_edges

__all__ = ["Intervene"]


def _is_index(idx) -> bool:
    return isinstance(idx, numbers.Integral) and not isinstance(idx, bool)


def _old_mask(old, n: int, where: str) -> Tensor | None:
    """An existing ``intervened`` attribute as a bool ``[n]`` mask (integer 0/1 tensors are cast)."""
    if old is None:
        return None
    if not isinstance(old, Tensor) or old.dim() != 1 or old.numel() != n:
        raise LayerInputError(
            f"the existing intervened attribute{where} must be a bool tensor of shape [{n}], "
            f"got {list(old.shape) if isinstance(old, Tensor) else type(old).__name__}"
        )
    if old.dtype == torch.bool:
        return old
    if old.dtype.is_floating_point or old.dtype.is_complex or not bool(((old == 0) | (old == 1)).all()):
        raise LayerInputError(
            f"the existing intervened attribute{where} must be bool (or an integer tensor of 0s and 1s), "
            f"got dtype {old.dtype}" + ("" if old.dtype.is_floating_point or old.dtype.is_complex else " holding other values")
        )
    return old.bool()


class Intervene(BaseTransform):
    r"""Apply an intervention do(node = value, ...) to a ``Data`` or ``HeteroData`` object.

    The returned object (the input is left unchanged) has

    1. every edge into an intervened node removed, with the edge-level
       attributes ``edge_attr``, ``edge_weight``, ``edge_type`` and those
       named in ``edge_keys`` (:func:`~intervgnn.nn.drop_parent_edges`);
    2. each intervened node's feature row replaced by ``encode(value, node)``;
    3. a bool attribute ``intervened`` per node (OR-ed with any existing one,
       which may be bool or an integer tensor of 0s and 1s), ready to pass to
       :class:`~intervgnn.nn.InterventionalConv`.

    The masks are built on the device of the data's ``x``.

    Args:
        do (Mapping): For ``Data``, node index -> value; for ``HeteroData``,
            ``(node_type, index)`` -> value.
        encode (callable): ``encode(value, node) -> Tensor`` giving the new
            feature row (same size as ``x``'s rows; cast to ``x``'s dtype and
            device); ``node`` is the key used in ``do``.
        edge_keys (list of str, optional): Names of further edge-level
            attributes to filter with the edges. (default: :obj:`None`)

    Raises
    ------
    LayerInputError
        At construction: ``do`` is empty or not a mapping, ``encode`` is not
        callable, ``edge_keys`` is not a list of names. When applied: the
        input is not ``Data`` / ``HeteroData``; a key is not a node index
        (bools are refused) or is out of range, or for ``HeteroData`` not a
        ``(node_type, index)`` pair of a known type; an intervened node type
        has no node count or no ``x`` (there are no features to set);
        ``encode`` returns a row of the wrong shape; an existing
        ``intervened`` attribute is neither bool nor integer 0/1 of one
        entry per node; and the errors of
        :func:`~intervgnn.nn.drop_parent_edges`.

    Examples
    --------
    >>> import torch
    >>> from torch_geometric.data import Data
    >>> data = Data(x=torch.zeros(3, 2), edge_index=torch.tensor([[0, 1], [1, 2]]))
    >>> onehot = lambda value, node: torch.nn.functional.one_hot(torch.tensor(value), 2).float()
    >>> out = Intervene({1: 1}, onehot)(data)
    >>> out.edge_index.tolist(), out.x[1].tolist(), out.intervened.tolist()
    ([[1], [2]], [0.0, 1.0], [False, True, False])
    >>> data.edge_index.shape[1]   # the input is unchanged
    2
    """

    def __init__(
        self,
        do: Mapping[Any, Any],
        encode: Callable[[Any, Any], Tensor],
        edge_keys: Iterable[str] | None = None,
    ):
        if not isinstance(do, Mapping) or not do:
            raise LayerInputError("do must be a non-empty mapping from node to value")
        if not callable(encode):
            raise LayerInputError("encode must be a callable encode(value, node) -> Tensor")
        self.do = dict(do)
        self.encode = encode
        self.edge_keys = _edge_keys(edge_keys)

    def _row(self, value, node, x: Tensor) -> Tensor:
        row = self.encode(value, node)
        if not isinstance(row, Tensor) or row.shape != x.shape[1:]:
            raise LayerInputError(
                f"encode({value!r}, {node!r}) must return a tensor of shape {list(x.shape[1:])}, "
                f"got {list(row.shape) if isinstance(row, Tensor) else type(row).__name__}"
            )
        return row.to(dtype=x.dtype, device=x.device)

    def forward(self, data):
        if isinstance(data, HeteroData):
            return self._forward_hetero(data)
        if not isinstance(data, Data):
            raise LayerInputError(f"Intervene applies to Data or HeteroData, got {type(data).__name__}")
        if data.x is None:
            raise LayerInputError("data has no x: Intervene sets the intervened nodes' feature rows, so it needs x")
        n = data.num_nodes
        old = _old_mask(data.get("intervened"), n, "")
        mask = torch.zeros(n, dtype=torch.bool, device=data.x.device)
        for idx in self.do:
            if not _is_index(idx) or not 0 <= idx < n:
                raise LayerInputError(f"do key {idx!r} is not a node index in [0, {n})")
            mask[int(idx)] = True
        out = drop_parent_edges(data, mask, edge_keys=self.edge_keys)
        x = out.x.clone()
        for idx, value in self.do.items():
            x[int(idx)] = self._row(value, idx, x)
        out.x = x
        out.intervened = mask if old is None else (old.to(mask.device) | mask)
        return out

    def _forward_hetero(self, data: HeteroData) -> HeteroData:
        types = ", ".join(sorted(data.node_types))
        masks: dict[str, Tensor] = {}
        for key in self.do:
            if not (isinstance(key, tuple) and len(key) == 2 and key[0] in data.node_types):
                raise LayerInputError(
                    f"for HeteroData, do keys are (node_type, index) with node types {types}; got {key!r}"
                )
            nt, idx = key
            store = data[nt]
            n = store.num_nodes
            if n is None:
                raise LayerInputError(f"node type '{nt}' has no node count; set x or num_nodes for it")
            if "x" not in store or store.x is None:
                raise LayerInputError(
                    f"node type '{nt}' has no x: Intervene sets the intervened nodes' feature rows, so it needs x"
                )
            if not _is_index(idx) or not 0 <= idx < n:
                raise LayerInputError(f"do key {key!r}: index is not in [0, {n}) for node type '{nt}'")
            if nt not in masks:
                masks[nt] = torch.zeros(n, dtype=torch.bool, device=store.x.device)
            masks[nt][int(idx)] = True
        olds = {nt: _old_mask(data[nt].get("intervened"), masks[nt].numel(), f" of node type '{nt}'") for nt in masks}
        out = drop_parent_edges(data, masks, edge_keys=self.edge_keys)
        for nt, mask in masks.items():
            store = out[nt]
            x = store.x.clone()
            for (t, idx), value in self.do.items():
                if t == nt:
                    x[int(idx)] = self._row(value, (t, idx), x)
            store.x = x
            old = olds[nt]
            store.intervened = mask if old is None else (old.to(mask.device) | mask)
        return out

    def __repr__(self) -> str:
        return f"{self.__class__.__name__}(do={self.do!r})"

    def __call__(self, data):
        # BaseTransform.__call__ makes a shallow copy; we copy what we change ourselves
        return self.forward(data)
