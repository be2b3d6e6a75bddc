"""Sweeps: stale temporary files removed, Ctrl-C stops a sweep cleanly and keeps what finished, no import cycle."""

from __future__ import annotations

import ast
import glob
import json
import os
import pathlib
import signal
import subprocess
import sys
import time

import pytest
import yaml

import intervgnn
from intervgnn._io import TEMP_SUFFIX, atomic_open, remove_stale_temps
from intervgnn.cli import main
from intervgnn.harness import load_config, run_experiment
from intervgnn.harness.executors import RunsInterrupted
from intervgnn.harness.runs import plan_runs, run_digest

SMALL = {
    "name": "small",
    "networks": ["cancer"],
    "rows": [300],
    "seeds": [0],
    "queries": {"count": 2, "kinds": ["do"], "seed": 0},
    "estimators": ["naive"],
    "metrics": ["tv"],
    "workers": 1,
    "bootstrap": 0,
}


def write_config(tmp_path, name, **changes):
    doc = {**SMALL, **changes, "output": str(tmp_path / name)}
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(doc))
    return load_config(path), path


def mtimes(folder):
    return {p: os.stat(p).st_mtime_ns for p in sorted(glob.glob(os.path.join(folder, "*.json")))}


# --- stale temporary files -------------------------------------------------


def test_atomic_open_names_its_temporary_file_recognisably(tmp_path):
    with atomic_open(tmp_path / "summary.csv") as fh:
        fh.write("x\n")
        names = os.listdir(tmp_path)
        assert len(names) == 1 and names[0].startswith(".summary.csv.") and names[0].endswith(TEMP_SUFFIX)
    assert os.listdir(tmp_path) == ["summary.csv"]


def test_remove_stale_temps_touches_only_our_temporary_files(tmp_path):
    ours = tmp_path / f".plot.png.k2j4{TEMP_SUFFIX}"
    ours.write_bytes(b"half a plot")
    others = [tmp_path / "notes.tmp", tmp_path / ".editor.swp.tmp", tmp_path / f"visible{TEMP_SUFFIX}"]
    for p in others:
        p.write_text("keep me")
    assert remove_stale_temps(tmp_path) == [str(ours)]
    assert sorted(os.listdir(tmp_path)) == sorted(p.name for p in others)
    assert remove_stale_temps(tmp_path / "missing") == []


def test_a_sweep_removes_stale_temporary_files_from_the_folders_it_writes(tmp_path):
    # a sweep killed while writing a plot, a summary or a run record leaves a temporary file behind
    cfg, _ = write_config(tmp_path, "stale")
    stale = [
        os.path.join(cfg.output, "plots", f".error_vs_rows_cancer.png.a1b2c3{TEMP_SUFFIX}"),
        os.path.join(cfg.output, f".summary.csv.d4e5f6{TEMP_SUFFIX}"),
        os.path.join(cfg.output, f".report.html.g7h8i9{TEMP_SUFFIX}"),
        os.path.join(cfg.output, "runs", f".cancer__300__seed0__naive.json.j1k2l3{TEMP_SUFFIX}"),
        os.path.join(cfg.output, "runs", ".cancer__300__seed0__naive.json.x9y8z7.tmp"),  # as intervgnn 0.2 named them
    ]
    kept = os.path.join(cfg.output, "plots", "my_notes.tmp")
    for p in stale + [kept]:
        os.makedirs(os.path.dirname(p), exist_ok=True)
        with open(p, "w") as fh:
            fh.write("half written")
    run_experiment(cfg, progress=False)
    assert [p for p in stale if os.path.exists(p)] == []
    assert os.path.exists(kept)
    assert glob.glob(os.path.join(cfg.output, "**", "*" + TEMP_SUFFIX), recursive=True) == []
    assert glob.glob(os.path.join(cfg.output, "**", ".*" + TEMP_SUFFIX), recursive=True) == []


def test_a_resumed_sweep_removes_a_stale_plot_temporary_file_too(tmp_path):
    cfg, path = write_config(tmp_path, "stale_resume")
    run_experiment(cfg, progress=False)
    stale = os.path.join(cfg.output, "plots", f".confounded_cancer.png.zz9{TEMP_SUFFIX}")
    with open(stale, "wb") as fh:
        fh.write(b"\x89PNG half")
    assert main(["run", str(path), "--resume", "--quiet"]) == 0
    assert not os.path.exists(stale)


# --- Ctrl-C ------------------------------------------------------------------


def test_ctrl_c_in_the_serial_path_keeps_finished_runs_and_exits_130(tmp_path, capsys, monkeypatch):
    # in one process, Ctrl-C is a KeyboardInterrupt raised inside whatever run is going
    from intervgnn.harness import executors

    cfg, path = write_config(tmp_path, "serial", seeds=[0, 1, 2], estimators=["naive", "plugin"])
    real = executors.execute_run
    started = []

    def interrupted_third(spec, cfg):
        started.append(spec.key)
        if len(started) == 3:
            raise KeyboardInterrupt
        return real(spec, cfg)

    monkeypatch.setattr(executors, "execute_run", interrupted_third)
    rc = main(["run", str(path), "--quiet"])
    out, err = capsys.readouterr()
    assert rc == 130  # 128 + SIGINT (common practice, no source)
    assert "Traceback" not in out + err, err
    assert err.strip().splitlines() == [
        "intervgnn: interrupted: 2 of 6 runs finished and kept; run the same command with --resume to do the other 4"
    ]
    runs = os.path.join(cfg.output, "runs")
    before = mtimes(runs)
    assert [os.path.basename(p) for p in before] == ["cancer__300__seed0__naive.json", "cancer__300__seed0__plugin.json"]
    for p in before:
        json.loads(pathlib.Path(p).read_text())

    monkeypatch.setattr(executors, "execute_run", real)
    assert main(["run", str(path), "--resume", "--quiet"]) == 0
    assert "6 runs in the grid; 2 already finished, 4 to run" in capsys.readouterr().out
    after = mtimes(runs)
    assert len(after) == 6
    assert {p: after[p] for p in before} == before, "a finished run was redone"


def test_ctrl_c_reaches_the_library_caller_as_a_keyboard_interrupt(tmp_path, monkeypatch):
    from intervgnn.harness import executors

    cfg, _ = write_config(tmp_path, "library", seeds=[0, 1])

    def interrupted(spec, cfg):
        raise KeyboardInterrupt

    monkeypatch.setattr(executors, "execute_run", interrupted)
    with pytest.raises(KeyboardInterrupt, match=r"^interrupted: 0 of 2 runs finished and kept; .*--resume") as info:
        run_experiment(cfg, progress=False)
    assert isinstance(info.value, RunsInterrupted)
    assert (info.value.finished, info.value.total) == (0, 2)


# the pool's runs for the test below: those of 400 rows are held (until the sweep stops their
# worker), so the sweep is surely part-way when Ctrl-C comes; a module, so the workers can import it
HELD_RUNS = """
import time

from intervgnn.harness import runs


def execute_run(spec, cfg):
    if spec.rows == 400:
        time.sleep(3600)
    return runs.execute_run(spec, cfg)
"""


def test_ctrl_c_stops_a_process_pool_sweep_at_once_and_a_resume_does_the_rest(tmp_path, capsys):
    # grid order: the two runs of 300 rows are taken first and finish; the two of 400 rows
    # then hold both workers
    cfg, path = write_config(tmp_path, "pool", rows=[300, 400], seeds=[0, 1], workers=2)
    runs = os.path.join(cfg.output, "runs")
    (tmp_path / "held_runs.py").write_text(HELD_RUNS)
    code = ("import sys, held_runs; from intervgnn.harness import executors; "
            "executors.execute_run = held_runs.execute_run; from intervgnn.cli import main; sys.exit(main())")
    root = os.path.dirname(os.path.dirname(intervgnn.__file__))
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([root, str(tmp_path)])}
    proc = subprocess.Popen(
        [sys.executable, "-c", code, "run", str(path), "--quiet"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=True, env=env,
    )
    try:
        # guards against a hang, not measurements: a held run never ends by itself
        deadline = time.monotonic() + 120
        while len(glob.glob(os.path.join(runs, "*.json"))) < 2 and time.monotonic() < deadline and proc.poll() is None:
            time.sleep(0.02)
        assert len(glob.glob(os.path.join(runs, "*.json"))) == 2, proc.stderr.read() if proc.poll() is not None else ""
        os.killpg(proc.pid, signal.SIGINT)  # what Ctrl-C in a terminal does
        out, err = proc.communicate(timeout=60)  # the held runs' workers are stopped, not waited for
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
    assert proc.returncode == 130, err  # 128 + SIGINT (common practice, no source)
    assert "Traceback" not in out + err, err
    assert err.strip().splitlines() == [
        "intervgnn: interrupted: 2 of 4 runs finished and kept; run the same command with --resume to do the other 2"
    ]
    before = mtimes(runs)
    assert [os.path.basename(p) for p in before] == ["cancer__300__seed0__naive.json", "cancer__300__seed1__naive.json"]
    assert glob.glob(os.path.join(runs, ".*")) == []  # no half-written record
    digests = {s.key: run_digest(s, cfg) for s in plan_runs(cfg)}
    for p in before:
        rec = json.loads(pathlib.Path(p).read_text())
        # a resume keeps a record of the same digest only: a different one here means intervgnn's
        # files changed between this process's import and the sweep's
        assert rec["digest"] == digests[rec["key"]], "intervgnn changed on disk while the test ran"

    assert main(["run", str(path), "--resume", "--workers", "1", "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "4 runs in the grid; 2 already finished, 2 to run" in out, out
    after = mtimes(runs)
    assert len(after) == 4
    assert {p: after[p] for p in before} == before, "a finished run was redone"


# --- layers ------------------------------------------------------------------


def test_no_harness_module_imports_the_command_line():
    # the command line sits above the harness; a harness module importing it makes a cycle
    folder = pathlib.Path(intervgnn.__file__).parent / "harness"
    offenders = []
    for path in sorted(folder.glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom):
                names = [(node.module or "")] + [f"{node.module or ''}.{a.name}" for a in node.names]
                if node.level == 0 and any(n == "intervgnn.cli" or n.startswith("intervgnn.cli.") for n in names):
                    offenders.append(path.name)
                if node.level == 2 and ((node.module or "").split(".")[0] == "cli"
                                        or (not node.module and any(a.name == "cli" for a in node.names))):
                    offenders.append(path.name)
            elif isinstance(node, ast.Import):
                if any(a.name == "intervgnn.cli" or a.name.startswith("intervgnn.cli.") for a in node.names):
                    offenders.append(path.name)
    assert offenders == []


def test_the_caution_text_has_one_home():
    from intervgnn import cli, texts
    from intervgnn.harness import report

    assert cli.CAUTION is texts.CAUTION and report.CAUTION is texts.CAUTION
    assert texts.CAUTION.startswith("Caution: ")
