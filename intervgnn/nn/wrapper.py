"""Make a PyG conv interventional by deleting the parent edges of intervened nodes."""

from __future__ import annotations

import inspect

import torch
from torch import Tensor
from torch_geometric.nn.conv import MessagePassing
from torch_geometric.typing import OptTensor

from ..errors import LayerInputError
from ._checks import check_edge_index, check_mask
from .conv import cut_mask

__all__ = ["Interventional"]

#: names of the conv's arguments that carry one entry per edge
EDGE_ARGS = ("edge_weight", "edge_attr", "edge_type")
#: edge-level arguments with exactly one value per edge (``[E]``)
_ONE_PER_EDGE = ("edge_weight", "edge_type")


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

    **Edge-level arguments.** The arguments after ``x`` and ``edge_index``
    are matched to the conv's ``forward`` parameters by name (positional
    ones through its signature); those named ``edge_weight``,
    ``edge_attr`` or ``edge_type``, or listed in ``edge_args``, are
    filtered with the edges. Everything else (``node_type``, ``size``, ...)
    is passed on unchanged.

    **Batch of rows.** ``x`` of shape ``[B, N, F]`` with a ``[B, N]`` mask
    (or an ``[N]`` mask, the same set for every row) is run as the
    equivalent disjoint batch of ``B`` graphs, since each row may cut
    different edges; edge-level arguments are then ``[E, ...]``, shared by
    the rows, and the output is ``[B, N, F_out]``.

    **Limits.** The conv must be a
    :class:`~torch_geometric.nn.conv.MessagePassing` whose ``forward``
    takes ``(x, edge_index, ...)`` with ``edge_index`` a dense ``[2, E]``
    tensor; ``flow`` must be ``"source_to_target"``; convs built with
    ``cached=True`` are refused (they would reuse the normalised edges of
    their first call, parents included); bipartite ``x = (x_src, x_dst)``
    is not supported when a mask is given. With no mask (``None``) the
    conv is called exactly as without the wrapper. Input checks run in
    eager mode; under :func:`torch.compile` the range check of
    ``edge_index`` is skipped.

    Args:
        conv (torch_geometric.nn.conv.MessagePassing): The conv to wrap.
        edge_args (tuple of str, optional): Names of further ``forward``
            arguments of the conv that carry one entry per edge.
            (default: :obj:`()`)

    Shapes:
        - **input:** as the wrapped conv, plus the intervened mask
          :math:`(|\mathcal{V}|)` (bool), or :math:`x` of shape
          :math:`(B, |\mathcal{V}|, F)` with a mask :math:`(B, |\mathcal{V}|)`
          or :math:`(|\mathcal{V}|)`
        - **output:** as the wrapped conv (:math:`(B, |\mathcal{V}|, F_{out})`
          for a batch of rows)

    Raises
    ------
    LayerInputError
        At construction: ``conv`` is not a ``MessagePassing``, its
        ``forward`` does not take ``(x, edge_index, ...)``, it was built
        with ``cached=True``, or its ``flow`` is not ``"source_to_target"``;
        ``edge_args`` is not a tuple of names. In ``forward`` with a mask:
        ``x`` is not a ``[N, F]`` / ``[B, N, F]`` tensor; ``edge_index`` is
        not a dense ``[2, E]`` int64/int32 tensor or is out of range; the
        mask is not bool, has the wrong shape or sits on another device; an
        edge-level argument has no entry per edge, or is given per row
        (``[B, E, ...]``) for a batch of rows; the conv returns extra outputs
        for a batch of rows.

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

    def __init__(self, conv: torch.nn.Module, edge_args: tuple[str, ...] = ()):
        super().__init__()
        if not isinstance(conv, MessagePassing):
            raise LayerInputError(
                "Interventional wraps a torch_geometric MessagePassing conv that takes (x, edge_index, ...); "
                f"got {type(conv).__name__}"
            )
        if getattr(conv, "cached", False):
            raise LayerInputError(
                f"{type(conv).__name__} was built with cached=True: it would reuse the normalised edges of its "
                "first call, parents included; build it with cached=False"
            )
        if conv.flow != "source_to_target":
            raise LayerInputError(
                f"{type(conv).__name__} has flow='{conv.flow}'; Interventional needs flow='source_to_target' "
                "(edges point parent -> child)"
            )
        if isinstance(edge_args, str) or not all(isinstance(a, str) for a in edge_args):
            raise LayerInputError(f"edge_args must be a tuple of argument names, got {edge_args!r}")
        params = list(inspect.signature(conv.forward).parameters.values())
        if len(params) < 2 or params[1].name != "edge_index":
            names = ", ".join(p.name for p in params[:2])
            raise LayerInputError(
                f"Interventional needs a conv whose forward takes (x, edge_index, ...); "
                f"{type(conv).__name__}.forward takes ({names}, ...)"
            )
        positional = []
        for p in params[2:]:
            if p.kind not in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD):
                break
            positional.append(p.name)
        self.conv = conv
        self.edge_args = tuple(edge_args)
        self._edge_names = frozenset(EDGE_ARGS) | frozenset(edge_args)
        self._positional = tuple(positional)

    @property
    def in_channels(self):
        """The wrapped conv's ``in_channels`` (``None`` if it has none)."""
        return getattr(self.conv, "in_channels", None)

    @property
    def out_channels(self):
        """The wrapped conv's ``out_channels`` (``None`` if it has none)."""
        return getattr(self.conv, "out_channels", None)

    def reset_parameters(self):
        self.conv.reset_parameters()

    def forward(self, x: Tensor, edge_index: Tensor, intervened: OptTensor = None, *args, **kwargs):
        """Cut the parent edges of intervened nodes, then call the wrapped conv.

        Args:
            x (torch.Tensor): Node features ``[N, F]`` (or ``[B, N, F]``).
            edge_index (torch.Tensor): Parent -> child edges ``[2, E]``.
            intervened (torch.Tensor, optional): Bool mask ``[N]`` (or
                ``[B, N]``, or ``[N]`` shared by the rows of ``x [B, N, F]``).
                ``None`` calls the conv unchanged.
            *args, **kwargs: Passed on to the conv (edge-level ones filtered).
        """
        if intervened is None:
            return self.conv(x, edge_index, *args, **kwargs)
        if not isinstance(x, Tensor):
            raise LayerInputError(
                "Interventional needs x as one tensor when a mask is given (bipartite input is not supported)"
            )
        if x.dim() not in (2, 3):
            raise LayerInputError(f"x must be a [N, F] or [B, N, F] tensor, got shape {list(x.shape)}")
        check_edge_index(edge_index, x.size(-2))
        rows = x.size(0) if x.dim() == 3 else None
        if rows is not None and isinstance(intervened, Tensor) and intervened.dim() == 1:
            check_mask(intervened, x[0])  # one set shared by every row
            intervened = intervened.expand(rows, -1)
        else:
            check_mask(intervened, x)
        num_edges = edge_index.size(1)
        names = [self._positional[i] if i < len(self._positional) else None for i in range(len(args))]
        for name, value in list(zip(names, args)) + list(kwargs.items()):
            if name in self._edge_names and isinstance(value, Tensor):
                self._check_edge_arg(name, value, num_edges, rows)
        keep = ~cut_mask(edge_index, intervened)  # [E] or [B, E]
        if rows is not None:
            n = x.size(1)
            offsets = torch.arange(0, rows * n, n, device=edge_index.device, dtype=edge_index.dtype)
            edge_index = (edge_index.unsqueeze(1) + offsets.view(1, rows, 1))[:, keep]
            x = x.reshape(rows * n, x.size(-1))

            def filt(t: Tensor) -> Tensor:
                return t.unsqueeze(0).expand((rows,) + t.shape)[keep]

        else:
            edge_index = edge_index[:, keep]

            def filt(t: Tensor) -> Tensor:
                return t[keep]

        args = tuple(
            filt(a) if name in self._edge_names and isinstance(a, Tensor) else a for name, a in zip(names, args)
        )
        kwargs = {k: (filt(v) if k in self._edge_names and isinstance(v, Tensor) else v) for k, v in kwargs.items()}
        out = self.conv(x, edge_index, *args, **kwargs)
        if rows is not None:
            if isinstance(out, tuple):
                raise LayerInputError("extra outputs (such as attention weights) are not supported for a batch of rows")
            out = out.reshape(rows, n, out.size(-1))
        return out

    @staticmethod
    def _check_edge_arg(name: str, t: Tensor, num_edges: int, rows: int | None) -> None:
        if t.dim() == 0:
            raise LayerInputError(f"{name} must have one entry per edge ([{num_edges}, ...]), got a 0-dim tensor")
        if rows is not None and t.dim() >= 2 and t.size(0) == rows and t.size(1) == num_edges and (
            t.size(0) != num_edges or name in _ONE_PER_EDGE
        ):
            raise LayerInputError(
                f"{name} has shape {list(t.shape)}, one entry per row and edge; for a batch of rows "
                f"Interventional takes edge-level arguments shared by the rows, [{num_edges}, ...]"
            )
        if t.size(0) != num_edges:
            raise LayerInputError(f"{name} has {t.size(0)} entries, but edge_index has {num_edges} edges")
        if name in _ONE_PER_EDGE and t.dim() != 1:
            raise LayerInputError(f"{name} must have shape [{num_edges}], got {list(t.shape)}")

    def __repr__(self) -> str:
        return f"{self.__class__.__name__}({self.conv})"
