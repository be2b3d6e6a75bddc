"""The interventional message-passing layer."""

from __future__ import annotations

from typing import Union

import torch
from torch import Tensor
from torch_geometric.nn import MLP
from torch_geometric.nn.conv import MessagePassing
from torch_geometric.typing import Adj, OptTensor

from ..errors import LayerInputError
from ._checks import check_edge_index, check_mask

__all__ = ["InterventionalConv"]

_AGGRS = ("add", "sum", "mean", "max", "min")


def cut_mask(edge_index: Tensor, intervened: Tensor) -> Tensor:
    """``True`` for edges ``j -> i`` into an intervened node ``i`` (self-loops excluded).

    ``intervened`` is ``[N]`` or ``[B, N]``; the result is ``[E]`` or ``[B, E]``.
    """
    src, dst = edge_index[0], edge_index[1]
    cut = intervened.index_select(-1, dst)
    return cut & (src != dst)


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
    :attr:`intervgnn.CausalGraph.edge_index`. Messages into intervened nodes
    are masked rather than deleted (routed to a discarded extra row for one
    intervened set, multiplied by zero for a set per row), so shapes stay
    static (the layer compiles with :func:`torch.compile`) and a batch of
    rows sharing one graph may carry a different intervened set per row. An intervened
    node therefore receives exactly what a root node receives (zero), its
    output depends on its own features only, and its gradient with respect
    to its parents' features is exactly zero. Self-loops ``i -> i`` are not
    parent edges and are never cut.

    Args:
        in_channels (int): Size of each input node feature.
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
            :class:`torch_geometric.nn.conv.MessagePassing`.

    Shapes:
        - **input:**
          node features :math:`(|\mathcal{V}|, F_{in})`, or
          :math:`(B, |\mathcal{V}|, F_{in})` for a batch of rows sharing one
          graph;
          edge indices :math:`(2, |\mathcal{E}|)`;
          intervened mask :math:`(|\mathcal{V}|)` or
          :math:`(B, |\mathcal{V}|)`, bool *(optional)*;
          edge features :math:`(|\mathcal{E}|, D)` or
          :math:`(B, |\mathcal{E}|, D)` *(optional)*
        - **output:** node features :math:`(|\mathcal{V}|, F_{out})` or
          :math:`(B, |\mathcal{V}|, F_{out})`

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
        in_channels: int,
        out_channels: int,
        aggr: str = "add",
        bias: bool = True,
        hidden_channels: int | None = None,
        num_layers: int = 2,
        edge_dim: int | None = None,
        act: Union[str, callable] = "relu",
        **kwargs,
    ):
        if aggr not in _AGGRS:
            raise LayerInputError(f"aggr must be one of {', '.join(_AGGRS)}; got '{aggr}'")
        if num_layers < 1:
            raise LayerInputError(f"num_layers must be at least 1, got {num_layers}")
        super().__init__(aggr=aggr, **kwargs)
        self.in_channels = in_channels
        self.out_channels = out_channels
        self.hidden_channels = hidden_channels or out_channels
        self.num_layers = num_layers
        self.edge_dim = edge_dim
        h = self.hidden_channels
        msg_in = 2 * in_channels + (edge_dim or 0)
        self.message_mlp = MLP([msg_in] + [h] * num_layers, act=act, norm=None, plain_last=True)
        upd = [in_channels + h] + [h] * (num_layers - 1) + [out_channels]
        self.update_mlp = MLP(upd, act=act, norm=None, plain_last=True, bias=[True] * (num_layers - 1) + [bias])
        self.reset_parameters()

    def reset_parameters(self):
        super().reset_parameters()
        self.message_mlp.reset_parameters()
        self.update_mlp.reset_parameters()

    def forward(self, x: Tensor, edge_index: Adj, intervened: OptTensor = None, edge_attr: OptTensor = None) -> Tensor:
        """Run one round of interventional message passing.

        Args:
            x (torch.Tensor): Node features ``[N, F]`` or ``[B, N, F]``.
            edge_index (torch.Tensor): Parent -> child edges ``[2, E]``.
            intervened (torch.Tensor, optional): Bool mask ``[N]`` (or
                ``[B, N]`` for a batch of rows, or ``[N]`` shared by all
                rows); ``None`` means plain message passing.
            edge_attr (torch.Tensor, optional): Edge features.
        """
        if not isinstance(x, Tensor) or x.dim() not in (2, 3):
            raise LayerInputError(f"x must be a [N, F] or [B, N, F] tensor, got {getattr(x, 'shape', type(x))}")
        check_edge_index(edge_index, x.size(-2))
        if isinstance(intervened, Tensor) and x.dim() == 3 and intervened.dim() == 1:
            check_mask(intervened, x[0])  # one set shared by every row
        else:
            check_mask(intervened, x)
        if (self.edge_dim is None) != (edge_attr is None):
            raise LayerInputError(
                "edge_attr was given but the layer has no edge_dim"
                if self.edge_dim is None
                else f"the layer was built with edge_dim={self.edge_dim}; pass edge_attr"
            )
        keep = cut = None
        if intervened is not None:
            if intervened.dim() == 1:
                # one intervened set: cut messages are routed to a discarded extra row
                cut = cut_mask(edge_index, intervened)
            else:
                # one set per row: cut messages are multiplied by zero
                keep = (~cut_mask(edge_index, intervened)).to(x.dtype).unsqueeze(-1)
        agg = self.propagate(edge_index, x=x, edge_attr=edge_attr, keep=keep, cut=cut)
        return self.update_mlp(torch.cat([x, agg], dim=-1))

    def message(self, x_i: Tensor, x_j: Tensor, edge_attr: OptTensor, keep: OptTensor) -> Tensor:
        parts = [x_j, x_i]
        if edge_attr is not None:
            if edge_attr.dim() < x_j.dim():
                edge_attr = edge_attr.expand(x_j.shape[:-1] + edge_attr.shape[-1:])
            parts.append(edge_attr)
        m = self.message_mlp(torch.cat(parts, dim=-1))
        if keep is not None:
            m = m * keep
        return m

    def aggregate(self, inputs: Tensor, index: Tensor, ptr: OptTensor = None, dim_size: int | None = None, cut: OptTensor = None) -> Tensor:
        if cut is None:
            return super().aggregate(inputs, index, ptr=ptr, dim_size=dim_size)
        if dim_size is None:
            dim_size = int(index.max()) + 1 if index.numel() else 0
        index = torch.where(cut, dim_size, index)
        out = super().aggregate(inputs, index, ptr=None, dim_size=dim_size + 1)
        return out.narrow(self.node_dim, 0, dim_size)

    def __repr__(self) -> str:
        return f"{self.__class__.__name__}({self.in_channels}, {self.out_channels}, aggr={self.aggr})"
