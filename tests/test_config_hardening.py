"""Config values that used to pass validation and then fail, hang or do nothing are refused when the config is read."""

from __future__ import annotations

import pytest

from intervgnn.cli import main
from intervgnn.errors import ConfigError
from intervgnn.harness import load_config, parse_config, run_grid

BASE = {"networks": "[cancer]", "rows": "[100]", "seeds": "[0]", "estimators": "[plugin]"}


def write(tmp_path, **changes) -> str:
    """A config file: the base keys, each changed key replaced by its YAML text."""
    doc = {**BASE, "output": repr(str(tmp_path / "out")), **changes}
    path = tmp_path / "c.yaml"
    path.write_text("".join(f"{key}: {text}\n" for key, text in doc.items()), encoding="utf-8")
    return str(path)


def refused_by_cli(capsys, path: str) -> str:
    """Run the sweep through the command line; it must stop with exit code 2 and one line, no traceback."""
    assert main(["run", path, "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("intervgnn: error: ") and "Traceback" not in err
    return err


@pytest.mark.parametrize(
    "changes, message",
    [
        # estimator settings, checked by the estimator itself and named by their key path
        ({"estimators": "[plugin, {neural: {lr: -1}}]"}, r"^estimators\[1\]\.neural\.lr must be above 0, got -1$"),
        ({"estimators": "[{neural: {lr: .nan}}]"}, r"^estimators\[0\]\.neural\.lr must be a number, got nan$"),
        ({"estimators": "[{neural: {lr: .inf}}]"}, r"^estimators\[0\]\.neural\.lr must be a number, got inf$"),
        ({"estimators": "[{neural: {lr: " + "9" * 400 + "}}]"}, r"^estimators\[0\]\.neural\.lr must be a number, got 9+\.\.\.9+$"),
        ({"estimators": "[{neural: {weight_decay: -1}}]"}, r"^estimators\[0\]\.neural\.weight_decay must be 0 or more, got -1$"),
        ({"estimators": "[{neural: {max_table_rows: -1}}]"},
         r"^estimators\[0\]\.neural\.max_table_rows must be a positive integer, got -1$"),
        ({"estimators": "[{neural: {patience: -1}}]"}, r"^estimators\[0\]\.neural: unknown setting 'patience'; settings are: dim, "),
        ({"estimators": "[{neural: {steps: 1000000000}}]"}, r"^estimators\[0\]\.neural\.steps must be at most 1,000,000, got 1000000000$"),
        ({"estimators": "[{neural: {dim: 1000000000}}]"}, r"^estimators\[0\]\.neural\.dim must be at most 4,096, got 1000000000$"),
        ({"estimators": "[{neural: {mc_samples: 1000000000000}}]"},
         r"^estimators\[0\]\.neural\.mc_samples must be at most 10,000,000, got 1000000000000$"),
        ({"estimators": "[{neural: {folds: 100000}}]"}, r"^estimators\[0\]\.neural\.folds must be at most 100, got 100000$"),
        ({"estimators": "[{naive: {alpha: .inf}}]"}, r"^estimators\[0\]\.naive\.alpha must be a non-negative number, got inf$"),
        ({"estimators": "[{plugin: {alpha: .inf}}]"},
         r"^estimators\[0\]\.plugin\.alpha must be a non-negative number or 'auto', got inf$"),
        ({"estimators": "[{estimand: {alpha: .nan}}]"}, r"^estimators\[0\]\.estimand\.alpha must be a non-negative number, got nan$"),
        ({"estimators": "[{plugin: {label: " + "p" * 101 + "}}]"},
         r"^estimators\[0\]\.plugin: label 'p+\.\.\.p+' is 101 characters long; at most 100 \(set 'label'\)$"),
        # row counts and experiments
        ({"rows": "[1000000000000]"}, r"^rows: 1000000000000 is above the maximum of 100,000,000$"),
        ({"experiments": "{count: 1, rows_per_target: 1000000000000}"},
         r"^experiments\.rows_per_target: 1000000000000 is above the maximum of 100,000,000$"),
        # YAML reads 1e12 (no dot) as text
        ({"experiments": "{count: 1, rows_per_target: 1e12}"}, r"^experiments\.rows_per_target: expected a whole number, got '1e12'$"),
        ({"experiments": "{targets: [Smoker, Smoker], rows_per_target: 5}"}, r"^experiments\.targets: 'Smoker' is listed twice$"),
        ({"experiments": "{targets: [Smoker], count: 2, rows_per_target: 5}"},
         r"^experiments: give 'targets' \(variable names\) or 'count' \(a seeded choice\), not both$"),
        # queries, seeds, metrics, bootstrap
        ({"queries": "{seed: -1}"}, r"^queries\.seed: expected a whole number from 0 to 9,223,372,036,854,775,807, got -1$"),
        ({"queries": "{count: 1000000}"}, r"^queries\.count: expected a whole number from 1 to 1,000, got 1000000$"),
        ({"queries": "{kinds: [do, null, do]}"}, r"^queries\.kinds: kind 'do' is listed twice$"),
        ({"seeds": "[" + "9" * 30 + "]"}, r"^seeds: 9{30} is above the maximum of 9,223,372,036,854,775,807$"),
        ({"metrics": "[tv, kl, tv]"}, r"^metrics: metric 'tv' is listed twice$"),
        ({"bootstrap": "100000000"}, r"^bootstrap: 100000000 resamples; at most 10,000 are allowed$"),
        # networks, names and labels
        ({"networks": "[{network: cancer, hidden: [Smoker, Smoker]}]"}, r"^networks\[0\]\.hidden: 'Smoker' is listed twice$"),
        ({"networks": "[{network: cancer, label: ''}]"}, r"^networks\[0\]: label '' cannot name a run file"),
        ({"networks": "[{network: cancer, label: 0}, {network: cancer, label: 0}]"}, r"^networks: label '0' is used twice"),
        ({"name": "[a, b]"}, r"c\.yaml: 'name' must be text, got \['a', 'b'\]$"),
        ({"output": "''"}, r"c\.yaml: 'output' must be a folder path, got empty text \(leave it out for runs/<name>\)$"),
        ({"rows": "[" + "x" * 500 + "]"}, r"^rows: expected whole numbers, got 'x+\.\.\.x+'$"),
        # grid size
        ({"rows": "[" + ", ".join(str(i) for i in range(1, 1001)) + "]", "seeds": "[" + ", ".join(str(i) for i in range(101)) + "]"},
         r"c\.yaml: the grid has 101,000 runs \(networks x rows x seeds x estimators\); at most 100,000 are allowed$"),
    ],
)
def test_refused_when_read(tmp_path, changes, message):
    with pytest.raises(ConfigError, match=message):
        load_config(write(tmp_path, **changes))


@pytest.mark.parametrize("key", ["rows", "seeds", "networks", "estimators"])
def test_a_list_too_long_to_be_meant_is_refused_at_once(key):
    # 200,000 entries: the duplicate check used to scan a list per entry (minutes); now the length is checked first
    long = list(range(1, 200_001)) if key in ("rows", "seeds") else ["cancer"] * 200_000 if key == "networks" else ["plugin"] * 200_000
    doc = {"networks": ["cancer"], "rows": [100], "seeds": [0], "estimators": ["plugin"], key: long}
    with pytest.raises(ConfigError, match=rf"^{key}: 200,000 entries; at most 1,000 are allowed$"):
        parse_config(doc, "c.yaml")


def test_a_long_list_within_the_bound_is_accepted():
    cfg = parse_config({"networks": ["cancer"], "rows": list(range(1, 1001)), "seeds": [0], "estimators": ["plugin"]}, "c.yaml")
    assert len(cfg.rows) == 1000


@pytest.mark.parametrize(
    "changes, message",
    [
        ({"networks": "[{network: cancer, hidden: [Pollution, Smoker, Cancer, Xray, Dyspnoea]}]"},
         r"^network 'cancer-hidden': 'hidden' lists every variable; leave some observed$"),
        ({"networks": "[{network: cancer, hidden: [Pollution, Smoker, Cancer, Xray]}]"},
         r"^network 'cancer-hidden': no query of the kinds do can be drawn from its 1 observed variable\(s\); "),
        ({"networks": "[{network: cancer, hidden: [Pollution, Smoker, Cancer]}]", "queries": "{kinds: [null]}",
          "experiments": "{count: 1, rows_per_target: 5}"},
         r"^network 'cancer-hidden': experiments\.count: no observed variable has a descendant to experiment on$"),
        ({"rows": "[100000000]"},
         r"^rows: 100,000,000 rows of network 'cancer' \(5 variables\) are more than a run may draw \(268,435,456 values\); "
         r"at most 53,687,091 rows for this network$"),
        ({"experiments": "{count: 1, rows_per_target: 60000000}"},
         r"^experiments\.rows_per_target: 60,000,000 rows of network 'cancer' \(5 variables\) are more than a run may draw"),
        ({"estimators": "[plugin, {backdoor: {pairs: [[Smokr, Dyspnoea]]}}]"},
         r"^estimators\[1\]\.backdoor\.pairs\[0\]: 'Smokr' is not an observed variable of network 'cancer' "
         r"\(did you mean 'Smoker'\?\)$"),
    ],
)
def test_refused_by_the_networks_before_any_run(tmp_path, changes, message):
    cfg = load_config(write(tmp_path, **changes))
    with pytest.raises(ConfigError, match=message):
        run_grid(cfg, progress=False)
    assert not (tmp_path / "out").exists(), "nothing may be written before the config is found sound"


def test_cli_bad_learning_rate(tmp_path, capsys):
    err = refused_by_cli(capsys, write(tmp_path, estimators="[plugin, {neural: {lr: -1}}]"))
    assert err.strip() == "intervgnn: error: estimators[1].neural.lr must be above 0, got -1"


def test_cli_negative_query_seed(tmp_path, capsys):
    # it used to end in a numpy traceback when the query sets were drawn
    err = refused_by_cli(capsys, write(tmp_path, queries="{seed: -1}"))
    assert "queries.seed: expected a whole number from 0 to 9,223,372,036,854,775,807, got -1" in err


def test_cli_every_variable_hidden(tmp_path, capsys):
    err = refused_by_cli(capsys, write(tmp_path, networks="[{network: cancer, hidden: [Pollution, Smoker, Cancer, Xray, Dyspnoea]}]"))
    assert "network 'cancer-hidden': 'hidden' lists every variable" in err
    assert not (tmp_path / "out").exists()


def test_cli_rows_beyond_the_bound(tmp_path, capsys):
    err = refused_by_cli(capsys, write(tmp_path, rows="[1000000000000]"))
    assert "rows: 1000000000000 is above the maximum of 100,000,000" in err


def test_a_label_of_zero_is_used_not_replaced(tmp_path):
    cfg = load_config(write(tmp_path, networks="[{network: cancer, label: 0}]"))
    assert cfg.networks[0].label == "0"


def test_sound_values_at_the_bounds_are_accepted(tmp_path):
    cfg = load_config(write(
        tmp_path, rows="[100000000]", seeds="[0, 9223372036854775807]", queries="{count: 1000, seed: 9223372036854775807}",
        bootstrap="10000", estimators="[{neural: {steps: 1000000, folds: 100, lr: 1, weight_decay: 0}}]",
    ))
    assert cfg.rows == (10**8,) and cfg.query_seed == 2**63 - 1 and cfg.bootstrap == 10_000
