"""CausalGraph: structure, mutilation, exports and errors."""

from __future__ import annotations

import networkx as nx
import pytest
import torch

from intervgnn import CausalGraph, GraphError, UnknownVariableError

from .conftest import our_network


def diamond():
    return CausalGraph([("A", "B"), ("A", "C"), ("B", "D"), ("C", "D")])


def test_structure():
    g = diamond()
    assert g.nodes == ("A", "B", "C", "D")
    assert g.parents("D") == ("B", "C")
    assert g.children("A") == ("B", "C")
    assert g.ancestors("D") == ("A", "B", "C")
    assert g.ancestors(["B"], include_self=True) == ("A", "B")
    assert g.descendants("A") == ("B", "C", "D")
    assert g.generations() == (("A",), ("B", "C"), ("D",))
    assert g.topological_order() == ("A", "B", "C", "D")
    assert len(g) == 4 and g.num_edges == 4 and "A" in g and "Z" not in g
    assert repr(g) == "CausalGraph(num_nodes=4, num_edges=4)"


def test_parent_order_is_kept():
    g = CausalGraph([("C", "D"), ("B", "D")], nodes=["B", "C", "D"])
    assert g.parents("D") == ("C", "B")


def test_mutilate_returns_a_new_graph():
    g = diamond()
    m = g.mutilate(["B"])
    assert m.parents("B") == () and g.parents("B") == ("A",)
    assert m.nodes == g.nodes
    assert m.mutilate({"D": "x"}).parents("D") == ()
    assert g.mutilate([]) == g


def test_edge_index_stable_order():
    g = diamond()
    ei = g.edge_index
    assert ei.dtype == torch.long and ei.shape == (2, 4)
    assert ei.tolist() == [[0, 0, 1, 2], [1, 2, 3, 3]]
    ei[0, 0] = 3  # a copy: the graph is not changed
    assert g.edge_index[0, 0] == 0
    assert CausalGraph([], nodes=["A"]).edge_index.shape == (2, 0)


def test_networkx_round_trip():
    g = diamond()
    nxg = g.to_networkx()
    assert list(nxg.nodes) == list(g.nodes)
    assert set(nxg.edges) == set(g.edges)
    assert CausalGraph.from_networkx(nxg) == g


def test_generations_match_networkx_on_alarm():
    # networkx (reference library) computes topological generations too
    g = our_network("alarm").graph
    ref = [set(gen) for gen in nx.topological_generations(g.to_networkx())]
    assert [set(gen) for gen in g.generations()] == ref


def test_ancestors_match_networkx_on_insurance():
    g = our_network("insurance").graph
    nxg = g.to_networkx()
    for v in g.nodes:
        assert set(g.ancestors(v)) == nx.ancestors(nxg, v)
        assert set(g.descendants(v)) == nx.descendants(nxg, v)


def test_cycle_is_named():
    with pytest.raises(GraphError, match=r"the graph has a cycle: (A -> B -> C -> A|B -> C -> A -> B|C -> A -> B -> C)"):
        CausalGraph([("A", "B"), ("B", "C"), ("C", "A")])


def test_self_loop():
    with pytest.raises(GraphError, match="self-loop on 'A': a variable cannot be its own parent"):
        CausalGraph([("A", "A")])


def test_duplicate_edge():
    with pytest.raises(GraphError, match="duplicate edge 'A' -> 'B'"):
        CausalGraph([("A", "B"), ("A", "B")])


def test_unknown_variable():
    g = diamond()
    with pytest.raises(UnknownVariableError, match="unknown variable 'Q'; the graph has: A, B, C, D"):
        g.parents("Q")
    with pytest.raises(UnknownVariableError, match="unknown intervened variable 'Q'"):
        g.mutilate(["Q"])
    with pytest.raises(GraphError, match="edge 'A' -> 'Q' names 'Q', which is not among the listed nodes"):
        CausalGraph([("A", "Q")], nodes=["A"])


def test_bad_edges_and_nodes():
    with pytest.raises(GraphError, match="an edge must be a"):
        CausalGraph([("A", "B", "C")])
    with pytest.raises(GraphError, match="node 'A' is listed twice"):
        CausalGraph([], nodes=["A", "A"])
    with pytest.raises(GraphError, match="expected a networkx.DiGraph"):
        CausalGraph.from_networkx(nx.Graph())
