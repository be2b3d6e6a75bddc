"""The plug-in estimator: counting CPTs, regimes, the estimator contract."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import intervgnn as ig
from intervgnn import DataError
from intervgnn.errors import NotFittedError
from intervgnn.estimators import PluginEstimator
from intervgnn.estimators.plugin import count_cpts

from .conftest import our_network


def _pgmpy_cpts(table, net, alpha):
    """pgmpy's BayesianEstimator with a Dirichlet(alpha) prior (reference library)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from pgmpy.estimators import BayesianEstimator
        from pgmpy.models import DiscreteBayesianNetwork

        model = DiscreteBayesianNetwork(list(net.graph.edges))
        model.add_nodes_from(net.variables)
        df = table.to_pandas()
        est = BayesianEstimator(model, df, state_names={v: list(s) for v, s in net.states.items()})
        out = {}
        for v in net.variables:
            k = len(net.states[v])
            pa = list(net.graph.parents(v))
            n_cfg = int(np.prod([len(net.states[p]) for p in pa])) if pa else 1
            cpd = est.estimate_cpd(v, prior_type="dirichlet", pseudo_counts=np.full((k, n_cfg), alpha))
            vals = cpd.values  # axes: v, then cpd.variables[1:] in its own order
            order = [cpd.variables.index(p) for p in pa] + [0]
            out[v] = np.transpose(vals, order)
        return out


@pytest.mark.parametrize("alpha", [0.5, 1.0])
def test_counts_equal_pgmpy_bayesian_estimator(alpha):
    net = our_network("survey")
    table = net.sample(3000, seed=1)
    ours = count_cpts(table, net.graph, alpha)
    ref = _pgmpy_cpts(table, net, alpha)
    for v in net.variables:
        np.testing.assert_allclose(ours[v], ref[v], atol=1e-12, err_msg=v)


def test_large_sample_recovers_cpts():
    net = our_network("child")
    est = PluginEstimator(alpha=0.5).fit(net.sample(200_000, seed=2), net.graph)
    for v in net.variables:
        assert np.abs(est.network_.cpt(v) - net.cpt(v)).max() < 0.05, v


def test_experimental_rows_skip_the_intervened_mechanism():
    # With rows where Irrigation was forced to 'high', the counted mechanism of
    # Irrigation must come from the observational rows only (its value there
    # did not come from Season), while its children still learn from them.
    net = our_network("greenhouse")
    obs = net.sample(20_000, seed=3)
    exp = net.sample(20_000, do={"Irrigation": "high"}, seed=4)
    both = ig.Table.concat([obs, exp])
    est = PluginEstimator(alpha=0.0).fit(both, net.graph)
    obs_only = PluginEstimator(alpha=0.0).fit(obs, net.graph)
    np.testing.assert_array_equal(est.network_.cpt("Irrigation"), obs_only.network_.cpt("Irrigation"))
    blind = ig.Table(both.codes, both.variables, both.states)  # regimes dropped
    blind_cpt = PluginEstimator(alpha=0.0).fit(blind, net.graph).network_.cpt("Irrigation")
    assert np.abs(blind_cpt - net.cpt("Irrigation")).max() > 0.2
    # SoilMoisture's CPT uses both sets of rows: closer to the truth than from either alone
    err = lambda e: np.abs(e.network_.cpt("SoilMoisture") - net.cpt("SoilMoisture")).max()  # noqa: E731
    assert err(est) < 0.03


def test_effect_is_a_difference_of_queries():
    net = our_network("greenhouse")
    est = PluginEstimator().fit(net.sample(5000, seed=0), net.graph)
    e = est.effect("Yield", "Irrigation", "high", "low", "good")
    a = est.query("Yield", do={"Irrigation": "high"})["good"]
    b = est.query("Yield", do={"Irrigation": "low"})["good"]
    assert e == pytest.approx(a - b, abs=1e-15)


def test_contract_errors_and_refit():
    net = our_network("cancer")
    est = PluginEstimator()
    with pytest.raises(NotFittedError, match="this PluginEstimator is not fitted yet"):
        est.query("Cancer")
    rows = net.sample(100, seed=0)
    with pytest.raises(DataError, match="variable 'Cancer' is in the graph but not in the data"):
        est.fit(rows.select(["Pollution", "Smoker", "Xray", "Dyspnoea"]), net.graph)
    other = ig.CausalGraph([("Pollution", "Smoker")])
    with pytest.raises(DataError, match="column 'Cancer' is in the data but not in the graph"):
        est.fit(rows, other)
    with pytest.raises(DataError, match="alpha must be a non-negative number or .auto., got -1"):
        PluginEstimator(alpha=-1).fit(rows, net.graph)
    first = est.fit(rows, net.graph).query("Cancer").probs
    second = est.fit(net.sample(5000, seed=9), net.graph).query("Cancer").probs
    assert not np.array_equal(first, second)
    assert repr(PluginEstimator(alpha=0.5)) == "PluginEstimator(alpha=0.5)"
