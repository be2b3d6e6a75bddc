"""Relational benchmarks: invented templates, seeded random skeletons, the registry and spec strings."""

from __future__ import annotations

import numpy as np
import pytest

from intervgnn import DataError
from intervgnn.relational import (
    RELATIONAL_BENCHMARKS,
    RelationalSpec,
    bipartite_skeleton,
    chain_skeleton,
    ground,
    parse_relational_spec,
    peer_skeleton,
    relational_benchmark,
)
from intervgnn.relational.benchmarks import DEGREE_DISTRIBUTIONS

# (aggregating entity type, its relationships) of each benchmark: degrees are counted into these instances
_IN = {"bipartite": ["pollinates"], "peer": ["advises"], "chain": ["supplies", "sells_to"]}


def _proper(probs):
    p = np.asarray(probs, dtype=float)
    assert np.all(p >= 0) and abs(p.sum() - 1.0) < 1e-9, p


@pytest.mark.parametrize("name", RELATIONAL_BENCHMARKS)
def test_each_template_grounds_and_answers_proper_distributions(name):
    per_type = {"bipartite": 8, "peer": 15, "chain": 5}[name]  # 15 or 16 instances in all
    template, skeleton = relational_benchmark(name, instances=per_type, degree=1.5, seed=3, max_degree=3)
    assert 10 <= sum(map(len, skeleton.instances.values())) <= 20
    net = ground(template, skeleton)
    n_attrs = {t: len(a) for t, a in template.schema.entities.items()}
    assert len(net.variables) == sum(len(skeleton.instances[t]) * n_attrs[t] for t in n_attrs)
    first, last = net.variables[0], net.variables[-1]
    _proper(net.query(last).probs)
    _proper(net.query(last, do={first: net.states[first][-1]}).probs)
    _proper(net.query(first, given={last: net.states[last][0]}).probs)
    # related instances really are parents of the aggregating attribute somewhere
    assert any(len(net.graph.parents(v)) >= 2 for v in net.variables)


@pytest.mark.parametrize("name", RELATIONAL_BENCHMARKS)
@pytest.mark.parametrize("distribution", DEGREE_DISTRIBUTIONS)
def test_determinism_per_seed(name, distribution):
    a_t, a_s = relational_benchmark(name, instances=30, degree=2, seed=5, distribution=distribution)
    b_t, b_s = relational_benchmark(name, instances=30, degree=2, seed=5, distribution=distribution)
    c_t, c_s = relational_benchmark(name, instances=30, degree=2, seed=6, distribution=distribution)
    assert a_s.links == b_s.links and a_s.instances == b_s.instances
    for key, m in a_t.mechanisms.items():
        np.testing.assert_array_equal(m.cpt, b_t.mechanisms[key].cpt)
    assert a_s.links != c_s.links
    assert any(not np.array_equal(m.cpt, c_t.mechanisms[k].cpt) for k, m in a_t.mechanisms.items())


def test_concentration_shapes_rows():
    flat, _ = relational_benchmark("bipartite", instances=2, degree=1, concentration=1000)
    peaked, _ = relational_benchmark("bipartite", instances=2, degree=1, concentration=0.05)
    spread = lambda t: float(np.max(t.mechanism("orchard", "Yield").cpt, axis=-1).mean())  # noqa: E731
    assert spread(flat) < 0.4 < 0.8 < spread(peaked)


@pytest.mark.parametrize("distribution", DEGREE_DISTRIBUTIONS)
def test_peer_skeletons_never_make_a_cycle(distribution):
    for seed in range(20):
        template, skeleton = relational_benchmark("peer", instances=12, degree=2, seed=seed, distribution=distribution,
                                                  max_degree=4)
        assert all(int(s) < int(t) for s, t in skeleton.links["advises"])
        ground(template, skeleton)  # raises GraphError on a cycle


@pytest.mark.parametrize("name", RELATIONAL_BENCHMARKS)
@pytest.mark.parametrize("distribution", DEGREE_DISTRIBUTIONS)
def test_mean_degree_matches_on_a_large_skeleton(name, distribution):
    n, degree = 2000, 3.0
    _, skeleton = relational_benchmark(name, instances=n, degree=degree, seed=1, distribution=distribution)
    for r in _IN[name]:
        target = skeleton.schema.relationships[r].target
        counts = np.bincount([int(t) - 1 for _, t in skeleton.links[r]], minlength=n)
        assert abs(counts.mean() - degree) <= 0.1 * degree, (r, counts.mean())
        if distribution == "heavy-tailed":
            assert counts.max() > 4 * degree  # a few hubs
        if distribution == "uniform":
            assert counts.max() <= 2 * degree + 1
        assert len(skeleton.instances[target]) == n


def test_max_degree_caps_every_instance():
    sk = bipartite_skeleton(hives=50, orchards=200, degree=3, distribution="heavy-tailed", seed=2, max_degree=4)
    counts = np.bincount([int(t) for _, t in sk.links["pollinates"]])
    assert counts.max() <= 4
    assert len(set(sk.links["pollinates"])) == len(sk.links["pollinates"])


def test_generator_argument_errors():
    with pytest.raises(DataError, match=r"bipartite skeleton: hives must be a whole number from 1 to 2,000,000, got 0"):
        bipartite_skeleton(hives=0, orchards=3)
    with pytest.raises(DataError, match=r"bipartite skeleton: orchards must be a whole number .* got True"):
        bipartite_skeleton(hives=3, orchards=True)
    with pytest.raises(DataError, match=r"degree must be a number from 0 to .* got -1"):
        bipartite_skeleton(hives=3, orchards=3, degree=-1)
    with pytest.raises(DataError, match=r"degree must be a number .* got nan"):
        bipartite_skeleton(hives=3, orchards=3, degree=float("nan"))
    with pytest.raises(DataError, match=r"bipartite skeleton: degree 4 is more than the most possible, 3"):
        bipartite_skeleton(hives=3, orchards=3, degree=4)
    with pytest.raises(DataError, match=r"peer skeleton: degree 3 is more than the most possible, 2 \(half the keepers"):
        peer_skeleton(keepers=5, degree=3)
    with pytest.raises(DataError, match=r"chain skeleton \(sells_to\): degree 2 is more than the most possible, 1"):
        chain_skeleton(nurseries=5, groves=1, markets=5, degree=2)
    with pytest.raises(DataError, match=r"distribution must be one of: poisson, uniform, heavy-tailed; got 'poison' \(did you mean 'poisson'\?\)"):
        peer_skeleton(keepers=5, distribution="poison")
    with pytest.raises(DataError, match=r"seed must be a whole number from 0 to .* got -2"):
        peer_skeleton(keepers=5, seed=-2)
    with pytest.raises(DataError, match=r"max_degree must be a whole number from 1 to .* got 0"):
        peer_skeleton(keepers=5, max_degree=0)
    with pytest.raises(DataError, match=r"chain skeleton: 3,000,000 instances in all, more than the limit of 2,000,000"):
        chain_skeleton(nurseries=1_000_000, groves=1_000_000, markets=1_000_000)
    with pytest.raises(DataError, match=r"about 20,000,000 links, more than the limit of 10,000,000"):
        bipartite_skeleton(hives=50_000, orchards=10_000, degree=2000)


def test_template_argument_errors():
    with pytest.raises(DataError, match=r"concentration must be a number from 0.01 to 1000, got 0"):
        relational_benchmark("chain", concentration=0)
    with pytest.raises(DataError, match=r"concentration must be a number .* got 'x'"):
        relational_benchmark("peer", concentration="x")


def test_spec_round_trip():
    spec = parse_relational_spec("relational:bipartite,instances=200,degree=3,seed=0")
    assert spec == RelationalSpec("bipartite", instances=200, degree=3.0, seed=0)
    assert spec.text == "relational:bipartite,instances=200,degree=3,seed=0"
    assert spec.label == "relational-bipartite-instances200-degree3-seed0"
    full = RelationalSpec("chain", instances=40, degree=2.5, seed=9, distribution="heavy-tailed",
                          concentration=0.25, max_degree=6)
    assert full.text == ("relational:chain,instances=40,degree=2.5,seed=9,distribution=heavy-tailed,"
                         "concentration=0.25,max_degree=6")
    assert parse_relational_spec(full.text) == full
    assert parse_relational_spec(" relational:peer, seed=2 ,instances=50 ,".strip()).text == (
        "relational:peer,instances=50,degree=2,seed=2")
    # a spec string and the same settings by keyword give the same benchmark
    a_t, a_s = relational_benchmark("relational:peer,instances=15,degree=1.5,seed=4")
    b_t, b_s = relational_benchmark("peer", instances=15, degree=1.5, seed=4)
    assert a_s.links == b_s.links
    np.testing.assert_array_equal(a_t.mechanism("keeper", "Practice").cpt, b_t.mechanism("keeper", "Practice").cpt)
    c_t, c_s = relational_benchmark(parse_relational_spec("relational:peer,instances=15,degree=1.5,seed=4"))
    assert c_s.links == a_s.links


@pytest.mark.parametrize(
    "text, message",
    [
        ("random:nodes=3", r"not a relational benchmark spec: 'random:nodes=3'"),
        ("relational:", r"must start with a benchmark name, one of: bipartite, peer, chain"),
        ("relational:seed=1", r"must start with a benchmark name"),
        ("relational:bipartit,seed=1", r"unknown relational benchmark 'bipartit'; .* \(did you mean 'bipartite'\?\)"),
        ("relational:peer,degre=2", r"unknown key 'degre' \(did you mean 'degree'\?\); keys are: instances, degree"),
        ("relational:peer,seed", r"expected key=value, got 'seed'"),
        ("relational:peer,seed=", r"expected key=value, got 'seed='"),
        ("relational:peer,seed=1,seed=2", r"key 'seed' is given twice"),
        ("relational:peer,instances=ten", r"'instances' must be a whole number, got 'ten'"),
        ("relational:peer,degree=lots", r"'degree' must be a number, got 'lots'"),
        ("relational:peer,degree=inf", r"degree must be a number from 0 to .* got inf"),
        ("relational:peer,instances=0", r"instances must be a whole number from 1 to 2,000,000, got 0"),
        ("relational:peer,distribution=flat", r"distribution must be one of: poisson, uniform, heavy-tailed; got 'flat'"),
        ("relational:peer,max_degree=1.5", r"'max_degree' must be a whole number, got '1.5'"),
        ("relational:peer,seed=" + "9" * 30, r"seed must be a whole number from 0 to 9,223,372,036,854,775,807, got 9{30}$"),
        ("relational:peer,seed=" + "9" * 5000, r"'seed' is 5,000 characters long, got '9+\.\.\.9+'$"),
    ],
)
def test_spec_errors(text, message):
    with pytest.raises(DataError, match=message):
        parse_relational_spec(text)


def test_registry_errors():
    with pytest.raises(DataError, match=r"unknown relational benchmark 'ring'; benchmarks are: bipartite, peer, chain"):
        relational_benchmark("ring")
    with pytest.raises(DataError, match=r"unknown relational benchmark 7"):
        relational_benchmark(7)
    with pytest.raises(DataError, match=r"unknown setting 'size'; settings are: instances, degree"):
        relational_benchmark("bipartite", size=3)
    with pytest.raises(DataError, match=r"give a spec string or object, or a name with settings, not both"):
        relational_benchmark("relational:peer,seed=1", seed=2)
    with pytest.raises(DataError, match=r"peer skeleton: degree 2 is more than the most possible, 0.5"):
        relational_benchmark("peer", instances=2, degree=2)
