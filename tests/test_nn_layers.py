"""Interventional message passing: the causal property, agreement across
input forms, PyG conventions (shape, repr, edge-order invariance via PyG's
own ``assert_module``), errors.

The causal property is the definition of the layers (common practice, no
source): an intervened node's output must not depend on its parents'
features, at any depth of a stack, and the gradient must be exactly zero.
"""

from __future__ import annotations

import pytest
import torch
from torch_geometric.data import Batch, Data, HeteroData
from torch_geometric.nn import GATConv, GCNConv, GINConv, GraphConv, SAGEConv, Sequential
from torch_geometric.testing import assert_module

from intervgnn.errors import LayerInputError
from intervgnn.nn import Intervene, Interventional, InterventionalConv, drop_parent_edges

from .conftest import our_network

F_IN, F_OUT = 6, 5


def alarm_graph():
    g = our_network("alarm").graph
    return g, g.edge_index


def pick_node(g):
    """An intervened node with >= 2 parents and >= 2 ancestors beyond them, and a child."""
    for v in g.nodes:
        if len(g.parents(v)) >= 2 and len(g.ancestors(v)) > len(g.parents(v)) and g.children(v):
            return g.index(v), [g.index(p) for p in g.parents(v)], [g.index(a) for a in g.ancestors(v)], g.index(g.children(v)[0])
    raise AssertionError("no suitable node")


def make_conv(kind):
    torch.manual_seed(0)
    if kind == "ours":
        return InterventionalConv(F_IN, F_OUT)
    if kind == "gcn":
        return Interventional(GCNConv(F_IN, F_OUT))
    if kind == "sage":
        return Interventional(SAGEConv(F_IN, F_OUT))
    if kind == "gat":
        return Interventional(GATConv(F_IN, F_OUT, heads=2, concat=False))
    if kind == "gin":
        return Interventional(GINConv(torch.nn.Sequential(torch.nn.Linear(F_IN, F_OUT), torch.nn.Tanh(), torch.nn.Linear(F_OUT, F_OUT))))
    if kind == "graph":
        return Interventional(GraphConv(F_IN, F_OUT))
    raise ValueError(kind)


def make_stack(kind):
    torch.manual_seed(0)
    dims = [F_IN, 8, 8, F_OUT]
    layers = []
    for a, b in zip(dims[:-1], dims[1:]):
        if kind == "ours":
            conv = InterventionalConv(a, b)
        else:
            conv = Interventional(
                {"gcn": lambda: GCNConv(a, b), "sage": lambda: SAGEConv(a, b), "gat": lambda: GATConv(a, b),
                 "gin": lambda: GINConv(torch.nn.Linear(a, b)), "graph": lambda: GraphConv(a, b)}[kind]()
            )
        layers += [(conv, "x, edge_index, intervened -> x"), torch.nn.Tanh()]
    return Sequential("x, edge_index, intervened", layers[:-1])


KINDS = ["ours", "gcn", "sage", "gat", "gin", "graph"]


@pytest.mark.parametrize("kind", KINDS)
def test_intervened_node_hears_nothing_from_its_parents(kind):
    g, ei = alarm_graph()
    node, parents, _, child = pick_node(g)
    conv = make_conv(kind)
    mask = torch.zeros(g.num_nodes, dtype=torch.bool)
    mask[node] = True
    x = torch.randn(g.num_nodes, F_IN)
    out = conv(x, ei, mask)
    x2 = x.clone()
    x2[parents] += torch.randn(len(parents), F_IN) * 3
    out2 = conv(x2, ei, mask)
    assert torch.equal(out[node], out2[node])
    # the node's own features still matter, and other nodes still hear their parents
    x3 = x.clone()
    x3[node] += 1.0
    assert not torch.allclose(conv(x3, ei, mask)[child], out[child])
    assert not torch.allclose(conv(x3, ei, mask)[node], out[node])
    # gradient with respect to the parents is exactly zero
    xg = x.clone().requires_grad_(True)
    conv(xg, ei, mask)[node].sum().backward()
    assert torch.count_nonzero(xg.grad[parents]) == 0
    assert torch.count_nonzero(xg.grad[node]) > 0
    # without the mask the parents are heard
    xg = x.clone().requires_grad_(True)
    conv(xg, ei, None)[node].sum().backward()
    assert torch.count_nonzero(xg.grad[parents]) > 0


@pytest.mark.parametrize("kind", KINDS)
def test_three_layer_stack_blocks_all_ancestors(kind):
    g, ei = alarm_graph()
    node, _, ancestors, child = pick_node(g)
    model = make_stack(kind)
    mask = torch.zeros(g.num_nodes, dtype=torch.bool)
    mask[node] = True
    x = torch.randn(g.num_nodes, F_IN, requires_grad=True)
    out = model(x, ei, mask)
    out[node].sum().backward()
    assert torch.count_nonzero(x.grad[ancestors]) == 0
    x2 = x.detach().clone()
    x2[ancestors] += 2.0
    assert torch.equal(model(x2, ei, mask)[node], out[node].detach())
    # a non-intervened descendant still hears the ancestors (through the node's siblings or the node itself)
    x.grad = None
    model(x, ei, mask)[child].sum().backward()
    assert torch.count_nonzero(x.grad[node]) > 0


@pytest.mark.parametrize("conv", [GCNConv(F_IN, F_OUT), SAGEConv(F_IN, F_OUT), GATConv(F_IN, F_OUT), GINConv(torch.nn.Linear(F_IN, F_OUT)), GraphConv(F_IN, F_OUT)], ids=lambda c: type(c).__name__)
def test_wrapper_without_intervention_equals_bare_conv(conv):
    g, ei = alarm_graph()
    x = torch.randn(g.num_nodes, F_IN)
    wrapped = Interventional(conv)
    assert torch.equal(wrapped(x, ei), conv(x, ei))
    assert torch.equal(wrapped(x, ei, torch.zeros(g.num_nodes, dtype=torch.bool)), conv(x, ei))


def test_wrapper_filters_edge_weights_and_attributes():
    g, ei = alarm_graph()
    node, parents, _, _ = pick_node(g)
    mask = torch.zeros(g.num_nodes, dtype=torch.bool)
    mask[node] = True
    x = torch.randn(g.num_nodes, F_IN)
    w = torch.rand(ei.size(1))
    gcn = Interventional(GCNConv(F_IN, F_OUT))
    keep = ei[1] != node
    expected = gcn.conv(x, ei[:, keep], w[keep])
    assert torch.equal(gcn(x, ei, mask, w), expected)
    assert torch.equal(gcn(x, ei, mask, edge_weight=w), expected)
    gat = Interventional(GATConv(F_IN, F_OUT, edge_dim=3))
    ea = torch.randn(ei.size(1), 3)
    assert torch.equal(gat(x, ei, mask, edge_attr=ea), gat.conv(x, ei[:, keep], edge_attr=ea[keep]))


@pytest.mark.parametrize("kind", ["ours", "sage", "gcn", "gat"])
def test_row_batch_equals_disjoint_batch(kind):
    g, ei = alarm_graph()
    B, N = 4, g.num_nodes
    conv = make_conv(kind)
    x = torch.randn(B, N, F_IN)
    mask = torch.rand(B, N) < 0.3
    out = conv(x, ei, mask)
    assert out.shape == (B, N, F_OUT)
    batch = Batch.from_data_list([Data(x=x[b], edge_index=ei, mask=mask[b]) for b in range(B)])
    ref = conv(batch.x, batch.edge_index, batch.mask).view(B, N, F_OUT)
    torch.testing.assert_close(out, ref, atol=1e-5, rtol=1e-5)


def test_row_batch_with_shared_mask_and_edge_features():
    g, ei = alarm_graph()
    conv = InterventionalConv(F_IN, F_OUT, edge_dim=2)
    x = torch.randn(3, g.num_nodes, F_IN)
    ea = torch.randn(ei.size(1), 2)
    shared = torch.rand(g.num_nodes) < 0.2
    out = conv(x, ei, shared, edge_attr=ea)
    per_row = conv(x, ei, shared.expand(3, -1), edge_attr=ea.expand(3, -1, -1))
    torch.testing.assert_close(out, per_row)
    for b in range(3):
        torch.testing.assert_close(out[b], conv(x[b], ei, shared, edge_attr=ea))


@pytest.mark.parametrize("kind", KINDS)
def test_edge_order_invariance_and_shape(kind):
    g, ei = alarm_graph()
    conv = make_conv(kind)
    mask = torch.rand(g.num_nodes) < 0.2
    x = torch.randn(g.num_nodes, F_IN)
    # PyG's own test helper: output size and invariance to edge permutation
    assert_module(conv, x, ei, expected_size=(g.num_nodes, F_OUT), test_sparse_layouts=[], atol=1e-6, intervened=mask)


def test_repr_strings():
    assert repr(InterventionalConv(16, 32)) == "InterventionalConv(16, 32, aggr=add)"
    assert repr(InterventionalConv(16, 32, aggr="mean")) == "InterventionalConv(16, 32, aggr=mean)"
    assert repr(Interventional(SAGEConv(16, 32))) == "Interventional(SAGEConv(16, 32, aggr=mean))"


@pytest.mark.parametrize("aggr", ["add", "mean", "max", "min"])
def test_aggregations_and_no_mask_is_plain_message_passing(aggr):
    g, ei = alarm_graph()
    conv = InterventionalConv(F_IN, F_OUT, aggr=aggr, hidden_channels=7, num_layers=3)
    x = torch.randn(g.num_nodes, F_IN)
    none = conv(x, ei)
    assert torch.equal(none, conv(x, ei, torch.zeros(g.num_nodes, dtype=torch.bool)))
    # an intervened node receives exactly what a root receives: U(h_i, 0)
    node, *_ = pick_node(g)
    mask = torch.zeros(g.num_nodes, dtype=torch.bool)
    mask[node] = True
    out = conv(x, ei, mask)
    alone = conv.update_mlp(torch.cat([x[node], torch.zeros(7)]))
    torch.testing.assert_close(out[node], alone)


def test_torch_compile():
    g, ei = alarm_graph()
    conv = InterventionalConv(F_IN, F_OUT)
    x = torch.randn(4, g.num_nodes, F_IN)
    mask = torch.rand(4, g.num_nodes) < 0.2
    eager = conv(x, ei, mask)
    try:
        compiled = torch.compile(conv)
        out = compiled(x, ei, mask)
    except Exception as exc:  # pragma: no cover - depends on the platform's compiler
        if any(w in str(exc).lower() for w in ("compiler", "gcc", "cc1", "cpp", "inductor", "triton")):
            pytest.skip(f"torch.compile unavailable here: {type(exc).__name__}")
        raise
    torch.testing.assert_close(out, eager, atol=1e-5, rtol=1e-5)
    # a different mask reuses the same compiled graph (static shapes)
    mask2 = torch.rand(4, g.num_nodes) < 0.5
    torch.testing.assert_close(compiled(x, ei, mask2), conv(x, ei, mask2), atol=1e-5, rtol=1e-5)
    # one intervened set for a whole graph (the routed path) compiles too
    node_mask = torch.rand(g.num_nodes) < 0.2
    torch.testing.assert_close(compiled(x[0], ei, node_mask), conv(x[0], ei, node_mask), atol=1e-5, rtol=1e-5)


# ----------------------------------------------------------------- errors
def test_mask_errors():
    conv = InterventionalConv(F_IN, F_OUT)
    x = torch.randn(4, F_IN)
    ei = torch.tensor([[0, 1], [1, 2]])
    with pytest.raises(LayerInputError, match=r"intervened must be a bool tensor, got dtype torch.float32"):
        conv(x, ei, torch.zeros(4))
    with pytest.raises(LayerInputError, match=r"intervened has shape \[5\], expected \[4\] \(one entry per node\)"):
        conv(x, ei, torch.zeros(5, dtype=torch.bool))
    with pytest.raises(LayerInputError, match=r"intervened has shape \[2, 5\], expected \[2, 4\] .* for x of shape \[2, 4, 6\]"):
        conv(torch.randn(2, 4, F_IN), ei, torch.zeros(2, 5, dtype=torch.bool))
    with pytest.raises(LayerInputError, match=r"intervened has shape \[3\], expected \[4\]"):
        Interventional(SAGEConv(F_IN, F_OUT))(x, ei, torch.zeros(3, dtype=torch.bool))


def test_edge_index_errors():
    conv = InterventionalConv(F_IN, F_OUT)
    x = torch.randn(4, F_IN)
    with pytest.raises(LayerInputError, match="edge_index refers to node 7, but x has only 4 nodes"):
        conv(x, torch.tensor([[0, 7], [1, 2]]))
    with pytest.raises(LayerInputError, match=r"edge_index must have shape \[2, E\], got \[3, 2\]"):
        conv(x, torch.zeros(3, 2, dtype=torch.long))
    with pytest.raises(LayerInputError, match="edge_index refers to node 9"):
        Interventional(GCNConv(F_IN, F_OUT))(x, torch.tensor([[0], [9]]), torch.zeros(4, dtype=torch.bool))


def test_wrapping_a_non_conv_is_refused():
    with pytest.raises(LayerInputError, match="Interventional wraps a torch_geometric MessagePassing conv .*got Linear"):
        Interventional(torch.nn.Linear(3, 3))


def test_bad_layer_settings():
    with pytest.raises(LayerInputError, match="aggr must be one of add, sum, mean, max, min; got 'lstm'"):
        InterventionalConv(3, 3, aggr="lstm")
    with pytest.raises(LayerInputError, match="the layer was built with edge_dim=2; pass edge_attr"):
        InterventionalConv(3, 3, edge_dim=2)(torch.randn(2, 3), torch.tensor([[0], [1]]))


# ------------------------------------------------- functional and transform
def test_drop_parent_edges_tensor():
    ei = torch.tensor([[0, 1, 2, 0], [1, 2, 2, 2]])
    ea = torch.arange(4.0).unsqueeze(1)
    mask = torch.tensor([False, False, True])
    before = ei.clone()
    out_ei, out_ea = drop_parent_edges(ei, mask, ea)
    assert out_ei.tolist() == [[0, 2], [1, 2]]  # 1->2 and 0->2 cut, self-loop kept
    assert out_ea.squeeze(1).tolist() == [0.0, 2.0]
    assert torch.equal(ei, before)
    assert drop_parent_edges(ei, mask)[1] is None


def test_drop_parent_edges_data_and_hetero():
    data = Data(x=torch.randn(3, 2), edge_index=torch.tensor([[0, 1], [1, 2]]), edge_weight=torch.tensor([0.5, 0.7]))
    out = drop_parent_edges(data, torch.tensor([False, True, False]))
    assert out.edge_index.tolist() == [[1], [2]] and out.edge_weight.tolist() == [pytest.approx(0.7)]
    assert data.edge_index.size(1) == 2 and data.edge_weight.numel() == 2
    h = HeteroData()
    h["pump"].x = torch.randn(2, 3)
    h["tank"].x = torch.randn(3, 3)
    h["pump", "feeds", "tank"].edge_index = torch.tensor([[0, 1, 1], [0, 1, 2]])
    h["pump", "feeds", "tank"].edge_attr = torch.tensor([[1.0], [2.0], [3.0]])
    h["tank", "drains", "tank"].edge_index = torch.tensor([[0, 1], [1, 2]])
    out = drop_parent_edges(h, {"tank": torch.tensor([False, True, False])})
    assert out["pump", "feeds", "tank"].edge_index.tolist() == [[0, 1], [0, 2]]
    assert out["pump", "feeds", "tank"].edge_attr.squeeze(1).tolist() == [1.0, 3.0]
    assert out["tank", "drains", "tank"].edge_index.tolist() == [[1], [2]]
    assert h["pump", "feeds", "tank"].edge_index.size(1) == 3
    with pytest.raises(LayerInputError, match="unknown node type 'valve'; node types are: pump, tank"):
        drop_parent_edges(h, {"valve": torch.tensor([True])})


def test_intervene_transform():
    data = Data(x=torch.zeros(3, 2), edge_index=torch.tensor([[0, 1], [1, 2]]), edge_attr=torch.tensor([[1.0], [2.0]]))
    enc = lambda value, node: torch.tensor([float(value), 1.0])  # noqa: E731
    out = Intervene({2: 5}, enc)(data)
    assert out.edge_index.tolist() == [[0], [1]] and out.edge_attr.tolist() == [[1.0]]
    assert out.x[2].tolist() == [5.0, 1.0] and out.intervened.tolist() == [False, False, True]
    assert data.x.abs().sum() == 0 and data.edge_index.size(1) == 2 and "intervened" not in data
    # composes: a second intervention keeps the first one's mask
    out2 = Intervene({1: 3}, enc)(out)
    assert out2.intervened.tolist() == [False, True, True] and out2.edge_index.size(1) == 0
    h = HeteroData()
    h["pump"].x = torch.zeros(2, 2)
    h["tank"].x = torch.zeros(2, 2)
    h["pump", "feeds", "tank"].edge_index = torch.tensor([[0, 1], [0, 1]])
    ho = Intervene({("tank", 1): 4}, enc)(h)
    assert ho["pump", "feeds", "tank"].edge_index.tolist() == [[0], [0]]
    assert ho["tank"].x[1].tolist() == [4.0, 1.0] and ho["tank"].intervened.tolist() == [False, True]
    assert h["tank"].x.abs().sum() == 0
    with pytest.raises(LayerInputError, match=r"encode\(5, 2\) must return a tensor of shape \[2\]"):
        Intervene({2: 5}, lambda v, n: torch.zeros(3))(data)
    with pytest.raises(LayerInputError, match=r"do key 9 is not a node index in \[0, 3\)"):
        Intervene({9: 1}, enc)(data)
