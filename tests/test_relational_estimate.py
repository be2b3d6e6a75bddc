"""Relational queries, exact answers, the tied-parameter plug-in and its unlinked ablation."""

from __future__ import annotations

import numpy as np
import pytest

from intervgnn import DataError, NotFittedError, QueryError
from intervgnn.relational import (
    Aggregate,
    Mechanism,
    Policy,
    PopulationQuery,
    RelationalData,
    RelationalPluginEstimator,
    Schema,
    Skeleton,
    SpilloverQuery,
    Template,
    UnitQuery,
    UnlinkedPluginEstimator,
    exact_answer,
    ground,
    relational_benchmark,
)


def _tv(p, q) -> float:
    return 0.5 * float(np.abs(np.asarray(p) - np.asarray(q)).sum())


def grounded_draws(name: str, instances: int, degree: float, draws: int, seed: int):
    """(template, skeleton, data): a benchmark world (template seed 0) and ``draws`` draws of its ground network."""
    template, skeleton = relational_benchmark(name, instances=instances, degree=degree, seed=0)
    rows = ground(template, skeleton).sample(draws, seed=seed)
    return template, skeleton, RelationalData.from_ground_rows(template, skeleton, rows)


@pytest.fixture(scope="module")
def bipartite():
    return grounded_draws("bipartite", instances=8, degree=2, draws=20_000, seed=1)


@pytest.fixture(scope="module")
def peer():
    return grounded_draws("peer", instances=10, degree=1.5, draws=2_000, seed=2)


def _tiny():
    """Three hives, two orchards; Yield depends on the count of treated hives pollinating the orchard (0 / 1+)."""
    schema = Schema(
        {"hive": {"Treated": ["no", "yes"]}, "orchard": {"Yield": ["low", "high"]}},
        {"pollinates": ("hive", "orchard")},
    )
    treated = Aggregate("pollinates", "Treated", "yes", "count", [0, 1], direction="against")
    template = Template(schema, [
        Mechanism("hive", "Treated", [0.5, 0.5]),
        Mechanism("orchard", "Yield", [[0.5, 0.5], [0.5, 0.5]], aggregates=[treated]),
    ])
    skeleton = Skeleton(schema, {"hive": ["1", "2", "3"], "orchard": ["a", "b"]},
                        {"pollinates": [("1", "a"), ("2", "a"), ("3", "b")]})
    # draw 1: hives yes, no, no; orchards high, low.  draw 2: hives no, no, yes; orchards low, high.
    data = RelationalData(skeleton, {
        "hive": [[[1], [0], [0]], [[0], [0], [1]]],
        "orchard": [[[1], [0]], [[0], [1]]],
    })
    return template, skeleton, data


# ---------------------------------------------------------------- consistency


def test_plugin_approaches_exact_answers_with_many_draws(bipartite):
    # a consistency check: with many draws the tied counts approach the true CPTs,
    # so the answers approach the exact ones (common practice, no source)
    template, skeleton, data = bipartite
    est = RelationalPluginEstimator().fit(data, template)
    unit = UnitQuery("orchard_2__Yield", do={"hive_7__Treated": "yes"})
    assert _tv(est.query(unit).probs, exact_answer(template, skeleton, unit).probs) < 0.02
    pop = PopulationQuery("orchard", "Yield", Policy("hive", "Treated", "yes", share=0.5, seed=3))
    assert _tv(est.query(pop).probs, exact_answer(template, skeleton, pop).probs) < 0.02


def test_plugin_answers_on_a_new_skeleton(bipartite):
    template, _, data = bipartite
    _, other = relational_benchmark("bipartite", instances=6, degree=2, seed=5)
    est = RelationalPluginEstimator().fit(data, template)
    pop = PopulationQuery("orchard", "Yield", Policy("hive", "Treated", "yes"))
    assert _tv(est.query(pop, skeleton=other).probs, exact_answer(template, other, pop).probs) < 0.02


def test_population_query_is_the_average_of_unit_queries(bipartite):
    template, skeleton, _ = bipartite
    policy = Policy("hive", "Treated", "yes", instances=["2", "5"])
    pop = exact_answer(template, skeleton, PopulationQuery("orchard", "Yield", policy))
    do = {"hive_2__Treated": "yes", "hive_5__Treated": "yes"}
    units = [exact_answer(template, skeleton, UnitQuery(("orchard", o, "Yield"), do=do)).probs
             for o in skeleton.instances["orchard"]]
    np.testing.assert_allclose(pop.probs, np.mean(units, axis=0), atol=1e-12)


def test_policy_that_sets_the_queried_attribute_gives_a_point_mass(bipartite):
    template, skeleton, _ = bipartite
    ans = exact_answer(template, skeleton, PopulationQuery("hive", "Treated", Policy("hive", "Treated", "yes")))
    assert ans["yes"] == 1.0


def test_policy_share_is_seeded():
    _, skeleton = relational_benchmark("bipartite", instances=20, degree=2, seed=0)
    a = Policy("hive", "Treated", "yes", share=0.3, seed=4).units(skeleton)
    assert len(a) == 6 and a == Policy("hive", "Treated", "yes", share=0.3, seed=4).units(skeleton)


# ---------------------------------------------------------------- spill-over


def test_unlinked_ablation_sees_no_spillover_where_the_truth_does(bipartite):
    template, skeleton, data = bipartite
    q = SpilloverQuery("orchard_8__Yield", "hive", "Treated", "yes", "no", "high")
    truth = exact_answer(template, skeleton, q)
    assert truth.own_units == ("2", "5", "6", "7", "8") and truth.own != 0.0
    assert truth.neighbours == 0.0  # an orchard's yield depends only on the hives pollinating it
    ablated = UnlinkedPluginEstimator().fit(data, template).query(q)
    assert (ablated.own, ablated.neighbours, ablated.both) == (0.0, 0.0, 0.0)
    linked = RelationalPluginEstimator().fit(data, template).query(q)
    assert abs(linked.own - truth.own) < 0.02


def test_peer_spillover_neighbours(peer):
    template, skeleton, data = peer
    q = SpilloverQuery("keeper_9__Practice", "keeper", "Training", "some", "none", "new")
    truth = exact_answer(template, skeleton, q)
    assert truth.own_units == ("9",) and truth.neighbour_units
    assert truth.neighbours != 0.0
    ablated = UnlinkedPluginEstimator().fit(data, template).query(q)
    assert ablated.neighbours == 0.0 and ablated.own != 0.0


# ---------------------------------------------------------------- counts


def test_fitted_counts_match_a_hand_count():
    template, _, data = _tiny()
    est = RelationalPluginEstimator(alpha=1.0).fit(data, template)
    # the expected numbers were counted by hand from the two draws in _tiny()
    np.testing.assert_array_equal(est.counts_[("hive", "Treated")], [4, 2])
    np.testing.assert_array_equal(est.counts_[("orchard", "Yield")], [[2, 0], [0, 2]])
    np.testing.assert_allclose(est.template_.mechanism("hive", "Treated").cpt, [5 / 8, 3 / 8])
    np.testing.assert_allclose(est.template_.mechanism("orchard", "Yield").cpt, [[0.75, 0.25], [0.25, 0.75]])
    flat = UnlinkedPluginEstimator(alpha=0).fit(data, template)
    np.testing.assert_array_equal(flat.counts_[("orchard", "Yield")], [2, 2])
    assert flat.template_.mechanism("orchard", "Yield").aggregates == ()


def test_unseen_rows_are_uniform_without_smoothing():
    template, _, data = _tiny()
    one = data.draw(0)
    est = RelationalPluginEstimator(alpha=0).fit(one, template)
    np.testing.assert_allclose(est.template_.mechanism("orchard", "Yield").cpt, [[1, 0], [0, 1]])
    est2 = RelationalPluginEstimator(alpha=0).fit(RelationalData(one.skeleton, {
        "hive": [[0], [0], [0]], "orchard": [[0], [1]]}), template)
    np.testing.assert_allclose(est2.template_.mechanism("orchard", "Yield").cpt, [[0.5, 0.5], [0.5, 0.5]])


# ---------------------------------------------------------------- contract


def test_estimator_contract():
    template, _, data = _tiny()
    est = RelationalPluginEstimator()
    assert est.get_params() == {"alpha": 1.0}
    assert est.set_params(alpha=0.5) is est and est.alpha == 0.5
    assert est.fit(data, template) is est
    assert {k for k in vars(est) if k.endswith("_")} == {"template_", "counts_", "alpha_", "skeleton_"}
    before = est.template_
    est.query(UnitQuery("orchard_a__Yield", do={"hive_1__Treated": "yes"}))
    assert est.template_ is before
    assert repr(UnlinkedPluginEstimator(alpha=2.0)) == "UnlinkedPluginEstimator(alpha=2.0)"
    with pytest.raises(DataError, match="unknown setting 'beta'"):
        est.set_params(beta=1)


def test_bad_settings_and_inputs():
    template, _, data = _tiny()
    with pytest.raises(DataError, match="alpha must be a non-negative number"):
        RelationalPluginEstimator(alpha=-1).fit(data, template)
    with pytest.raises(DataError, match="fit expects RelationalData, got dict"):
        RelationalPluginEstimator().fit({}, template)
    with pytest.raises(DataError, match="fit expects a Template"):
        RelationalPluginEstimator().fit(data, None)
    other, _ = relational_benchmark("peer", instances=3, degree=1, seed=0)
    with pytest.raises(DataError, match="another schema"):
        RelationalPluginEstimator().fit(data, other)
    with pytest.raises(NotFittedError, match="not fitted yet"):
        RelationalPluginEstimator().query(UnitQuery("orchard_a__Yield"))


@pytest.mark.parametrize(
    "query, message",
    [
        (UnitQuery("orchard_9__Yield"), r"target: 'orchard' has no instance '9' in this skeleton"),
        (UnitQuery(("orchard", "a", "Yeld")), r"target: entity type 'orchard' has no attribute 'Yeld'.*Yield"),
        (UnitQuery(("barn", "a", "Yield")), r"target: unknown entity type 'barn'"),
        (UnitQuery("barn_1__Yield"), r"target: 'barn_1__Yield' is not a ground variable"),
        (UnitQuery(42), r"target: expected a ground variable name"),
        (UnitQuery("orchard_a__Yield", do={"hive_1__Treated": "maybe"}),
         r"do of 'hive_1__Treated': 'maybe' is not a state of 'hive.Treated'; states are: no, yes"),
        (UnitQuery("orchard_a__Yield", do={"hive_7__Treated": "yes"}), r"do: 'hive' has no instance '7'"),
        (UnitQuery("orchard_a__Yield", given=["x"]), r"given must be a mapping"),
        (PopulationQuery("orchard", "Size"), r"population query: entity type 'orchard' has no attribute 'Size'"),
        (PopulationQuery("orchard", "Yield", Policy("hive", "Treated", "maybe")), r"policy: 'maybe' is not a state"),
        (PopulationQuery("orchard", "Yield", Policy("hive", "Treated", "yes", instances=["1", "9"])),
         r"policy: 'hive' has no instance '9'"),
        (PopulationQuery("orchard", "Yield", Policy("hive", "Treated", "yes", share=1.5)),
         r"policy: share must be a number from 0 to 1, got 1.5"),
        (PopulationQuery("orchard", "Yield", Policy("hive", "Treated", "yes", instances=["1"], share=0.5)),
         r"either instances or share"),
        (PopulationQuery("orchard", "Yield", "all"), r"policy must be a Policy or None, got str"),
        (SpilloverQuery("orchard_a__Yield", "hive", "Treated", "yes", "no", "best"),
         r"outcome state: 'best' is not a state of 'orchard.Yield'"),
        (SpilloverQuery("orchard_a__Yield", "hive", "Strength", "yes", "no", "high"),
         r"treatment: entity type 'hive' has no attribute 'Strength'"),
        (SpilloverQuery("orchard_a__Yield", "hive", "Treated", "on", "no", "high"), r"treated state: 'on'"),
        ("orchard_a__Yield", r"expected a UnitQuery, PopulationQuery or SpilloverQuery, got str"),
    ],
)
def test_bad_queries_are_clear_errors(query, message):
    template, skeleton, data = _tiny()
    with pytest.raises(QueryError, match=message):
        exact_answer(template, skeleton, query)
    with pytest.raises(QueryError, match=message):
        RelationalPluginEstimator().fit(data, template).query(query)


def test_skeleton_over_another_schema_is_refused():
    template, _, _ = _tiny()
    _, other = relational_benchmark("peer", instances=3, degree=1, seed=0)
    with pytest.raises(QueryError, match="another schema"):
        exact_answer(template, other, UnitQuery("keeper_1__Practice"))
    with pytest.raises(QueryError, match="skeleton must be a Skeleton, got str"):
        exact_answer(template, "here", UnitQuery("keeper_1__Practice"))
    with pytest.raises(QueryError, match="template must be a Template"):
        exact_answer(None, other, UnitQuery("keeper_1__Practice"))
