"""Make any PyG conv interventional by deleting the parent edges of intervened nodes."""

from __future__ import annotations

import torch
from torch import Tensor
from torch_geometric.nn.conv import MessagePassing
from torch_geometric.typing import Adj, OptTensor

from ..errors import LayerInputError
from ._checks import check_edge_index, check_mask
from .conv import cut_mask

__all__ = ["Interventional"]

#: keyword arguments that carry one entry per edge
EDGE_KWARGS = ("edge_weight", "edge_attr", "edge_type")


class Interventional(torch.nn.Module):
    r"""Wrap an existing PyG conv so that intervened nodes hear nothing from their parents.

    Before the wrapped conv runs, every edge ``j -> i`` into an intervened
    node ``i`` is deleted, together with the matching entries of edge-level
    arguments. Deleting (rather than masking) matters for convs whose
    arithmetic depends on the edge set: degree normalisation
    (:class:`~torch_geometric.nn.conv.GCNConv`), attention softmax
    (:class:`~torch_geometric.nn.conv.GATConv`) and mean aggregation
    (:class:`~torch_geometric.nn.conv.SAGEConv`) never see a cut edge.

    **Self-loops.** Self-loops are not parent edges and are kept: an
    explicit ``i -> i`` edge in the input stays, and self-loops that the
    conv adds itself (``add_self_loops=True`` in GCNConv and GATConv) are
    added after the cut, so an intervened node still hears itself. With
    GCNConv an intervened node's normalised degree is then 1 and its output
    is a transform of its own features only.

    Edge-level arguments that are filtered with the edges: the keyword
    arguments ``edge_weight``, ``edge_attr`` and ``edge_type``, and any
    positional tensor argument whose first dimension equals the number of
    edges.

    A batch of rows sharing one graph (``x`` of shape ``[B, N, F]`` with a
    ``[B, N]`` mask) is run as the equivalent disjoint batch of ``B`` graphs,
    since each row may cut different edges; edge-level arguments are then
    ``[E, ...]`` (shared by the rows) and the output is ``[B, N, F_out]``.

    Args:
        conv (torch_geometric.nn.conv.MessagePassing): The conv to wrap;
            it must take ``(x, edge_index, ...)``.

    Shapes:
        - **input:** as the wrapped conv, plus the intervened mask
          :math:`(|\mathcal{V}|)` (bool), or :math:`x` of shape
          :math:`(B, |\mathcal{V}|, F)` with a mask :math:`(B, |\mathcal{V}|)`
        - **output:** as the wrapped conv (:math:`(B, |\mathcal{V}|, F_{out})`
          for a batch of rows)

    Examples
    --------
    >>> import torch
    >>> from torch_geometric.nn import GCNConv
    >>> layer = Interventional(GCNConv(4, 8))
    >>> layer
    Interventional(GCNConv(4, 8))
    >>> x, edge_index = torch.randn(3, 4), torch.tensor([[0, 1], [1, 2]])
    >>> tuple(layer(x, edge_index, torch.tensor([False, True, False])).shape)
    (3, 8)
    """

    def __init__(self, conv: torch.nn.Module):
        super().__init__()
        if not isinstance(conv, MessagePassing):
            raise LayerInputError(
                "Interventional wraps a torch_geometric MessagePassing conv that takes (x, edge_index, ...); "
                f"got {type(conv).__name__}"
            )
        self.conv = conv

    def reset_parameters(self):
        self.conv.reset_parameters()

    def forward(self, x: Tensor, edge_index: Adj, intervened: OptTensor = None, *args, **kwargs):
        """Cut the parent edges of intervened nodes, then call the wrapped conv.

        Args:
            x (torch.Tensor): Node features ``[N, F]`` (or ``[B, N, F]``).
            edge_index (torch.Tensor): Parent -> child edges ``[2, E]``.
            intervened (torch.Tensor, optional): Bool mask ``[N]`` (or
                ``[B, N]``). ``None`` calls the conv unchanged.
            *args, **kwargs: Passed on to the conv (edge-level ones filtered).
        """
        if intervened is None:
            return self.conv(x, edge_index, *args, **kwargs)
        if not isinstance(x, Tensor):
            raise LayerInputError("Interventional needs x as one tensor when a mask is given (bipartite input is not supported)")
        check_edge_index(edge_index, x.size(-2))
        check_mask(intervened, x)
        num_edges = edge_index.size(1)
        batch_rows = x.dim() == 3
        if batch_rows:
            B, N = x.size(0), x.size(1)
            offsets = torch.arange(B, device=edge_index.device).mul_(N).view(1, B, 1)
            edge_index = (edge_index.unsqueeze(1) + offsets).reshape(2, B * num_edges)
            x = x.reshape(B * N, x.size(-1))
            intervened = intervened.reshape(B * N)

            def expand(t):
                return t.unsqueeze(0).expand((B,) + t.shape).reshape((B * num_edges,) + t.shape[1:])

        keep = ~cut_mask(edge_index, intervened)

        def filt(t):
            if batch_rows:
                t = expand(t)
            return t[keep]

        args = tuple(filt(a) if isinstance(a, Tensor) and a.dim() > 0 and a.size(0) == num_edges else a for a in args)
        kwargs = {k: (filt(v) if k in EDGE_KWARGS and isinstance(v, Tensor) else v) for k, v in kwargs.items()}
        out = self.conv(x, edge_index[:, keep], *args, **kwargs)
        if batch_rows:
            if isinstance(out, tuple):
                raise LayerInputError("extra outputs (such as attention weights) are not supported for a batch of rows")
            out = out.reshape(B, N, out.size(-1))
        return out

    def __repr__(self) -> str:
        return f"{self.__class__.__name__}({self.conv})"
