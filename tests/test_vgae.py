"""The interventional VGAE: shapes, factorisation along the graph, the ELBO's regime handling."""

from __future__ import annotations

import numpy as np
import pytest
import torch

import intervgnn as ig
from intervgnn.estimators import NeuralEstimator
from intervgnn.models import InterventionalVGAE, elbo_terms

from .conftest import our_network


def model_for(net, **kw):
    torch.manual_seed(0)
    return InterventionalVGAE([len(net.states[v]) for v in net.variables], net.graph.edge_index, **kw)


def test_shapes_and_padding():
    net = our_network("survey")  # 2- and 3-state variables
    m = model_for(net, dim=8, hidden=16, z_dim=3)
    rows = net.sample(5, seed=0)
    codes = torch.as_tensor(rows.codes.copy())
    lat = m.encode(codes, None)
    assert lat.z.shape == lat.mu.shape == lat.logstd.shape == (5, 6, 3) and lat.group_logprior is None
    logits = m.decode(codes, lat.z, None)
    assert logits.shape == (5, 6, 3)
    for j, v in enumerate(net.variables):
        k = len(net.states[v])
        assert torch.isinf(logits[:, j, k:]).all() and torch.isfinite(logits[:, j, :k]).all()


def test_logits_see_only_the_parents_values():
    net = our_network("alarm")
    m = model_for(net).eval()
    g = net.graph
    codes = torch.as_tensor(net.sample(8, seed=1).codes.copy())
    z = m.prior_sample(8, torch.Generator().manual_seed(0))
    base = m.decode(codes, z, None)
    for v in ["CO", "BP", "HR", "HISTORY"]:
        j = g.index(v)
        own = codes.clone()
        own[:, j] = (own[:, j] + 1) % len(net.states[v])
        assert torch.equal(m.decode(own, z, None)[:, j], base[:, j]), f"{v} sees its own value"
        others = codes.clone()
        for w in g.nodes:
            if w not in g.parents(v) and w != v:
                k = g.index(w)
                others[:, k] = (others[:, k] + 1) % len(net.states[w])
        assert torch.equal(m.decode(others, z, None)[:, j], base[:, j]), f"{v} sees a non-parent"
        if g.parents(v):
            p = g.index(g.parents(v)[0])
            moved = codes.clone()
            moved[:, p] = (moved[:, p] + 1) % len(net.states[g.parents(v)[0]])
            assert not torch.allclose(m.decode(moved, z, None)[:, j], base[:, j])


def test_elbo_skips_intervened_nodes():
    net = our_network("cancer")
    m = model_for(net).eval()
    codes = torch.as_tensor(net.sample(6, seed=2).codes.copy())
    mask = torch.zeros(6, 5, dtype=torch.bool)
    mask[:3, 1] = True
    logits, lat = m(codes, mask)
    elbo, ll, kl = elbo_terms(logits, codes, lat, mask)
    mu, logstd = lat.mu, lat.logstd
    logp = torch.log_softmax(logits, -1).gather(-1, codes.unsqueeze(-1)).squeeze(-1)
    klnode = 0.5 * (mu**2 + (2 * logstd).exp() - 1 - 2 * logstd).sum(-1)
    keep = ~mask
    torch.testing.assert_close(ll, (logp * keep).sum(-1))
    torch.testing.assert_close(kl, (klnode * keep).sum(-1))
    torch.testing.assert_close(elbo, ll - kl)
    _, ll_blind, _ = elbo_terms(logits, codes, lat, mask, regime_aware=False)
    torch.testing.assert_close(ll_blind, logp.sum(-1))
    assert (ll[:3] > ll_blind[:3]).all()  # the intervened node's term is left out


def test_regime_aware_elbo_learns_the_observational_mechanism():
    # greenhouse: Irrigation depends on Season. Rows where Irrigation was forced
    # to 'high' say nothing about that mechanism. The intervention-aware ELBO
    # must recover P(Irrigation | Season) from the observational rows; the
    # regime-blind ELBO is pulled towards 'high'.
    net = our_network("greenhouse")
    obs = net.sample(3000, seed=0)
    exp = net.sample(3000, do={"Irrigation": "high"}, seed=1)
    rows = ig.Table.concat([obs, exp])
    settings = dict(epochs=60, seed=0)
    aware = NeuralEstimator(**settings).fit(rows, net.graph)
    blind = NeuralEstimator(cut=False, **settings).fit(rows, net.graph)
    truth = net.cpt("Irrigation")
    err_aware = np.abs(aware.network_.cpt("Irrigation") - truth).max()
    err_blind = np.abs(blind.network_.cpt("Irrigation") - truth).max()
    assert err_aware < 0.05, err_aware
    assert err_blind > 0.2, err_blind
