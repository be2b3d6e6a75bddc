"""Sweeps: outputs, determinism, executors agree, a killed sweep resumes with nothing lost or redone."""

from __future__ import annotations

import csv
import glob
import json
import os
import signal
import subprocess
import sys
import time

import pytest
import yaml

from intervgnn.harness import load_config, run_experiment
from intervgnn.harness.summary import SUMMARY_COLUMNS

TINY = {
    "name": "tiny",
    "networks": ["cancer", "survey"],
    "rows": [300, 1000],
    "seeds": [0],
    "queries": {"count": 4, "kinds": ["do", "conditional", "joint", None], "seed": 0},
    "estimators": ["naive", "plugin", "backdoor", {"neural": {"steps": 4}}],
    "metrics": ["tv", "kl", "jsd", "hellinger", "effect"],
    "workers": 1,
    "bootstrap": 200,
}


def write_config(tmp_path, name, **changes):
    doc = {**TINY, **changes, "output": str(tmp_path / name)}
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(doc))
    return load_config(path), path


def read(path):
    with open(path) as fh:
        return fh.read()


@pytest.fixture(scope="module")
def first_sweep(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("sweep")
    cfg, _ = write_config(tmp, "a")
    paths = run_experiment(cfg, progress=False)
    return tmp, cfg, paths


def test_outputs(first_sweep):
    tmp, cfg, paths = first_sweep
    for key in ("queries", "summary", "summary_md", "report_md", "report_html"):
        assert os.path.getsize(paths[key]) > 0, key
    with open(paths["summary"]) as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == SUMMARY_COLUMNS
    assert {r["estimator"] for r in rows} == {"naive", "plugin", "backdoor", "neural"}
    assert {r["metric"] for r in rows} == {"tv", "kl", "jsd", "hellinger", "effect"}
    assert {"all", "confounded"} <= {r["subset"] for r in rows}
    for r in rows:
        assert float(r["ci_low"]) <= float(r["mean"]) + 1e-12 <= float(r["ci_high"]) + 2e-12
    with open(paths["queries"]) as fh:
        qrows = list(csv.DictReader(fh))
    assert {r["status"] for r in qrows if r["estimator"] == "backdoor"} == {"ok", "unsupported"}
    pngs = glob.glob(os.path.join(cfg.output, "plots", "*.png"))
    assert any("error_vs_rows_cancer" in p for p in pngs) and any("confounded_" in p for p in pngs)
    assert "<img" in read(paths["report_html"]) and "Caution" in read(paths["report_md"])
    assert len(glob.glob(os.path.join(cfg.output, "runs", "*.json"))) == cfg.grid_size == 16


def test_same_config_same_summary(first_sweep, tmp_path):
    _, cfg_a, paths_a = first_sweep
    cfg_b, _ = write_config(tmp_path, "b")
    paths_b = run_experiment(cfg_b, progress=False)
    assert read(paths_a["summary"]) == read(paths_b["summary"])
    assert read(paths_a["queries"]) == read(paths_b["queries"])


def test_process_pool_gives_the_same_results(first_sweep, tmp_path):
    _, _, paths_a = first_sweep
    cfg, _ = write_config(tmp_path, "pool")
    paths = run_experiment(cfg, workers=2, progress=False)
    assert read(paths["summary"]) == read(paths_a["summary"])


def test_ray_gives_the_same_results(first_sweep, tmp_path):
    pytest.importorskip("ray")
    _, _, paths_a = first_sweep
    cfg, _ = write_config(tmp_path, "ray")
    paths = run_experiment(cfg, executor="ray", workers=2, progress=False)
    assert read(paths["summary"]) == read(paths_a["summary"])


def test_killed_sweep_resumes_with_nothing_lost_redone_or_half_written(first_sweep, tmp_path):
    _, _, paths_a = first_sweep
    cfg, cfg_path = write_config(tmp_path, "killed")
    runs = os.path.join(cfg.output, "runs")
    proc = subprocess.Popen(
        [sys.executable, "-m", "intervgnn", "run", str(cfg_path), "--quiet"],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )
    deadline = time.time() + 120
    while time.time() < deadline:
        done = glob.glob(os.path.join(runs, "*.json"))
        if len(done) >= 5:
            break
        time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    finished = sorted(glob.glob(os.path.join(runs, "*.json")))
    assert 5 <= len(finished) < cfg.grid_size, "the sweep must be killed part-way"
    for p in finished:  # every file there is complete
        json.loads(read(p))
    before = {p: os.stat(p).st_mtime_ns for p in finished}
    paths = run_experiment(cfg, resume=True, progress=False)
    after = sorted(glob.glob(os.path.join(runs, "*.json")))
    assert len(after) == cfg.grid_size
    assert not glob.glob(os.path.join(runs, ".*.tmp"))
    for p, mtime in before.items():
        assert os.stat(p).st_mtime_ns == mtime, f"{os.path.basename(p)} was redone"
    assert read(paths["summary"]) == read(paths_a["summary"])


def test_a_metric_added_later_is_scored_on_resume_without_rerunning(tmp_path):
    # the run files keep estimates, not scores, so a resumed sweep scores every metric of its config
    cfg, _ = write_config(tmp_path, "metrics", networks=["cancer"], rows=[300], estimators=["naive", "plugin"], metrics=["tv"])
    run_experiment(cfg, progress=False)
    runs = sorted(glob.glob(os.path.join(cfg.output, "runs", "*.json")))
    before = {p: os.stat(p).st_mtime_ns for p in runs}
    more, _ = write_config(tmp_path, "metrics", networks=["cancer"], rows=[300], estimators=["naive", "plugin"], metrics=["tv", "kl"])
    paths = run_experiment(more, resume=True, progress=False)
    assert {p: os.stat(p).st_mtime_ns for p in runs} == before
    with open(paths["summary"]) as fh:
        rows = list(csv.DictReader(fh))
    assert {r["metric"] for r in rows} == {"tv", "kl"}
    assert all(int(r["n_queries"]) > 0 for r in rows if r["subset"] == "all")


def test_a_failed_run_costs_no_other_run(tmp_path, monkeypatch):
    # common practice, no source: one bad cell of a sweep must not throw away the rest
    from intervgnn.errors import DataError, RunError
    from intervgnn.harness import executors

    cfg, _ = write_config(tmp_path, "failing", networks=["cancer"], rows=[300], estimators=["naive", "plugin"], seeds=[0, 1])
    real = executors.execute_run

    def flaky(spec, cfg):
        if spec.key == "cancer__300__seed0__naive":
            raise DataError("made to fail")
        return real(spec, cfg)

    monkeypatch.setattr(executors, "execute_run", flaky)
    with pytest.raises(RunError, match=r"^1 of 4 runs failed .*--resume.*: cancer__300__seed0__naive: made to fail$") as info:
        run_experiment(cfg, progress=False)
    assert list(info.value.failed) == ["cancer__300__seed0__naive"]
    runs = os.path.join(cfg.output, "runs")
    saved = sorted(os.path.basename(p) for p in glob.glob(os.path.join(runs, "*.json")))
    assert saved == ["cancer__300__seed0__plugin.json", "cancer__300__seed1__naive.json", "cancer__300__seed1__plugin.json"]
    before = {p: os.stat(os.path.join(runs, p)).st_mtime_ns for p in saved}
    monkeypatch.setattr(executors, "execute_run", real)
    run_experiment(cfg, resume=True, progress=False)
    assert len(glob.glob(os.path.join(runs, "*.json"))) == 4
    assert {p: os.stat(os.path.join(runs, p)).st_mtime_ns for p in saved} == before
