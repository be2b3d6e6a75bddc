"""Input validation shared by the interventional layers (skipped while compiling)."""

from __future__ import annotations

import torch
from torch import Tensor

from ..errors import LayerInputError


def _compiling() -> bool:
    return bool(torch.compiler.is_compiling())


def check_edge_index(edge_index: Tensor, num_nodes: int) -> None:
    """Raise unless ``edge_index`` is a ``[2, E]`` integer tensor with indices in range."""
    if not isinstance(edge_index, Tensor):
        raise LayerInputError(
            f"edge_index must be a [2, E] tensor, got {type(edge_index).__name__} "
            "(sparse adjacency layouts are not supported by the interventional layers)"
        )
    if _compiling():
        return
    if edge_index.dim() != 2 or edge_index.size(0) != 2:
        raise LayerInputError(f"edge_index must have shape [2, E], got {list(edge_index.shape)}")
    if edge_index.dtype not in (torch.long, torch.int32, torch.int64):
        raise LayerInputError(f"edge_index must hold integers, got {edge_index.dtype}")
    if edge_index.numel():
        lo, hi = int(edge_index.min()), int(edge_index.max())
        if lo < 0:
            raise LayerInputError(f"edge_index holds the negative index {lo}")
        if hi >= num_nodes:
            raise LayerInputError(f"edge_index refers to node {hi}, but x has only {num_nodes} nodes")


def check_mask(intervened: Tensor | None, x: Tensor) -> None:
    """Raise unless the mask is bool with one entry per node (``[N]`` or ``[B, N]`` for ``x [B, N, F]``)."""
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
