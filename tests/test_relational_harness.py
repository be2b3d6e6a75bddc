"""Relational sweeps from a YAML config: validation with key paths, runs, resume, summaries split by query kind."""

from __future__ import annotations

import csv
import json
import re

import pytest

from intervgnn import ConfigError
from intervgnn.cli import CAUTION, main
from intervgnn.harness import load_config
from intervgnn.harness.relational import KINDS, RelationalConfig, parse_relational_config

SMALL = """
name: tiny
output: {out}
relational:
  benchmarks:
    - relational:chain,instances=12,degree=2,max_degree=4
  seeds: [0, 1]
  estimators: [plugin, {{neural: {{steps: 5}}}}, unlinked]
  queries: {{units: 3, spillover: 2}}
  transfer: [{{scale: 0.5}}, {{distribution: heavy-tailed}}]
"""


def test_a_sweep_runs_resumes_and_splits_its_summary_by_kind(tmp_path, capsys):
    out = tmp_path / "out"
    path = tmp_path / "r.yaml"
    path.write_text(SMALL.format(out=out))
    cfg = load_config(path)
    assert isinstance(cfg, RelationalConfig) and cfg.transfer == ({"scale": 0.5}, {"distribution": "heavy-tailed"})
    assert main(["run", str(path)]) == 0
    text = capsys.readouterr().out
    assert "| chain,instances=12,degree=2,max_degree=4 | transfer population |" in text and CAUTION in text
    runs = sorted((out / "runs").iterdir())
    assert [p.name for p in runs] == ["chain-instances12-degree2-max_degree4__seed0.json",
                                      "chain-instances12-degree2-max_degree4__seed1.json"]
    record = json.loads(runs[0].read_text())
    assert set(record["errors"]) == {"plugin", "neural", "unlinked"}
    assert len(record["errors"]["neural"]["unit"]) == 3 and len(record["errors"]["neural"]["population"]) == 3
    assert len(record["errors"]["neural"]["transfer population"]) == 6  # two skeletons x three policies
    # the unlinked ablation sees no effect across links, so on spill-over it is wrong wherever the truth is not 0
    with open(out / "summary.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert {r["kind"] for r in rows} == set(KINDS)
    assert all(r["seeds"] == "2" for r in rows)
    plugin_unit = next(r for r in rows if r["kind"] == "unit" and r["estimator"] == "plugin")
    assert float(plugin_unit["ratio_to_plugin"]) == 1.0
    # --resume keeps both runs (their settings match) and redoes nothing
    before = [p.stat().st_mtime_ns for p in runs]
    assert main(["run", str(path), "--resume"]) == 0
    assert "0 relational run(s) to do, 2 kept" in capsys.readouterr().out
    assert [p.stat().st_mtime_ns for p in runs] == before


@pytest.mark.parametrize("change, message", [
    ({"relational": {"benchmarks": ["bipartite"]}}, "relational.benchmarks[0]: not a relational benchmark spec"),
    ({"relational": {"benchmarks": ["relational:tree"]}}, "relational.benchmarks[0]: unknown relational benchmark 'tree'"),
    ({"relational": {"benchmarks": ["relational:peer"], "seeds": [-1]}}, "relational.seeds[0] must be a whole number"),
    ({"relational": {"benchmarks": ["relational:peer"], "estimators": ["nueral"]}},
     "unknown relational estimator 'nueral' (did you mean 'neural'?)"),
    ({"relational": {"benchmarks": ["relational:peer"], "estimators": [{"neural": {"steps": 0}}]}},
     "relational.estimators[0].neural: steps must be a whole number from 1"),
    ({"relational": {"benchmarks": ["relational:peer"], "estimators": [{"plugin": {"beta": 1}}]}},
     "relational.estimators[0].plugin:"),
    ({"relational": {"benchmarks": ["relational:peer"], "queries": {"share": 1.5}}},
     "relational.queries.share must be a number between 0 and 1"),
    ({"relational": {"benchmarks": ["relational:peer"], "queries": {"unit": 3}}},
     "relational.queries: unknown key 'unit' (did you mean 'units'?)"),
    ({"relational": {"benchmarks": ["relational:peer"], "transfer": [{"scale": 0}]}},
     "relational.transfer[0].scale must be a number above 0"),
    ({"relational": {"benchmarks": ["relational:peer"], "transfer": [{"distribution": "wide"}]}},
     "relational.transfer[0]: distribution must be one of"),
    ({"relational": {"benchmarks": ["relational:peer"], "tranfser": []}}, "unknown key 'tranfser'"),
    ({"relational": {"benchmarks": ["relational:peer", "relational:peer"]}}, "lists one benchmark twice"),
    ({"relational": {"benchmarks": ["relational:peer"]}, "workers": 0}, "workers must be a whole number"),
    ({"relational": {"benchmarks": ["relational:peer,seed=2"]}}, "leave seed= out of the spec"),
    ({"relational": {"benchmarks": ["relational:peer", "relational:peer,degree=2"]}}, "lists one benchmark twice"),
    ({"relational": {"benchmarks": ["relational:peer"], "seeds": [2**63 - 1]}}, "relational.seeds[0] must be a whole number"),
])
def test_bad_configs_name_the_key(change, message):
    with pytest.raises(ConfigError, match=re.escape(message)):
        parse_relational_config({"name": "x", **change}, "c.yaml")


def test_run_refuses_rows_for_a_relational_sweep(tmp_path, capsys):
    path = tmp_path / "r.yaml"
    path.write_text(SMALL.format(out=tmp_path / "out"))
    assert main(["run", str(path), "--rows", "1000"]) == 2
    assert "a relational sweep has no --rows" in capsys.readouterr().err
