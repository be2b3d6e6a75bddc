"""``intervgnn relational-fit`` and ``relational-query``: files in, fitted template out, answers with the caution."""

from __future__ import annotations

import json

import numpy as np
import pytest
import yaml

from intervgnn.cli import CAUTION, main
from intervgnn.relational import (
    PopulationQuery,
    Policy,
    UnitQuery,
    exact_answer,
    read_template,
    relational_benchmark,
    write_template,
)
from intervgnn.relational.sampling import sample_data


@pytest.fixture(scope="module")
def coop(tmp_path_factory):
    folder = tmp_path_factory.mktemp("coop")
    truth, skeleton = relational_benchmark("bipartite", instances=40, degree=2, seed=0)
    write_template(truth, folder / "truth.yaml")
    # a structure file: the truth's file with every cpt left out (what a user knows before fitting)
    doc = yaml.safe_load((folder / "truth.yaml").read_text())
    for attrs in doc["mechanisms"].values():
        for spec in attrs.values():
            spec.pop("cpt")
    (folder / "structure.yaml").write_text(yaml.safe_dump(doc, sort_keys=False))
    data = sample_data(truth, skeleton, draws=1, seed=1)
    data.to_csv_folder(folder / "data")
    data.to_sqlite(folder / "data.db")
    return folder, truth, skeleton


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    assert "Traceback" not in out.out + out.err
    return code, out.out, out.err


@pytest.mark.parametrize("estimator, name", [
    ("neural", "relational-neural"), ("plugin", "relational-plugin"), ("unlinked", "unlinked-plugin")])
def test_fit_writes_a_template_that_answers(coop, capsys, estimator, name):
    folder, truth, skeleton = coop
    out = folder / f"fitted-{estimator}.yaml"
    code, text, _ = run(capsys, "relational-fit", "--template", folder / "structure.yaml", "--data", folder / "data",
                        "--estimator", estimator, "--steps", 5, "--quiet", "--out", out)
    assert code == 0 and f"fitted the {name} estimator" in text and str(out) in text
    fitted = read_template(out)
    assert fitted.schema == truth.schema
    code, text, _ = run(capsys, "relational-query", "--template", out, "--skeleton", folder / "data",
                        "--target", "orchard_3__Yield", "--do", "hive_1__Treated=yes", "--json")
    payload = json.loads(text)
    assert code == 0 and payload["caution"] == CAUTION
    # the printed answer is the fitted template's exact answer on the same skeleton
    expected = exact_answer(fitted, skeleton, UnitQuery("orchard_3__Yield", do={"hive_1__Treated": "yes"}))
    np.testing.assert_allclose(payload["estimate"]["probs"], expected.probs.tolist(), atol=1e-12)


def test_population_and_spillover_queries_from_sqlite(coop, capsys):
    folder, truth, skeleton = coop
    code, text, _ = run(capsys, "relational-query", "--template", folder / "truth.yaml", "--sqlite", folder / "data.db",
                        "--population", "orchard.Yield", "--policy", "hive.Treated=yes", "--share", 0.5,
                        "--policy-seed", 3)
    assert code == 0 and CAUTION in text and "average P(orchard.Yield | do(hive.Treated=yes on 20))" in text
    pop = exact_answer(truth, skeleton, PopulationQuery("orchard", "Yield", Policy("hive", "Treated", "yes",
                                                                                  share=0.5, seed=3)))
    assert f"{pop['high']:.4f}" in text
    code, text, _ = run(capsys, "relational-query", "--template", folder / "truth.yaml", "--skeleton", folder / "data",
                        "--spillover", "orchard_3__Yield", "--treatment", "hive.Treated", "--treated", "yes",
                        "--untreated", "no", "--state", "high")
    assert code == 0 and "own alone" in text and "neighbours alone" in text and CAUTION in text


@pytest.mark.parametrize("argv, message", [
    (["--target", "orchard_3__Yield", "--population", "orchard.Yield"], "ask one query"),
    (["--population", "orchard"], "--population expects ENTITY.ATTRIBUTE, got 'orchard'"),
    (["--population", "orchard.Yield", "--policy", "hive.Treated"], "--policy expects ENTITY.ATTRIBUTE=STATE"),
    (["--population", "orchard.Yield", "--share", "0.5"], "--share and --units shape a --policy"),
    (["--spillover", "orchard_3__Yield", "--treatment", "hive.Treated"], "missing --treated"),
    (["--target", "orchard_999__Yield"], "no instance '999'"),
    (["--target", "orchard_3__Yield", "--do", "hive_1__Treated=maybe"], "maybe"),
])
def test_bad_queries_are_one_line_errors(coop, capsys, argv, message):
    folder, _, _ = coop
    code, _, err = run(capsys, "relational-query", "--template", folder / "truth.yaml", "--skeleton", folder / "data",
                       *argv)
    assert code == 2 and message in err and err.startswith("intervgnn: error:")


def test_bad_files_are_one_line_errors(coop, capsys, tmp_path, monkeypatch):
    folder, _, _ = coop
    code, _, err = run(capsys, "relational-fit", "--template", folder / "structure.yaml", "--out", tmp_path / "x.yaml")
    assert code == 2 and "--data FOLDER (CSV files) or --sqlite FILE" in err
    code, _, err = run(capsys, "relational-query", "--template", folder / "structure.yaml",
                       "--skeleton", folder / "data", "--target", "orchard_3__Yield")
    assert code == 2 and "has no 'cpt'" in err
    code, _, err = run(capsys, "relational-fit", "--template", folder / "structure.yaml", "--data", tmp_path / "none",
                       "--out", tmp_path / "x.yaml")
    assert code == 2 and "no such folder" in err
    # an output that cannot be written is refused before the data are read and fitted, not after the fit
    import intervgnn.cli as cli

    def too_late(*args, **kwargs):
        raise AssertionError("the data were read before --out was checked")

    monkeypatch.setattr(cli, "_relational_data", too_late)
    code, _, err = run(capsys, "relational-fit", "--template", folder / "structure.yaml", "--data", folder / "data",
                       "--out", tmp_path / "missing" / "x.yaml")
    assert code == 2 and "--out: cannot write" in err and "does not exist" in err
