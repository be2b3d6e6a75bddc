"""The neural estimator: accuracy on a small network, modes, determinism, checkpoints."""

from __future__ import annotations

import json
import os

import numpy as np
import pytest
import torch

import intervgnn as ig
from intervgnn.errors import CheckpointError, QueryError
from intervgnn.estimators import NeuralEstimator, PluginEstimator
from intervgnn.estimators.plugin import count_table
from intervgnn.eval import make_query_set, total_variation

from .conftest import our_network

SETTINGS = dict(seed=0)


def refit_as(est, **settings):
    """The same learned state answered with other settings (mode, cut)."""
    other = NeuralEstimator(**{**est.get_params(), **settings})
    other.graph_, other.states_, other.models_, other.cells_, other.n_rows_ = (
        est.graph_, est.states_, est.models_, est.cells_, est.n_rows_)
    other._prepare_answers()
    return other


@pytest.fixture(scope="module")
def earthquake_fit():
    net = our_network("earthquake")
    est = NeuralEstimator(**SETTINGS).fit(net.sample(20_000, seed=0), net.graph)
    return net, est


def test_matches_exact_do_answers_on_earthquake(earthquake_fit):
    # Tolerance: on these 20,000 rows the plug-in (counting) estimator's error
    # on the same do-queries is 0.0065 TV on average and 0.0215 at worst
    # (measured); the neural estimate must stay close to it: within 25% on
    # one seed (the benchmark's goal for any single network), and below 0.012.
    net, est = earthquake_fit
    qs = make_query_set(net, 50, seed=0)
    rows = net.sample(20_000, seed=0)
    plug = PluginEstimator().fit(rows, net.graph)
    tvs = [total_variation(est.query(q.target, do=q.do_dict).probs, q.exact.probs) for q in qs]
    ref = [total_variation(plug.query(q.target, do=q.do_dict).probs, q.exact.probs) for q in qs]
    assert np.mean(tvs) < min(1.25 * np.mean(ref), 0.012), (np.mean(tvs), np.mean(ref))
    assert max(tvs) < 0.04, max(tvs)
    assert est.answer_mode_ == "exact"


def test_monte_carlo_mode_agrees_with_exact_mode(earthquake_fit):
    net, est = earthquake_fit
    mc = refit_as(est, mode="monte_carlo", mc_samples=40_000)
    assert mc.answer_mode_ == "monte_carlo"
    for do, given in [({"Burglary": "True"}, {}), ({"Earthquake": "False"}, {"MaryCalls": "True"})]:
        a = est.query("Alarm" if not given else "JohnCalls", do=do, given=given)
        b = mc.query("Alarm" if not given else "JohnCalls", do=do, given=given)
        # 40,000 weighted samples: standard error below 0.01 on these probabilities
        assert total_variation(a, b) < 0.03


def test_ablation_answers_do_as_observation(earthquake_fit):
    net, est = earthquake_fit
    abl = refit_as(est, cut=False)
    do = {"Alarm": "True"}
    np.testing.assert_allclose(abl.query("Burglary", do=do).probs, est.query("Burglary", given=do).probs)
    assert total_variation(abl.query("Burglary", do=do), est.query("Burglary", do=do)) > 0.1


def test_same_seed_same_model():
    net = our_network("cancer")
    rows = net.sample(2000, seed=5)
    settings = {**SETTINGS, "steps": 20}
    a = NeuralEstimator(**settings).fit(rows, net.graph)
    b = NeuralEstimator(**settings).fit(rows, net.graph)
    assert list(a.models_) == ["fold0", "fold1"]
    for key in a.models_:
        for (k, x), (_, y) in zip(a.models_[key].state_dict().items(), b.models_[key].state_dict().items()):
            assert np.array_equal(x.numpy(), y.numpy()), (key, k)
    q = dict(target="Xray", do={"Smoker": "True"})
    assert np.array_equal(a.query(**q).probs, b.query(**q).probs)
    c = NeuralEstimator(**{**settings, "seed": 1}).fit(rows, net.graph)
    assert not np.array_equal(a.query(**q).probs, c.query(**q).probs)


def test_checkpoint_round_trip_and_refusals(earthquake_fit, tmp_path):
    net, est = earthquake_fit
    path = tmp_path / "model"
    est.save(path)
    meta = json.loads((path / "model.json").read_text())
    assert meta["package_version"] == ig.__version__ and meta["nodes"] == list(net.variables)
    back = NeuralEstimator.load(path, graph=net.graph)
    q = dict(target="Alarm", do={"Earthquake": "True"})
    np.testing.assert_allclose(back.query(**q).probs, est.query(**q).probs, atol=1e-12)
    # a different graph is refused
    other = ig.CausalGraph([e for e in net.graph.edges if e != ("Earthquake", "Alarm")], nodes=net.variables)
    with pytest.raises(CheckpointError, match="the model was trained on another graph .edge Earthquake -> Alarm differs."):
        NeuralEstimator.load(path, graph=other)
    # data whose states differ are refused
    rows = net.sample(10, seed=0)
    renamed = ig.Table(rows.codes, rows.variables, {**rows.states, "Alarm": ("yes", "no")})
    with pytest.raises(CheckpointError, match="states of 'Alarm' differ"):
        NeuralEstimator.load(path, table=renamed)
    # a tampered weights file is refused
    w = path / "weights.pt"
    blob = bytearray(w.read_bytes())
    blob[-20] ^= 0xFF
    w.write_bytes(bytes(blob))
    with pytest.raises(CheckpointError, match="the weights file was changed after saving"):
        NeuralEstimator.load(path)
    os.remove(path / "model.json")
    with pytest.raises(CheckpointError, match="not a saved model .missing model.json."):
        NeuralEstimator.load(path)


def test_bad_settings():
    net = our_network("cancer")
    rows = net.sample(50, seed=0)
    with pytest.raises(QueryError, match="mode must be one of auto, exact, monte_carlo; got 'fast'"):
        NeuralEstimator(mode="fast").fit(rows, net.graph)
    with pytest.raises(ig.DataError, match="steps must be a positive integer, got 0"):
        NeuralEstimator(steps=0).fit(rows, net.graph)
    with pytest.raises(ig.DataError, match=r"prior_counts must lie in \(0, 1\], got 0"):
        NeuralEstimator(prior_counts=0).fit(rows, net.graph)
    with pytest.raises(ig.DataError, match="folds must be a whole number of at least 2, got 1"):
        NeuralEstimator(folds=1).fit(rows, net.graph)
    with pytest.raises(ig.DataError, match="lr must be above 0, got -1"):
        NeuralEstimator(lr=-1).fit(rows, net.graph)
    with pytest.raises(ig.DataError, match="threads must be a positive integer, got 0"):
        NeuralEstimator(threads=0).fit(rows, net.graph)


def test_counts_only_prior_is_the_plugin():
    # prior_counts=1 leaves no weight to the neural prior: the CPTs are the
    # plug-in's smoothed counts with its leave-one-out alpha, exactly
    net = our_network("child")
    rows = net.sample(1500, seed=3)
    est = NeuralEstimator(seed=0, steps=5, prior_counts=1.0).fit(rows, net.graph)
    plug = PluginEstimator().fit(rows, net.graph)
    for v in net.variables:
        np.testing.assert_allclose(est.network_.cpt(v), plug.network_.cpt(v), rtol=1e-12, atol=1e-15)
    assert set(est.neural_share_.values()) == {0.0}


def test_large_samples_approach_the_counts():
    # at large n the answer approaches the maximum-likelihood CPTs: every
    # parent configuration seen 2,000 times or more is within 0.01 of its
    # relative frequencies, whatever weight the neural prior got
    net = our_network("survey")
    rows = net.sample(200_000, seed=4)
    est = NeuralEstimator(seed=0).fit(rows, net.graph)
    for v in net.variables:
        counts = count_table(rows, net.graph, v)
        seen = counts.sum(axis=1) >= 2000
        mle = counts[seen] / counts[seen].sum(axis=1, keepdims=True)
        got = est.network_.cpt(v).reshape(counts.shape)[seen]
        assert np.abs(got - mle).max() < 0.01, v


def test_fit_cost_does_not_grow_with_rows():
    # the models train on distinct family configurations: 20 times the rows
    # add few cells (earthquake has at most 26 (configuration, state) pairs)
    net = our_network("earthquake")
    small = NeuralEstimator(seed=0, steps=3).fit(net.sample(5_000, seed=0), net.graph)
    large = NeuralEstimator(seed=0, steps=3).fit(net.sample(100_000, seed=0), net.graph)
    assert small.cells_.num_cells <= large.cells_.num_cells <= 26
    assert large.cells_.count.sum() == 100_000 * 5


def test_monte_carlo_mode_uses_the_counts_too():
    # a forced Monte Carlo answer on a parent configuration seen often must follow its counts
    net = our_network("cancer")
    rows = net.sample(50_000, seed=2)
    est = NeuralEstimator(seed=0, mode="monte_carlo", mc_samples=60_000).fit(rows, net.graph)
    plug = PluginEstimator().fit(rows, net.graph)
    for do in ({"Cancer": "True"}, {"Smoker": "False"}):
        a, b = est.query("Xray", do=do), plug.query("Xray", do=do)
        assert total_variation(a, b) < 0.02, (do, a.probs, b.probs)


def test_a_variable_set_in_every_row_gets_the_counts_only_answer():
    # Smoker is set by experiment in every row: no row says anything about its
    # mechanism, so it gets the uniform counts-only row (no weight on a decoder
    # that never saw it), in exact and in Monte Carlo mode alike
    net = our_network("cancer")
    rows = net.sample(3000, do={"Smoker": "True"}, seed=0)
    est = NeuralEstimator(seed=0, steps=10).fit(rows, net.graph)
    assert est.neural_share_["Smoker"] == 0.0
    np.testing.assert_allclose(est.network_.cpt("Smoker"), [0.5, 0.5])
    mc = refit_as(est, mode="monte_carlo", mc_samples=40_000)
    for target, do in (("Smoker", {"Pollution": "low"}), ("Xray", {"Pollution": "low"})):
        # 40,000 samples: standard error below 0.003
        assert total_variation(est.query(target, do=do), mc.query(target, do=do)) < 0.015


def test_fit_leaves_the_global_torch_generator_alone():
    net = our_network("cancer")
    rows = net.sample(200, seed=0)
    torch.manual_seed(123)
    expected = torch.rand(3)
    torch.manual_seed(123)
    NeuralEstimator(seed=0, steps=2).fit(rows, net.graph)
    assert torch.equal(torch.rand(3), expected)


def test_damaged_checkpoints_are_refused_cleanly(earthquake_fit, tmp_path):
    net, est = earthquake_fit
    path = tmp_path / "model"
    est.save(path)
    meta = json.loads((path / "model.json").read_text())
    meta["settings"]["epochs"] = 3
    (path / "model.json").write_text(json.dumps(meta))
    with pytest.raises(CheckpointError, match="unknown setting 'epochs' in the model description"):
        NeuralEstimator.load(path)
    os.remove(path / "weights.pt")
    os.mkdir(path / "weights.pt")
    with pytest.raises(CheckpointError, match="cannot read the weights"):
        NeuralEstimator.load(path)
    meta["format"] = "intervgnn-neural-1"
    (path / "model.json").write_text(json.dumps(meta))
    with pytest.raises(CheckpointError, match="saved in format 'intervgnn-neural-1' by an earlier version"):
        NeuralEstimator.load(path)
