"""Interventional message passing: the causal property, agreement across
input forms, PyG conventions (shape, repr, edge-order invariance via PyG's
own ``assert_module``), errors.

The causal property is the definition of the layers (common practice, no
source): an intervened node's output must not depend on its parents'
features, at any depth of a stack, and the gradient must be exactly zero.
"""

from __future__ import annotations

import shutil
import warnings

import pytest
import torch
from torch_geometric.data import Batch, Data, HeteroData
from torch_geometric.nn import GATConv, GCNConv, GINConv, GraphConv, HEATConv, MessagePassing, SAGEConv, Sequential
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


def bypassing_ancestors(ei, node, child, depth=3):
    """Ancestors of ``node`` that reach ``child`` in at most ``depth`` edges without passing through ``node``."""
    parents = {}
    for s, d in ei.t().tolist():
        parents.setdefault(d, set()).add(s)
    ancestors, todo = set(), [node]
    while todo:
        for p in parents.get(todo.pop(), ()):
            if p not in ancestors:
                ancestors.add(p)
                todo.append(p)
    reach = frontier = {child}
    for _ in range(depth):
        frontier = {p for v in frontier for p in parents.get(v, ()) if p != node} - reach
        reach = reach | frontier
    return sorted(ancestors & reach)


def stack_case(g, ei):
    """An intervened node with >= 2 ancestors and a child that hears some of them around the node."""
    for v in g.nodes:
        for c in g.children(v):
            if len(g.ancestors(v)) >= 2 and bypassing_ancestors(ei, g.index(v), g.index(c)):
                return g.index(v), [g.index(a) for a in g.ancestors(v)], g.index(c)
    raise AssertionError("no suitable node")


@pytest.mark.parametrize("kind", KINDS)
def test_three_layer_stack_blocks_all_ancestors(kind):
    g, ei = alarm_graph()
    node, ancestors, child = stack_case(g, ei)
    around = bypassing_ancestors(ei, node, child)
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
    # a non-intervened child still hears the ancestors that reach it around the intervened node
    x.grad = None
    model(x, ei, mask)[child].sum().backward()
    assert torch.count_nonzero(x.grad[node]) > 0
    assert all(torch.count_nonzero(x.grad[a]) > 0 for a in around)


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


@pytest.mark.parametrize("kind", KINDS)
def test_row_batch_equals_pre_cut_disjoint_batch(kind):
    g, ei = alarm_graph()
    B, N = 4, g.num_nodes
    conv = make_conv(kind)
    x = torch.randn(B, N, F_IN)
    mask = torch.rand(B, N) < 0.3
    out = conv(x, ei, mask)
    assert out.shape == (B, N, F_OUT)
    batch = Batch.from_data_list([Data(x=x[b], edge_index=ei, mask=mask[b]) for b in range(B)])
    pre_cut = drop_parent_edges(batch.edge_index, batch.mask)[0]
    bare = conv if kind == "ours" else conv.conv  # ours without a mask is plain message passing
    ref = bare(batch.x, pre_cut).view(B, N, F_OUT)
    torch.testing.assert_close(out, ref, atol=1e-5, rtol=1e-5)
    if kind == "ours":  # and the [N] path on the disjoint batch agrees too
        torch.testing.assert_close(out, conv(batch.x, batch.edge_index, batch.mask).view(B, N, F_OUT), atol=1e-5, rtol=1e-5)


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


def _have_compiler() -> bool:
    return any(shutil.which(c) for c in ("cc", "gcc", "g++", "c++"))


@pytest.mark.skipif(not _have_compiler(), reason="torch.compile needs a C/C++ compiler (none of cc, gcc, g++, c++ found)")
def test_torch_compile_reuses_the_graph_for_a_new_mask():
    from torch._dynamo.utils import counters

    g, ei = alarm_graph()
    conv = InterventionalConv(F_IN, F_OUT)
    x = torch.randn(4, g.num_nodes, F_IN)
    torch._dynamo.reset()
    compiled = torch.compile(conv, fullgraph=True)

    def graphs():
        return counters["stats"]["unique_graphs"]

    # one set per row ([B, N] mask)
    mask = torch.rand(4, g.num_nodes) < 0.2
    torch.testing.assert_close(compiled(x, ei, mask), conv(x, ei, mask), atol=1e-5, rtol=1e-5)
    seen = graphs()
    mask2 = torch.rand(4, g.num_nodes) < 0.5
    torch.testing.assert_close(compiled(x, ei, mask2), conv(x, ei, mask2), atol=1e-5, rtol=1e-5)
    assert graphs() == seen
    # one set for the whole graph ([N] mask, the routed path)
    node_mask = torch.rand(g.num_nodes) < 0.2
    torch.testing.assert_close(compiled(x[0], ei, node_mask), conv(x[0], ei, node_mask), atol=1e-5, rtol=1e-5)
    seen = graphs()
    node_mask2 = torch.rand(g.num_nodes) < 0.5
    torch.testing.assert_close(compiled(x[0], ei, node_mask2), conv(x[0], ei, node_mask2), atol=1e-5, rtol=1e-5)
    assert graphs() == seen


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


def test_pair_input_separates_what_a_node_sends_from_what_it_knows():
    g, ei = alarm_graph()
    node, parents, _, child = pick_node(g)
    conv = InterventionalConv((F_IN, 3), F_OUT)
    assert repr(conv) == "InterventionalConv((6, 3), 5, aggr=add)"
    x_src, x_dst = torch.randn(g.num_nodes, F_IN), torch.randn(g.num_nodes, 3)
    out = conv((x_src, x_dst), ei)
    # a node's own source features reach its children only, never itself
    moved = x_src.clone()
    moved[node] += 4.0
    out2 = conv((moved, x_dst), ei)
    assert torch.equal(out2[node], out[node])
    assert not torch.allclose(out2[child], out[child])
    same = InterventionalConv(F_IN, F_OUT)
    x = torch.randn(g.num_nodes, F_IN)
    assert torch.equal(same((x, x), ei), same(x, ei))
    with pytest.raises(LayerInputError, match="must have the same batch rows"):
        conv((x_src.expand(2, -1, -1), x_dst.expand(3, -1, -1)), ei)


def test_bipartite_pair_equals_the_same_graph_padded_to_one_node_set():
    # PyG's convention for bipartite message passing (common practice, no source): with x = (x_s, x_t) of
    # N_s and N_t nodes, edge_index[0] indexes x_s and edge_index[1] x_t. It must equal the one-node-set
    # layer on [x_s; 0] -> [0; x_t] with targets shifted by N_s, cuts included.
    torch.manual_seed(0)
    n_s, n_t = 4, 6
    ei = torch.tensor([[0, 1, 1, 3, 2], [0, 0, 2, 5, 5]])
    conv = InterventionalConv((F_IN, 3), F_OUT)
    x_s, x_t = torch.randn(n_s, F_IN), torch.randn(n_t, 3)
    cut = torch.tensor([False, False, False, False, False, True])
    out = conv((x_s, x_t), ei, intervened=cut)
    assert out.shape == (n_t, F_OUT)
    pad_s = torch.cat([x_s, torch.zeros(n_t, F_IN)])
    pad_t = torch.cat([torch.zeros(n_s, 3), x_t])
    shifted = ei + torch.tensor([[0], [n_s]])
    ref = conv((pad_s, pad_t), shifted, intervened=torch.cat([torch.zeros(n_s, dtype=torch.bool), cut]))[n_s:]
    torch.testing.assert_close(out, ref)
    # the cut target hears nothing: its output is the update of its own features alone
    alone = conv((x_s, x_t), ei[:, :0])
    torch.testing.assert_close(out[5], alone[5])
    with pytest.raises(LayerInputError, match="refers to target node 6, but x_target has only 6 nodes"):
        conv((x_s, x_t), torch.tensor([[0], [6]]))
    with pytest.raises(LayerInputError, match="refers to source node 4, but x_source has only 4 nodes"):
        conv((x_s, x_t), torch.tensor([[4], [0]]))


@pytest.mark.parametrize("with_edges", [False, True])
def test_direct_sum_equals_pyg_propagate_with_hooks_and_explainer_routed_through_propagate(with_edges):
    # With sum aggregation and nothing attached, the layer sums its messages itself; the result and its
    # gradients must equal PyG's propagate() (reference: torch_geometric's MessagePassing, a registry
    # library). A registered hook must still be called, i.e. the layer then goes through propagate().
    torch.manual_seed(1)
    n = 7
    ei = torch.tensor([[0, 1, 2, 2, 3, 5, 6, 4], [1, 2, 3, 4, 4, 6, 0, 4]])
    conv = InterventionalConv(F_IN, F_OUT, edge_dim=2 if with_edges else None)
    attr = torch.randn(ei.size(1), 2) if with_edges else None
    cut = torch.tensor([False, False, True, False, True, False, False])

    def run(x):
        return conv(x, ei, intervened=cut, edge_attr=attr)

    x1 = torch.randn(n, F_IN, requires_grad=True)
    x2 = x1.detach().clone().requires_grad_(True)
    fast = run(x1)
    calls = []
    handle = conv.register_message_forward_hook(lambda module, inputs, out: calls.append(out.shape))
    slow = run(x2)
    handle.remove()
    assert calls, "a registered hook must make the layer use propagate()"
    torch.testing.assert_close(fast, slow)
    fast.square().sum().backward()
    slow.square().sum().backward()
    torch.testing.assert_close(x1.grad, x2.grad)
    conv.explain = True  # PyG's explainer switch: propagate() must run (it applies the edge mask there)
    try:
        assert not conv._plain_sum()
    finally:
        conv.explain = False
    assert conv._plain_sum()
    assert not InterventionalConv(F_IN, F_OUT, aggr="mean")._plain_sum()


# ------------------------------------------------- aggregation by routing
def with_self_loops(ei, n):
    loops = torch.arange(n).repeat(2, 1)
    return torch.cat([ei, loops[:, ::2]], dim=1)  # self-loops on every other node


@pytest.mark.parametrize("aggr", ["add", "mean", "max", "min"])
def test_row_path_equals_node_path_and_pre_cut_graph_with_self_loops(aggr):
    g, ei = alarm_graph()
    ei = with_self_loops(ei, g.num_nodes)
    torch.manual_seed(1)
    conv = InterventionalConv(F_IN, F_OUT, aggr=aggr)
    B = 5
    x = torch.randn(B, g.num_nodes, F_IN)
    mask = torch.rand(B, g.num_nodes) < 0.4
    out = conv(x, ei, mask)
    for b in range(B):
        torch.testing.assert_close(out[b], conv(x[b], ei, mask[b]), atol=1e-6, rtol=1e-6)
        # routing equals deleting: the plain layer on the pre-cut graph
        torch.testing.assert_close(out[b], conv(x[b], drop_parent_edges(ei, mask[b])[0]), atol=1e-6, rtol=1e-6)


@pytest.mark.parametrize("aggr", ["add", "mean", "max", "min"])
def test_row_path_ignores_non_finite_messages_from_cut_parents(aggr):
    g, ei = alarm_graph()
    node, parents, _, _ = pick_node(g)
    conv = InterventionalConv(F_IN, F_OUT, aggr=aggr)
    x = torch.randn(3, g.num_nodes, F_IN)
    mask = torch.zeros(3, g.num_nodes, dtype=torch.bool)
    mask[:, node] = True
    x[:, parents] = float("inf")
    out = conv(x, ei, mask)
    assert torch.isfinite(out[:, node]).all()
    torch.testing.assert_close(out[:, node], conv(x, ei, mask[0])[:, node])


def test_cached_conv_is_refused():
    with pytest.raises(LayerInputError, match=r"GCNConv was built with cached=True: .* build it with cached=False"):
        Interventional(GCNConv(F_IN, F_OUT, cached=True))
    assert Interventional(GCNConv(F_IN, F_OUT, cached=False)).conv.cached is False


def test_flow_other_than_source_to_target_is_refused():
    with pytest.raises(LayerInputError, match=r"flow must be 'source_to_target' \(edges point parent -> child\), got 'target_to_source'"):
        InterventionalConv(F_IN, F_OUT, flow="target_to_source")
    with pytest.raises(LayerInputError, match=r"SAGEConv has flow='target_to_source'; Interventional needs flow='source_to_target'"):
        Interventional(SAGEConv(F_IN, F_OUT, flow="target_to_source"))


def test_wrapper_refuses_a_conv_without_edge_index_second():
    class Odd(MessagePassing):
        def forward(self, x, adj):
            return x

    with pytest.raises(LayerInputError, match=r"needs a conv whose forward takes \(x, edge_index, \.\.\.\); Odd.forward takes \(x, adj, \.\.\.\)"):
        Interventional(Odd())
    with pytest.raises(LayerInputError, match="edge_args must be a tuple of argument names, got 'capacity'"):
        Interventional(SAGEConv(3, 3), edge_args="capacity")


def test_conv_input_errors():
    conv = InterventionalConv(F_IN, F_OUT, edge_dim=2)
    x = torch.randn(4, F_IN)
    ei = torch.tensor([[0, 1, 2], [1, 2, 3]])
    with pytest.raises(LayerInputError, match=r"edge_attr has 2 rows of edges, but edge_index has 3 edges"):
        conv(x, ei, edge_attr=torch.randn(2, 2))
    with pytest.raises(LayerInputError, match=r"edge_attr has 5 features per edge, but the layer was built with edge_dim=2"):
        conv(x, ei, edge_attr=torch.randn(3, 5))
    with pytest.raises(LayerInputError, match=r"edge_attr has shape \[3\], expected \[E, 2\] with E=3"):
        conv(x, ei, edge_attr=torch.randn(3))
    with pytest.raises(LayerInputError, match=r"edge_attr has shape \[2, 3, 2\], expected \[E, 2\] with E=3"):
        conv(x, ei, edge_attr=torch.randn(2, 3, 2))
    with pytest.raises(LayerInputError, match=r"edge_attr has shape \[3, 3, 2\], expected \[E, 2\] or \[2, E, 2\] for x of shape \[2, 4, 6\]"):
        conv(torch.randn(2, 4, F_IN), ei, edge_attr=torch.randn(3, 3, 2))
    # a 1-D [E] edge_attr with edge_dim=1 is read as [E, 1], never expanded to [E, E]
    one = InterventionalConv(F_IN, F_OUT, edge_dim=1)
    ea = torch.randn(3)
    torch.testing.assert_close(one(x, ei, edge_attr=ea), one(x, ei, edge_attr=ea.unsqueeze(1)))
    torch.testing.assert_close(one(torch.stack([x, x]), ei, edge_attr=ea)[1], one(x, ei, edge_attr=ea.unsqueeze(1)))
    # feature sizes are checked against in_channels, both roles of a pair
    with pytest.raises(LayerInputError, match=r"x has 3 features per node, expected 6 \(the layer was built with in_channels=6\)"):
        InterventionalConv(F_IN, F_OUT)(torch.randn(4, 3), ei)
    pair = InterventionalConv((F_IN, 3), F_OUT)
    with pytest.raises(LayerInputError, match=r"x_source has 3 features per node, expected 6 \(the layer was built with in_channels=\(6, 3\)\)"):
        pair((torch.randn(4, 3), torch.randn(4, 3)), ei)
    with pytest.raises(LayerInputError, match=r"x_target has 6 features per node, expected 3 \(the layer was built with in_channels=\(6, 3\)\)"):
        pair((torch.randn(4, F_IN), torch.randn(4, F_IN)), ei)
    with pytest.raises(LayerInputError, match=r"x must be a \[N, F\] or \[B, N, F\] tensor, got shape \[6\]"):
        InterventionalConv(F_IN, F_OUT)(torch.randn(F_IN), ei)
    with pytest.raises(LayerInputError, match=r"edge_index must hold int64 or int32 indices, got torch.float32"):
        InterventionalConv(F_IN, F_OUT)(x, ei.float())
    with pytest.raises(LayerInputError, match=r"edge_index must be a dense \[2, E\] tensor, got a torch.sparse_coo tensor"):
        InterventionalConv(F_IN, F_OUT)(x, torch.eye(4).to_sparse())


def test_mask_on_another_device_is_refused():
    x = torch.randn(4, F_IN)
    ei = torch.tensor([[0, 1], [1, 2]])
    meta = torch.zeros(4, dtype=torch.bool, device="meta")
    with pytest.raises(LayerInputError, match=r"intervened is on device meta but x is on cpu; move the mask to x's device"):
        InterventionalConv(F_IN, F_OUT)(x, ei, meta)
    with pytest.raises(LayerInputError, match=r"intervened is on device meta but x is on cpu"):
        Interventional(SAGEConv(F_IN, F_OUT))(x, ei, meta)


def test_wrapper_input_errors():
    g, ei = alarm_graph()
    N, E = g.num_nodes, ei.size(1)
    gcn = Interventional(GCNConv(F_IN, F_OUT))
    x = torch.randn(N, F_IN)
    mask = torch.zeros(N, dtype=torch.bool)
    with pytest.raises(LayerInputError, match=f"edge_weight has 3 entries, but edge_index has {E} edges"):
        gcn(x, ei, mask, torch.rand(3))
    with pytest.raises(LayerInputError, match=f"edge_weight has 3 entries, but edge_index has {E} edges"):
        gcn(x, ei, mask, edge_weight=torch.rand(3))
    gat = Interventional(GATConv(F_IN, F_OUT, edge_dim=2))
    with pytest.raises(LayerInputError, match=f"edge_attr has 5 entries, but edge_index has {E} edges"):
        gat(x, ei, mask, edge_attr=torch.randn(5, 2))
    rows = torch.zeros(3, N, dtype=torch.bool)
    with pytest.raises(LayerInputError, match=rf"edge_weight has shape \[3, {E}\], one entry per row and edge; for a batch of rows Interventional takes edge-level arguments shared by the rows, \[{E}, \.\.\.\]"):
        gcn(torch.randn(3, N, F_IN), ei, rows, torch.rand(3, E))
    with pytest.raises(LayerInputError, match=r"edge_attr has shape \[3, \d+, 2\], one entry per row and edge"):
        gat(torch.randn(3, N, F_IN), ei, rows, edge_attr=torch.randn(3, E, 2))
    with pytest.raises(LayerInputError, match=r"x must be a \[N, F\] or \[B, N, F\] tensor, got shape \[37\]"):
        Interventional(GINConv(torch.nn.Linear(1, 1)))(torch.randn(N), ei, mask)
    with pytest.raises(LayerInputError, match="bipartite input is not supported"):
        Interventional(SAGEConv(F_IN, F_OUT))((x, x), ei, mask)
    with pytest.raises(LayerInputError, match=r"edge_weight must have one entry per edge .*got a 0-dim tensor"):
        gcn(x, ei, mask, torch.tensor(1.0))


def test_wrapper_maps_positional_arguments_by_name():
    # HEATConv takes (x, edge_index, node_type, edge_type, edge_attr); with N == E the old size rule cut node_type
    torch.manual_seed(0)
    heat = HEATConv(F_IN, F_OUT, num_node_types=2, num_edge_types=2, edge_type_emb_dim=3, edge_dim=2, edge_attr_emb_dim=3)
    ei = torch.tensor([[0, 1, 2, 0], [1, 2, 3, 3]])
    N = E = 4
    x = torch.randn(N, F_IN)
    node_type, edge_type, ea = torch.tensor([0, 1, 0, 1]), torch.tensor([0, 1, 1, 0]), torch.randn(E, 2)
    mask = torch.tensor([False, False, False, True])
    keep = torch.tensor([True, True, False, False])
    expected = heat(x, ei[:, keep], node_type, edge_type[keep], ea[keep])
    layer = Interventional(heat)
    torch.testing.assert_close(layer(x, ei, mask, node_type, edge_type, ea), expected)
    torch.testing.assert_close(layer(x, ei, mask, node_type, edge_type=edge_type, edge_attr=ea), expected)

    # further edge-level names through edge_args
    class Pipe(MessagePassing):
        def forward(self, x, edge_index, capacity, scale):
            return self.propagate(edge_index, x=x, capacity=capacity) * scale

        def message(self, x_j, capacity):
            return x_j * capacity.unsqueeze(-1)

    cap = torch.rand(E)
    wrapped = Interventional(Pipe(), edge_args=("capacity",))
    scale = torch.rand(N, 1)  # as many entries as edges, but not edge-level
    torch.testing.assert_close(wrapped(x, ei, mask, cap, scale), Pipe()(x, ei[:, keep], cap[keep], scale))
    torch.testing.assert_close(wrapped(x, ei, mask, capacity=cap, scale=scale), Pipe()(x, ei[:, keep], cap[keep], scale))


@pytest.mark.parametrize("kind", ["sage", "gcn", "gat", "gin", "graph"])
def test_wrapper_row_path_with_a_shared_node_mask(kind):
    g, ei = alarm_graph()
    conv = make_conv(kind)
    x = torch.randn(3, g.num_nodes, F_IN)
    shared = torch.rand(g.num_nodes) < 0.3
    out = conv(x, ei, shared)
    torch.testing.assert_close(out, conv(x, ei, shared.expand(3, -1)))
    for b in range(3):
        torch.testing.assert_close(out[b], conv.conv(x[b], drop_parent_edges(ei, shared)[0]), atol=1e-5, rtol=1e-5)
    # no mask: exactly the bare conv call
    assert torch.equal(conv(x[0], ei), conv.conv(x[0], ei))


def test_wrapper_exposes_channels():
    layer = Interventional(SAGEConv(F_IN, F_OUT))
    assert (layer.in_channels, layer.out_channels) == (F_IN, F_OUT)
    gin = Interventional(GINConv(torch.nn.Linear(F_IN, F_OUT)))
    assert (gin.in_channels, gin.out_channels) == (None, None)


def test_drop_parent_edges_data_with_as_many_nodes_as_edges():
    # N == E == 3: node-level x and y must not be taken for edge-level attributes
    data = Data(
        x=torch.arange(6.0).view(3, 2), y=torch.tensor([7, 8, 9]), edge_index=torch.tensor([[0, 1, 0], [1, 2, 2]]),
        edge_weight=torch.tensor([0.1, 0.2, 0.3]), capacity=torch.tensor([1.0, 2.0, 3.0]),
    )
    out = drop_parent_edges(data, torch.tensor([False, False, True]))
    assert out.edge_index.tolist() == [[0], [1]] and out.edge_weight.tolist() == [pytest.approx(0.1)]
    assert torch.equal(out.x, data.x) and out.y.tolist() == [7, 8, 9]
    assert out.capacity.tolist() == [1.0, 2.0, 3.0]  # not named: kept as it is
    out = drop_parent_edges(data, torch.tensor([False, False, True]), edge_keys=["capacity"])
    assert out.capacity.tolist() == [1.0] and torch.equal(out.x, data.x)
    assert data.capacity.numel() == 3
    with pytest.raises(LayerInputError, match="edge_keys names 'flow', which data does not have; its attributes are: capacity, edge_index, edge_weight, x, y"):
        drop_parent_edges(data, torch.tensor([False, False, True]), edge_keys=["flow"])
    ti = Intervene({2: 1.0}, lambda v, n: torch.tensor([v, v]), edge_keys=["capacity"])(data)
    assert ti.capacity.tolist() == [1.0] and ti.y.tolist() == [7, 8, 9] and ti.x.shape == (3, 2)


def test_drop_parent_edges_hetero_ranges_and_keys():
    h = HeteroData()
    h["pump"].x = torch.randn(2, 3)
    h["tank"].x = torch.randn(5, 3)
    tank = {"tank": torch.zeros(5, dtype=torch.bool)}
    h["pump", "feeds", "tank"].edge_index = torch.tensor([[0, 3], [1, 4]])  # source 3 is not a pump
    with pytest.raises(LayerInputError, match="edge_index refers to source node 3, but node type 'pump' has only 2 nodes"):
        drop_parent_edges(h, tank)
    h["pump", "feeds", "tank"].edge_index = torch.tensor([[0, 1], [1, 5]])
    with pytest.raises(LayerInputError, match="edge_index refers to target node 5, but node type 'tank' has only 5 nodes"):
        drop_parent_edges(h, tank)
    h["pump", "feeds", "tank"].edge_index = torch.tensor([[0, 1], [1, 4]])
    h["pump", "feeds", "tank"].flow = torch.tensor([0.5, 0.7])
    out = drop_parent_edges(h, {"tank": torch.tensor([False, True, False, False, False])}, edge_keys=["flow"])
    assert out["pump", "feeds", "tank"].edge_index.tolist() == [[1], [4]]
    assert out["pump", "feeds", "tank"].flow.tolist() == [pytest.approx(0.7)]
    with pytest.raises(LayerInputError, match="edge_keys names 'level', which no edge type of data has"):
        drop_parent_edges(h, tank, edge_keys=["level"])
    with pytest.raises(LayerInputError, match=r"intervened for node type 'tank' has shape \[2\], expected shape \[5\]"):
        drop_parent_edges(h, {"tank": torch.zeros(2, dtype=torch.bool)})


def test_drop_parent_edges_errors():
    ei = torch.tensor([[0, 1], [1, 2]])
    mask = torch.tensor([False, True, False])
    with pytest.raises(LayerInputError, match=r"intervened has shape \[2, 3\], expected shape \[N\] \(one entry per node; drop_parent_edges takes one intervened set, not one per row\)"):
        drop_parent_edges(ei, mask.expand(2, -1))
    with pytest.raises(LayerInputError, match=r"intervened has shape \[2, 3\], expected shape \[3\]"):
        drop_parent_edges(Data(x=torch.randn(3, 1), edge_index=ei), mask.expand(2, -1))
    with pytest.raises(LayerInputError, match=r"edge_attr must be a tensor with one row per edge \(\[2, \.\.\.\]\), got a 0-dim tensor"):
        drop_parent_edges(ei, mask, torch.tensor(1.0))
    with pytest.raises(LayerInputError, match=r"edge_attr must be a tensor with one row per edge \(\[2, \.\.\.\]\), got list"):
        drop_parent_edges(ei, mask, [1.0, 2.0])
    with pytest.raises(LayerInputError, match=r"edge_attr must be a tensor with one row per edge \(\[2, \.\.\.\]\), got a 0-dim tensor"):
        drop_parent_edges(Data(x=torch.randn(3, 1), edge_index=ei, edge_attr=torch.tensor(2.0)), mask)
    with pytest.raises(LayerInputError, match="edge_attr has 3 rows but edge_index has 2 edges"):
        drop_parent_edges(ei, mask, torch.randn(3, 1))


def test_intervene_keys_masks_and_features():
    data = Data(x=torch.zeros(3, 2), edge_index=torch.tensor([[0, 1], [1, 2]]))
    enc = lambda value, node: torch.tensor([float(value), 1.0])  # noqa: E731
    with pytest.raises(LayerInputError, match=r"do key True is not a node index in \[0, 3\)"):
        Intervene({True: 1}, enc)(data)
    # an integer 0/1 mask is taken as bool
    prior = data.clone()
    prior.intervened = torch.tensor([1, 0, 0])
    out = Intervene({2: 1}, enc)(prior)
    assert out.intervened.dtype == torch.bool and out.intervened.tolist() == [True, False, True]
    prior.intervened = torch.tensor([0.0, 1.0, 0.0])
    with pytest.raises(LayerInputError, match=r"the existing intervened attribute must be bool \(or an integer tensor of 0s and 1s\), got dtype torch.float32"):
        Intervene({2: 1}, enc)(prior)
    prior.intervened = torch.tensor([0, 2, 0])
    with pytest.raises(LayerInputError, match=r"got dtype torch.int64 holding other values"):
        Intervene({2: 1}, enc)(prior)
    with pytest.raises(LayerInputError, match="data has no x: Intervene sets the intervened nodes' feature rows, so it needs x"):
        Intervene({1: 1}, enc)(Data(edge_index=data.edge_index, num_nodes=3))
    h = HeteroData()
    h["tank"].x = torch.zeros(2, 2)
    h["tank"].intervened = torch.tensor([0, 1])
    h["valve"].num_nodes = 2
    h["gauge"].label = "no tensors, so no node count"
    h["tank", "drains", "tank"].edge_index = torch.tensor([[0], [1]])
    out = Intervene({("tank", 0): 1}, enc)(h)
    assert out["tank"].intervened.tolist() == [True, True] and out["tank"].x[0].tolist() == [1.0, 1.0]
    with pytest.raises(LayerInputError, match=r"do key \('tank', True\): index is not in \[0, 2\) for node type 'tank'"):
        Intervene({("tank", True): 1}, enc)(h)
    with pytest.raises(LayerInputError, match="node type 'valve' has no x: Intervene sets the intervened nodes' feature rows"):
        Intervene({("valve", 0): 1}, enc)(h)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # PyG warns that it cannot infer the count
        with pytest.raises(LayerInputError, match="node type 'gauge' has no node count; set x or num_nodes for it"):
            Intervene({("gauge", 0): 1}, enc)(h)
        with pytest.raises(LayerInputError, match="node type 'gauge' has no node count; set x or num_nodes for it"):
            drop_parent_edges(h, {"gauge": torch.zeros(1, dtype=torch.bool)})


def test_bipartite_cut_also_cuts_the_edge_from_the_source_of_the_same_index():
    # with two node sets, source k and target k are different nodes: k -> k is a parent edge, not a self-loop
    torch.manual_seed(0)
    conv = InterventionalConv((4, 3), 5)
    x_s, x_t = torch.randn(3, 4), torch.randn(2, 3)
    ei = torch.tensor([[0, 1, 2], [0, 0, 1]])
    out = conv((x_s, x_t), ei, intervened=torch.tensor([True, False]))
    alone = conv((x_s, x_t), ei[:, :0])
    torch.testing.assert_close(out[0], alone[0])
    assert not torch.allclose(out[1], alone[1])
