"""Edge cutting as a function, for tensors, ``Data`` and ``HeteroData``."""

from __future__ import annotations

import copy
from collections.abc import Iterable, Mapping

import torch
from torch import Tensor
from torch_geometric.data import Data, HeteroData

from ..errors import LayerInputError
from ._checks import check_edge_index
from .conv import cut_mask

__all__ = ["drop_parent_edges"]

#: edge-level attributes of a graph object that are always filtered with the edges
EDGE_KEYS = ("edge_attr", "edge_weight", "edge_type")


def _mask_for(intervened, num_nodes: int | None, what: str = "", device: torch.device | None = None) -> Tensor:
    if not isinstance(intervened, Tensor) or intervened.dtype != torch.bool:
        got = getattr(intervened, "dtype", type(intervened).__name__)
        raise LayerInputError(f"intervened{what} must be a bool tensor, got {got}")
    n = "N" if num_nodes is None else num_nodes
    if intervened.dim() != 1 or (num_nodes is not None and intervened.numel() != num_nodes):
        raise LayerInputError(
            f"intervened{what} has shape {list(intervened.shape)}, expected shape [{n}] (one entry per node; "
            "drop_parent_edges takes one intervened set, not one per row)"
        )
    if device is not None and intervened.device != device:
        raise LayerInputError(
            f"intervened{what} is on device {intervened.device} but edge_index is on {device}; "
            "move the mask to the graph's device"
        )
    return intervened


def _edge_keys(edge_keys) -> tuple[str, ...]:
    if edge_keys is None:
        return ()
    if isinstance(edge_keys, str) or not isinstance(edge_keys, Iterable):
        raise LayerInputError(f"edge_keys must be a list of attribute names, got {edge_keys!r}")
    keys = tuple(edge_keys)
    if not all(isinstance(k, str) for k in keys):
        raise LayerInputError(f"edge_keys must be a list of attribute names, got {edge_keys!r}")
    return keys


def _check_edge_value(key: str, value, num_edges: int, where: str = "") -> None:
    if not isinstance(value, Tensor) or value.dim() == 0:
        got = "a 0-dim tensor" if isinstance(value, Tensor) else type(value).__name__
        raise LayerInputError(f"{key}{where} must be a tensor with one row per edge ([{num_edges}, ...]), got {got}")
    if value.size(0) != num_edges:
        raise LayerInputError(f"{key}{where} has {value.size(0)} rows but edge_index has {num_edges} edges")


def _cut_store(store, keep: Tensor, keys: tuple[str, ...], where: str = "") -> set[str]:
    """Filter ``edge_index`` and the named edge-level attributes of a (copied) store; return the keys found."""
    num_edges = keep.numel()
    found = [k for k in dict.fromkeys(EDGE_KEYS + keys) if k in store and store[k] is not None]
    for key in found:
        _check_edge_value(key, store[key], num_edges, where)
    store["edge_index"] = store["edge_index"][:, keep]
    for key in found:
        store[key] = store[key][keep]
    return set(found)


def drop_parent_edges(edge_index, intervened, edge_attr: Tensor | None = None, edge_keys: Iterable[str] | None = None):
    """Delete every edge ``j -> i`` whose target ``i`` is intervened.

    Self-loops are not parent edges and are kept. The inputs are never
    modified.

    Parameters
    ----------
    edge_index : torch.Tensor, Data or HeteroData
        Parent -> child edges ``[2, E]``; or a graph object, in which case a
        new object is returned with ``edge_index`` and the edge-level
        attributes filtered.
    intervened : torch.Tensor or mapping
        Bool mask of shape ``[N]``. For ``HeteroData``, a mapping from node
        type to a bool mask over that type's nodes; every edge type whose
        target type is listed has its edges into intervened nodes removed.
    edge_attr : torch.Tensor, optional
        Edge features ``[E, ...]`` filtered alongside a tensor
        ``edge_index``.
    edge_keys : list of str, optional
        For graph input: names of further edge-level attributes to filter.
        Only ``edge_index``, ``edge_attr``, ``edge_weight``, ``edge_type``
        and these are filtered (no guessing from sizes, which is ambiguous
        when a graph has as many nodes as edges); other attributes are
        kept as they are. For ``HeteroData`` the names apply to every edge
        type that has them.

    Returns
    -------
    tuple (edge_index, edge_attr) for tensor input (``edge_attr`` is None if
    not given); a new ``Data`` / ``HeteroData`` for graph input.

    Raises
    ------
    LayerInputError
        A mask that is not a bool tensor of shape ``[N]`` or is on another
        device than the edges; an unknown node type or a node type without a
        node count; ``edge_index`` not a ``[2, E]`` integer tensor or out of
        range (for ``HeteroData``, sources are checked against the source
        type's count and targets against the target type's); an edge-level
        attribute that is not a tensor with one row per edge; an
        ``edge_keys`` name that the graph does not have.

    Examples
    --------
    >>> import torch
    >>> ei = torch.tensor([[0, 1, 2], [1, 2, 2]])   # 0 -> 1 -> 2 and a self-loop 2 -> 2
    >>> drop_parent_edges(ei, torch.tensor([False, False, True]))[0].tolist()
    [[0, 2], [1, 2]]
    """
    if isinstance(edge_index, HeteroData):
        return _drop_hetero(edge_index, intervened, _edge_keys(edge_keys))
    if isinstance(edge_index, Data):
        keys = _edge_keys(edge_keys)
        data = copy.copy(edge_index)
        if data.edge_index is None:
            raise LayerInputError("data has no edge_index")
        n = data.num_nodes
        check_edge_index(data.edge_index, n, source="data has")
        mask = _mask_for(intervened, n, device=data.edge_index.device)
        missing = [k for k in keys if k not in data]
        if missing:
            raise LayerInputError(
                f"edge_keys names {', '.join(map(repr, missing))}, which data does not have; "
                f"its attributes are: {', '.join(sorted(data.keys()))}"
            )
        _cut_store(data._store, ~cut_mask(data.edge_index, mask), keys)
        return data
    if not isinstance(edge_index, Tensor):
        raise LayerInputError(f"edge_index must be a [2, E] tensor, Data or HeteroData; got {type(edge_index).__name__}")
    mask = _mask_for(intervened, None, device=edge_index.device)
    check_edge_index(edge_index, mask.numel(), source="intervened has")
    keep = ~cut_mask(edge_index, mask)
    if edge_attr is not None:
        _check_edge_value("edge_attr", edge_attr, edge_index.size(1))
        edge_attr = edge_attr[keep]
    return edge_index[:, keep], edge_attr


def _drop_hetero(data: HeteroData, intervened, keys: tuple[str, ...]) -> HeteroData:
    data = copy.copy(data)
    if not isinstance(intervened, Mapping):
        raise LayerInputError("for HeteroData, intervened must map node types to bool masks")
    for node_type, mask in intervened.items():
        if node_type not in data.node_types:
            raise LayerInputError(
                f"unknown node type '{node_type}'; node types are: {', '.join(sorted(data.node_types))}"
            )
        n = data[node_type].num_nodes
        if n is None:
            raise LayerInputError(
                f"node type '{node_type}' has no node count; set x or num_nodes for it"
            )
        _mask_for(mask, n, f" for node type '{node_type}'")
    found: set[str] = set()
    for edge_type in data.edge_types:
        src_type, _, dst_type = edge_type
        if dst_type not in intervened:
            continue
        store = data[edge_type]
        ei = store.edge_index
        where = f" of edge type {edge_type}"
        check_edge_index(
            ei, data[src_type].num_nodes, data[dst_type].num_nodes,
            source=f"node type '{src_type}' has", target=f"node type '{dst_type}' has",
        )
        mask = _mask_for(intervened[dst_type], data[dst_type].num_nodes, f" for node type '{dst_type}'", ei.device)
        keep = ~mask.index_select(0, ei[1])
        if src_type == dst_type:
            keep = keep | (ei[0] == ei[1])
        found |= _cut_store(store, keep, keys, where)
    missing = [k for k in keys if k not in found and not any(k in data[et] for et in data.edge_types)]
    if missing:
        raise LayerInputError(f"edge_keys names {', '.join(map(repr, missing))}, which no edge type of data has")
    return data
