"""Config validation: every error names the key and what was expected."""

from __future__ import annotations

import pytest

from intervgnn.errors import ConfigError
from intervgnn.harness import load_config, parse_config

BASE = {
    "networks": ["cancer"],
    "rows": [100],
    "seeds": [0],
    "estimators": ["plugin"],
}


def cfg(**changes):
    doc = {**BASE, **changes}
    return parse_config({k: v for k, v in doc.items() if v is not ...}, "c.yaml")


def test_a_valid_config():
    c = cfg(estimators=["naive", {"neural": {"epochs": 5, "label": "quick"}}], queries={"count": 3, "kinds": ["do", None]})
    assert [e.label for e in c.estimators] == ["naive", "quick"]
    assert c.query_kinds == ("do", "null") and c.grid_size == 2


@pytest.mark.parametrize(
    "changes, message",
    [
        ({"netwroks": ["cancer"]}, r"c.yaml: unknown key 'netwroks' \(did you mean 'networks'\?\)"),
        ({"rows": "many"}, r"rows: expected a whole number or a list of them, got text"),
        ({"rows": [100, 2.5]}, r"rows: expected whole numbers, got 2.5"),
        ({"networks": ["alrm"]}, r"networks\[0\]: unknown network 'alrm' \(did you mean 'alarm'\?\)"),
        ({"estimators": ["nueral"]}, r"estimators\[0\]: unknown estimator 'nueral' \(did you mean 'neural'\?\)"),
        ({"estimators": [{"neural": {"epoch": 3}}]}, r"estimators\[0\].neural: unknown setting 'epoch' \(did you mean 'epochs'\?\)"),
        ({"estimators": [{"neural": {"epochs": "ten"}}]}, r"estimators\[0\].neural.epochs: expected int, got 'ten'"),
        ({"estimators": [{"plugin": {"seed": 3}}]}, r"'seed' is set by the harness"),
        ({"metrics": ["tvd"]}, r"metrics: unknown metric 'tvd' \(did you mean 'tv'\?\)"),
        ({"queries": {"kinds": ["does"]}}, r"queries.kinds: unknown query kind 'does' \(did you mean 'do'\?\)"),
        ({"queries": {"cuont": 3}}, r"queries: unknown key 'cuont' \(did you mean 'count'\?\)"),
        ({"executor": "dask"}, r"executor: unknown executor 'dask'"),
        ({"workers": 0}, r"workers: expected a whole number of at least 1, got 0"),
        ({"rows": []}, r"c.yaml: the grid is empty: no rows"),
        ({"estimators": []}, r"the grid is empty: no estimators"),
        ({"seeds": ...}, r"c.yaml: missing key 'seeds'"),
        ({"estimators": ["plugin", "plugin"]}, r"estimators: label 'plugin' is used twice"),
        ({"experiments": {"rows_per_target": 10}}, r"experiments: give 'targets' \(variable names\) or 'count'"),
    ],
)
def test_config_errors(changes, message):
    with pytest.raises(ConfigError, match=message):
        cfg(**changes)


def test_yaml_syntax_error_has_a_line(tmp_path):
    p = tmp_path / "bad.yaml"
    p.write_text("networks: [cancer\nrows: [1]\n")
    with pytest.raises(ConfigError, match=r"bad.yaml, line \d+: not valid YAML"):
        load_config(p)
    with pytest.raises(ConfigError, match="no such file"):
        load_config(tmp_path / "missing.yaml")


def test_shipped_configs_are_valid():
    import glob
    import os

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    paths = sorted(glob.glob(os.path.join(root, "configs", "*.yaml")))
    assert any(p.endswith("quickstart.yaml") for p in paths)
    for p in paths:
        assert load_config(p).grid_size > 0
