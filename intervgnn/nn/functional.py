"""Edge cutting as a function, for tensors, ``Data`` and ``HeteroData``."""

from __future__ import annotations

import copy
from collections.abc import Mapping

import torch
from torch import Tensor
from torch_geometric.data import Data, HeteroData

from ..errors import LayerInputError
from ._checks import check_edge_index
from .conv import cut_mask

__all__ = ["drop_parent_edges"]


def _mask_for(intervened, num_nodes: int, what: str) -> Tensor:
    if not isinstance(intervened, Tensor) or intervened.dtype != torch.bool:
        raise LayerInputError(f"intervened{what} must be a bool tensor, got {getattr(intervened, 'dtype', type(intervened).__name__)}")
    if intervened.dim() != 1 or intervened.numel() != num_nodes:
        raise LayerInputError(
            f"intervened{what} has shape {list(intervened.shape)}, expected [{num_nodes}] (one entry per node)"
        )
    return intervened


def _cut_store(store, keep: Tensor) -> None:
    """Filter every edge-level attribute of a (copied) edge store in place."""
    num_edges = keep.numel()
    edge_keys = [
        k for k in store.keys()
        if k != "edge_index" and isinstance(store[k], Tensor) and store.is_edge_attr(k) and store[k].size(0) == num_edges
    ]
    store["edge_index"] = store["edge_index"][:, keep]
    for key in edge_keys:
        store[key] = store[key][keep]


def drop_parent_edges(edge_index, intervened, edge_attr: Tensor | None = None):
    """Delete every edge ``j -> i`` whose target ``i`` is intervened.

    Self-loops are not parent edges and are kept. The inputs are never
    modified.

    Parameters
    ----------
    edge_index : torch.Tensor, Data or HeteroData
        Parent -> child edges ``[2, E]``; or a graph object, in which case
        every edge-level attribute is filtered too and a new object returned.
    intervened : torch.Tensor or mapping
        Bool mask ``[N]``. For ``HeteroData``, a mapping from node type to a
        bool mask over that type's nodes; every edge type whose target type
        is listed has its edges into intervened nodes removed.
    edge_attr : torch.Tensor, optional
        Edge features ``[E, ...]`` filtered alongside ``edge_index``.

    Returns
    -------
    tuple (edge_index, edge_attr) for tensor input (``edge_attr`` is None if
    not given); a new ``Data`` / ``HeteroData`` for graph input.

    Raises
    ------
    LayerInputError
        Mask of the wrong dtype or shape, unknown node type, edge_index out
        of range.

    Examples
    --------
    >>> import torch
    >>> ei = torch.tensor([[0, 1, 2], [1, 2, 2]])   # 0 -> 1 -> 2 and a self-loop 2 -> 2
    >>> drop_parent_edges(ei, torch.tensor([False, False, True]))[0].tolist()
    [[0, 2], [1, 2]]
    """
    if isinstance(edge_index, HeteroData):
        data = copy.copy(edge_index)
        if not isinstance(intervened, Mapping):
            raise LayerInputError("for HeteroData, intervened must map node types to bool masks")
        for node_type, mask in intervened.items():
            if node_type not in data.node_types:
                raise LayerInputError(
                    f"unknown node type '{node_type}'; node types are: {', '.join(sorted(data.node_types))}"
                )
            _mask_for(mask, data[node_type].num_nodes, f" for node type '{node_type}'")
        for edge_type in data.edge_types:
            src_type, _, dst_type = edge_type
            if dst_type not in intervened:
                continue
            store = data[edge_type]
            ei = store.edge_index
            check_edge_index(ei, max(data[src_type].num_nodes, data[dst_type].num_nodes))
            keep = ~intervened[dst_type].index_select(0, ei[1])
            if src_type == dst_type:
                keep = keep | (ei[0] == ei[1])
            _cut_store(store, keep)
        return data
    if isinstance(edge_index, Data):
        data = copy.copy(edge_index)
        n = data.num_nodes
        mask = _mask_for(intervened, n, "")
        check_edge_index(data.edge_index, n)
        _cut_store(data._store, ~cut_mask(data.edge_index, mask))
        return data
    if not isinstance(edge_index, Tensor):
        raise LayerInputError(f"edge_index must be a [2, E] tensor, Data or HeteroData; got {type(edge_index).__name__}")
    if not isinstance(intervened, Tensor):
        raise LayerInputError(f"intervened must be a bool tensor, got {type(intervened).__name__}")
    mask = _mask_for(intervened, intervened.numel() if intervened.dim() == 1 else -1, "")
    check_edge_index(edge_index, mask.numel())
    keep = ~cut_mask(edge_index, mask)
    if edge_attr is not None:
        if edge_attr.size(0) != edge_index.size(1):
            raise LayerInputError(
                f"edge_attr has {edge_attr.size(0)} rows but edge_index has {edge_index.size(1)} edges"
            )
        edge_attr = edge_attr[keep]
    return edge_index[:, keep], edge_attr
