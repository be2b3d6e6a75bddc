"""Intervals on answers: the batched exact engine, Dirichlet posterior draws, bootstrap refits, effect contrasts."""

from __future__ import annotations

import re

import numpy as np
import pytest
from scipy import stats

import intervgnn as ig
from intervgnn import NotFittedError, QueryError
from intervgnn.distribution import Distribution, EffectEstimate, Interval
from intervgnn.estimators import NeuralEstimator, PluginEstimator
from intervgnn.estimators.plugin import (AUTO_ALPHAS, dirichlet_rows, fit_row_priors, mixed_dirichlet_rows,
                                        row_prior_weights)


def test_batched_engine_equals_one_query_per_cpt_set():
    # S networks that differ in their CPTs, answered in one contraction, must equal S separate exact queries
    net = ig.load_network("sachs")
    eng = net._engine
    rng = np.random.default_rng(0)
    batch = {v: rng.dirichlet(np.ones(c.shape[-1]), size=(7,) + c.shape[:-1]) for v, c in eng.cpts.items()}
    do, given = {"PKC": 0}, {"Mek": 1}
    got = eng.query_array_batch(["Akt", "Erk"], batch, do, given)
    orig = eng.cpts
    try:
        for s in range(7):
            eng.cpts = {v: batch[v][s] for v in orig}
            np.testing.assert_allclose(got[s], eng.query_array(["Akt", "Erk"], do, given), atol=1e-12)
    finally:
        eng.cpts = orig
    # a stacked CPT that cannot reach the answer leaves every member the plain answer
    other = {"PKC": batch["PKC"]}
    np.testing.assert_allclose(eng.query_array_batch(["PKA"], other, {"PKC": 0}), np.broadcast_to(
        eng.query_array(["PKA"], {"PKC": 0}), (7, 3)), atol=1e-12)


def test_dirichlet_draws_match_numpy_quantiles():
    # reference: numpy's own Dirichlet sampler (a general-purpose library); the Wilson-Hilferty draws for
    # large parameters and the exact gamma draws for small ones must give the same quantiles
    rng = np.random.default_rng(3)
    for alpha in (np.array([0.5, 2.0, 30.0]), np.array([400.0, 9000.0]), np.array([[1.0, 3.0], [50.0, 12.0]])):
        ours = dirichlet_rows(rng, alpha, 200_000)
        ref = rng.dirichlet(alpha.reshape(-1, alpha.shape[-1])[0], 200_000)
        for q in (0.025, 0.5, 0.975):
            assert abs(np.quantile(ours.reshape(200_000, -1, alpha.shape[-1])[:, 0, 0], q)
                       - np.quantile(ref[:, 0], q)) < 0.004


def test_plugin_interval_of_a_root_is_the_beta_posterior():
    # One binary root with n1 ones out of n and alpha = 1: its posterior is Beta(n1 + 1, n - n1 + 1) (a worked
    # fact of the trade, common practice, no source); the reference quantiles come from scipy.stats.beta.
    net = ig.load_network("cancer")
    rows = net.sample(300, seed=4)
    est = PluginEstimator(alpha=1.0).fit(rows, net.graph)
    d = est.query_interval("Smoker", draws=40_000, seed=1)
    col = rows.codes[:, rows.variables.index("Smoker")]
    n1 = int((col == 0).sum())
    lo, hi = stats.beta.ppf([0.025, 0.975], n1 + 1, len(col) - n1 + 1)
    assert abs(d.interval.lower[0] - lo) < 0.004 and abs(d.interval.upper[0] - hi) < 0.004
    np.testing.assert_array_equal(d.probs, est.query("Smoker").probs)
    assert d.interval.method == "posterior" and d.interval.draws == 40_000


def test_row_weights_follow_the_dirichlet_multinomial_likelihood():
    # Each row weighs the candidate priors (Dirichlet(a, ..., a), then Dirichlet(3a m_c) centred on each of the
    # K centres c) by shared weights w times the row's marginal likelihood; a row never seen keeps w. So every seen row's
    # weights are the unseen row's times the row's likelihoods, renormalised; reference:
    # scipy.stats.dirichlet_multinomial (a general-purpose library), on the centres the fit reports.
    counts = np.array([[40.0, 1.0, 0.0], [3.0, 0.0, 0.0], [2.0, 2.0, 1.0], [0.0, 5.0, 6.0], [0.0, 0.0, 0.0]])
    priors = fit_row_priors(counts)
    post = priors.weights
    n, centres = len(AUTO_ALPHAS), priors.sizes.size
    assert centres == 4 and post.shape == (5 * n, 5)  # four centres: as many as the seen rows
    np.testing.assert_allclose(post.sum(axis=0), 1.0)
    m = priors.centres(counts)
    for r in range(4):
        c = counts[r]
        ll = np.array([stats.dirichlet_multinomial.logpmf(c, np.full(3, a), c.sum()) for a in AUTO_ALPHAS]
                      + [stats.dirichlet_multinomial.logpmf(c, 3 * a * m[j, r], c.sum())
                         for j in range(centres) for a in AUTO_ALPHAS])
        expect = post[:, 4] * np.exp(ll - ll.max())
        np.testing.assert_allclose(post[:, r], expect / expect.sum(), rtol=1e-8, atol=1e-300)


def test_centres_leave_the_row_out():
    # Each seen row's centre is the membership-weighed mean of the other seen rows' frequencies with one uniform
    # pseudo-row; a row never seen gets every seen row. Worked by hand from the fitted memberships.
    counts = np.array([[8.0, 0.0], [1.0, 3.0], [0.0, 0.0], [5.0, 5.0]])
    priors = fit_row_priors(counts, centres=1)
    f = np.array([[1.0, 0.0], [0.25, 0.75], [0.5, 0.5], [0.5, 0.5]])
    g = priors.membership[0]
    m = priors.centres(counts)[0]
    for r in (0, 1, 3):
        others = [i for i in (0, 1, 3) if i != r]
        expect = (sum(g[i] * f[i] for i in others) + 0.5) / (sum(g[i] for i in others) + 1.0)
        np.testing.assert_allclose(m[r], expect)
    np.testing.assert_allclose(m[2], (sum(g[i] * f[i] for i in (0, 1, 3)) + 0.5) / (g.sum() + 1.0))
    one = fit_row_priors(np.array([[5.0, 1.0, 0.0]]))  # one row: its centre has no other row, so it is uniform
    np.testing.assert_allclose(one.centres(np.array([[5.0, 1.0, 0.0]]))[0], [[1 / 3] * 3])
    assert fit_row_priors(np.zeros((3, 2))).weights.shape == (len(AUTO_ALPHAS), 3)  # nothing seen: no centre
    with pytest.raises(ValueError, match="shrink"):
        fit_row_priors(counts, shrink=0.0)
    with pytest.raises(ValueError, match="pseudo"):
        fit_row_priors(counts, pseudo=0.0)
    for bad in (0, -1, 2.5, True):
        with pytest.raises(ValueError, match="max_rows"):
            fit_row_priors(counts, max_rows=bad)
    priors = fit_row_priors(counts)
    with pytest.raises(ValueError, match="pass both"):
        mixed_dirichlet_rows(np.random.default_rng(0), counts, 2, shapes=priors.shapes(counts))
    with pytest.raises(ValueError, match="rows and states"):
        mixed_dirichlet_rows(np.random.default_rng(0), counts, 2, priors, np.ones((3, 5, 2)))


def test_row_weights_recover_how_deterministic_a_variable_is():
    # Empirical Bayes on many rows recovers the concentration the rows were drawn with (common practice, no
    # source): rows drawn from Dirichlet(0.01) put a row never seen on the smallest values of the grid, rows
    # drawn from Dirichlet(3) on the largest (summed over the symmetric and the centred candidates).
    rng = np.random.default_rng(0)
    n = len(AUTO_ALPHAS)
    for a, side in ((0.01, slice(0, 2)), (3.0, slice(4, 6))):
        rows = np.vstack([rng.multinomial(30, rng.dirichlet(np.full(3, a))) for _ in range(300)] + [np.zeros(3)])
        w = row_prior_weights(rows.astype(float))[:, -1]  # the unseen row keeps the variable's weights
        assert w.reshape(-1, n)[:, side].sum() > 0.8


def _rare_state_coverage(truth, counts, centres):
    """Share of the true probabilities of states 1.. inside the rows' 95% intervals, and the mean of the last state."""
    draws = mixed_dirichlet_rows(np.random.default_rng(0), counts, 4000, fit_row_priors(counts, centres=centres))
    lo, hi = np.quantile(draws, [0.025, 0.975], axis=0)
    return ((lo <= truth) & (truth <= hi))[:, 1:].mean(), draws.mean(axis=0)[:, -1].mean()


def test_rows_that_share_a_skewed_shape_get_calibrated_intervals():
    # Frequentist coverage of the posterior intervals when the rows come from one hierarchical prior (the check
    # behind simulation-based calibration, Cook, Gelman & Rubin 2006, J. Comput. Graph. Stat. 15: 675-692):
    # Dirichlet(8 m) with m = (0.85, 0.1, 0.04, 0.01), every row mostly in the first state (a cost variable
    # whose rows all lean low), 8 to 40 counts each, three draws of the rows. The centred candidates take the
    # weight, the rarest state's posterior means average its true probabilities, and 95% intervals hold the
    # truth about 95% of the time. Symmetric priors alone (centres=0) pull every rare state up: the rarest
    # state's mean is 1.5 to 2 times the truth and coverage is lower (seen on these seeds).
    m = np.array([0.85, 0.1, 0.04, 0.01])
    for seed in (3, 5, 6):
        rng = np.random.default_rng(seed)
        truth = rng.dirichlet(8 * m, size=400)
        counts = np.array([rng.multinomial(t, p) for t, p in zip(rng.integers(8, 41, size=400), truth)], dtype=float)
        assert row_prior_weights(counts)[len(AUTO_ALPHAS):].sum(axis=0).mean() > 0.8
        cover, mean = _rare_state_coverage(truth, counts, 2)
        assert 0.93 <= cover <= 0.985
        assert mean == pytest.approx(truth[:, 3].mean(), rel=0.25)
        cover_sym, mean_sym = _rare_state_coverage(truth, counts, 0)
        assert mean_sym > 1.4 * truth[:, 3].mean()
        assert cover_sym < cover


def _coverage(truth, counts, centres=None):
    """Per row and state: is the true probability inside the row's 95% posterior interval (4,000 draws)."""
    priors = fit_row_priors(counts) if centres is None else fit_row_priors(counts, centres=centres)
    draws = mixed_dirichlet_rows(np.random.default_rng(0), counts, 4000, priors)
    lo, hi = np.quantile(draws, [0.025, 0.975], axis=0)
    return (lo <= truth) & (truth <= hi)


def test_rows_in_groups_get_calibrated_intervals():
    # Rows in groups of opposite shapes (a parent switching the child), 3 to 14 counts each: two groups,
    # Dirichlet(20, 1, 1, 0.3) and Dirichlet(0.3, 1, 1, 20), then a third, Dirichlet(1, 20, 0.3, 1). A centre
    # shared by two groups is their average, a shape no row has, and makes the rare states overconfident: one
    # centre on two groups (coverage of the middle states about 0.85 to 0.91 seen), two centres on three groups
    # (overall about 0.94 against 0.97 for symmetric priors alone, 0.79 on one group's third state: an
    # independent review's simulation). The default centres cover as well as the symmetric priors alone, or
    # better. Frequentist coverage of the rows' true probabilities (common practice, no source).
    shapes = [[20, 1, 1, 0.3], [0.3, 1, 1, 20], [1, 20, 0.3, 1]]
    for groups, few in ((2, 1), (3, 2)):
        for seed in (1, 2):
            rng = np.random.default_rng(seed)
            truth = np.vstack([rng.dirichlet(shapes[g], 210 // groups) for g in range(groups)])
            counts = np.array([rng.multinomial(n, p) for n, p in zip(rng.integers(3, 15, len(truth)), truth)],
                              dtype=float)
            cover = _coverage(truth, counts)
            assert 0.94 <= cover.mean() <= 0.99
            assert cover.mean() >= _coverage(truth, counts, centres=0).mean() - 0.005
            assert cover.mean(axis=0).min() >= 0.93  # every state
            worst = _coverage(truth, counts, centres=few).mean(axis=0).min()
            assert worst < 0.93


def test_rows_take_their_shared_shapes_together_in_a_draw():
    # mixed_dirichlet_rows decides symmetric or centred once per draw (one uniform number compared with each row's
    # weight on the symmetric candidates): each row's own posterior is that of independent picks (a shared uniform
    # below p_r has probability p_r; common practice, no source), but an average over rows that lean on the shared
    # shape spreads as their picks move together. 40 rows seen 20 times at 0.9 / 0.1 make the centre; 20 rows seen
    # once in each state are unsure whether to follow it (about 0.12 of their weight on symmetric priors).
    counts = np.array([[18.0, 2.0]] * 40 + [[1.0, 1.0]] * 20)
    priors = fit_row_priors(counts)
    share = priors.weights[: len(AUTO_ALPHAS)].sum(axis=0)
    assert 0.05 < share[45] < 0.5
    draws = 4000
    together = mixed_dirichlet_rows(np.random.default_rng(0), counts, draws, priors)
    apart = np.stack([mixed_dirichlet_rows(np.random.default_rng(100 + r), counts, draws, priors)[:, r]
                      for r in range(counts.shape[0])], axis=1)  # each row from its own call: independent picks
    np.testing.assert_allclose(together.mean(axis=0), apart.mean(axis=0), atol=0.015)
    np.testing.assert_allclose(together.std(axis=0), apart.std(axis=0), atol=0.015)
    spread_together = together[:, 40:, 0].mean(axis=1).var()
    spread_apart = apart[:, 40:, 0].mean(axis=1).var()
    assert spread_together > 2.0 * spread_apart


def test_odd_rows_keep_their_symmetric_spread():
    # 190 rows sharing a skewed shape (Dirichlet(8 m), m = (0.85, 0.1, 0.04, 0.01)) and 10 odd rows near uniform
    # (Dirichlet(3, 3, 3, 3)), 3 to 20 counts each: the odd rows take the symmetric candidates and must keep
    # their coverage (a draw that gave a symmetric pick a centre's shape brought it to about 0.74 in an
    # independent review). Frequentist coverage as above (common practice, no source).
    odd = []
    for seed in range(3):
        rng = np.random.default_rng(1000 + seed)
        truth = np.vstack([rng.dirichlet(8 * np.array([0.85, 0.1, 0.04, 0.01]), 190), rng.dirichlet([3, 3, 3, 3], 10)])
        counts = np.array([rng.multinomial(n, p) for n, p in zip(rng.integers(3, 21, 200), truth)], dtype=float)
        odd.append(_coverage(truth, counts)[190:].mean())
    assert np.mean(odd) >= 0.9


def test_row_priors_of_a_large_table_are_fitted_on_a_sample():
    # Beyond max_rows seen rows the priors are fitted on a seeded sample: the rows left out make no centre (no
    # membership), every row still gets weights, and the intervals cover as the full fit's do (frequentist
    # coverage of the rows' true probabilities; common practice, no source).
    rng = np.random.default_rng(4)
    truth = rng.dirichlet([8, 1, 0.5, 0.2], size=3000)
    counts = np.array([rng.multinomial(n, p) for n, p in zip(rng.integers(5, 30, 3000), truth)], dtype=float)
    sample, full = fit_row_priors(counts, max_rows=500), fit_row_priors(counts, max_rows=10**9)
    assert ((sample.membership.sum(axis=0) > 0).sum() == 500) and (full.membership.sum(axis=0) > 0).all()
    assert sample.weights.shape == full.weights.shape
    np.testing.assert_allclose(sample.weights.sum(axis=0), 1.0)
    cover = []
    for priors in (sample, full):
        draws = mixed_dirichlet_rows(np.random.default_rng(0), counts, 1000, priors)
        lo, hi = np.quantile(draws, [0.025, 0.975], axis=0)
        cover.append(((lo <= truth) & (truth <= hi)).mean())
    assert abs(cover[0] - cover[1]) < 0.01 and 0.93 <= cover[0] <= 0.98
    assert fit_row_priors(counts, max_rows=500).weights == pytest.approx(sample.weights)  # the sample is seeded


def test_a_rare_row_seen_in_one_state_keeps_an_honest_spread():
    # A variable whose common row is nearly deterministic (985 / 5) and whose rare row was seen 10 times, all
    # in one state. One smoothing value for the variable (leave-one-out picks 0.01) makes the rare row's
    # posterior Beta(10.01, 0.01), whose 95% interval is [0.995, 1] (scipy.stats.beta): a true 0.9 would be
    # missed. Weighing the smoothing grid per row must reach below 0.9, the Jeffreys interval's lower bound
    # for 10 of 10 being 0.783 (Brown, Cai & DasGupta 2001, Statistical Science 16: 101-133), while the
    # common row, where the counts decide, keeps Beta(985.01, 5.01)'s interval.
    counts = np.array([[985.0, 5.0], [10.0, 0.0]])
    draws = mixed_dirichlet_rows(np.random.default_rng(0), counts, 40_000)
    lo, hi = np.quantile(draws[:, 1, 0], [0.025, 0.975])
    assert stats.beta.ppf(0.025, 10.01, 0.01) > 0.99
    assert stats.beta.ppf(0.025, 10.5, 0.5) - 0.05 < lo < 0.9 and hi > 0.9999
    np.testing.assert_allclose(np.quantile(draws[:, 0, 0], [0.025, 0.975]),
                               stats.beta.ppf([0.025, 0.975], 985.01, 5.01), atol=0.003)


def test_an_interval_always_holds_its_own_answer():
    # The point answer smooths every row of a variable with one leave-one-out value; the posterior weighs the
    # smoothing per row. A row seen 21 times in one state (random network, 300 rows) has its point at 0.846
    # (smoothed with 1.0) while the draws' 2.5% quantile is above 0.93: the bounds are widened to hold the
    # answer (an interval that excludes its own estimate reads as a contradiction; common practice, no source).
    net = ig.load_network("random:nodes=20,seed=4")
    est = PluginEstimator().fit(net.sample(300, seed=1), net.graph)
    d = est.query_interval("V07", do={"V09": "s4", "V11": "s0", "V18": "s0"}, seed=0)
    raw_lower = np.quantile(d.interval.samples, 0.025, axis=0, method="weibull")
    assert raw_lower[1] > d.probs[1] + 0.05  # the situation arises here
    assert np.all(d.interval.lower <= d.probs) and np.all(d.probs <= d.interval.upper)
    e = est.effect_interval("V07", "V09", "s4", "s0", "s1", given=None, seed=0)
    assert e.lower <= e.estimate <= e.upper
    iv = Interval(0.9, np.array([[0.5], [0.6], [0.7]]), "test", estimate=np.array([0.9]))
    assert iv.upper[0] == 0.9 and iv.lower[0] < 0.6
    contrast = Interval(0.9, np.array([0.1, 0.2, 0.3]), "test", estimate=-0.05)  # an effect contrast: a scalar
    assert contrast.lower == -0.05 and 0.2 < contrast.upper <= 0.3


def test_plugin_intervals_cover_the_exact_answers_most_of_the_time():
    # a small coverage check (the recorded one is experiments/bench/interval_coverage.py): on sachs with 2,000
    # rows, nominal 95% intervals on 20 do-queries must hold most exact probabilities (common practice, no source)
    from intervgnn.eval.queries import make_query_set

    net = ig.load_network("sachs")
    est = PluginEstimator().fit(net.sample(2000, seed=1), net.graph)
    inside = []
    for q in make_query_set(net, n=20, kinds=("do",), seed=0):
        d = est.query_interval(q.target, do=q.do_dict)
        inside.append(((q.exact.probs >= d.interval.lower) & (q.exact.probs <= d.interval.upper)).reshape(-1))
    share = np.concatenate(inside).mean()
    assert 0.85 <= share <= 1.0


def test_bootstrap_interval_effect_and_cache():
    # the default for estimators without a posterior: refits on resampled rows (here the back-door estimator)
    from intervgnn.estimators import BackdoorEstimator

    net = ig.load_network("cancer")
    rows = net.sample(1000, seed=0)
    est = BackdoorEstimator().fit(rows, net.graph)
    d = est.query_interval("Dyspnoea", do={"Smoker": "True"}, draws=12, seed=2)
    assert d.interval.method == "bootstrap" and d.interval.samples.shape == (12, 2)
    assert np.all(d.interval.lower <= d.interval.upper)
    first = est._bootstrap_refits[2]
    effect = est.effect_interval("Dyspnoea", "Smoker", "True", "False", "True", draws=12, seed=2)
    assert est._bootstrap_refits[2] is first  # the same refits answer both
    assert isinstance(effect, EffectEstimate)
    assert effect.lower <= effect.upper and 0.0 <= effect.positive <= 1.0
    assert effect.excludes_zero == (effect.lower > 0 or effect.upper < 0)
    assert effect.estimate == pytest.approx(est.effect("Dyspnoea", "Smoker", "True", "False", "True"))
    payload = effect.to_dict()
    assert payload["method"] == "bootstrap" and "probability_positive" in payload
    # the refits take the settings of the fit: a changed setting needs a refit before it counts (as for points)
    est.set_params(classifier="naive_bayes")
    est.query_interval("Dyspnoea", do={"Smoker": "True"}, draws=10, seed=7)
    assert all(r.classifier == "logistic" for r in est._bootstrap_refits[2])
    est.set_params(classifier="logistic")
    est.fit(rows, net.graph)  # a refit makes the kept refits stale
    est.query_interval("Dyspnoea", do={"Smoker": "True"}, draws=12, seed=2)
    assert est._bootstrap_refits[2] is not first


def test_neural_interval_draws_one_fold_decoder_at_a_time():
    # The decoder the neural prior centres on is the mean of the two cross-fitting folds' decoders; a draw takes
    # one fold's decoder for every variable (the delete-a-group jackknife's spread for two folds, common practice,
    # no source). With every variable's weight forced onto one very strong neural candidate, each drawn CPT is
    # its fold's decoder, so P(JohnCalls | do(Burglary=True, Earthquake=False)), which reads the Alarm and the
    # JohnCalls CPTs, lands on one of the two answers computed from a single fold's CPTs, both of them occur,
    # and never on a mix of the folds (Alarm from one fold, JohnCalls from the other).
    from intervgnn.models.shrinkage import Mixture

    net = ig.load_network("earthquake")
    est = NeuralEstimator(seed=0, steps=10).fit(net.sample(1000, seed=4), net.graph)
    counts, base, mix, shape = est._posterior["Alarm"]
    np.testing.assert_allclose(base, est._fold_bases["Alarm"].mean(axis=0))
    strong = Mixture(np.array([1e9]), np.array([0.01]), np.array([1.0]))
    for v, (c, b, _, sh) in list(est._posterior.items()):
        est._posterior[v] = (c, b, strong, sh)
    alarm, john = est._fold_bases["Alarm"], est._fold_bases["JohnCalls"]
    on = net.states["Alarm"].index("True"), net.states["JohnCalls"].index("True")
    row = net.states["Burglary"].index("True") * 2 + net.states["Earthquake"].index("False")  # Alarm's parents' row

    def answer(fa, fj):  # P(JohnCalls=True) from fold fa's Alarm row and fold fj's JohnCalls rows
        return sum(alarm[fa][row, a] * john[fj][a, on[1]] for a in range(2))

    pure = np.array([answer(0, 0), answer(1, 1)])
    mixed = np.array([answer(0, 1), answer(1, 0)])
    assert np.abs(pure[:, None] - mixed[None]).min() > 1e-4  # told apart here (a draw strays about 1e-5)
    d = est.query_interval("JohnCalls", do={"Burglary": "True", "Earthquake": "False"}, draws=400, seed=5)
    samples = d.interval.samples[:, on[1]]
    gap = np.abs(samples[:, None] - pure[None])
    assert gap.min(axis=1).max() < 5e-5
    assert set(np.argmin(gap, axis=1)) == {0, 1}


def test_neural_interval_is_drawn_from_the_shrinkage_posterior():
    # the neural answer is the mean of a Dirichlet posterior centred on the decoder (a mixture over strengths);
    # with the strength forced to zero (prior_counts=1: counts alone) the interval must equal the plug-in's
    # posterior interval (the plug-in's pieces are checked against scipy above)
    net = ig.load_network("cancer")
    rows = net.sample(1000, seed=0)
    est = NeuralEstimator(seed=0, steps=10).fit(rows, net.graph)
    d = est.query_interval("Dyspnoea", do={"Smoker": "True"}, seed=2)
    assert d.interval.method == "posterior" and d.interval.draws == 200
    assert np.all(d.interval.lower <= d.probs + 0.02) and np.all(d.probs - 0.02 <= d.interval.upper)
    effect = est.effect_interval("Dyspnoea", "Smoker", "True", "False", "True", seed=2)
    assert effect.interval.method == "posterior" and effect.lower <= effect.estimate + 0.01
    # earthquake at 1,000 rows: Burglary=True is rare and the alarm sounded every time (the exact answer
    # P(Alarm=True | do(Burglary=True)) is 0.94, from the network); with the variable's one leave-one-out
    # smoothing (0.01) the row's posterior is nearly a point (lower bound 0.989 with alpha=0.01); with the
    # smoothing weighed per row both estimators reach below the truth, and agree
    quake = ig.load_network("earthquake")
    few = quake.sample(1000, seed=4)
    ask = dict(target="Alarm", do={"Burglary": "True"}, draws=20_000)
    a = NeuralEstimator(seed=0, steps=10, prior_counts=1.0).fit(few, quake.graph).query_interval(**ask, seed=3).interval
    b = PluginEstimator().fit(few, quake.graph).query_interval(**ask, seed=4).interval
    one = PluginEstimator(alpha=0.01).fit(few, quake.graph).query_interval(**ask, seed=4).interval
    truth = quake.query(["Alarm"], do={"Burglary": "True"}).probs[0]
    assert one.lower[0] > truth and a.lower[0] < truth and b.lower[0] < truth
    np.testing.assert_allclose(a.lower, b.lower, atol=0.03)
    np.testing.assert_allclose(a.upper, b.upper, atol=0.03)
    loaded_like = NeuralEstimator(seed=0, steps=10, mode="monte_carlo").fit(rows.take(np.arange(300)), net.graph)
    assert loaded_like._interval_method() == "bootstrap"  # Monte Carlo mode has no tabulated posterior


def test_printing_and_json_carry_the_interval():
    samples = np.random.default_rng(0).dirichlet([25, 75], size=200)
    d = Distribution(["Pump"], [["day", "night"]], [0.25, 0.75], description="P(Pump)",
                     interval=Interval(0.9, samples, "posterior"))
    text = str(d)
    assert "90% interval" in text and " to " in text and "not the diagram's assumptions" in text
    assert d.to_dict()["interval"]["level"] == 0.9 and len(d.to_dict()["interval"]["lower"]) == 2
    with pytest.raises(QueryError, match="interval must be an Interval over probabilities of shape"):
        Distribution(["Pump"], [["day", "night"]], [0.25, 0.75], interval=Interval(0.9, samples[:, :1], "x"))


def test_bad_interval_settings_and_a_model_without_rows(tmp_path):
    net = ig.load_network("cancer")
    rows = net.sample(500, seed=0)
    est = PluginEstimator().fit(rows, net.graph)
    with pytest.raises(QueryError, match="level must be a number between 0 and 1, got 1.5"):
        est.query_interval("Xray", level=1.5)
    with pytest.raises(QueryError, match="draws must be a whole number from 20 to 100,000, got 5"):
        est.query_interval("Xray", draws=5)
    neural = NeuralEstimator(seed=0, steps=3).fit(rows, net.graph)
    neural.save(tmp_path / "m")
    loaded = NeuralEstimator.load(tmp_path / "m")  # exact mode: the posterior needs only the saved counts
    np.testing.assert_allclose(loaded.query_interval("Xray", seed=1).interval.lower,
                               neural.query_interval("Xray", seed=1).interval.lower)
    sampled = NeuralEstimator(seed=0, steps=3, mode="monte_carlo", mc_samples=2000).fit(rows, net.graph)
    sampled.save(tmp_path / "s")
    with pytest.raises(NotFittedError, match="no rows to resample"):
        NeuralEstimator.load(tmp_path / "s").query_interval("Xray", draws=10)


def test_cli_interval_and_effect(capsys):
    from intervgnn.cli import CAUTION, main

    base = ["estimate", "--network", "cancer", "--rows", "1500", "--estimator", "plugin", "--target", "Dyspnoea"]
    assert main(base + ["--do", "Smoker=True", "--interval", "0.9", "--draws", "100"]) == 0
    out = capsys.readouterr().out
    assert "90% interval" in out and "central 90% of 100 posterior draws" in out and CAUTION in out
    assert main(base + ["--effect", "Smoker=True,False", "--state", "True", "--json"]) == 0
    payload = __import__("json").loads(capsys.readouterr().out)
    assert set(payload["effect"]) >= {"estimate", "lower", "upper", "probability_positive", "interval_excludes_zero"}
    assert payload["caution"] == CAUTION
    for extra, message in [
        (["--effect", "Smoker=True"], "--effect expects TREATMENT=A,B, got 'Smoker=True'"),
        (["--effect", "Smoker=True,False"], "--effect needs one --target and the target's --state"),
        (["--effect", "Smoker=True,False", "--state", "True", "--do", "Pollution=low"], "leave --do out"),
        (["--do", "Smoker=True", "--interval", "2"], "level must be a number between 0 and 1, got 2.0"),
    ]:
        assert main(base + extra) == 2
        err = capsys.readouterr().err
        assert message in err and "Traceback" not in err


def test_a_query_that_is_not_identifiable_gets_no_interval():
    # the bow-arc X <-> Y with X -> Y: P(Y | do(X)) is not identifiable (Pearl 2009, Causality, ch. 3; from
    # memory); an interval would pretend the rows narrow it down
    from intervgnn import NotIdentified

    net = ig.load_network("cancer")
    graph = ig.CausalGraph([("Smoker", "Cancer"), ("Pollution", "Cancer"), ("Cancer", "Xray"),
                            ("Cancer", "Dyspnoea")], bidirected=[("Smoker", "Cancer")])
    rows = net.sample(800, seed=0)
    est = PluginEstimator().fit(rows, graph)
    with pytest.raises(NotIdentified):
        est.query_interval("Cancer", do={"Smoker": "True"})
    neural = NeuralEstimator(seed=0, steps=3, latent_steps=20, latent_restarts=1, unidentified="answer").fit(rows, graph)
    assert neural.query("Cancer", do={"Smoker": "True"}).identified is False
    with pytest.raises(NotIdentified):
        neural.query_interval("Cancer", do={"Smoker": "True"})


def test_sweeps_score_intervals_with_coverage_and_width(tmp_path, capsys):
    import csv

    from intervgnn import ConfigError
    from intervgnn.cli import main
    from intervgnn.harness import load_config

    config = tmp_path / "iv.yaml"
    config.write_text(f"""
name: iv
output: {tmp_path / 'out'}
networks: [cancer]
rows: [500]
seeds: [0, 1]
queries: {{count: 4, kinds: [do], seed: 0}}
estimators: [plugin, naive]
metrics: [tv, coverage, width]
intervals: {{level: 0.9, draws: 60}}
""")
    assert main(["run", str(config), "--quiet"]) == 0
    capsys.readouterr()
    with open(tmp_path / "out" / "summary.csv", newline="") as fh:
        rows = [r for r in csv.DictReader(fh) if r["metric"] in ("coverage", "width") and r["subset"] == "all"]
    assert {(r["estimator"], r["metric"]) for r in rows} == {("plugin", "coverage"), ("plugin", "width"),
                                                            ("naive", "coverage"), ("naive", "width")}
    assert all(0.0 <= float(r["mean"]) <= 1.0 for r in rows)
    assert (tmp_path / "out" / "plots" / "coverage_vs_rows.png").stat().st_size > 1000
    text = (tmp_path / "out" / "summary.md").read_text()
    assert "share of exact probabilities inside the 90% interval" in text
    base = {"name": "x", "networks": ["cancer"], "rows": [100], "seeds": [0], "estimators": ["plugin"]}
    from intervgnn.harness.config import parse_config

    for extra, message in [
        ({"metrics": ["coverage"]}, "metrics: 'coverage' scores the answers' intervals; add an 'intervals' setting"),
        ({"intervals": {"level": 1.2}}, "intervals.level: expected a number between 0 and 1, got 1.2"),
        ({"intervals": {"draws": 5}}, "intervals.draws"),
        ({"intervals": {"levle": 0.9}}, "did you mean 'level'"),
    ]:
        with pytest.raises(ConfigError, match=re.escape(message)):
            parse_config({**base, **extra})
    assert load_config(config).interval_level == 0.9


def _bow_rows(arm_rows: int, seed: int = 0):
    # cancer's rows with a hidden common cause declared between Smoker and Cancer (the bow-arc: P(Cancer |
    # do(Smoker)) is not identifiable from observational rows), plus experiments that set Smoker
    net = ig.load_network("cancer")
    graph = ig.CausalGraph([("Smoker", "Cancer"), ("Pollution", "Cancer"), ("Cancer", "Xray"),
                            ("Cancer", "Dyspnoea")], bidirected=[("Smoker", "Cancer")])
    parts = [net.sample(800, seed=seed),
             net.sample(arm_rows, do={"Smoker": "True"}, seed=seed + 1),
             net.sample(arm_rows, do={"Smoker": "False"}, seed=seed + 2),
             # rows of another experiment (Smoker and Pollution both set) answer another query: not counted
             net.sample(50, do={"Smoker": "True", "Pollution": "high"}, seed=seed + 3)]
    return net, graph, ig.Table.concat(parts)


def test_experimental_rows_give_a_query_that_is_not_identifiable_its_interval():
    from scipy.stats import beta

    net, graph, rows = _bow_rows(60)
    est = PluginEstimator().fit(rows, graph)
    d = est.query_interval("Cancer", do={"Smoker": "True"}, draws=40_000, seed=3)
    # the rows counted by hand: Smoker set alone, to True
    smoker, cancer = rows.variables.index("Smoker"), rows.variables.index("Cancer")
    alone = rows.intervened[:, smoker] & (rows.intervened.sum(axis=1) == 1)
    arm = alone & (rows.codes[:, smoker] == rows.states["Smoker"].index("True"))
    n = int(arm.sum())
    k = int((rows.codes[arm, cancer] == rows.states["Cancer"].index("True")).sum())
    assert n == 60 and d.experimental_rows == 60 and "from the 60 experimental rows that set Smoker=True" in d.description
    # Jeffreys interval for a proportion (Brown, Cai & DasGupta 2001, Statistical Science 16:101-133; from
    # memory): the Beta(k + 1/2, n - k + 1/2) quantiles, here from scipy; the posterior mean (k + 1/2) / (n + 1)
    assert d["True"] == pytest.approx((k + 0.5) / (n + 1))
    t = rows.states["Cancer"].index("True")
    assert d.interval.lower[t] == pytest.approx(beta.ppf(0.025, k + 0.5, n - k + 0.5), abs=0.004)
    assert d.interval.upper[t] == pytest.approx(beta.ppf(0.975, k + 0.5, n - k + 0.5), abs=0.004)
    assert d.interval.method == "experimental posterior" and "not identifiable from the observational rows" in d.description
    assert d.identified is None  # the experiment answers it, not the diagram
    assert est.experimental_rows({"Smoker": "True"}) == 60
    g = est.query_interval("Cancer", do={"Smoker": "True"}, given={"Xray": "positive"})
    assert f"from the {g.experimental_rows} experimental rows that set Smoker=True and have Xray=positive" in g.description
    assert g.experimental_rows == est.experimental_rows({"Smoker": "True"}, {"Xray": "positive"}) < 60
    # the neural estimator, which refuses the query by default, gets the same answer from the same rows
    neural = NeuralEstimator(seed=0, steps=3, latent_steps=20, latent_restarts=1).fit(rows, graph)
    nd = neural.query_interval("Cancer", do={"Smoker": "True"}, draws=40_000, seed=3)
    np.testing.assert_allclose(nd.probs, d.probs)
    np.testing.assert_allclose(nd.interval.lower, d.interval.lower)


def test_the_experimental_interval_narrows_only_as_experimental_rows_accumulate():
    widths = {}
    for arm_rows in (30, 300):
        net, graph, rows = _bow_rows(arm_rows)
        d = PluginEstimator().fit(rows, graph).query_interval("Cancer", do={"Smoker": "True"})
        widths[arm_rows] = float(d.interval.upper[0] - d.interval.lower[0])
        truth = net.query("Cancer", do={"Smoker": "True"})
        assert ((d.interval.lower <= truth.probs) & (truth.probs <= d.interval.upper)).all()
    # the Jeffreys interval's width falls about as 1 / sqrt(n) (common practice, no source): ten times the rows,
    # about a third of the width
    assert 2.0 < widths[30] / widths[300] < 4.5


def test_an_effect_from_experimental_rows_and_a_refusal_without_them():
    from intervgnn import NotIdentified

    _, graph, rows = _bow_rows(200)
    est = PluginEstimator().fit(rows, graph)
    e = est.effect_interval("Cancer", "Smoker", "True", "False", "True", draws=4000, seed=0)
    a = est.experimental_answer("Cancer", do={"Smoker": "True"})
    b = est.experimental_answer("Cancer", do={"Smoker": "False"})
    assert e.estimate == pytest.approx(a["True"] - b["True"])
    assert "from 200/200 experimental rows alone" in e.description
    assert e.lower < e.estimate < e.upper and 0.0 <= e.positive <= 1.0
    same = est.effect_interval("Cancer", "Smoker", "True", "True", "True")  # one arm: exactly no effect
    assert same.estimate == same.lower == same.upper == 0.0
    # no experiment set Pollution alone: still refused, with the hedge
    with pytest.raises(NotIdentified):
        est.query_interval("Cancer", do={"Smoker": "True", "Pollution": "low"})
    observational = PluginEstimator().fit(rows.observational_rows(), graph)
    assert observational.experimental_answer("Cancer", do={"Smoker": "True"}) is None
    with pytest.raises(NotIdentified):
        observational.effect_interval("Cancer", "Smoker", "True", "False", "True")


def test_cli_answers_a_query_that_is_not_identifiable_from_its_experimental_rows(tmp_path, capsys):
    from intervgnn.cli import CAUTION, EXIT_NOT_IDENTIFIABLE, main

    _, _, rows = _bow_rows(80)
    rows.to_csv(tmp_path / "rows.csv")
    (tmp_path / "g.yaml").write_text(
        "edges:\n  - [Smoker, Cancer]\n  - [Pollution, Cancer]\n  - [Cancer, Xray]\n  - [Cancer, Dyspnoea]\n"
        "confounded:\n  - [Smoker, Cancer]\n"
    )
    base = ["estimate", "--data", str(tmp_path / "rows.csv"), "--graph", str(tmp_path / "g.yaml"),
            "--estimator", "plugin", "--target", "Cancer", "--do", "Smoker=True"]
    assert main(base) == EXIT_NOT_IDENTIFIABLE
    out = capsys.readouterr().out
    assert "80 experimental rows set exactly Smoker=True: --interval answers from them alone." in out
    assert main(base + ["--interval"]) == 0
    out = capsys.readouterr().out
    assert "from the 80 experimental rows that set Smoker=True alone" in out and "95% interval" in out
    assert "experimental posterior draws" in out and CAUTION in out


def test_csv_carries_the_bounds(tmp_path, capsys):
    import csv

    from intervgnn.cli import main

    net = ig.load_network("cancer")
    est = PluginEstimator().fit(net.sample(1500, seed=0), net.graph)
    d = est.query_interval("Dyspnoea", do={"Smoker": "True"}, draws=100)
    d.to_csv(tmp_path / "d.csv")
    with open(tmp_path / "d.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["Dyspnoea"] for r in rows] == ["True", "False"]
    for r, p, lo, hi in zip(rows, d.probs, d.interval.lower, d.interval.upper):
        assert float(r["probability"]) == p and float(r["lower"]) == lo and float(r["upper"]) == hi
        assert r["level"] == "0.95" and r["method"] == "posterior"
    e = est.effect_interval("Dyspnoea", "Smoker", "True", "False", "True", draws=100)
    e.to_csv(tmp_path / "e.csv")
    with open(tmp_path / "e.csv", newline="") as fh:
        (row,) = list(csv.DictReader(fh))
    assert float(row["estimate"]) == e.estimate and row["interval_excludes_zero"] == str(e.excludes_zero)
    # the command line writes the same, and refuses an unwritable file before fitting
    base = ["estimate", "--network", "cancer", "--rows", "1500", "--estimator", "plugin", "--target", "Dyspnoea"]
    assert main(base + ["--do", "Smoker=True", "--interval", "--csv", str(tmp_path / "c.csv")]) == 0
    capsys.readouterr()
    header = (tmp_path / "c.csv").read_text().splitlines()[0]
    assert header == "Dyspnoea,probability,lower,upper,level,method"
    assert main(base + ["--do", "Smoker=True", "--csv", str(tmp_path / "missing" / "c.csv")]) == 2
    assert "--csv: cannot write" in capsys.readouterr().err


def test_a_probability_the_counts_make_zero_keeps_zero_inside_its_interval():
    # Pump -> Alarm where a stopped pump never raises the alarm in the rows (and the network: a structural
    # zero). Every posterior draw is strictly inside the simplex, so its quantiles alone would exclude 0; the
    # bound is widened to the counts-only answer, 0 -- the modified Jeffreys rule for one proportion, lower
    # bound 0 when no success is seen (Brown, Cai & DasGupta 2001, Statistical Science 16:101-133; from memory)
    from intervgnn.bn.network import CausalNetwork

    graph = ig.CausalGraph([("Pump", "Alarm")])
    states = {"Pump": ["running", "stopped"], "Alarm": ["on", "off"]}
    cpts = {"Pump": np.array([0.7, 0.3]), "Alarm": np.array([[0.2, 0.8], [0.0, 1.0]])}
    net = CausalNetwork(graph, states, cpts)
    rows = net.sample(400, seed=0)
    for est in (PluginEstimator(), NeuralEstimator(seed=0, steps=5)):
        est.fit(rows, graph)
        d = est.query_interval("Alarm", do={"Pump": "stopped"}, draws=200)
        assert d.interval.samples[:, 0].min() > 0.0  # no draw reaches the boundary
        assert d.interval.lower[0] == 0.0 and d.interval.upper[1] == 1.0
        assert 0.0 < d.interval.upper[0] < 0.05
        # an answer the counts put inside (0, 1) keeps its quantile bounds, even where the counts-only
        # answer lies outside them (heavy smoothing, few rows)
        r = est.query_interval("Alarm", do={"Pump": "running"}, draws=200)
        np.testing.assert_allclose(r.interval.lower, np.quantile(r.interval.samples, 0.025, axis=0, method="weibull"))
        e = est.effect_interval("Alarm", "Pump", "running", "stopped", "on", draws=200)
        assert e.lower > 0.1 and e.excludes_zero
    heavy = PluginEstimator(alpha=300.0).fit(rows.take(np.arange(30)), graph)
    h = heavy.query_interval("Alarm", do={"Pump": "running"}, draws=200)
    counts_only = heavy._interval_include([("Alarm", {"Pump": "running"}, None)])[0]
    assert np.isnan(counts_only).all()  # not at 0 or 1: no widening
    np.testing.assert_allclose(h.interval.upper, np.quantile(h.interval.samples, 0.975, axis=0, method="weibull"))


def test_a_row_never_seen_leaves_room_for_zero_and_one():
    # Valve -> Alarm <- Pump, Alarm never on while the pump is stopped (a structural zero), and a stopped pump
    # with a shut valve never in the rows. The rows say nothing about that row: the likelihood is flat in it, so
    # putting it on "off" fits them as well as the counts-only answer, which spreads it uniformly. With it on
    # "off", P(Alarm=on | do(Pump=stopped)) is exactly 0; on "on", P(Alarm=off | ...) is not 1, so only the lower
    # bound of "on" and the upper bound of "off" go to the boundary. For one proportion this is the modified
    # Jeffreys rule (x = 0 and x = n both hold for n = 0; Brown, Cai & DasGupta 2001, Statistical Science
    # 16:101-133; from memory). The quantiles alone stay above 0 (every drawn row is inside the simplex).
    from intervgnn.bn.network import CausalNetwork

    graph = ig.CausalGraph([("Pump", "Alarm"), ("Valve", "Alarm")])
    states = {"Pump": ["running", "stopped"], "Valve": ["open", "shut"], "Alarm": ["on", "off"]}
    cpts = {"Pump": np.array([0.7, 0.3]), "Valve": np.array([0.9, 0.1]),
            "Alarm": np.array([[[0.3, 0.7], [0.6, 0.4]], [[0.0, 1.0], [0.0, 1.0]]])}
    rows = CausalNetwork(graph, states, cpts).sample(600, seed=0)
    pump, valve = (np.asarray(rows.column(v)) for v in ("Pump", "Valve"))
    rows = rows.take(np.flatnonzero(~((pump == 1) & (valve == 1))))  # the (stopped, shut) row never seen
    for est in (PluginEstimator(), NeuralEstimator(seed=0, steps=5)):
        est.fit(rows, graph)
        d = est.query_interval("Alarm", do={"Pump": "stopped"}, draws=200)
        assert np.quantile(d.interval.samples[:, 0], 0.025, method="weibull") > 0.0
        assert d.interval.lower[0] == 0.0 and d.interval.upper[1] == 1.0
        assert d.interval.upper[0] < 1.0 and d.interval.lower[1] > 0.0
        # "on" was widened (its quantile was above 0); "off"'s draws reach 1.0 in floating point on their own
        assert d.interval.widened[0] and d.to_dict()["interval"]["widened"][0] is True
        assert "0.0000 to " in str(d) and "* a bound moved to 0 or 1" in str(d)
        layers = est._interval_include([("Alarm", {"Pump": "stopped"}, None)])[0]
        assert np.isnan(layers[0]).all()  # the counts-only answer (the unseen row uniform) is inside (0, 1)
        assert est._interval_include([("Alarm", {"Pump": "running"}, None)])[0].shape == (3, 2)
        # a row seen in both states widens nothing
        r = est.query_interval("Alarm", do={"Pump": "running"}, draws=200)
        np.testing.assert_allclose(r.interval.lower, np.quantile(r.interval.samples, 0.025, axis=0, method="weibull"))
        np.testing.assert_allclose(r.interval.upper, np.quantile(r.interval.samples, 0.975, axis=0, method="weibull"))
        assert not r.interval.widened.any() and "*" not in str(r)


def test_a_widened_bound_is_marked_in_every_view():
    # the mark follows the bound in a full table, in a shortened one and in an effect contrast; unmarked bounds
    # stay aligned with marked ones (common practice, no source)
    rng = np.random.default_rng(0)
    alpha = np.ones(60)
    alpha[:3] = 20.0  # s0, s1, s2 the largest: the ones a shortened table shows
    samples = rng.dirichlet(alpha, size=200)
    states = [[f"s{i}" for i in range(60)]]

    def table(marked, **kw):
        include = np.full(60, np.nan)
        include[marked] = 0.0
        d = Distribution(["V"], states, samples.mean(axis=0), interval=Interval(0.95, samples, "posterior", include))
        lines = d.format(**kw).splitlines()
        return d, [line for line in lines if line.startswith("s")], lines[-1]

    d, rows, last = table([0, 1, 2, 40], max_rows=None)
    assert d.interval.widened.tolist() == [i in (0, 1, 2, 40) for i in range(60)]
    assert [line.split()[0] for line in rows if line.endswith("*")] == ["s0", "s1", "s2", "s40"]
    assert len({line.index(" to ") for line in rows}) == 1 and last.startswith("* a bound moved to 0 or 1")
    _, shown, last = table([0, 40], max_rows=50, show=3)
    assert [line.split()[0] for line in shown if line.endswith("*")] == ["s0"] and len(shown) == 3
    assert last.startswith("* a bound moved")
    _, shown, last = table([40], max_rows=50, show=3)  # the widened entry is not shown: no mark, no footnote
    assert not any(line.endswith("*") for line in shown) and not last.startswith("*")
    e = EffectEstimate("c", 0.5, Interval(0.95, rng.normal(0.5, 0.1, 200), "posterior", 1.0, estimate=0.5))
    assert e.upper == 1.0 and e.to_dict()["widened"] is True and "a bound moved" in str(e)
    plain = EffectEstimate("c", 0.5, Interval(0.95, rng.normal(0.5, 0.1, 200), "posterior", estimate=0.5))
    assert plain.to_dict()["widened"] is False and "a bound moved" not in str(plain)


def test_interval_bounds_hold_the_level_of_the_distribution_they_were_drawn_from():
    # The k-th smallest of n draws lies on average at the k / (n + 1) quantile of their distribution (the mean
    # of the uniform order statistics; David & Nagaraja 2003, Order Statistics, section 2.2; from memory). Bounds
    # at positions p (n + 1) (Hyndman & Fan 1996, The American Statistician 50:361-365, definition 6) therefore
    # hold a further draw from the same distribution with probability level; numpy's default positions
    # 1 + p (n - 1) hold it with (1 - 2 p) (n - 1) / (n + 1): 0.913 at 50 draws, 0.941 at 200.
    rng = np.random.default_rng(0)
    for n in (50, 200):
        default = 0.95 * (n - 1) / (n + 1)
        draws = rng.random((20_000, n + 1))
        iv = Interval(0.95, draws[:, 1:].T, "posterior")
        inside = (iv.lower <= draws[:, 0]) & (draws[:, 0] <= iv.upper)
        assert abs(inside.mean() - 0.95) < 0.005
        lo, hi = np.quantile(draws[:, 1:], [0.025, 0.975], axis=1)
        assert abs(((lo <= draws[:, 0]) & (draws[:, 0] <= hi)).mean() - default) < 0.006


def test_each_draw_held_out_is_covered_on_exactly_the_level_of_the_draws():
    # experiments/bench/coverage_spread.py takes each posterior draw in turn as the truth and the interval of the
    # others. By the rank argument (common practice, no source): with n draws and (1 - level) n / 2 = h whole, the
    # bounds of the n - 1 others at positions p n are their h-th smallest and largest, so a draw of rank r among all
    # n falls below the lower bound exactly when r <= h: every column is covered on exactly 1 - 2h / n of its draws.
    import importlib.util
    import pathlib

    path = pathlib.Path(__file__).parents[1] / "experiments" / "bench" / "coverage_spread.py"
    spec = importlib.util.spec_from_file_location("coverage_spread", path)
    bench = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(bench)
    rng = np.random.default_rng(3)
    samples = rng.beta(2.0, 5.0, size=(200, 7))
    c = bench.held_out_coverage(samples, 0.95)
    assert c.shape == (200, 7)
    np.testing.assert_array_equal(c.sum(axis=0), np.full(7, 190))  # h = 5 below and 5 above, in every column
    # three seeds' figures: one held-out draw per seed, every probability of the three counted once
    figs = bench.three_seed([c, c[:, :3], c[:, 3:]], np.random.default_rng(0).integers(200, size=(4000, 3)))
    assert abs(figs.mean() - 0.95) < 0.002 and figs.min() < 0.95 < figs.max()
    pooled = bench.three_seed([np.array([[True, True]]), np.array([[False, False, False, True]])], np.zeros((1, 2), int))
    assert pooled[0] == 0.5  # 3 of 6 probabilities; the mean of the seeds' own shares would be 0.625
    # the recorded run's three-seed subsets: seeds at 0.90, 0.95, 1.00, 0.95 give 0.95 (seeds 0 1 2), 0.933 (0 1 3),
    # 0.95 (0 2 3) and 0.967 (1 2 3); the confounded shares of the two at 0.95 are 29 / 30 and 27 / 30
    record = {"per_seed_coverage": [0.90, 0.95, 1.00, 0.95], "per_seed_confounded": [[9, 10], [10, 10], [10, 10], [8, 10]]}
    assert bench.recorded_windows(record, 3, (0.94, 0.96), (0.95, 0.99)) == (0.5, 0.25)
    assert bench.recorded_windows(record, 3, (0.94, 0.96), (0.97, 0.99)) == (0.5, 0.0)


def test_csv_refuses_a_clashing_name_and_marks_an_unidentified_answer(tmp_path):
    from intervgnn import WriteError

    d = Distribution(["probability"], [["a", "b"]], [0.5, 0.5])
    with pytest.raises(QueryError, match="the variable 'probability' has the name of a fixed column"):
        d.to_csv(tmp_path / "x.csv")
    u = Distribution(["Y"], [["a", "b"]], [0.5, 0.5], identified=False)
    u.to_csv(tmp_path / "u.csv")
    assert (tmp_path / "u.csv").read_text().splitlines() == ["Y,probability,identified", "a,0.5,no", "b,0.5,no"]
    with pytest.raises(WriteError, match="cannot write the file"):
        u.to_csv(tmp_path / "missing" / "u.csv")
