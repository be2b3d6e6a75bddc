"""The intervgnn command on small networks."""

from __future__ import annotations

import json

import pytest

from intervgnn.cli import CAUTION, main


def run(capsys, *argv):
    rc = main(list(argv))
    out = capsys.readouterr()
    return rc, out.out, out.err


def test_networks_lists_catalog_with_citations(capsys):
    rc, out, _ = run(capsys, "networks", "--cite")
    assert rc == 0
    for name in ["cancer", "earthquake", "survey", "sachs", "child", "insurance", "alarm"]:
        assert name in out
    assert "Beinlich" in out and "Sachs, K." in out


def test_exact_prints_table_and_caution(capsys):
    rc, out, _ = run(capsys, "exact", "--network", "cancer", "--target", "Dyspnoea", "--do", "Smoker=True")
    assert rc == 0
    assert "P(Dyspnoea | do(Smoker=True))" in out
    assert CAUTION in out


def test_exact_json_and_each(capsys):
    rc, out, _ = run(capsys, "exact", "--network", "cancer", "--target", "Cancer", "--do", "Smoker=True", "--json")
    data = json.loads(out)
    assert data["variables"] == ["Cancer"] and abs(sum(data["probs"]) - 1) < 1e-12
    assert data["caution"] == CAUTION
    rc, out, _ = run(capsys, "exact", "--network", "cancer", "--target", "Cancer", "--each", "Smoker", "--json")
    data = json.loads(out)
    assert set(data["answers"]) == {"True", "False"}


def test_sample_writes_csv(capsys, tmp_path):
    path = tmp_path / "rows.csv"
    rc, out, _ = run(capsys, "sample", "--network", "survey", "--rows", "50", "--out", str(path))
    assert rc == 0 and "wrote 50 rows" in out
    assert path.read_text().splitlines()[0] == "A,S,E,O,R,T"


def test_write_failure_is_a_clean_error(capsys, tmp_path, monkeypatch):
    blocker = tmp_path / "afile"
    blocker.write_text("not a folder")
    rc, _, err = run(capsys, "sample", "--network", "survey", "--rows", "5", "--out", str(blocker / "rows.csv"))
    assert rc == 2
    assert err.startswith("intervgnn: error: ") and "rows.csv: cannot write the file (NotADirectoryError" in err
    # the model folder is checked before any training (a folder under a file cannot be made)
    from intervgnn.estimators import NeuralEstimator

    def too_late(*args, **kwargs):
        raise AssertionError("trained before --out was checked")

    monkeypatch.setattr(NeuralEstimator, "fit", too_late)
    rc, _, err = run(capsys, "fit", "--network", "cancer", "--rows", "300", "--steps", "2", "--quiet",
                     "--out", str(blocker / "model"))
    assert rc == 2 and f"--out: cannot create '{blocker / 'model'}': '{blocker}' is a file" in err
    rc, _, err = run(capsys, "fit", "--network", "cancer", "--rows", "300", "--out", str(blocker))
    assert rc == 2 and "is a file; give a folder" in err


def test_demo_runs(capsys):
    rc, out, _ = run(capsys, "demo")
    assert rc == 0 and "P(Yield | do(Irrigation=high))" in out and CAUTION in out


@pytest.mark.parametrize(
    "argv, message",
    [
        (["exact", "--network", "nope", "--target", "A"], "unknown network 'nope'"),
        (["exact", "--network", "cancer", "--target", "Cancer", "--do", "Smoker"], "--do expects VARIABLE=STATE, got 'Smoker'"),
        (["exact", "--network", "cancer", "--target", "Cancer", "--do", "Smoker=maybe"], "unknown state 'maybe' for variable 'Smoker'; states are: False, True"),
        (["exact", "--network", "cancer", "--target", "Q"], "unknown target variable 'Q'"),
    ],
)
def test_errors_are_one_line(capsys, argv, message):
    rc, out, err = run(capsys, *argv)
    assert rc == 2
    assert err.startswith("intervgnn: error: ") and message in err
    assert "Traceback" not in err


def test_fit_then_estimate_from_the_saved_model(capsys, tmp_path):
    out = tmp_path / "model"
    rc, text, _ = run(capsys, "fit", "--network", "cancer", "--rows", "3000", "--steps", "5", "--threads", "2", "--quiet",
                      "--out", str(out))
    assert rc == 0 and "saved to" in text and (out / "weights.pt").exists() and (out / "model.json").exists()
    assert "trained 2 models" in text and "distinct family configurations of 3000 rows (0 experimental)" in text
    assert json.loads((out / "model.json").read_text())["settings"]["threads"] == 2
    rc, text, _ = run(capsys, "estimate", "--model", str(out), "--target", "Xray", "--do", "Smoker=True")
    assert rc == 0 and "P(Xray | do(Smoker=True))" in text and CAUTION in text
    rc, text, _ = run(capsys, "estimate", "--model", str(out), "--target", "Xray", "--do", "Smoker=True", "--json")
    data = json.loads(text)
    assert data["caution"] == CAUTION and abs(sum(data["estimate"]["probs"]) - 1) < 1e-9


def test_estimate_with_plugin_on_sampled_rows_prints_the_truth_too(capsys):
    rc, text, _ = run(capsys, "estimate", "--network", "greenhouse", "--estimator", "plugin", "--target", "Yield", "--do", "Irrigation=high")
    assert rc == 0 and "Exact answer from the network 'greenhouse'" in text


def test_threads_must_be_positive(capsys):
    rc, _, err = run(capsys, "estimate", "--network", "cancer", "--rows", "200", "--threads", "0", "--quiet",
                     "--target", "Xray", "--do", "Smoker=True")
    assert rc == 2 and "threads must be a positive integer, got 0" in err


def test_estimate_from_csv_and_graph(capsys, tmp_path):
    import intervgnn as ig

    net = ig.load_network("greenhouse")
    net.sample(2000, seed=0).to_csv(tmp_path / "rows.csv")
    graph = "edges:\n" + "".join(f"  - [{a}, {b}]\n" for a, b in net.graph.edges)
    (tmp_path / "g.yaml").write_text(graph)
    rc, text, _ = run(
        capsys, "estimate", "--data", str(tmp_path / "rows.csv"), "--graph", str(tmp_path / "g.yaml"),
        "--estimator", "plugin", "--target", "Yield", "--do", "Irrigation=high", "--given", "Shading=on",
    )
    assert rc == 0 and "P(Yield | do(Irrigation=high), Shading=on)" in text
    rc, _, err = run(capsys, "estimate", "--data", str(tmp_path / "rows.csv"), "--target", "Yield", "--do", "Irrigation=high")
    assert rc == 2 and "give --network NAME, or both --data F.csv and --graph G.yaml" in err


def test_estimate_refuses_a_model_for_another_graph(capsys, tmp_path):
    out = tmp_path / "model"
    run(capsys, "fit", "--network", "cancer", "--rows", "500", "--steps", "2", "--quiet", "--out", str(out))
    (tmp_path / "g.yaml").write_text("edges:\n  - [Pollution, Cancer]\n  - [Smoker, Cancer]\n  - [Cancer, Xray]\n")
    rc, _, err = run(capsys, "estimate", "--model", str(out), "--graph", str(tmp_path / "g.yaml"), "--target", "Xray", "--do", "Smoker=True")
    assert rc == 2 and "the model was trained on other variables" in err
