"""The interventional message-passing layer."""

from __future__ import annotations

from typing import Callable, Union

import torch
from torch import Tensor
from torch_geometric.nn import MLP
from torch_geometric.nn.conv import MessagePassing
from torch_geometric.typing import OptTensor, PairTensor

from ..errors import LayerInputError
from ._checks import check_edge_index, check_mask

__all__ = ["InterventionalConv"]

_AGGRS = ("add", "sum", "mean", "max", "min")


def cut_mask(edge_index: Tensor, intervened: Tensor, self_loops: bool = True) -> Tensor:
    """``True`` for edges ``j -> i`` into an intervened node ``i`` (self-loops excluded).

    ``intervened`` is ``[N]`` or ``[B, N]``; the result is ``[E]`` or ``[B, E]``.
    ``self_loops=False`` for a bipartite graph, whose sources and targets
    are different nodes: there ``j == i`` is an ordinary edge and is cut.
    """
    src, dst = edge_index[0], edge_index[1]
    cut = intervened.index_select(-1, dst)
    return cut & (src != dst) if self_loops else cut


def _scatter_rows(inputs: Tensor, index: Tensor, dim_size: int, aggr: str) -> Tensor:
    """Aggregate messages ``[B, E, H]`` into ``[B, dim_size, H]`` by a per-row index ``[B, E]``.

    Rows that receive nothing are zero, as in PyG's aggregations.
    """
    rows, num_edges, width = inputs.shape
    full = index.unsqueeze(-1).expand(rows, num_edges, width)
    out = inputs.new_zeros(rows, dim_size, width)
    if aggr in ("add", "sum", "mean"):
        out = out.scatter_add_(1, full, inputs)
        if aggr == "mean":
            ones = inputs.new_ones(1, 1).expand(rows, num_edges)
            count = inputs.new_zeros(rows, dim_size).scatter_add_(1, index, ones)
            out = out / count.clamp(min=1).unsqueeze(-1)
        return out
    return out.scatter_reduce_(1, full, inputs, reduce="a" + aggr, include_self=False)


class InterventionalConv(MessagePassing):
    r"""Message passing along parent -> child edges that cuts the parents of intervened nodes.

    For node :math:`i` with parents :math:`\mathrm{pa}(i)` and the set
    :math:`I` of intervened nodes,

    .. math::
        \mathbf{h}_i^{\prime} = U\Big(\mathbf{h}_i \,\Big\|\,
        \bigoplus_{j \in \mathrm{pa}_I(i)} M\big(\mathbf{h}_j \,\|\,
        \mathbf{h}_i \,\|\, \mathbf{e}_{j,i}\big)\Big),
        \qquad
        \mathrm{pa}_I(i) = \begin{cases} \emptyset & i \in I \\
        \mathrm{pa}(i) & \text{otherwise,} \end{cases}

    where :math:`M` and :math:`U` are MLPs and :math:`\bigoplus` is the
    aggregation. Edges point parent -> child (PyG's source -> target), as in
    :attr:`intervgnn.CausalGraph.edge_index`.

    Messages into intervened nodes are not deleted but routed to a
    discarded extra row (one extra row per batch row when the mask is
    ``[B, N]``), so shapes stay static (the layer compiles with
    :func:`torch.compile`) and a batch of rows sharing one graph may carry
    a different intervened set per row. A cut message is never aggregated,
    so for every aggregation the result equals running the layer on the
    graph with the cut edges deleted. An intervened node without a
    self-loop therefore receives exactly what a root node receives (the
    empty aggregate, zero): its output depends on its own features only and
    its gradient with respect to its parents' features is exactly zero.
    Self-loops ``i -> i`` are not parent edges and are never cut: an
    intervened node with an explicit self-loop receives its own
    self-message alone.

    Input checks (shapes, dtypes, devices, index range) run in eager mode;
    under :func:`torch.compile` the range check of ``edge_index`` is
    skipped, as it needs data-dependent Python.

    Args:
        in_channels (int or tuple): Size of each input node feature, or a
            pair (source size, target size) when ``x`` is given as a pair.
        out_channels (int): Size of each output node feature.
        aggr (str, optional): Aggregation, one of :obj:`"add"`,
            :obj:`"mean"`, :obj:`"max"`, :obj:`"min"`. (default: :obj:`"add"`)
        bias (bool, optional): If :obj:`False`, the last layer of :math:`U`
            has no bias. (default: :obj:`True`)
        hidden_channels (int, optional): Width of the MLPs and size of the
            messages. (default: :obj:`out_channels`)
        num_layers (int, optional): Number of linear layers in each of
            :math:`M` and :math:`U`. (default: :obj:`2`)
        edge_dim (int, optional): Size of edge features; if set, the layer
            expects :obj:`edge_attr`. (default: :obj:`None`)
        act (str or callable, optional): Activation inside the MLPs.
            (default: :obj:`"relu"`)
        **kwargs (optional): Additional arguments of
            :class:`torch_geometric.nn.conv.MessagePassing`; ``flow`` must
            be :obj:`"source_to_target"`.

    Shapes:
        - **input:**
          node features :math:`(|\mathcal{V}|, F_{in})`, or
          :math:`(B, |\mathcal{V}|, F_{in})` for a batch of rows sharing one
          graph, or a pair of such tensors (source role, target role);
          edge indices :math:`(2, |\mathcal{E}|)`;
          intervened mask :math:`(|\mathcal{V}|)` or
          :math:`(B, |\mathcal{V}|)`, bool *(optional)*;
          edge features :math:`(|\mathcal{E}|, D)` (or :math:`(|\mathcal{E}|)`
          when :math:`D = 1`) or :math:`(B, |\mathcal{E}|, D)` *(optional)*
        - **output:** node features :math:`(|\mathcal{V}|, F_{out})` or
          :math:`(B, |\mathcal{V}|, F_{out})`

    Raises
    ------
    LayerInputError
        At construction: an unknown ``aggr``, ``num_layers < 1``, or a
        ``flow`` other than ``"source_to_target"``. In ``forward``: ``x``
        not a ``[N, F]`` / ``[B, N, F]`` tensor or pair, or with a feature
        size other than ``in_channels``; ``edge_index`` not a dense
        ``[2, E]`` int64/int32 tensor or out of range; a mask that is not
        bool, not ``[N]`` / ``[B, N]``, or on another device; ``edge_attr``
        given without ``edge_dim`` (or missing with it), or with the wrong
        number of rows, width or dimensions.

    Examples
    --------
    >>> import torch
    >>> conv = InterventionalConv(8, 16)
    >>> x = torch.randn(3, 8)
    >>> edge_index = torch.tensor([[0, 1], [1, 2]])   # 0 -> 1 -> 2
    >>> out = conv(x, edge_index, intervened=torch.tensor([False, True, False]))
    >>> tuple(out.shape)
    (3, 16)
    """

    def __init__(
        self,
        in_channels: int | tuple[int, int],
        out_channels: int,
        aggr: str = "add",
        bias: bool = True,
        hidden_channels: int | None = None,
        num_layers: int = 2,
        edge_dim: int | None = None,
        act: Union[str, Callable] = "relu",
        **kwargs,
    ):
        if isinstance(in_channels, (tuple, list)):
            src_channels, dst_channels = (int(c) for c in in_channels)
        else:
            src_channels = dst_channels = int(in_channels)
        if aggr not in _AGGRS:
            raise LayerInputError(f"aggr must be one of {', '.join(_AGGRS)}; got '{aggr}'")
        if num_layers < 1:
            raise LayerInputError(f"num_layers must be at least 1, got {num_layers}")
        flow = kwargs.get("flow", "source_to_target")
        if flow != "source_to_target":
            raise LayerInputError(
                f"flow must be 'source_to_target' (edges point parent -> child), got '{flow}'; "
                "reverse edge_index instead"
            )
        super().__init__(aggr=aggr, **kwargs)
        self.in_channels = in_channels
        self.out_channels = out_channels
        self.hidden_channels = hidden_channels or out_channels
        self.num_layers = num_layers
        self.edge_dim = edge_dim
        self._channels = (src_channels, dst_channels)
        h = self.hidden_channels
        msg_in = src_channels + dst_channels + (edge_dim or 0)
        self.message_mlp = MLP([msg_in] + [h] * num_layers, act=act, norm=None, plain_last=True)
        upd = [dst_channels + h] + [h] * (num_layers - 1) + [out_channels]
        self.update_mlp = MLP(upd, act=act, norm=None, plain_last=True, bias=[True] * (num_layers - 1) + [bias])
        self.reset_parameters()

    def _set_jittable_templates(self, raise_on_error: bool = False) -> None:
        # PyG renders a specialised propagate() from a template when a layer is built; for this
        # layer's signature (the extra ``cut`` mask) the rendered module comes out without one, the
        # failure is swallowed and the plain propagate() is used, and the attempt was repeated on
        # every construction (about 5 ms each). Use the plain propagate() from the start.
        return None

    def reset_parameters(self):
        super().reset_parameters()
        self.message_mlp.reset_parameters()
        self.update_mlp.reset_parameters()

    def forward(
        self,
        x: Union[Tensor, PairTensor],
        edge_index: Tensor,
        intervened: OptTensor = None,
        edge_attr: OptTensor = None,
    ) -> Tensor:
        """Run one round of interventional message passing.

        Args:
            x (torch.Tensor or tuple): Node features ``[N, F]`` or
                ``[B, N, F]``; or a pair ``(x_source, x_target)`` of features
                of the same nodes in their two roles (what a node sends to
                its children, and what it knows of itself), or, as in PyG,
                of two node sets for a bipartite graph (``[N_s, F_s]`` and
                ``[N_t, F_t]``: ``edge_index[0]`` indexes the sources,
                ``edge_index[1]`` the targets; ``intervened`` and the output
                are over the targets).
            edge_index (torch.Tensor): Parent -> child edges ``[2, E]``
                (sparse layouts are refused).
            intervened (torch.Tensor, optional): Bool mask ``[N]`` (or
                ``[B, N]`` for a batch of rows, or ``[N]`` shared by all
                rows); ``None`` means plain message passing.
            edge_attr (torch.Tensor, optional): Edge features ``[E, D]``
                (``[E]`` when ``D = 1``), or ``[B, E, D]`` for a batch of
                rows.
        """
        x_src, x_dst = self._check_x(x)
        n_src, n_dst = x_src.size(-2), x_dst.size(-2)
        if n_src == n_dst:
            check_edge_index(edge_index, n_dst)
        else:  # bipartite: edge_index[0] indexes x_source, edge_index[1] x_target
            check_edge_index(edge_index, n_src, n_dst, source="x_source has", target="x_target has")
        if isinstance(intervened, Tensor) and x_dst.dim() == 3 and intervened.dim() == 1:
            check_mask(intervened, x_dst[0])  # one set shared by every row
        else:
            check_mask(intervened, x_dst)
        edge_attr = self._check_edge_attr(edge_attr, x_dst, edge_index.size(1))
        # sources and targets are the same nodes (one tensor, or a pair of equal size): i -> i is a self-loop
        cut = None if intervened is None else cut_mask(edge_index, intervened, self_loops=n_src == n_dst)
        # the message MLP's first layer on [x_j, x_i(, e)] is W_s x_j + W_t x_i (+ W_e e) + b: applied to
        # the nodes before the messages are gathered, not to every edge (E is usually larger than N)
        first = self.message_mlp.lins[0]
        s, d = self._channels
        a = torch.nn.functional.linear(x_src, first.weight[:, :s])
        b = torch.nn.functional.linear(x_dst, first.weight[:, s : s + d], first.bias)
        if x_dst.dim() == 2 and self._plain_sum():
            agg = self._sum_messages(a, b, edge_index, edge_attr, cut, n_dst)
        else:
            agg = self.propagate(edge_index, x=(a, b), edge_attr=edge_attr, cut=cut, size=(n_src, n_dst))
        return self.update_mlp(torch.cat([x_dst, agg], dim=-1))

    def _plain_sum(self) -> bool:
        """True when :meth:`propagate` would do nothing but gather, :meth:`message` and sum.

        That is: sum aggregation, no explainer attached, no decomposition
        into layers and no propagate / message / aggregate hooks. Then
        :meth:`_sum_messages` computes the same in fewer operations (PyG's
        generic machinery costs about as much as the arithmetic on a few
        thousand edges).
        """
        return (
            self.aggr in ("add", "sum")
            and not self.explain
            and self.decomposed_layers == 1
            and not (
                self._propagate_forward_pre_hooks or self._propagate_forward_hooks
                or self._message_forward_pre_hooks or self._message_forward_hooks
                or self._aggregate_forward_pre_hooks or self._aggregate_forward_hooks
            )
        )

    def _sum_messages(
        self, x_src: Tensor, x_dst: Tensor, edge_index: Tensor, edge_attr: OptTensor, cut: OptTensor, n_dst: int
    ) -> Tensor:
        """Sum of the messages into each target ``[N_t, H]`` (a cut message is dropped), as ``propagate`` sums them."""
        src, dst = edge_index[0], edge_index[1]
        msg = self.message(x_dst.index_select(0, dst), x_src.index_select(0, src), edge_attr)
        if cut is None:
            return msg.new_zeros(n_dst, msg.size(-1)).index_add_(0, dst, msg)
        # a cut message goes to the extra row n_dst, which is dropped
        return msg.new_zeros(n_dst + 1, msg.size(-1)).index_add_(0, torch.where(cut, n_dst, dst), msg)[:n_dst]

    def _check_x(self, x) -> tuple[Tensor, Tensor]:
        if isinstance(x, (tuple, list)):
            if len(x) != 2 or not all(isinstance(t, Tensor) for t in x):
                raise LayerInputError("x must be a tensor or a pair (x_source, x_target) of tensors")
            x_src, x_dst = x
            roles = ("x_source", "x_target")
        elif isinstance(x, Tensor):
            x_src = x_dst = x
            roles = ("x", "x")
        else:
            raise LayerInputError(f"x must be a [N, F] or [B, N, F] tensor, got {type(x).__name__}")
        for t, role in zip((x_src, x_dst), roles):
            if t.dim() not in (2, 3):
                raise LayerInputError(f"{role} must be a [N, F] or [B, N, F] tensor, got shape {list(t.shape)}")
        if x_src.shape[:-2] != x_dst.shape[:-2]:
            raise LayerInputError(
                f"x_source {list(x_src.shape)} and x_target {list(x_dst.shape)} must have the same batch rows"
            )
        for t, role, want in zip((x_src, x_dst), roles, self._channels):
            if t.size(-1) != want:
                raise LayerInputError(
                    f"{role} has {t.size(-1)} features per node, expected {want} "
                    f"(the layer was built with in_channels={self.in_channels})"
                )
        return x_src, x_dst

    def _check_edge_attr(self, edge_attr: OptTensor, x: Tensor, num_edges: int) -> OptTensor:
        if (self.edge_dim is None) != (edge_attr is None):
            raise LayerInputError(
                "edge_attr was given but the layer has no edge_dim"
                if self.edge_dim is None
                else f"the layer was built with edge_dim={self.edge_dim}; pass edge_attr"
            )
        if edge_attr is None:
            return None
        if not isinstance(edge_attr, Tensor):
            raise LayerInputError(f"edge_attr must be a tensor, got {type(edge_attr).__name__}")
        if edge_attr.dim() == 1 and self.edge_dim == 1:
            edge_attr = edge_attr.unsqueeze(-1)
        shape = list(edge_attr.shape)
        if x.dim() == 3:
            if edge_attr.dim() not in (2, 3) or (edge_attr.dim() == 3 and edge_attr.size(0) != x.size(0)):
                raise LayerInputError(
                    f"edge_attr has shape {shape}, expected [E, {self.edge_dim}] or "
                    f"[{x.size(0)}, E, {self.edge_dim}] for x of shape {list(x.shape)}"
                )
        elif edge_attr.dim() != 2:
            raise LayerInputError(f"edge_attr has shape {shape}, expected [E, {self.edge_dim}] with E={num_edges}")
        if edge_attr.size(-2) != num_edges:
            raise LayerInputError(
                f"edge_attr has {edge_attr.size(-2)} rows of edges, but edge_index has {num_edges} edges"
            )
        if edge_attr.size(-1) != self.edge_dim:
            raise LayerInputError(
                f"edge_attr has {edge_attr.size(-1)} features per edge, but the layer was built with "
                f"edge_dim={self.edge_dim}"
            )
        return edge_attr

    def message(self, x_i: Tensor, x_j: Tensor, edge_attr: OptTensor) -> Tensor:
        # x_j, x_i: the first layer of the message MLP already applied to the source / target (see forward)
        h = x_j + x_i
        mlp = self.message_mlp
        if edge_attr is not None:
            e = torch.nn.functional.linear(edge_attr, mlp.lins[0].weight[:, sum(self._channels) :])
            h = h + (e if e.dim() == h.dim() else e.expand_as(h))
        for lin in mlp.lins[1:]:  # the rest of the MLP (no norms, no dropout: built so in __init__)
            h = lin(mlp.act(h))
        return h

    def aggregate(
        self, inputs: Tensor, index: Tensor, ptr: OptTensor = None, dim_size: int | None = None, cut: OptTensor = None
    ) -> Tensor:
        if cut is None:
            return super().aggregate(inputs, index, ptr=ptr, dim_size=dim_size)
        n = dim_size  # set by propagate from x_target
        # a cut message goes to the extra row n, which is aggregated and dropped
        index = torch.where(cut, n, index)
        if cut.dim() == 1:
            out = super().aggregate(inputs, index, ptr=None, dim_size=n + 1)
            return out.narrow(self.node_dim, 0, n)
        # one set per row: row b's messages go to rows [0, n] of its own block of n + 1 rows, i.e.
        # B * (n + 1) rows held as [B, n + 1, H]. Kept 3-D (a dim-1 scatter with a [B, E] index),
        # the scatter runs the same kernel as the unmasked path; the flattened dim-0 scatter takes
        # another CPU kernel that is faster on one thread but stalls badly when threads contend.
        return _scatter_rows(inputs, index, n + 1, self.aggr)[:, :n]

    def __repr__(self) -> str:
        return f"{self.__class__.__name__}({self.in_channels}, {self.out_channels}, aggr={self.aggr})"
