"""The interventional VGAE: shapes, factorisation along the graph, the ELBO's regime handling."""

from __future__ import annotations

import numpy as np
import torch

import intervgnn as ig
from intervgnn.estimators import NeuralEstimator
from intervgnn.estimators.plugin import count_table
from intervgnn.models import FamilyBatch, InterventionalVGAE, count_cells, elbo_terms, family_elbo, tabulate_cpts

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
    # regime-blind ELBO is pulled towards 'high'. Checked on the trained
    # decoder itself and on the estimator's CPT.
    net = our_network("greenhouse")
    obs = net.sample(3000, seed=0)
    exp = net.sample(3000, do={"Irrigation": "high"}, seed=1)
    rows = ig.Table.concat([obs, exp])
    aware = NeuralEstimator(seed=0).fit(rows, net.graph)
    blind = NeuralEstimator(cut=False, seed=0).fit(rows, net.graph)
    truth = net.cpt("Irrigation")
    cards = {v: len(s) for v, s in net.states.items()}
    for est, low, high in ((aware, 0.0, 0.05), (blind, 0.2, 1.0)):
        decoder = tabulate_cpts(est.models_["fold0"], net.graph, cards)[2]["Irrigation"]
        for cpt in (decoder, est.network_.cpt("Irrigation")):
            err = np.abs(cpt - truth).max()
            assert low < err < high, (est.cut, err)


def _random_weights(model):
    """Perturb every weight (the zero-initialised ones included) so that equalities are not trivial."""
    with torch.no_grad():
        for p in model.parameters():
            p.add_(0.3 * torch.randn_like(p))
    return model.eval()


def _elbos(graph, rows, groups=()):
    """(family ELBO from the rows' cells, sum of the row-wise ELBO), same model, eval mode."""
    index = {v: i for i, v in enumerate(graph.nodes)}
    cards = [len(rows.states[v]) for v in graph.nodes]
    torch.manual_seed(0)
    model = _random_weights(InterventionalVGAE(cards, graph.edge_index, groups=groups, u_states=3))
    parents = [[index[p] for p in graph.parents(v)] for v in graph.nodes]
    cells = count_cells(rows.codes, rows.intervened, parents, cards, groups=groups)
    batch = FamilyBatch.from_cells(model, cells)
    with torch.no_grad():
        fam = family_elbo(
            model, batch, torch.as_tensor(cells.count, dtype=torch.float32),
            [torch.as_tensor(g.count, dtype=torch.float32) for g in cells.groups],
        )
        codes, mask = torch.as_tensor(rows.codes.copy()), torch.as_tensor(rows.intervened.copy())
        logits, lat = model(codes, mask)
        by_row = elbo_terms(logits, codes, lat, mask)[0].sum()
    return float(fam), float(by_row), cells


def test_family_elbo_equals_the_row_elbo_observational_and_mixed():
    # The ELBO decomposes over families (common practice, no source: the
    # factorisation of the model along the graph), so the count-weighted sum
    # over distinct configurations equals the sum over rows.
    net = our_network("alarm")
    obs = net.sample(3000, seed=0)
    fam, by_row, cells = _elbos(net.graph, obs)
    assert cells.num_cells < 37 * 3000 / 4  # far fewer cells than (row, node) pairs
    assert abs(fam - by_row) <= 1e-5 * abs(by_row), (fam, by_row)
    mixed = ig.Table.concat([
        obs,
        net.sample(500, do={"CATECHOL": "HIGH"}, seed=1),
        net.sample(400, do={"HR": "LOW", "LVFAILURE": "TRUE"}, seed=2),
    ])
    fam, by_row, cells = _elbos(net.graph, mixed)
    assert abs(fam - by_row) <= 1e-5 * abs(by_row), (fam, by_row)
    # an intervened node's value is not counted for its own mechanism
    hr = net.graph.index("HR")
    assert cells.count[cells.node == hr].sum() == mixed.n_rows - 400


def test_family_elbo_equals_the_row_elbo_with_hidden_common_causes():
    net = our_network("alarm")
    hidden = ["HYPOVOLEMIA", "TPR", "INTUBATION"]
    graph = net.graph.project_out(hidden)
    index = {v: i for i, v in enumerate(graph.nodes)}
    groups = [[index[v] for v in c] for c in graph.c_components() if len(c) > 1]
    assert len(groups) == 3 and max(len(g) for g in groups) == 5
    member = graph.nodes[groups[1][0]]
    rows = ig.Table.concat([
        net.sample(3000, seed=0),
        net.sample(300, do={member: net.states[member][0]}, seed=3),
    ]).select(graph.nodes)
    fam, by_row, cells = _elbos(graph, rows, groups)
    assert len(cells.groups) == 3
    assert abs(fam - by_row) <= 1e-5 * abs(by_row), (fam, by_row)


def test_counted_cells_match_the_plugin_counts():
    # one vectorised pass gives the same counts as the plug-in estimator's per-variable tables
    net = our_network("insurance")
    rows = ig.Table.concat([net.sample(2000, seed=0), net.sample(300, do={"Age": "Adult"}, seed=1)])
    g = net.graph
    index = {v: i for i, v in enumerate(g.nodes)}
    cards = [len(net.states[v]) for v in g.nodes]
    folds = np.arange(rows.n_rows) % 3
    cells = count_cells(rows.codes, rows.intervened, [[index[p] for p in g.parents(v)] for v in g.nodes], cards,
                        folds=folds, num_folds=3)
    for v in g.nodes:
        np.testing.assert_array_equal(cells.dense(index[v]), count_table(rows, g, v))
    np.testing.assert_array_equal(cells.fold_count.sum(axis=0), cells.count)
    first = rows.take(np.flatnonzero(folds == 0))
    np.testing.assert_array_equal(cells.dense(index["Age"], cells.fold_count[0]), count_table(first, g, "Age"))
