"""The estimators' contract: scikit-learn settings, learning in fit, and what each does with hidden causes."""

from __future__ import annotations

import json

import numpy as np
import pytest
from sklearn.base import clone
from sklearn.linear_model import LogisticRegression

from intervgnn import CausalNetwork, DataError, NotIdentified, Table, UnsupportedQuery
from intervgnn.cli import EXIT_NOT_IDENTIFIABLE, main
from intervgnn.errors import NotFittedError
from intervgnn.estimators import (
    BackdoorEstimator,
    EstimandEstimator,
    NaiveEstimator,
    NeuralEstimator,
    PluginEstimator,
)
from intervgnn.estimators.plugin import count_cpts, observational_dag
from intervgnn.eval import total_variation

from .conftest import our_network

QUERY = {"target": "Dyspnoea", "do": {"Smoker": "True"}}

# every estimator with settings other than its defaults (tiny ones for the neural estimator)
NON_DEFAULT = [
    NaiveEstimator(alpha=0.25),
    PluginEstimator(alpha=0.5),
    BackdoorEstimator(classifier=LogisticRegression(C=0.5, max_iter=500), pairs=[("Smoker", "Dyspnoea")]),
    EstimandEstimator(alpha=0.5, formula="complete"),
    NeuralEstimator(dim=8, hidden=8, steps=2, seed=3),
]


@pytest.fixture(scope="module")
def cancer_rows():
    net = our_network("cancer")
    return net, net.sample(300, seed=0)


def hidden(name: str, variables: list[str], rows: int, seed: int = 0):
    """A shipped network with ``variables`` hidden: the network, the projected diagram and the observed rows."""
    net = our_network(name)
    observed = [v for v in net.variables if v not in variables]
    return net, net.graph.project_out(variables), net.sample(rows, seed=seed).select(observed)


# ------------------------------------------------------------ scikit-learn settings


@pytest.mark.parametrize("est", NON_DEFAULT, ids=lambda e: type(e).__name__)
def test_clone_gives_an_unfitted_copy_that_fits_and_answers_the_same(est, cancer_rows):
    net, rows = cancer_rows
    est = clone(est).fit(rows, net.graph)
    copy = clone(est)
    assert type(copy) is type(est) and copy is not est
    assert repr(copy) == repr(est)
    assert copy.get_params(deep=False).keys() == est.get_params(deep=False).keys()
    with pytest.raises(NotFittedError, match=f"this {type(est).__name__} is not fitted yet"):
        copy.query(**QUERY)
    assert copy.fit(rows, net.graph) is copy
    np.testing.assert_array_equal(copy.query(**QUERY).probs, est.query(**QUERY).probs)


def test_settings_are_stored_unchanged_and_checked_only_in_fit(cancer_rows):
    net, rows = cancer_rows
    pairs = [("Smoker", "Dyspnoea")]
    bd = BackdoorEstimator(pairs=pairs)
    assert bd.pairs is pairs
    # a bad value is accepted by the constructor and refused by fit
    for est, message in [
        (PluginEstimator(alpha=-1), r"alpha must be a non-negative number or 'auto', got -1"),
        (BackdoorEstimator(pairs="Smoker"), r"pairs must be a list of \(treatment, target\) pairs, got 'Smoker'"),
        (BackdoorEstimator(pairs=[("Smoker",)]), r"pairs\[0\] must be a \(treatment, target\) pair of variable names"),
        (BackdoorEstimator(pairs=[("Smokr", "Dyspnoea")]),
         r"pairs\[0\]: 'Smokr' is not a variable of the graph \(did you mean 'Smoker'\?\)"),
    ]:
        with pytest.raises(DataError, match=message):
            est.fit(rows, net.graph)


def test_get_params_deep_lists_the_settings_of_a_nested_classifier():
    bd = BackdoorEstimator(classifier=LogisticRegression(C=0.5))
    assert set(bd.get_params(deep=False)) == {"classifier", "pairs"}
    deep = bd.get_params()
    assert deep["classifier__C"] == 0.5 and deep["pairs"] is None


def test_set_params_changes_settings_and_returns_self():
    est = PluginEstimator()
    assert est.set_params(alpha=0.3) is est and est.alpha == 0.3
    assert est.set_params() is est
    bd = BackdoorEstimator(classifier=LogisticRegression())
    bd.set_params(classifier__C=2.0, pairs=[("A", "B")])
    assert bd.classifier.C == 2.0 and bd.pairs == [("A", "B")]


def test_set_params_refuses_an_unknown_name():
    with pytest.raises(DataError, match=r"^unknown setting 'alpah' for PluginEstimator \(did you mean 'alpha'\?\); "
                                        r"settings are: alpha$"):
        PluginEstimator().set_params(alpah=1.0)
    with pytest.raises(DataError, match=r"^unknown setting 'x+\.\.\.' for NaiveEstimator; settings are: alpha$"):
        NaiveEstimator().set_params(**{"x" * 200: 1})
    with pytest.raises(DataError, match=r"^setting 'alpha' is not an estimator, so 'alpha__\.\.\.' cannot be set$"):
        PluginEstimator().set_params(alpha__scale=2)
    with pytest.raises(DataError, match=r"^setting 'classifier' refused colour: "):
        BackdoorEstimator(classifier=LogisticRegression()).set_params(classifier__colour="red")


def test_the_harness_registry_builds_and_checks_every_estimator():
    from intervgnn.harness.registry import ESTIMATORS, check_settings, make_estimator

    for kind in ESTIMATORS:
        est = make_estimator(kind, {}, seed=4)
        assert clone(est).get_params() == est.get_params()
    check_settings("estimators[0].backdoor", "backdoor", {"pairs": [["Smoker", "Dyspnoea"]]})


# ------------------------------------------------------ the back-door estimator learns in fit


def test_backdoor_trains_in_fit_and_never_in_a_query(cancer_rows, monkeypatch):
    net, rows = cancer_rows
    bd = BackdoorEstimator(pairs=[("Smoker", "Dyspnoea"), ("Pollution", "Xray")]).fit(rows, net.graph)
    assert set(bd.outcome_models_) == {("Smoker", "Dyspnoea"), ("Pollution", "Xray")}

    def no_training():
        raise AssertionError("a query trained a classifier")

    monkeypatch.setattr(bd, "_new_classifier", no_training)
    before = dict(bd.outcome_models_)
    for s in net.states["Smoker"]:
        bd.query("Dyspnoea", do={"Smoker": s})
    bd.query("Smoker", do={"Dyspnoea": "True"})  # not a descendant: counted in fit
    assert bd.outcome_models_ == before
    with pytest.raises(UnsupportedQuery, match=r"^no outcome model was fitted for Smoker -> Xray: it is not in this "
                                               r"estimator's pairs"):
        bd.query("Xray", do={"Smoker": "True"})


def test_backdoor_fits_every_pair_by_default_and_a_second_fit_starts_clean(cancer_rows):
    net, rows = cancer_rows
    bd = BackdoorEstimator().fit(rows, net.graph)
    assert set(bd.outcome_models_) == {(x, y) for x in net.variables for y in net.graph.descendants(x)}
    bd.set_params(pairs=[("Cancer", "Xray")]).fit(rows, net.graph)
    assert set(bd.outcome_models_) == {("Cancer", "Xray")}


# ----------------------------------------------------------- the plug-in with hidden causes


def test_plugin_refuses_a_query_that_is_not_identifiable():
    # sachs (shipped) with PKA hidden: Mek <-> Akt, and P(Akt | do(Mek)) has a hedge
    _, graph, rows = hidden("sachs", ["PKA"], 1000)
    est = PluginEstimator().fit(rows, graph)
    with pytest.raises(NotIdentified, match=r"^P\(Akt \| do\(Mek\)\) is not identifiable from observational data "
                                            r"on this diagram"):
        est.query("Akt", do={"Mek": "HIGH"})
    # a query without do() is an observational one, answered from the fitted network
    assert est.query("Akt", given={"Mek": "HIGH"}).identified is None


def test_plugin_answers_an_identifiable_query_with_its_formula():
    # child (shipped) with Disease hidden: reading the projected diagram as if nothing were hidden
    # is 0.047 off P(HypDistrib | do(BirthAsphyxia=yes)) at unlimited rows
    net, graph, rows = hidden("child", ["Disease"], 20_000)
    query = {"target": "HypDistrib", "do": {"BirthAsphyxia": "yes"}}
    exact = net.query(**query)
    answer = PluginEstimator().fit(rows, graph).query(**query)
    ignoring = PluginEstimator().fit(rows, graph.without_bidirected()).query(**query)
    assert answer.identified is True and ignoring.identified is None
    assert total_variation(answer, exact) < 0.015
    assert total_variation(ignoring, exact) > 0.035


def test_plugin_without_smoothing_agrees_with_the_estimand_of_the_rows():
    # cancer with Cancer hidden: Xray <-> Dyspnoea; with alpha=0 the fitted network is the rows'
    # distribution but for the independence of the two roots (Pollution, Smoker), and both
    # estimators evaluate the same formula
    net, graph, rows = hidden("cancer", ["Cancer"], 5000)
    plug = PluginEstimator(alpha=0.0).fit(rows, graph)
    estd = EstimandEstimator().fit(rows, graph)
    for query in [
        {"target": "Dyspnoea", "do": {"Smoker": "True"}, "given": {"Xray": "positive"}},
        {"target": ["Dyspnoea", "Xray"], "do": {"Smoker": "True"}},
        {"target": ["Xray", "Dyspnoea"], "do": {"Pollution": "high"}},
    ]:
        a, b = plug.query(**query), estd.query(**query)
        assert a.variables == b.variables == tuple(np.atleast_1d(query["target"]))
        np.testing.assert_allclose(a.probs, b.probs, atol=1e-3)
        assert total_variation(a, net.query(**query)) < 0.05


def test_answers_lay_out_the_targets_in_the_order_asked():
    net, graph, rows = hidden("cancer", ["Cancer"], 5000)
    for est in (PluginEstimator().fit(rows, graph), EstimandEstimator().fit(rows, graph)):
        ab = est.query(["Dyspnoea", "Xray"], do={"Smoker": "True"})
        ba = est.query(["Xray", "Dyspnoea"], do={"Smoker": "True"})
        np.testing.assert_allclose(ab.probs, ba.probs.T, atol=1e-12)
        exact = net.query(["Dyspnoea", "Xray"], do={"Smoker": "True"})
        assert total_variation(ab, exact) < 0.03


def test_the_factorising_dag_holds_for_the_distribution_with_hidden_causes():
    # sachs with PKA hidden: CPTs read off the exact observational distribution on the factorising
    # DAG give back that distribution exactly
    net = our_network("sachs")
    observed = [v for v in net.variables if v != "PKA"]
    dag = observational_dag(net.graph.project_out(["PKA"]))
    cpts = {}
    for v in dag.nodes:
        joint = net.query(list(dag.parents(v)) + [v]).probs
        cpts[v] = joint / joint.sum(axis=-1, keepdims=True)
    rebuilt = CausalNetwork(dag, {v: net.states[v] for v in observed}, cpts)
    np.testing.assert_allclose(rebuilt.query(observed).probs, net.query(observed).probs, atol=1e-12)


def test_experiments_on_a_confounded_variable_do_not_count_for_its_component():
    net, graph, rows = hidden("cancer", ["Cancer"], 2000)
    trial = net.sample(500, do={"Xray": "positive"}, seed=1).select(rows.variables)
    both = Table.concat([rows, trial])
    dag = observational_dag(graph)
    members = ["Xray", "Dyspnoea"]
    with_trial = count_cpts(both, dag, 1.0, observational=members)
    obs_only = count_cpts(rows, dag, 1.0, observational=members)
    for v in members:  # P(Dyspnoea | Xray, ...) changes under do(Xray): only observational rows count
        np.testing.assert_array_equal(with_trial[v], obs_only[v])
    assert not np.array_equal(with_trial["Smoker"], obs_only["Smoker"])  # its mechanism ran in every row


def test_plugin_fit_refuses_a_cpt_too_large_to_count(monkeypatch):
    import intervgnn.estimators.plugin as plugin

    _, graph, rows = hidden("sachs", ["PKA"], 200)
    monkeypatch.setattr(plugin, "MAX_CPT_CELLS", 1000)
    message = r"^variable '\w+' would need a CPT of [\d,]+ cells, more than the limit of 1,000 \(its confounded component"
    with pytest.raises(DataError, match=message):
        PluginEstimator().fit(rows, graph)


def test_plugin_fit_refuses_cpts_too_large_in_all(monkeypatch):
    import intervgnn.estimators.plugin as plugin

    _, graph, rows = hidden("sachs", ["PKA"], 200)
    monkeypatch.setattr(plugin, "MAX_NETWORK_ENTRIES", 1000)
    with pytest.raises(DataError, match=r"^the counted CPTs would have more than 1,000 cells in all"):
        PluginEstimator().fit(rows, graph)


# ------------------------------------------------------------------ the command line

BOW = "edges:\n  - [X, Y]\nconfounded:\n  - [X, Y]\n"
CANCER_HIDDEN = (
    "edges:\n  - [Pollution, Xray]\n  - [Smoker, Xray]\n  - [Pollution, Dyspnoea]\n  - [Smoker, Dyspnoea]\n"
    "confounded:\n  - [Xray, Dyspnoea]\n"
)


def run(capsys, *argv):
    rc = main(list(argv))
    out = capsys.readouterr()
    assert "Traceback" not in out.out + out.err
    return rc, out.out, out.err


@pytest.fixture(scope="module")
def user_files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hidden")
    net, _, rows = hidden("cancer", ["Cancer"], 2000)
    rows.to_csv(folder / "cancer.csv")
    (folder / "cancer.yaml").write_text(CANCER_HIDDEN)
    (folder / "bow.yaml").write_text(BOW)
    (folder / "bow.csv").write_text("X,Y\n" + "a,b\nb,a\na,a\nb,b\n" * 10)
    return folder


def test_estimate_with_the_plugin_refuses_a_query_that_is_not_identifiable(capsys, user_files):
    args = ["estimate", "--estimator", "plugin", "--data", str(user_files / "bow.csv"),
            "--graph", str(user_files / "bow.yaml"), "--target", "Y", "--do", "X=a"]
    rc, out, _ = run(capsys, *args)
    assert rc == EXIT_NOT_IDENTIFIABLE == 3
    assert "P(Y | do(X)) is not identifiable from observational data on this diagram" in out
    assert "The plugin estimator\nhas no model of the hidden causes" in out and "Estimate from" not in out
    rc, out, _ = run(capsys, *args, "--allow-unidentified")  # only the neural estimator can answer it
    assert rc == 3 and "Estimate from" not in out
    rc, out, _ = run(capsys, *args, "--json")
    data = json.loads(out)
    assert rc == 3 and data["identifiable"] is False and data["estimate"] is None and data["query"] == "P(Y | do(X))"


def test_estimate_with_the_plugin_answers_an_identifiable_query(capsys, user_files):
    rc, out, _ = run(capsys, "estimate", "--estimator", "plugin", "--data", str(user_files / "cancer.csv"),
                     "--graph", str(user_files / "cancer.yaml"), "--target", "Dyspnoea", "--do", "Smoker=True",
                     "--given", "Xray=positive")
    assert rc == 0 and "Estimate from the plugin estimator fitted on 2000 rows" in out
    assert "P(Dyspnoea | do(Smoker=True), Xray=positive)" in out


def test_identify_exits_3_when_the_query_is_not_identifiable(capsys, user_files):
    bow = str(user_files / "bow.yaml")
    rc, out, _ = run(capsys, "identify", "--graph", bow, "--target", "Y", "--do", "X")
    assert rc == EXIT_NOT_IDENTIFIABLE and "P(Y | do(X)) is not identifiable" in out
    rc, out, _ = run(capsys, "identify", "--graph", bow, "--target", "Y", "--do", "X", "--json")
    assert rc == 3 and json.loads(out)["identifiable"] is False
    rc, out, _ = run(capsys, "identify", "--graph", str(user_files / "cancer.yaml"), "--target", "Dyspnoea",
                     "--do", "Smoker")
    assert rc == 0 and "P(Dyspnoea | do(Smoker)) is identifiable (back-door)." in out


def test_plugin_needs_observational_rows_on_a_diagram_with_hidden_causes():
    net, graph, rows = hidden("cancer", ["Cancer"], 10)
    trial = net.sample(200, do={"Xray": "positive"}, seed=1).select(rows.variables)
    with pytest.raises(DataError, match=r"^every row comes from an experiment; on a diagram with confounded pairs the "
                                        r"plug-in needs observational rows \(rows where nothing was set\) to count "
                                        r"Xray, Dyspnoea$"):
        PluginEstimator().fit(trial, graph)
    PluginEstimator().fit(trial, graph.without_bidirected())  # without hidden causes each mechanism is counted
