"""The VGAE with one shared latent per confounded component."""

from __future__ import annotations

import numpy as np
import pytest
import torch

import intervgnn as ig
from intervgnn import CausalGraph, CausalNetwork, NotIdentified
from intervgnn.estimators import NeuralEstimator
from intervgnn.eval import total_variation
from intervgnn.models import InterventionalVGAE, elbo_terms


def front_door_world(seed=0):
    """A front-door diagram X -> M -> Y with a hidden U -> X, U -> Y (CPTs drawn once, seeded)."""
    rng = np.random.default_rng(seed)
    full = CausalGraph([("U", "X"), ("U", "Y"), ("X", "M"), ("M", "Y")], nodes=["U", "X", "M", "Y"])
    states = {v: ["a", "b"] for v in full.nodes}
    cpts = {
        "U": [0.4, 0.6],
        "X": [[0.85, 0.15], [0.2, 0.8]],
        "M": [[0.9, 0.1], [0.25, 0.75]],
        "Y": [[[0.8, 0.2], [0.35, 0.65]], [[0.55, 0.45], [0.1, 0.9]]],  # axes U, M, Y
    }
    return CausalNetwork(full, states, cpts), full.project_out(["U"])


def test_groups_latents_and_cut():
    net, observed = front_door_world()
    index = {v: i for i, v in enumerate(observed.nodes)}
    groups = [[index[v] for v in c] for c in observed.c_components() if len(c) > 1]
    assert groups == [[index["X"], index["Y"]]]
    torch.manual_seed(0)
    m = InterventionalVGAE([2, 2, 2], observed.edge_index, groups=groups, u_states=3).eval()
    codes = torch.as_tensor(net.sample(6, seed=0).select(observed.nodes).codes.copy())
    logits, lat = m(codes, None)
    assert logits.shape == (6, 3, 3, 2) and lat.group_logprior.shape == (1, 3)
    # the u-part of the ELBO is the exact log-marginal over the latent's states
    # (common practice, no source: Bayes' rule over a finite latent)
    elbo, ll, kl = elbo_terms(logits, codes, lat, None)
    torch.testing.assert_close(elbo, ll - kl)
    logp = torch.log_softmax(logits, -1).gather(-1, codes[:, None, :, None].expand(6, 3, 3, 1)).squeeze(-1)
    members = logp[:, :, [index["X"], index["Y"]]].sum(-1) + lat.group_logprior[0]
    by_hand = logp[:, 0, index["M"]] + torch.logsumexp(members, dim=1) - torch.distributions.kl_divergence(
        torch.distributions.Normal(lat.mu, lat.logstd.exp()), torch.distributions.Normal(0.0, 1.0)).sum((-1, -2))
    torch.testing.assert_close(elbo, by_hand)
    # with every member intervened the group contributes neither likelihood nor KL
    mask = torch.zeros(6, 3, dtype=torch.bool)
    mask[:, [index["X"], index["Y"]]] = True
    logits_cut, lat_cut = m(codes, mask)
    elbo_cut, ll_cut, kl_cut = elbo_terms(logits_cut, codes, lat_cut, mask)
    only_m = torch.log_softmax(logits_cut[:, 0, index["M"]], -1).gather(-1, codes[:, index["M"], None]).squeeze(-1)
    torch.testing.assert_close(ll_cut, only_m)
    # an intervened member does not hear the group latent; a non-intervened one does
    z = m.prior_sample(6, torch.Generator().manual_seed(1))
    only_x = torch.zeros(6, 3, dtype=torch.bool)
    only_x[:, index["X"]] = True
    u0, u2 = torch.zeros(6, 1, dtype=torch.long), torch.full((6, 1), 2, dtype=torch.long)
    a, b = m.decode(codes, z, only_x, u0), m.decode(codes, z, only_x, u2)
    assert torch.equal(a[:, index["X"]], b[:, index["X"]])
    assert not torch.allclose(a[:, index["Y"]], b[:, index["Y"]])


@pytest.fixture(scope="module")
def front_door_fit():
    net, observed = front_door_world()
    rows = net.sample(20_000, seed=1).select(observed.nodes)
    est = NeuralEstimator(seed=0).fit(rows, observed)
    return net, observed, rows, est


def test_front_door_answer_respects_hidden_confounding(front_door_fit):
    # identifiable by the front-door formula (Pearl 2009, Sec. 3.3.2); the naive reading is confounded
    net, observed, rows, est = front_door_fit
    assert est.model_.num_groups == 1 and est.answer_mode_ == "exact"
    for x in ("a", "b"):
        exact = net.query("Y", do={"X": x})
        naive = net.query("Y", given={"X": x})
        got = est.query("Y", do={"X": x})
        assert got.identified is True
        assert total_variation(naive, exact) > 0.05  # the hidden cause matters here
        assert total_variation(got, exact) < 0.03, (x, got.probs, exact.probs)


def test_not_identified_is_refused_or_marked():
    # the bow: X -> Y with a hidden common cause (Pearl 2009, Sec. 3.5)
    full = CausalGraph([("U", "X"), ("U", "Y"), ("X", "Y")], nodes=["U", "X", "Y"])
    states = {v: ["a", "b"] for v in full.nodes}
    cpts = {"U": [0.5, 0.5], "X": [[0.8, 0.2], [0.2, 0.8]], "Y": [[[0.9, 0.1], [0.6, 0.4]], [[0.4, 0.6], [0.1, 0.9]]]}
    net = CausalNetwork(full, states, cpts)
    bow = full.project_out(["U"])
    obs = net.sample(4000, seed=0).select(bow.nodes)
    est = NeuralEstimator(seed=0).fit(obs, bow)
    with pytest.raises(NotIdentified, match=r"P\(Y \| do\(X\)\) is not identifiable") as info:
        est.query("Y", do={"X": "a"})
    assert info.value.identification.hedge == (("X", "Y"), ("Y",))
    marked = NeuralEstimator(seed=0, unidentified="answer").fit(obs, bow).query("Y", do={"X": "a"})
    assert marked.identified is False and "NOT IDENTIFIED" in str(marked)


def test_experimental_rows_pin_down_a_non_identified_query():
    # With rows where X was set by experiment, the regime-aware ELBO learns
    # P(Y | do(X)) although it is not identifiable from observational rows alone.
    full = CausalGraph([("U", "X"), ("U", "Y"), ("X", "Y")], nodes=["U", "X", "Y"])
    states = {v: ["a", "b"] for v in full.nodes}
    cpts = {"U": [0.5, 0.5], "X": [[0.85, 0.15], [0.15, 0.85]], "Y": [[[0.9, 0.1], [0.6, 0.4]], [[0.45, 0.55], [0.1, 0.9]]]}
    net = CausalNetwork(full, states, cpts)
    bow = full.project_out(["U"])
    obs = net.sample(6000, seed=0)
    exp = ig.Table.concat([net.sample(1500, do={"X": s}, seed=i + 1) for i, s in enumerate(["a", "b"])])
    rows = ig.Table.concat([obs, exp]).select(bow.nodes)
    est = NeuralEstimator(seed=0, unidentified="answer").fit(rows, bow)
    for x in ("a", "b"):
        exact = net.query("Y", do={"X": x})
        assert total_variation(est.query("Y", do={"X": x}), exact) < 0.03


def test_same_seed_same_latent_model_with_two_threads():
    # Same seed -> bit-identical weights and answers, also with two torch
    # threads (common practice, no source: a seeded run must repeat). The
    # group latents' lookup once went through advanced indexing, whose
    # accumulating backward sums in a thread-dependent order.
    net, observed = front_door_world()
    rows = net.sample(4000, seed=2).select(observed.nodes)
    threads = torch.get_num_threads()
    fits = [NeuralEstimator(seed=3, steps=6, latent_steps=6, threads=2).fit(rows, observed) for _ in range(3)]
    assert torch.get_num_threads() == threads  # the setting applies while fitting only
    assert set(fits[0].models_) == {"fold0", "fold1", "all"}  # M is outside the component: cross-fitted
    for other in fits[1:]:
        for key, model in other.models_.items():
            first = fits[0].models_[key].state_dict()
            for k, v in model.state_dict().items():
                assert torch.equal(v, first[k]), (key, k)
        assert np.array_equal(other.query("Y", do={"X": "a"}).probs, fits[0].query("Y", do={"X": "a"}).probs)


def test_monte_carlo_mode_with_hidden_causes_agrees_with_exact_mode(front_door_fit):
    # the same learned state answered by ancestral sampling (members hear a
    # latent drawn from its prior, free nodes follow the shrunk counts)
    net, observed, rows, est = front_door_fit
    mc = NeuralEstimator(**{**est.get_params(), "mode": "monte_carlo", "mc_samples": 50_000})
    mc.graph_, mc.states_, mc.models_, mc.cells_, mc.n_rows_ = est.graph_, est.states_, est.models_, est.cells_, est.n_rows_
    mc._prepare_answers()
    assert mc.answer_mode_ == "monte_carlo" and mc.network_ is None
    for target, do, given in [("Y", {"X": "a"}, {}), ("Y", {"X": "b"}, {}), ("M", {"X": "a"}, {"Y": "b"})]:
        # 50,000 weighted samples: standard error below 0.005 on these probabilities
        assert total_variation(est.query(target, do=do, given=given), mc.query(target, do=do, given=given)) < 0.02


def test_every_member_set_in_every_row():
    # no row generates X or Y from their mechanisms: the latent model has no
    # cell to learn from, and the fit must still work (and answer from the rest)
    net, observed = front_door_world()
    rows = net.sample(300, do={"X": "a", "Y": "b"}, seed=0).select(observed.nodes)
    est = NeuralEstimator(seed=0, steps=5, latent_steps=20, unidentified="answer").fit(rows, observed)
    assert est.cells_.count[est.cells_.node == observed.index("M")].sum() == 300
    got = est.query("M", do={"X": "a"})
    assert total_variation(got, net.query("M", do={"X": "a"})) < 0.1
