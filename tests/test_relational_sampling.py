"""Drawing relational data without the ground network, checked against the ground network's exact answers."""

from __future__ import annotations

import numpy as np
import pytest

from intervgnn import DataError, GraphError
from intervgnn.relational import (
    RelationalData,
    Skeleton,
    ground,
    node_name,
    relational_benchmark,
)
from intervgnn.relational.sampling import sample_data


@pytest.mark.parametrize("name", ["bipartite", "peer", "chain"])
def test_draws_match_the_ground_networks_exact_pairwise_joints(name):
    # The exact engine is checked against pgmpy elsewhere (test_exact_vs_pgmpy.py); here every parent-child
    # pair of the ground network must have, over 20,000 draws, the joint frequencies of its exact joint
    # (a consistency check: common practice, no source). 0.03 TV is about 4 standard errors for 8 cells.
    template, skeleton = relational_benchmark(name, instances=6, degree=2, seed=0)
    net = ground(template, skeleton)
    data = sample_data(template, skeleton, draws=20_000, seed=1)
    table = data.to_ground_table()
    col = {v: j for j, v in enumerate(table.variables)}
    pairs = [(p, v) for v in net.variables for p in net.graph.parents(v)]
    assert pairs
    for p, v in pairs:
        exact = net.query([p, v]).probs
        kp, kv = exact.shape
        freq = np.bincount(table.codes[:, col[p]] * kv + table.codes[:, col[v]], minlength=kp * kv) / table.n_rows
        assert 0.5 * np.abs(freq - exact.reshape(-1)).sum() < 0.03, (p, v)


def test_same_seed_same_draws_and_shapes():
    template, skeleton = relational_benchmark("chain", instances=30, degree=2, seed=2)
    a = sample_data(template, skeleton, draws=3, seed=5)
    b = sample_data(template, skeleton, draws=3, seed=5)
    c = sample_data(template, skeleton, draws=3, seed=6)
    assert isinstance(a, RelationalData) and a.num_draws == 3 and a == b and a != c
    assert a.values["market"].shape == (3, 30, 1)


def test_a_skeleton_too_large_to_ground_can_still_be_drawn():
    template, skeleton = relational_benchmark("bipartite", instances=60_000, degree=2, seed=0, max_degree=7)
    with pytest.raises(Exception, match="more than the limit"):
        ground(template, skeleton)
    data = sample_data(template, skeleton, seed=0)
    assert data.values["orchard"].shape == (1, 60_000, 2)


def test_cyclic_links_and_bad_arguments_are_refused():
    template, _ = relational_benchmark("peer", instances=3, degree=1, seed=0)
    schema = template.schema
    cyclic = Skeleton(schema, {"keeper": ["1", "2"]}, {"advises": [("1", "2"), ("2", "1")]})
    with pytest.raises(GraphError, match="cyclic \\(through keeper '1' attribute 'Practice'\\)"):
        sample_data(template, cyclic)
    _, ok = relational_benchmark("peer", instances=3, degree=1, seed=0)
    with pytest.raises(DataError, match="draws must be a positive whole number, got 0"):
        sample_data(template, ok, draws=0)
    with pytest.raises(DataError, match="seed"):
        sample_data(template, ok, seed=-1)
    with pytest.raises(GraphError, match="template must be a Template, got str"):
        sample_data("t", ok)
    other, _ = relational_benchmark("chain", instances=3, degree=1, seed=0)
    with pytest.raises(GraphError, match="another schema"):
        sample_data(other, ok)
    assert node_name("keeper", "1", "Practice") == "keeper_1__Practice"


def test_grounding_only_what_a_query_needs_gives_the_same_answers():
    # ground(keep=...) keeps the query's variables and their ancestors; the exact answers must equal those on
    # the whole ground network (the rest cannot change them: the d-separation of non-ancestors, common
    # practice, no source)
    from intervgnn.relational import UnitQuery, exact_answer

    template, skeleton = relational_benchmark("peer", instances=25, degree=2, seed=3)
    whole = ground(template, skeleton)
    target, do = "keeper_20__Practice", {"keeper_7__Training": "some"}
    part = ground(template, skeleton, keep=[target, *do])
    assert set(part.variables) < set(whole.variables)
    np.testing.assert_allclose(part.query(target, do=do).probs, whole.query(target, do=do).probs, atol=1e-12)
    q = UnitQuery(target, do=do)
    np.testing.assert_allclose(exact_answer(template, skeleton, q).probs, whole.query(target, do=do).probs,
                               atol=1e-12)


def test_a_unit_query_on_a_skeleton_too_large_to_ground_whole():
    from intervgnn.relational import RelationalPluginEstimator, UnitQuery, exact_answer

    template, skeleton = relational_benchmark("chain", instances=40_000, degree=2, seed=0, max_degree=7)
    q = UnitQuery("market_17__Price", do={"nursery_3__Stock": "good"})
    truth = exact_answer(template, skeleton, q)
    data = sample_data(template, skeleton, seed=1)
    est = RelationalPluginEstimator().fit(data, template)
    assert 0.5 * np.abs(est.query(q).probs - truth.probs).sum() < 0.05


def test_monte_carlo_answers_where_exact_inference_is_too_large(monkeypatch):
    # With the elimination bound forced down, unit, population and spill-over answers come from draws of the
    # whole skeleton under the intervention; they must agree with the exact ones (computed first) within about
    # four standard errors (a consistency check: common practice, no source).
    import intervgnn.bn.exact as exact
    from intervgnn.relational import Policy, PopulationQuery, SpilloverQuery, UnitQuery, exact_answer

    template, skeleton = relational_benchmark("peer", instances=30, degree=2, seed=1)
    unit = UnitQuery("keeper_25__Practice", do={"keeper_3__Training": "some"})
    pop = PopulationQuery("keeper", "Practice", Policy("keeper", "Training", "some", share=0.5, seed=1))
    spill = SpilloverQuery("keeper_25__Practice", "keeper", "Training", "some", "none", "new")
    exact_unit, exact_pop = exact_answer(template, skeleton, unit), exact_answer(template, skeleton, pop)
    exact_spill = exact_answer(template, skeleton, spill)
    monkeypatch.setattr(exact, "MAX_FACTOR_ENTRIES", 2)
    mc_unit = exact_answer(template, skeleton, unit)
    assert "Monte Carlo, 40,000 draws" in mc_unit.description
    assert np.abs(mc_unit.probs - exact_unit.probs).max() < 0.01
    mc_pop = exact_answer(template, skeleton, pop)
    assert "Monte Carlo" in mc_pop.description and np.abs(mc_pop.probs - exact_pop.probs).max() < 0.01
    mc_spill = exact_answer(template, skeleton, spill)
    assert abs(mc_spill.own - exact_spill.own) < 0.015 and abs(mc_spill.both - exact_spill.both) < 0.015
    with pytest.raises(Exception, match="evidence"):
        exact_answer(template, skeleton, UnitQuery("keeper_25__Practice", given={"keeper_3__Training": "some"}))


def test_an_intervened_variable_is_grounded_as_a_root_so_its_large_cpt_is_never_built():
    # orchard a hears 24 hives (a ground CPT of 2^49 x 3 entries); a query on orchard b that sets a's yield needs
    # none of it: a is grounded as a root (its mechanism is replaced), so the answer stays exact
    from intervgnn.relational import UnitQuery, bipartite_template, exact_answer

    template = bipartite_template(seed=0)
    hives = [str(k) for k in range(1, 26)]
    skeleton = Skeleton(template.schema, {"hive": hives, "orchard": ["a", "b"]},
                        {"pollinates": [(h, "a") for h in hives[:24]] + [("25", "b")]})
    with pytest.raises(Exception, match="too many related instances"):
        ground(template, skeleton)
    q = UnitQuery("orchard_b__Yield", do={"orchard_a__Yield": "high"})
    answer = exact_answer(template, skeleton, q)
    assert "Monte Carlo" not in (answer.description or "")
    alone = ground(template, skeleton, keep=["orchard_b__Yield"]).query("orchard_b__Yield")
    np.testing.assert_allclose(answer.probs, alone.probs, atol=1e-12)
