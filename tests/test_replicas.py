"""Cross-fitted VGAEs trained side by side in one model of block-diagonal layers equal the models trained alone.

The check is against the models themselves (the same ELBO, the same
training steps), on the shipped alarm network's rows, with observational and
experimental rows mixed. Block-diagonal weights compute independent models
exactly (common practice, no source); only float rounding differs.
"""

from __future__ import annotations

import copy

import numpy as np
import pytest
import torch

from intervgnn.models import FamilyBatch, InterventionalVGAE, count_cells, family_elbo
from intervgnn.models.replicas import stack_models, unstack_models
from intervgnn.models.training import init_output_bias, train_replicas, train_vgae
from intervgnn.table import Table

from .conftest import our_network


def setting(seed=0, n=600, num_layers=2, scramble=False):
    net = our_network("alarm")
    rows = Table.concat([net.sample(n, seed=seed), net.sample(n // 3, do={"HR": "HIGH"}, seed=seed + 1)])
    index = {v: i for i, v in enumerate(net.graph.nodes)}
    parents = [[index[p] for p in net.graph.parents(v)] for v in net.graph.nodes]
    cards = [len(rows.states[v]) for v in net.graph.nodes]
    folds = np.arange(rows.n_rows) % 2
    cells = count_cells(rows.codes, rows.intervened, parents, cards, folds=folds, num_folds=2)
    models = []
    for r in range(2):
        torch.manual_seed(10 + r)
        m = InterventionalVGAE(
            cards, net.graph.edge_index, dim=8, hidden=16, z_dim=3, encoder_hidden=6, num_layers=num_layers
        )
        init_output_bias(m, cells, cells.heldout(r))
        if scramble:  # every weight away from its start (zero last layers included), so every block is exercised
            with torch.no_grad():
                for p in m.parameters():
                    p.normal_(0.0, 0.3)
        models.append(m)
    return cells, models


@pytest.mark.parametrize("num_layers", [1, 2, 3])
def test_a_stacked_model_computes_each_models_elbo(num_layers):
    cells, models = setting(num_layers=num_layers, scramble=True)
    big = stack_models(models)
    batch = FamilyBatch.from_cells(big, cells)
    weights = torch.as_tensor(np.stack([cells.heldout(r) for r in range(2)]), dtype=torch.float32)
    big.eval()
    together = family_elbo(big, batch, weights)
    for r, m in enumerate(models):
        alone = family_elbo(m.eval(), FamilyBatch.from_cells(m, cells), weights[r])
        torch.testing.assert_close(together[r], alone, rtol=1e-5, atol=0)
    copies = [copy.deepcopy(m) for m in models]
    unstack_models(big, copies)  # and the blocks go back where they came from
    for m, c in zip(models, copies):
        for p, q in zip(m.parameters(), c.parameters()):
            assert torch.equal(p, q)


def test_training_side_by_side_ends_where_training_alone_ends():
    cells, models = setting(seed=3)
    alone = copy.deepcopy(models)
    big = stack_models(models)
    weights = [cells.heldout(r) for r in range(2)]
    results = train_replicas(
        big, FamilyBatch.from_cells(big, cells), weights, steps=15, lr=1e-2, weight_decay=0.01, seeds=[5, 6]
    )
    unstack_models(big, models)
    for r, m in enumerate(alone):
        result = train_vgae(
            m, FamilyBatch.from_cells(m, cells), weights[r], steps=15, lr=1e-2, weight_decay=0.01, seed=[5, 6][r]
        )
        np.testing.assert_allclose(results[r].history, result.history, rtol=1e-4)
        for (name, p), q in zip(m.named_parameters(), models[r].parameters()):
            torch.testing.assert_close(q, p, rtol=1e-3, atol=1e-5, msg=name)
    # the blocks off the diagonal never moved from zero
    w = big.decoder.message_mlp.lins[0].weight
    assert torch.count_nonzero(w) <= w.numel() // 2
