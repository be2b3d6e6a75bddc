"""The neural relational estimator: counted instance families, the ELBO on them, shrunk CPTs, answers and transfer."""

from __future__ import annotations

import numpy as np
import pytest
import torch

from intervgnn import DataError, NotFittedError
from sklearn.base import clone
from intervgnn.models.vgae import family_elbo
from intervgnn.relational import (
    Policy,
    PopulationQuery,
    RelationalData,
    RelationalPluginEstimator,
    SpilloverQuery,
    UnitQuery,
    exact_answer,
    relational_benchmark,
)
from intervgnn.relational.neural import RelationalNeuralEstimator, _batch, count_families

from .test_relational_estimate import _tiny, _tv, grounded_draws


@pytest.fixture(scope="module")
def chain():
    return grounded_draws("chain", instances=12, degree=2, draws=3_000, seed=1)


@pytest.fixture(scope="module")
def fitted(chain):
    template, _, data = chain
    return RelationalNeuralEstimator(seed=0, steps=40).fit(data, template)


# ---------------------------------------------------------------- sufficient statistics


def test_counted_families_bin_to_the_plugins_counts(chain):
    # the family configurations, binned by the template's aggregates, are exactly what the tied plug-in
    # counts (the plug-in's own counts were checked by hand in test_relational_estimate.py)
    template, _, data = chain
    plug = RelationalPluginEstimator().fit(data, template)
    est = RelationalNeuralEstimator(steps=1).fit(data, template)
    for key, counts in plug.counts_.items():
        np.testing.assert_array_equal(est.counts_[key], counts)
    fams = count_families(data, template)
    grove = fams[("grove", "Vigour")]
    assert grove.count.sum() == 3_000 * len(data.skeleton.instances["grove"])
    assert (grove.hits <= grove.degree).all()


def test_family_elbo_on_counted_families_equals_the_sum_over_instances(chain):
    # The ELBO decomposes over instance families (common practice, no source: the same factorisation as
    # the single-table sufficient-statistics test): the count-weighted sum over distinct configurations
    # must equal the sum over every instance and draw, one family each, to float tolerance.
    template, _, data = chain
    est = RelationalNeuralEstimator(steps=3, seed=1)
    small = RelationalData(data.skeleton, {t: v[:40] for t, v in data.values.items()})
    est.fit(small, template)
    model = est.models_[0].eval()
    keys, cards, edges, agg_node, offsets = est._lifted(template)
    fams = count_families(small, template)

    def batch_of(per_instance: bool):
        node, state, weight, src, dst, attr, first = [], [], [], [], [], [], 0
        for i, key in enumerate(keys):
            m, fam = template.mechanisms[key], fams[key]
            cfg, st = np.nonzero(fam.count > 0)
            w = fam.count[cfg, st]
            if per_instance:  # repeat each (configuration, state) once per instance-draw that has it
                reps = w.astype(np.int64)
                cfg, st, w = np.repeat(cfg, reps), np.repeat(st, reps), np.ones(int(reps.sum()))
            e, a = est._mech_edges(m, i, fam.own[cfg], fam.hits[cfg], fam.degree[cfg], small.schema, keys,
                                   agg_node, offsets)
            node.append(np.full(cfg.size, i))
            state.append(st)
            weight.append(w)
            src.append(e[0])
            dst.append(e[1] + first)
            attr.append(a)
            first += cfg.size
        node, state = np.concatenate(node), np.concatenate(state)
        edges_ = np.stack([np.concatenate(src), np.concatenate(dst)])
        return _batch(node, state, edges_, np.concatenate(attr), offsets), np.concatenate(weight)

    with torch.no_grad():
        counted, w1 = batch_of(False)
        every, w2 = batch_of(True)
        assert w2.size == 40 * sum(len(v) for v in data.skeleton.instances.values())
        a = family_elbo(model, counted, torch.as_tensor(w1, dtype=torch.float32))
        b = family_elbo(model, every, torch.as_tensor(w2, dtype=torch.float32))
    assert float(a) == pytest.approx(float(b), rel=1e-5)


# ---------------------------------------------------------------- answers


def test_answers_approach_the_exact_ones_with_many_draws(chain, fitted):
    # consistency (common practice, no source): with 3,000 draws of a 12-instance skeleton the shrunk
    # counts approach the true CPTs, so unit, population and spill-over answers approach the exact ones
    template, skeleton, _ = chain
    unit = UnitQuery("market_3__Price", do={"grove_5__Vigour": "high"})
    assert _tv(fitted.query(unit).probs, exact_answer(template, skeleton, unit).probs) < 0.03
    pop = PopulationQuery("market", "Price", Policy("nursery", "Stock", "good"))
    assert _tv(fitted.query(pop).probs, exact_answer(template, skeleton, pop).probs) < 0.03
    spill = SpilloverQuery("grove_7__Vigour", "nursery", "Stock", "good", "poor", "high")
    truth, est = exact_answer(template, skeleton, spill), fitted.query(spill)
    assert abs(est.own - truth.own) < 0.05 and est.own_units == truth.own_units


def test_transfer_to_an_unseen_skeleton(chain, fitted):
    template, _, _ = chain
    _, other = relational_benchmark("chain", instances=20, degree=3, seed=7, distribution="heavy-tailed")
    pop = PopulationQuery("market", "Price", Policy("grove", "Vigour", "high", share=0.5, seed=1))
    assert _tv(fitted.query(pop, skeleton=other).probs, exact_answer(template, other, pop).probs) < 0.04


def test_the_decoder_earns_weight_only_where_it_helps(fitted):
    shares = fitted.neural_share_
    assert set(shares) == {("nursery", "Stock"), ("grove", "Vigour"), ("market", "Price")}
    assert all(0.0 <= s <= 1.0 for s in shares.values())
    for key, cpt in ((k, fitted.template_.mechanisms[k].cpt) for k in shares):
        np.testing.assert_allclose(cpt.sum(-1), 1.0)


def test_same_seed_same_model_and_other_seed_other_model(chain):
    template, _, data = chain
    small = RelationalData(data.skeleton, {t: v[:50] for t, v in data.values.items()})
    a = RelationalNeuralEstimator(seed=3, steps=10).fit(small, template)
    b = RelationalNeuralEstimator(seed=3, steps=10).fit(small, template)
    c = RelationalNeuralEstimator(seed=4, steps=10).fit(small, template)
    key = ("market", "Price")
    np.testing.assert_array_equal(a.template_.mechanisms[key].cpt, b.template_.mechanisms[key].cpt)
    assert not np.array_equal(a.template_.mechanisms[key].cpt, c.template_.mechanisms[key].cpt)


def test_rows_the_data_never_reach_still_get_a_distribution():
    template, _, data = _tiny()
    est = RelationalNeuralEstimator(steps=5).fit(data.draw(0), template)
    cpt = est.template_.mechanism("orchard", "Yield").cpt
    assert cpt.shape == (2, 2) and np.isfinite(cpt).all()
    np.testing.assert_allclose(cpt.sum(-1), 1.0)


# ---------------------------------------------------------------- contract


def test_estimator_contract_and_bad_settings():
    template, _, data = _tiny()
    est = RelationalNeuralEstimator(steps=3, hidden=8)
    twin = clone(est)
    assert twin.get_params() == est.get_params() and twin is not est
    with pytest.raises(NotFittedError, match="not fitted yet"):
        est.query(UnitQuery("orchard_a__Yield"))
    assert est.fit(data, template) is est
    assert {"template_", "counts_", "families_", "neural_share_", "models_", "train_results_", "skeleton_"} <= {
        k for k in vars(est) if k.endswith("_")}
    for setting, message in [
        ({"steps": 0}, "steps must be a whole number from 1 to 1,000,000, got 0"),
        ({"folds": 1}, "folds must be a whole number from 2 to 100, got 1"),
        ({"dim": True}, "dim must be a whole number from 1 to 4,096, got True"),
        ({"lr": float("nan")}, "lr must be a number, got nan"),
        ({"lr": 0}, "lr must be above 0, got 0"),
        ({"prior_counts": 1.5}, r"prior_counts must lie in \(0, 1\], got 1.5"),
        ({"seed": -1}, "seed"),
    ]:
        with pytest.raises(DataError, match=message):
            RelationalNeuralEstimator(**setting).fit(data, template)
    with pytest.raises(DataError, match="fit expects RelationalData, got dict"):
        RelationalNeuralEstimator().fit({}, template)
    with pytest.raises(DataError, match="fit expects a Template, got str"):
        RelationalNeuralEstimator().fit(data, "template")


def test_fit_on_several_skeletons_counts_them_together():
    template, one = relational_benchmark("chain", instances=10, degree=2, seed=0)
    _, two = relational_benchmark("chain", instances=15, degree=3, seed=1)
    from intervgnn.relational.sampling import sample_data

    d1, d2 = sample_data(template, one, draws=20, seed=1), sample_data(template, two, draws=20, seed=2)
    both = RelationalNeuralEstimator(steps=3).fit([d1, d2], template)
    for key in template.mechanisms:
        expected = (RelationalPluginEstimator().fit(d1, template).counts_[key]
                    + RelationalPluginEstimator().fit(d2, template).counts_[key])
        np.testing.assert_array_equal(both.counts_[key], expected)
        fam = both.families_[key]
        np.testing.assert_array_equal(fam.fold_count.sum(0), fam.count)
    assert both.skeleton_ is one
    with pytest.raises(DataError, match="non-empty list"):
        RelationalNeuralEstimator().fit([], template)


def test_made_up_families_for_rows_the_data_never_reach_lie_in_their_bin():
    # a share aggregate in tenths: narrow bins need large degrees; every bin gets a family inside it
    from intervgnn.relational import Aggregate
    from intervgnn.relational.neural import _representative

    g = Aggregate("pollinates", "Treated", "yes", "share", np.linspace(0, 1, 11).round(6).tolist(), direction="against")
    for b in range(g.num_bins):
        hits, degree = _representative(g, b, typical=2, most=3)
        assert g.bin_of_counts(degree)[hits] == b, b
    c = Aggregate("pollinates", "Treated", "yes", "count", [0, 1, 5])
    for b in range(c.num_bins):
        hits, degree = _representative(c, b, typical=1, most=1)
        assert c.bin_of_counts(degree)[hits] == b


def test_the_decoder_reads_only_what_an_aggregate_declares(fitted):
    # A mechanism reads a share aggregate through the share alone and a count aggregate through the count in
    # the state alone (the template's declaration, see intervgnn.relational.model): families that agree on
    # that get the same decoder conditional, whatever else differs (common practice, no source).
    est = fitted
    template = est.template_
    keys, _, _, agg_node, offsets = est._lifted(template)
    schema = template.schema
    model = est.models_[0]
    for i, key in enumerate(keys):
        m = template.mechanisms[key]
        if not m.aggregates:
            continue
        g = m.aggregates[0]
        if g.kind == "share":  # share 1/2 out of 2, 4 and 6 related
            hits, degree = np.array([[1], [2], [3]]), np.array([[2], [4], [6]])
        else:  # 2 in the state out of 2, 5 and 9 related
            hits, degree = np.array([[2], [2], [2]]), np.array([[2], [5], [9]])
        own = np.zeros(3, np.int64)
        e, a = est._mech_edges(m, i, own, hits, degree, schema, keys, agg_node, offsets)
        p = est._conditionals(model, i, e, a, 3, seed=0)
        np.testing.assert_allclose(p[1:], np.broadcast_to(p[0], p[1:].shape), atol=1e-6)
        # and what it declares does move the conditional
        other = np.zeros((3, 1), np.int64)  # none of the related instances in the state
        e2, a2 = est._mech_edges(m, i, own, other, degree, schema, keys, agg_node, offsets)
        assert not np.allclose(est._conditionals(model, i, e2, a2, 3, seed=0)[0], p[0], atol=1e-6)


# ---------------------------------------------------------------- intervals


def test_relational_intervals_from_the_posterior_of_the_tied_cpts(chain, fitted):
    import json

    from scipy.stats import beta

    from intervgnn import QueryError

    template, skeleton, data = chain
    one = data.draw(0)  # one observed draw: a few counts per tied row, so the posterior is wide
    plug = RelationalPluginEstimator().fit(one, template)
    # a root attribute: its answer is the tied row itself, whose posterior is Beta(count + alpha, ...);
    # the interval's bounds are that Beta's quantiles (scipy as the reference; Monte Carlo error allowed,
    # about three standard errors of a 2.5% quantile from 3,000 draws)
    q = UnitQuery(("nursery", "1", "Stock"))
    d = plug.query_interval(q, draws=3000, seed=1)
    n_poor, n_good = plug.counts_[("nursery", "Stock")]
    good = d.states[0].index("good")
    lo, hi = beta.ppf([0.025, 0.975], n_good + 1, n_poor + 1)
    assert hi - lo > 0.3
    assert d.interval.lower[good] == pytest.approx(lo, abs=0.02)
    assert d.interval.upper[good] == pytest.approx(hi, abs=0.02)
    np.testing.assert_allclose(d.probs, plug.query(q).probs)
    # alpha is the fitted one: changing the setting without a refit moves neither the point nor the draws
    plug.set_params(alpha=50.0)
    np.testing.assert_array_equal(plug.query_interval(q, draws=3000, seed=1).interval.samples, d.interval.samples)
    plug.set_params(alpha=1.0)
    # every query kind gets one; the neural estimator draws from the mixture over strengths behind its CPTs. Grove 2
    # is supplied by nurseries, so its own contrast is far from zero
    spill_q = SpilloverQuery(("grove", "2", "Vigour"), "nursery", "Stock", "good", "poor", "high")
    for est in (plug, fitted):
        unit = est.query_interval(UnitQuery(("grove", "2", "Vigour"), do={("nursery", "1", "Stock"): "good"}), seed=0)
        assert (unit.interval.lower <= unit.interval.upper).all() and unit.interval.draws == 100
        pop = est.query_interval(PopulationQuery("grove", "Vigour", Policy("nursery", "Stock", "good")), draws=20)
        assert pop.interval.samples.shape == (20, 2)
        spill = est.query_interval(spill_q, draws=40)
        own = spill.intervals["own"]
        assert abs(spill.own) > 0.1 and own.upper - own.lower > 0 and own.lower <= spill.own <= own.upper
        assert spill == est.query(spill_q)  # the intervals do not take part in equality
        payload = json.loads(json.dumps(spill.to_dict()))
        assert set(payload["intervals"]) == {"own", "neighbours", "both"}
    again = fitted.query_interval(q, seed=0)
    np.testing.assert_array_equal(again.interval.samples, fitted.query_interval(q, seed=0).interval.samples)
    with pytest.raises(QueryError, match="draws must be a whole number"):
        plug.query_interval(q, draws=3)


def test_a_relational_probability_the_counts_make_zero_stays_inside_its_interval(chain):
    template, skeleton, data = chain
    est = RelationalPluginEstimator(alpha=0.0).fit(data.draw(0), template)
    zero = [(m, i) for m in skeleton.instances["market"] for i in range(3)
            if est.query(UnitQuery(("market", m, "Price"))).probs[i] == 0.0]
    assert zero, "the fixture should leave some price state unseen"
    m, i = zero[0]
    d = est.query_interval(UnitQuery(("market", m, "Price")), draws=50)
    assert d.interval.lower[i] == 0.0 <= d.interval.upper[i]


def test_a_relational_row_never_seen_leaves_room_for_zero_and_one():
    # Markets price by how many of their groves are vigorous (bins 0, 1-2, 3+). In this draw no
    # market has three vigorous groves, so the 3+ row is never seen; setting all six groves of market 6 vigorous reads
    # the 3+ row alone. The rows say nothing about it: each state's probability may be 0 or 1, as in the
    # modified Jeffreys rule for n = 0 (Brown, Cai & DasGupta 2001, Statistical Science 16:101-133; from
    # memory), while the draws (rows inside the simplex) stay strictly inside (0, 1).
    from intervgnn.relational import sample_data
    from intervgnn.relational.estimate import _linked

    template, skeleton = relational_benchmark("chain", instances=40, degree=2, seed=4)
    est = RelationalPluginEstimator().fit(sample_data(template, skeleton, draws=1, seed=0), template)
    assert est.counts_[("market", "Price")].sum(axis=-1).tolist() == [30.0, 10.0, 0.0]
    groves = _linked(skeleton, "market", "6", "grove")
    assert len(groves) == 6
    q = UnitQuery(("market", "6", "Price"), do={("grove", g, "Vigour"): "high" for g in groves})
    d = est.query_interval(q, draws=200, seed=0)
    s = d.interval.samples
    assert (s.min(axis=0) > 0.0).all() and (s.max(axis=0) < 1.0).all()
    assert (d.interval.lower == 0.0).all() and (d.interval.upper == 1.0).all() and d.interval.widened.all()
    # evidence the counts alone make impossible (a grove-less market never priced high) still gets an interval,
    # from the smoothed draws, without the widening
    q = UnitQuery("nursery_1__Stock", given={"market_7__Price": "high"})
    assert est._boundary_layers(skeleton, q) is None
    d = est.query_interval(q, draws=50, seed=0)
    assert not d.interval.widened.any() and d.interval.lower[0] <= d.probs[0] <= d.interval.upper[0]
    # a market without groves reads only the seen row "0": the never-seen rows add no 0 or 1 to its answer's
    layers = est._boundary_layers(skeleton, UnitQuery(("market", "7", "Price")))
    np.testing.assert_array_equal(layers[1], np.where(layers[0] == 0.0, 0.0, np.nan))
    np.testing.assert_array_equal(layers[2], np.where(layers[0] == 1.0, 1.0, np.nan))


def test_no_relational_interval_on_a_monte_carlo_answer(monkeypatch):
    # an interval would repeat the 40,000-draw simulation once per posterior draw: refused with the reason
    import intervgnn.bn.exact as exact
    from intervgnn import QueryError
    from intervgnn.relational import sample_data

    template, skeleton = relational_benchmark("peer", instances=30, degree=2, seed=1)
    est = RelationalPluginEstimator().fit(sample_data(template, skeleton, draws=5, seed=0), template)
    monkeypatch.setattr(exact, "MAX_FACTOR_ENTRIES", 2)
    with pytest.raises(QueryError, match="answered by Monte Carlo on this skeleton"):
        est.query_interval(UnitQuery("keeper_25__Practice", do={"keeper_3__Training": "some"}), draws=20)
