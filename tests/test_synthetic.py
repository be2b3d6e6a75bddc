"""Seeded random benchmark networks: what they promise, their specs, and their use by name."""

from __future__ import annotations

import numpy as np
import pytest

import intervgnn as ig
from intervgnn.bn import RandomSpec, parse_random_spec, random_network
from intervgnn.errors import UnknownNetworkError
from intervgnn.harness.config import parse_config


def test_same_spec_same_network_other_seed_other_network():
    a = random_network(nodes=20, seed=7)
    b = ig.load_network("random:nodes=20,seed=7")
    assert a.graph == b.graph and a.states == b.states
    for v in a.variables:
        assert np.array_equal(a.cpt(v), b.cpt(v))
    c = random_network(nodes=20, seed=8)
    assert c.graph != a.graph or any(not np.array_equal(a.cpt(v), c.cpt(v)) for v in a.variables)


@pytest.mark.parametrize("spec", ["random:nodes=40,seed=1", "random:nodes=25,seed=2,parents=2,states=3-4",
                                  "random:seed=3,nodes=60,parents=5,states=2"])
def test_properties_hold(spec):
    s = parse_random_spec(spec)
    net = random_network(s)
    g = net.graph
    assert len(net.variables) == s.nodes
    assert max(len(g.parents(v)) for v in g.nodes) <= s.parents
    assert all(s.min_states <= len(net.states[v]) <= s.max_states for v in g.nodes)
    for v in g.nodes:
        cpt = net.cpt(v)
        np.testing.assert_allclose(cpt.sum(axis=-1), 1.0, atol=1e-12)
        assert (cpt > 0).all()  # every state stays possible
    # the causal order is not the order of the names
    order = g.topological_order()
    assert list(order) != sorted(order)


def test_near_deterministic_share():
    # deterministic=0.5: about half the CPT rows put 95% to 99.5% on one state
    def row_max(net):
        return np.concatenate([net.cpt(v).reshape(-1, len(net.states[v])).max(axis=1) for v in net.variables])

    peaked = row_max(random_network(nodes=60, seed=4, deterministic=0.5, concentration=5.0))
    assert 0.4 < (peaked >= 0.95).mean() < 0.6, (peaked >= 0.95).mean()
    assert peaked.max() <= 0.995 + 1e-12
    flat = row_max(random_network(nodes=60, seed=4, deterministic=0.0, concentration=5.0))
    assert (flat >= 0.95).mean() < 0.05


def test_spec_text_and_label():
    s = parse_random_spec("random: seed=4 , nodes=30 ")
    assert s.text == "random:nodes=30,seed=4" and s.label == "random-nodes30-seed4"
    s = parse_random_spec("random:nodes=30,seed=4,states=3,concentration=0.5")
    assert (s.min_states, s.max_states) == (3, 3)
    assert s.text == "random:nodes=30,seed=4,states=3-3,concentration=0.5"
    assert parse_random_spec(s.text) == s
    assert random_network(s).name == s.text
    # the canonical text keeps every digit: it must name the same network
    fine = parse_random_spec("random:nodes=8,seed=1,concentration=0.1234567,deterministic=0.3333333333")
    assert parse_random_spec(fine.text) == fine


@pytest.mark.parametrize(
    "spec, message",
    [
        ("random:nodes=30,sed=4", r"unknown key 'sed' \(did you mean 'seed'\?\)"),
        ("random:nodes=many", r"'nodes' must be a number, got 'many'"),
        ("random:nodes=1", "nodes must be a whole number from 2 to 1000, got 1"),
        ("random:nodes=5,nodes=6", "key 'nodes' is given twice"),
        ("random:states=5-2", "states range 5-2 is empty"),
        ("random:states=1-3", "min_states must be a whole number from 2 to 10, got 1"),
        ("random:concentration=0", "concentration must be a number from 0.01 to 1000, got 0.0"),
        ("random:deterministic=1.5", "deterministic must be a share from 0 to 1, got 1.5"),
        ("random:nodes", "expected key=value, got 'nodes'"),
        ("random:seed=-1", "seed must be a whole number"),
        ("random:parents=6,states=10", r"a CPT could hold 10\^7 = 10000000 entries \(at most 1000000\)"),
    ],
)
def test_spec_errors(spec, message):
    with pytest.raises(UnknownNetworkError, match=message):
        parse_random_spec(spec)


def test_usable_by_name_in_configs_and_runs():
    cfg = parse_config({
        "networks": ["random:seed=4,nodes=12", {"network": "random:nodes=12,seed=5", "label": "mine"}],
        "rows": [200], "seeds": [0], "estimators": ["plugin"], "queries": {"count": 3},
    })
    assert [n.source for n in cfg.networks] == ["random:nodes=12,seed=4", "random:nodes=12,seed=5"]
    assert [n.label for n in cfg.networks] == ["random-nodes12-seed4", "mine"]
    from intervgnn.harness.runs import execute_run, plan_runs

    record = execute_run(plan_runs(cfg)[0], cfg)
    assert record["network"] == "random-nodes12-seed4" and record["training_rows"] == 200
    assert all(r["status"] == "ok" for r in record["queries"])
    with pytest.raises(ig.ConfigError, match=r"networks\[0\]: random network: unknown key 'nodez'"):
        parse_config({"networks": ["random:nodez=3"], "rows": [10], "seeds": [0], "estimators": ["plugin"]})


def test_random_spec_object_validates():
    with pytest.raises(UnknownNetworkError, match="parents must be a whole number from 0 to 6, got 7"):
        RandomSpec(parents=7)
    with pytest.raises(UnknownNetworkError, match="give a spec string or keyword settings, not both"):
        random_network("random:nodes=5", seed=2)
