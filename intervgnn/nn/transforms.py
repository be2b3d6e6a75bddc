"""A PyG transform that applies do(...) to a graph."""

from __future__ import annotations


from collections.abc import Callable, Mapping
from typing import Any

import torch
from torch_geometric.data import Data, HeteroData
from torch_geometric.transforms import BaseTransform

from ..errors import LayerInputError
from .functional import drop_parent_edges

__all__ = ["Intervene"]


class Intervene(BaseTransform):
    r"""Apply an intervention do(node = value, ...) to a ``Data`` or ``HeteroData`` object.

    The returned object (the input is left unchanged) has

    1. every edge into an intervened node removed, with its edge-level
       attributes (:func:`~intervgnn.nn.drop_parent_edges`);
    2. each intervened node's feature row replaced by ``encode(value, node)``;
    3. a bool attribute ``intervened`` per node (OR-ed with any existing one),
       ready to pass to :class:`~intervgnn.nn.InterventionalConv`.

    Args:
        do (Mapping): For ``Data``, node index -> value; for ``HeteroData``,
            ``(node_type, index)`` -> value.
        encode (callable): ``encode(value, node) -> Tensor`` giving the new
            feature row (same size and dtype as ``x``'s rows); ``node`` is
            the key used in ``do``.

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

    def __init__(self, do: Mapping[Any, Any], encode: Callable[[Any, Any], torch.Tensor]):
        if not isinstance(do, Mapping) or not do:
            raise LayerInputError("do must be a non-empty mapping from node to value")
        if not callable(encode):
            raise LayerInputError("encode must be a callable encode(value, node) -> Tensor")
        self.do = dict(do)
        self.encode = encode

    def _row(self, value, node, x) -> torch.Tensor:
        row = self.encode(value, node)
        if not isinstance(row, torch.Tensor) or row.shape != x.shape[1:]:
            raise LayerInputError(
                f"encode({value!r}, {node!r}) must return a tensor of shape {list(x.shape[1:])}, "
                f"got {getattr(row, 'shape', type(row).__name__)}"
            )
        return row.to(dtype=x.dtype, device=x.device)

    def forward(self, data):
        if isinstance(data, HeteroData):
            masks: dict[str, torch.Tensor] = {}
            for key in self.do:
                if not (isinstance(key, tuple) and len(key) == 2 and key[0] in data.node_types):
                    raise LayerInputError(
                        f"for HeteroData, do keys are (node_type, index) with node types "
                        f"{', '.join(sorted(data.node_types))}; got {key!r}"
                    )
            out = drop_parent_edges(data, self._masks_hetero(data, masks))
            for node_type, mask in masks.items():
                store = out[node_type]
                if "x" in store:
                    x = store.x.clone()
                    for (nt, idx), value in self.do.items():
                        if nt == node_type:
                            x[idx] = self._row(value, (nt, idx), x)
                    store.x = x
                old = store.get("intervened")
                store.intervened = mask if old is None else (old | mask)
            return out
        if not isinstance(data, Data):
            raise LayerInputError(f"Intervene applies to Data or HeteroData, got {type(data).__name__}")
        n = data.num_nodes
        mask = torch.zeros(n, dtype=torch.bool)
        for idx in self.do:
            if not isinstance(idx, int) or not 0 <= idx < n:
                raise LayerInputError(f"do key {idx!r} is not a node index in [0, {n})")
            mask[idx] = True
        out = drop_parent_edges(data, mask)
        if out.x is not None:
            x = out.x.clone()
            for idx, value in self.do.items():
                x[idx] = self._row(value, idx, x)
            out.x = x
        old = data.get("intervened") if hasattr(data, "get") else None
        out.intervened = mask if old is None else (old | mask)
        return out

    def _masks_hetero(self, data: HeteroData, masks: dict) -> dict:
        for (nt, idx) in self.do:
            n = data[nt].num_nodes
            if not isinstance(idx, int) or not 0 <= idx < n:
                raise LayerInputError(f"do key {(nt, idx)!r}: index is not in [0, {n}) for node type '{nt}'")
            masks.setdefault(nt, torch.zeros(n, dtype=torch.bool))[idx] = True
        return masks

    def __repr__(self) -> str:
        return f"{self.__class__.__name__}(do={self.do!r})"

    def __call__(self, data):
        # BaseTransform.__call__ makes a shallow copy; we copy what we change ourselves
        return self.forward(data)



