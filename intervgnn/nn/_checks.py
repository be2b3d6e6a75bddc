"""Input validation shared by the interventional layers.

Shape, dtype and device checks read only static tensor metadata and run
always; the range check of ``edge_index`` reads the data (a data-dependent
Python branch) and is skipped while :func:`torch.compile` traces.
"""

from __future__ import annotations

import torch
from torch import Tensor

from ..errors import LayerInputError


def _compiling() -> bool:
    return bool(torch.compiler.is_compiling())


def check_edge_index(
    edge_index: Tensor,
    num_nodes: int | None,
    num_dst: int | None = None,
    source: str = "x has",
    target: str | None = None,
) -> None:
    """Raise unless ``edge_index`` is a dense ``[2, E]`` integer tensor with indices in range.

    ``num_nodes`` bounds both rows, or only the source row when ``num_dst``
    bounds the target row (``source`` / ``target`` name the two node sets in
    the message). A bound of ``None`` is not checked. The range check is
    skipped while compiling.
    """
    if not isinstance(edge_index, Tensor) or edge_index.layout != torch.strided:
        kind = type(edge_index).__name__ if not isinstance(edge_index, Tensor) else f"a {edge_index.layout} tensor"
        raise LayerInputError(
            f"edge_index must be a dense [2, E] tensor, got {kind} "
            "(sparse adjacency layouts are not supported by the interventional layers)"
        )
    if edge_index.dim() != 2 or edge_index.size(0) != 2:
        raise LayerInputError(f"edge_index must have shape [2, E], got {list(edge_index.shape)}")
    if edge_index.dtype not in (torch.int64, torch.int32):
        raise LayerInputError(f"edge_index must hold int64 or int32 indices, got {edge_index.dtype}")
    if _compiling() or not edge_index.numel():
        return
    lo = int(edge_index.min())
    if lo < 0:
        raise LayerInputError(f"edge_index holds the negative index {lo}")
    if num_dst is None:
        if num_nodes is not None:
            hi = int(edge_index.max())
            if hi >= num_nodes:
                raise LayerInputError(f"edge_index refers to node {hi}, but {source} only {num_nodes} nodes")
        return
    target = target or source
    for row, bound, who, role in ((0, num_nodes, source, "source"), (1, num_dst, target, "target")):
        if bound is None:
            continue
        hi = int(edge_index[row].max())
        if hi >= bound:
            raise LayerInputError(f"edge_index refers to {role} node {hi}, but {who} only {bound} nodes")


def check_mask(intervened: Tensor | None, x: Tensor) -> None:
    """Raise unless the mask is bool with one entry per node (``[N]`` or ``[B, N]`` for ``x [B, N, F]``), on x's device."""
    if intervened is None:
        return
    if not isinstance(intervened, Tensor):
        raise LayerInputError(f"intervened must be a bool tensor, got {type(intervened).__name__}")
    if intervened.dtype != torch.bool:
        raise LayerInputError(f"intervened must be a bool tensor, got dtype {intervened.dtype}")
    expected = list(x.shape[:-1])
    if list(intervened.shape) != expected:
        if x.dim() == 3:
            raise LayerInputError(
                f"intervened has shape {list(intervened.shape)}, expected {expected} "
                f"(one row of N={x.size(-2)} entries per batch row) for x of shape {list(x.shape)}"
            )
        raise LayerInputError(
            f"intervened has shape {list(intervened.shape)}, expected {expected} (one entry per node)"
        )
    if intervened.device != x.device:
        raise LayerInputError(
            f"intervened is on device {intervened.device} but x is on {x.device}; move the mask to x's device"
        )
