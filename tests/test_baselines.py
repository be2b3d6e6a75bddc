"""The naive and back-door estimators."""

from __future__ import annotations

import numpy as np
import pytest

from intervgnn import DataError, UnsupportedQuery
from intervgnn.estimators import BackdoorEstimator, NaiveEstimator
from intervgnn.eval import total_variation

from .conftest import our_network


@pytest.fixture(scope="module")
def greenhouse_rows():
    net = our_network("greenhouse")
    return net, net.sample(60_000, seed=0)


def test_naive_reads_the_conditional_off_the_rows(greenhouse_rows):
    # with many rows the naive answer converges to the exact P(Y | X=x), not to P(Y | do(X=x))
    net, rows = greenhouse_rows
    naive = NaiveEstimator().fit(rows, net.graph)
    est = naive.query("Yield", do={"Irrigation": "high"})
    assert total_variation(est, net.query("Yield", given={"Irrigation": "high"})) < 0.01
    assert total_variation(est, net.query("Yield", do={"Irrigation": "high"})) > 0.04
    # joint treatments and evidence are conditioned on too
    j = naive.query("Yield", do={"Irrigation": "high", "Shading": "on"}, given={"Season": "warm"})
    ref = net.query("Yield", given={"Irrigation": "high", "Shading": "on", "Season": "warm"})
    assert total_variation(j, ref) < 0.03


def test_naive_counts_exactly():
    net = our_network("cancer")
    rows = net.sample(500, seed=1)
    est = NaiveEstimator(alpha=0.0).fit(rows, net.graph)
    mask = np.array(rows.labels("Smoker")) == "True"
    xray = np.array(rows.labels("Xray"))[mask]
    assert est.query("Xray", do={"Smoker": "True"})["positive"] == pytest.approx(np.mean(xray == "positive"))


def test_backdoor_recovers_the_interventional_answer(greenhouse_rows):
    # parents of Irrigation = {Season}: a valid adjustment set (the back-door criterion)
    net, rows = greenhouse_rows
    bd = BackdoorEstimator().fit(rows, net.graph)
    for state in ("low", "high"):
        exact = net.query("Yield", do={"Irrigation": state})
        assert total_variation(bd.query("Yield", do={"Irrigation": state}), exact) < 0.015
    # a target that is not a descendant: P(Y | do(X)) = P(Y)
    assert total_variation(bd.query("Season", do={"Irrigation": "high"}), net.query("Season")) < 0.01


def test_backdoor_with_another_classifier(greenhouse_rows):
    from sklearn.ensemble import RandomForestClassifier

    net, rows = greenhouse_rows
    small = rows.take(np.arange(5000))
    for clf in ("random_forest", RandomForestClassifier(n_estimators=30, min_samples_leaf=5, random_state=0)):
        bd = BackdoorEstimator(classifier=clf).fit(small, net.graph)
        assert total_variation(bd.query("Yield", do={"Irrigation": "high"}), net.query("Yield", do={"Irrigation": "high"})) < 0.05


def test_backdoor_unsupported_kinds_and_bad_classifier(greenhouse_rows):
    net, rows = greenhouse_rows
    bd = BackdoorEstimator().fit(rows.take(np.arange(500)), net.graph)
    msg = "back-door adjustment answers P\\(Y \\| do\\(X=x\\)\\) for one treatment and one target, without given="
    with pytest.raises(UnsupportedQuery, match=msg):
        bd.query("Yield", do={"Irrigation": "high"}, given={"Shading": "on"})
    with pytest.raises(UnsupportedQuery, match=msg):
        bd.query("Yield", do={"Irrigation": "high", "Shading": "on"})
    with pytest.raises(UnsupportedQuery, match=msg):
        bd.query(["Yield", "Mildew"], do={"Irrigation": "high"})
    with pytest.raises(DataError, match="unknown classifier 'svm'; classifiers are: logistic, random_forest"):
        BackdoorEstimator(classifier="svm").fit(rows, net.graph)
