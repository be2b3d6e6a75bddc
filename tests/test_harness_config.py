"""Config validation: every error names the key and what was expected (common practice, no source)."""

from __future__ import annotations

import pytest
import yaml

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
    c = cfg(estimators=["naive", {"neural": {"steps": 5, "label": "quick"}}], queries={"count": 3, "kinds": ["do", None]})
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
        ({"estimators": [{"neural": {"step": 3}}]}, r"estimators\[0\].neural: unknown setting 'step' \(did you mean 'steps'\?\)"),
        ({"estimators": [{"neural": {"steps": "ten"}}]}, r"estimators\[0\].neural.steps: expected int, got 'ten'"),
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
        # shapes and types of every key
        ({"output": 3}, r"c.yaml: 'output' must be a folder path, got a whole number"),
        ({"networks": "cancer"}, r"c.yaml: 'networks' must be a list, got text"),
        ({"networks": [3]}, r"networks\[0\]: expected a network name or a mapping, got a whole number"),
        ({"networks": [{"hidden": ["Smoker"]}]}, r"networks\[0\]: 'network' must name a shipped network, a random network or a BIF file"),
        ({"networks": [{"network": "cancer", "hiden": ["Smoker"]}]}, r"networks\[0\]: unknown key 'hiden' \(did you mean 'hidden'\?\)"),
        ({"networks": [{"network": "cancer", "hidden": "Smoker"}]}, r"networks\[0\].hidden: expected a list of variable names"),
        ({"networks": ["cancer", "cancer"]}, r"networks: label 'cancer' is used twice"),
        ({"rows": [0]}, r"rows: 0 is below the minimum of 1"),
        ({"rows": [100, 100]}, r"rows: 100 is listed twice"),
        ({"seeds": [-1]}, r"seeds: -1 is below the minimum of 0"),
        ({"seeds": [1, 1]}, r"seeds: 1 is listed twice"),
        ({"estimators": "plugin"}, r"c.yaml: 'estimators' must be a list, got text"),
        ({"estimators": [{"plugin": {}, "naive": {}}]}, r"estimators\[0\]: expected an estimator name or a one-key mapping"),
        ({"estimators": [{"plugin": 3}]}, r"estimators\[0\].plugin: settings must be a mapping, got a whole number"),
        ({"estimators": [{"plugin": {"label": 3}}]}, r"estimators\[0\].plugin.label: expected text"),
        ({"estimators": [{"naive": {1: 2}}]}, r"estimators\[0\].naive: setting names must be text, got 1"),
        # values the estimator itself refuses, found before any run starts
        ({"estimators": [{"naive": {"alpha": -1}}]}, r"estimators\[0\]\.naive\.alpha must be a non-negative number, got -1"),
        ({"estimators": [{"plugin": {"alpha": "often"}}]}, r"estimators\[0\]\.plugin\.alpha must be a non-negative number or 'auto', got 'often'"),
        ({"estimators": [{"backdoor": {"classifier": "logisitc"}}]}, r"estimators\[0\].backdoor: unknown classifier 'logisitc' \(did you mean 'logistic'\?\)"),
        ({"estimators": [{"estimand": {"formula": "simple"}}]}, r"estimators\[0\].estimand: unknown formula 'simple' \(did you mean 'simplest'\?\)"),
        ({"estimators": [{"neural": {"steps": 0}}]}, r"estimators\[0\]\.neural\.steps must be a positive integer, got 0"),
        # labels name the run files
        ({"estimators": [{"plugin": {"label": "a/b"}}]}, r"estimators\[0\].plugin: label 'a/b' cannot name a run file"),
        ({"networks": [{"network": "cancer", "label": "my net"}]}, r"networks\[0\]: label 'my net' cannot name a run file"),
        ({"networks": [{"network": "cancer", "label": "a__b"}]}, r"networks\[0\]: label 'a__b' cannot name a run file"),
        ({"queries": [3]}, r"queries: expected a mapping, got a list"),
        ({"queries": {"count": 0}}, r"queries.count: expected a whole number from 1 to 1,000, got 0"),
        ({"queries": {"kinds": []}}, r"queries.kinds: expected a non-empty list"),
        ({"queries": {"seed": "x"}}, r"queries.seed: expected a whole number, got 'x'"),
        ({"experiments": [1]}, r"experiments: expected a mapping, got a list"),
        ({"experiments": {"targets": "Smoker", "rows_per_target": 5}}, r"experiments.targets: expected a list of variable names"),
        ({"experiments": {"count": -1, "rows_per_target": 5}}, r"experiments.count: expected a whole number, got -1"),
        ({"experiments": {"count": 1, "rows_per_target": "many"}}, r"experiments.rows_per_target: expected a whole number, got 'many'"),
        ({"experiments": {"count": 1}}, r"experiments.rows_per_target: give the number of experimental rows per target"),
        ({"experiments": {"count": 1, "rows_per_target": 5, "rows": 3}}, r"experiments: unknown key 'rows'"),
        ({"metrics": []}, r"metrics: expected a non-empty list"),
        ({"bootstrap": 1}, r"bootstrap: expected 0 \(no interval\) or a whole number of at least 100, got 1"),
        ({"bootstrap": -5}, r"bootstrap: expected 0 \(no interval\) or a whole number of at least 100, got -5"),
    ],
)
def test_config_errors(changes, message):
    with pytest.raises(ConfigError, match=message):
        cfg(**changes)


def test_a_top_level_that_is_not_a_mapping():
    with pytest.raises(ConfigError, match=r"c.yaml: expected a mapping of settings at the top"):
        parse_config(["networks"], "c.yaml")


def test_unreadable_config_files(tmp_path):
    with pytest.raises(ConfigError, match=r"is a folder, not a config file"):
        load_config(tmp_path)
    p = tmp_path / "latin1.yaml"
    p.write_bytes(b"networks: [cancer]\nname: caf\xe9\n")
    with pytest.raises(ConfigError, match=r"latin1.yaml, line 2: not UTF-8 text \(byte 0xe9\)"):
        load_config(p)


def write(tmp_path, **changes):
    doc = {**BASE, "output": str(tmp_path / "out"), **changes}
    p = tmp_path / "c.yaml"
    p.write_text(yaml.safe_dump(doc))
    return load_config(p)


@pytest.mark.parametrize(
    "changes, message",
    [
        ({"networks": [{"network": "cancer", "hidden": ["Smokr"]}]},
         r"network 'cancer-hidden': hidden variable 'Smokr' is not in the network \(did you mean 'Smoker'\?\)"),
        ({"experiments": {"targets": ["Smoker", "Polution"], "rows_per_target": 5}},
         r"experiments.targets: 'Polution' is not an observed variable of any network \(did you mean 'Pollution'\?\)"),
        ({"networks": ["cancer", "survey"], "experiments": {"targets": ["Smoker"], "rows_per_target": 5}},
         r"network 'survey': none of the experiment targets \(Smoker\) is an observed variable of this network"),
        ({"networks": [{"network": "cancer", "hidden": ["Smoker"]}], "experiments": {"targets": ["Smoker"], "rows_per_target": 5}},
         r"network 'cancer-hidden': none of the experiment targets \(Smoker\) is an observed variable"),
    ],
)
def test_errors_only_the_networks_reveal_stop_the_sweep_before_it_starts(tmp_path, changes, message):
    from intervgnn.harness import run_grid

    c = write(tmp_path, **changes)
    earlier = tmp_path / "out" / "runs" / "earlier.json"
    earlier.parent.mkdir(parents=True)
    earlier.write_text("{}")
    with pytest.raises(ConfigError, match=message):
        run_grid(c, progress=False)
    assert earlier.exists(), "a refused sweep must leave the earlier runs alone"


def test_a_broken_network_file_stops_the_sweep_before_it_starts(tmp_path):
    from intervgnn.errors import BIFParseError
    from intervgnn.harness import run_grid

    bif = tmp_path / "broken.bif"
    bif.write_text("network broken {\n}\nvariable A {\n  type discrete [ 2 ] { a, b }\n")
    c = write(tmp_path, networks=[str(bif)])
    with pytest.raises(BIFParseError, match=r"broken.bif"):
        run_grid(c, progress=False)
    assert not (tmp_path / "out" / "runs").exists()


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"workers": 0}, r"workers: expected a whole number of at least 1, got 0"),
        ({"executor": "dask"}, r"unknown executor 'dask'; executors are: local, ray"),
        ({"address": "10.0.0.1:6379"}, r"an address is for the ray executor \(--executor ray\)"),
    ],
)
def test_run_arguments_are_checked(tmp_path, kwargs, message):
    from intervgnn.harness import run_grid

    with pytest.raises(ConfigError, match=message):
        run_grid(write(tmp_path), progress=False, **kwargs)


def test_cli_rows_must_be_a_row_count_of_the_config(tmp_path, capsys):
    from intervgnn.cli import main

    write(tmp_path, rows=[100, 200])
    assert main(["run", str(tmp_path / "c.yaml"), "--rows", "300", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.strip() == "intervgnn: error: --rows 300 is not a row count of this config; its row counts are: 100, 200"


def test_cli_config_that_is_a_folder_is_a_clean_error(tmp_path, capsys):
    from intervgnn.cli import main

    assert main(["run", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("intervgnn: error: ") and "is a folder, not a config file" in err and "Traceback" not in err


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
        cfg = load_config(p)
        if "relational" in os.path.basename(p):  # a relational sweep (intervgnn.harness.relational)
            assert cfg.benchmarks and cfg.seeds
        else:
            assert cfg.grid_size > 0
