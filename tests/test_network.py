"""CausalNetwork validation, intervene(), zero-probability evidence."""

from __future__ import annotations

import numpy as np
import pytest

from intervgnn import CausalGraph, CausalNetwork, NetworkError, QueryError, ZeroEvidenceError, load_network
from intervgnn.errors import UnknownNetworkError


def two_nodes(cpt_b=None, states=None):
    g = CausalGraph([("A", "B")])
    st = states or {"A": ["a0", "a1"], "B": ["b0", "b1"]}
    cpt_b = [[0.9, 0.1], [0.2, 0.8]] if cpt_b is None else cpt_b
    return CausalNetwork(g, st, {"A": [0.3, 0.7], "B": cpt_b})


def test_valid_network_and_accessors():
    net = two_nodes()
    assert net.variables == ("A", "B")
    assert net.cardinality("B") == 2
    assert net.cpt("B").shape == (2, 2)
    assert net.num_parameters == 3
    with pytest.raises(ValueError):
        net.cpt("B")[0, 0] = 0.5  # read-only


def test_wrong_shape():
    with pytest.raises(NetworkError, match=r"CPT of 'B' has shape \(2,\), expected \(2, 2\) for parents \(A\) and itself"):
        two_nodes([0.5, 0.5])


def test_negative_entry_names_variable_and_row():
    with pytest.raises(NetworkError, match=r"CPT of 'B', row \(A=a1\): entry for state 'b0' is -0.2"):
        two_nodes([[0.9, 0.1], [-0.2, 1.2]])


def test_row_sum_names_variable_and_row():
    with pytest.raises(NetworkError, match=r"CPT of 'B', row \(A=a0\): probabilities sum to 0.98, expected 1 \(within 1e-06\)"):
        two_nodes([[0.9, 0.08], [0.2, 0.8]])


def test_nan_entry():
    with pytest.raises(NetworkError, match="probabilities must be finite"):
        two_nodes([[np.nan, 0.1], [0.2, 0.8]])


def test_duplicate_state_names():
    with pytest.raises(NetworkError, match="variable 'A' lists state 'x' twice"):
        two_nodes(states={"A": ["x", "x"], "B": ["b0", "b1"]})


def test_missing_and_extra_variables():
    g = CausalGraph([("A", "B")])
    with pytest.raises(NetworkError, match="no CPT given for variable 'B'"):
        CausalNetwork(g, {"A": ["0", "1"], "B": ["0", "1"]}, {"A": [0.5, 0.5]})
    with pytest.raises(NetworkError, match="no states given for variable 'B'"):
        CausalNetwork(g, {"A": ["0", "1"]}, {"A": [0.5, 0.5]})
    with pytest.raises(NetworkError, match="states or CPT given for 'Q', which is not in the graph"):
        CausalNetwork(g, {"A": ["0", "1"], "B": ["0", "1"], "Q": ["0"]}, {})


def test_rows_within_tolerance_are_rescaled():
    net = two_nodes([[0.9, 0.1 - 5e-7], [0.2, 0.8]])
    assert net.cpt("B")[0].sum() == pytest.approx(1.0, abs=1e-15)


def test_intervene_returns_new_network():
    net = two_nodes()
    m = net.intervene({"A": "a1"})
    assert m.graph.parents("B") == ("A",)
    np.testing.assert_array_equal(m.cpt("A"), [0.0, 1.0])
    np.testing.assert_allclose(m.query("B").probs, net.query("B", do={"A": "a1"}).probs)
    np.testing.assert_array_equal(net.cpt("A"), [0.3, 0.7])


def test_zero_probability_evidence_is_an_error():
    chain = CausalGraph([("A", "B"), ("B", "C")])
    net = CausalNetwork(
        chain,
        {"A": ["a0", "a1"], "B": ["b0", "b1"], "C": ["c0", "c1"]},
        {"A": [0.5, 0.5], "B": [[1.0, 0.0], [0.5, 0.5]], "C": [[0.5, 0.5], [0.5, 0.5]]},
    )
    with pytest.raises(ZeroEvidenceError, match=r"^the evidence B=b1 has probability zero under do\(A=a0\)$"):
        net.query("C", do={"A": "a0"}, given={"B": "b1"})
    with pytest.raises(ZeroEvidenceError, match=r"^the evidence B=b1 has probability zero under do\(A=a0\)$"):
        net.query_each("C", "A", given={"B": "b1"})
    with pytest.raises(ZeroEvidenceError, match=r"^the evidence B=b1 has probability zero$"):
        net.intervene({"A": "a0"}).query("C", given={"B": "b1"})
    # possible evidence gives a finite answer
    assert net.query("C", do={"A": "a1"}, given={"B": "b1"})["c0"] == pytest.approx(0.5)


def test_query_errors():
    net = two_nodes()
    with pytest.raises(QueryError, match="unknown target variable 'Q'; variables are: A, B"):
        net.query("Q")
    with pytest.raises(QueryError, match="unknown state 'a9' for variable 'A'; states are: a0, a1"):
        net.query("B", do={"A": "a9"})
    with pytest.raises(QueryError, match="'B' is both a target and intervened on"):
        net.query("B", do={"B": "b0"})
    with pytest.raises(QueryError, match="'A' is both a target and observed"):
        net.query("A", given={"A": "a0"})
    with pytest.raises(QueryError, match="'A' is both intervened on and observed"):
        net.query("B", do={"A": "a0"}, given={"A": "a0"})
    with pytest.raises(QueryError, match="unknown observed variable 'Z'"):
        net.query("B", given={"Z": "z"})


def test_unknown_network():
    with pytest.raises(UnknownNetworkError, match="unknown network 'nope': not a shipped network"):
        load_network("nope")


def test_marginals_equal_one_query_per_target_under_one_intervention():
    # marginals() is query() per target with the intervention checked once (the exact answers of query() are
    # checked against pgmpy in test_exact_vs_pgmpy.py); an intervened target gets its point mass
    net = load_network("cancer")
    do = {"Smoker": "True", "Pollution": "high"}
    targets = ["Dyspnoea", "Xray", "Smoker"]
    got = net.marginals(targets, do)
    for t, p in zip(targets[:2], got):
        np.testing.assert_allclose(p, net.query(t, do=do).probs, atol=1e-12)
    np.testing.assert_array_equal(got[2], [1.0, 0.0])  # Smoker set to its first state
    assert net.marginals([], do) == []
    with pytest.raises(QueryError, match="unknown"):
        net.marginals(["nope"], do)


def test_exact_inference_refuses_a_table_beyond_its_bound(monkeypatch):
    # the bound is checked while the elimination plan is made, before any table is built
    import intervgnn.bn.exact as exact
    from intervgnn import ExactTooLarge

    net = load_network("alarm")
    monkeypatch.setattr(exact, "MAX_FACTOR_ENTRIES", 8)
    with pytest.raises(ExactTooLarge, match=r"exact inference would build a table of [\d,]+ entries .* more than the limit of 8"):
        net.query("BP")
