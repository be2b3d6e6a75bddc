"""Bad query, sampling and seed arguments give clear errors; answers and samples stay bounded."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from intervgnn.bn.exact import ExactEngine
from intervgnn.bn.sampling import MAX_SAMPLE_CELLS, AncestralSampler
from intervgnn.cli import main
from intervgnn.distribution import Distribution
from intervgnn.errors import DataError, QueryError
from intervgnn.estimators import (
    BackdoorEstimator,
    EstimandEstimator,
    NaiveEstimator,
    NeuralEstimator,
    PluginEstimator,
)
from intervgnn.query import MAX_ANSWER_ENTRIES, check_seed

from .conftest import our_network

SEED_MESSAGE = "seed must be a non-negative whole number, got "


def run(capsys, *argv):
    rc = main([str(a) for a in argv])
    out = capsys.readouterr()
    assert "Traceback" not in out.out and "Traceback" not in out.err
    return rc, out.out, out.err


def alarm_twenty():
    """Twenty of alarm's variables: a joint answer far above the limit."""
    names = list(our_network("alarm").variables[:20])
    net = our_network("alarm")
    assert math.prod(len(net.states[v]) for v in names) > MAX_ANSWER_ENTRIES
    return names


# ------------------------------------------------------------------ targets and assignments
@pytest.mark.parametrize(
    "target, message",
    [
        (None, "target must be a variable name or a list of names, got NoneType None"),
        (5, "target must be a variable name or a list of names, got int 5"),
        (b"Cancer", "target must be a variable name or a list of names, got bytes b'Cancer'"),
        ({"Cancer": "True"}, "target must be a variable name or a list of names, got dict"),
        (["Cancer", 5], "target variable names must be strings, got int 5"),
        ([b"Cancer"], "target variable names must be strings, got bytes b'Cancer'"),
    ],
)
def test_target_that_is_not_a_name(target, message):
    with pytest.raises(QueryError, match=f"^{message}"):
        our_network("cancer").query(target)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"do": {5: "True"}}, "intervened variable names must be strings, got int 5"),
        ({"given": {None: "True"}}, "observed variable names must be strings, got NoneType None"),
        ({"do": {"Smoker": 1}}, "the state of 'Smoker' must be a string (a state name), got int 1; states are: False, True"),
        ({"given": {"Smoker": None}}, "the state of 'Smoker' must be a string (a state name), got NoneType None"),
        ({"given": {"Smoker": b"True"}}, "the state of 'Smoker' must be a string (a state name), got bytes b'True'"),
    ],
)
def test_do_and_given_names_and_states_must_be_strings(kwargs, message):
    with pytest.raises(QueryError) as info:
        our_network("cancer").query("Cancer", **kwargs)
    assert str(info.value).startswith(message)


def test_long_names_are_cut_in_messages():
    long = "x" * 300
    with pytest.raises(QueryError, match=r"^unknown target variable 'x{77}\.\.\.'; variables are: ") as info:
        our_network("cancer").query(long)
    assert len(str(info.value)) < 200
    with pytest.raises(QueryError, match=r"^unknown state 'x{77}\.\.\.' for variable 'Smoker'"):
        our_network("cancer").query("Cancer", do={"Smoker": long})
    with pytest.raises(QueryError, match=r"^target variable names must be strings, got list \['y+\.\.\.y+\.\.\.$") as info:
        our_network("cancer").query(["Cancer", ["y" * 300]])
    assert len(str(info.value).split("got list ")[1]) <= 80


def test_query_each_checks_the_swept_variable():
    net = our_network("cancer")
    with pytest.raises(QueryError, match=r"^intervened variable names must be strings, got list \['Smoker'\]"):
        net.query_each("Cancer", ["Smoker"])
    with pytest.raises(QueryError, match="^intervened values must map variable names to state names, got int"):
        net.query_each("Cancer", "Smoker", do=5)
    with pytest.raises(QueryError, match="^'Smoker' is swept over and also given a value in do="):
        net.query_each("Cancer", "Smoker", do={"Smoker": "True"})


def test_effect_checks_its_names():
    net = our_network("cancer")
    est = PluginEstimator().fit(net.sample(200, seed=0), net.graph)
    with pytest.raises(QueryError, match="^target variable names must be strings, got list"):
        est.effect(["Cancer"], "Smoker", "True", "False", "True")
    with pytest.raises(QueryError, match=r"^the state of 'Cancer' must be a string \(a state name\), got int 1"):
        est.effect("Cancer", "Smoker", "True", "False", 1)


def test_cli_long_state_is_cut(capsys):
    rc, _, err = run(capsys, "exact", "--network", "cancer", "--target", "Cancer", "--given", "Smoker=" + "q" * 200)
    assert rc == 2
    assert err.startswith("intervgnn: error: unknown state '" + "q" * 77 + "...' for variable 'Smoker'; states are: False, True")


# ----------------------------------------------------------------------------- seeds
@pytest.mark.parametrize("seed, shown", [(-1, "-1"), ("abc", "'abc'"), (1.5, "1.5"), (True, "True"), (np.int64(-3), "np.int64(-3)")])
def test_sample_seed_must_be_a_non_negative_whole_number(seed, shown):
    net = our_network("cancer")
    with pytest.raises(DataError, match="^" + SEED_MESSAGE + f"{shown}$".replace("(", r"\(").replace(")", r"\)")):
        net.sample(3, seed=seed)
    with pytest.raises(DataError, match="^" + SEED_MESSAGE):
        AncestralSampler(net.graph, net.cpts).sample_codes(3, seed=seed)
    with pytest.raises(DataError, match="^" + SEED_MESSAGE):
        NeuralEstimator(seed=seed, steps=2, progress=False).fit(net.sample(50, seed=0), net.graph)


def test_good_seeds_still_work():
    net = our_network("cancer")
    a = net.sample(20, seed=np.int64(7))
    assert np.array_equal(a.codes, net.sample(20, seed=7).codes)
    assert net.sample(5, seed=np.random.default_rng(1)).n_rows == 5
    assert net.sample(5).n_rows == 5
    assert check_seed(np.uint8(3)) == 3
    with pytest.raises(DataError, match="^seed must be a non-negative whole number, got None$"):
        check_seed(None)
    with pytest.raises(DataError, match=r"^seed must be a non-negative whole number, got 'z+\.\.\.z+'$") as info:
        check_seed("z" * 300)
    assert len(str(info.value).split("got ")[1]) <= 80


@pytest.mark.parametrize("command", [
    ["sample", "--network", "cancer", "--rows", "5", "--out", "unused.csv"],
    ["estimate", "--network", "cancer", "--rows", "50", "--estimator", "plugin", "--target", "Cancer"],
    ["fit", "--network", "cancer", "--rows", "50", "--steps", "2", "--quiet", "--out", "unused"],
])
def test_cli_negative_seed(capsys, tmp_path, command):
    argv = [str(tmp_path / a) if a.startswith("unused") else a for a in command]
    rc, out, err = run(capsys, *argv, "--seed", "-1")
    assert rc == 2
    assert err.strip() == "intervgnn: error: --seed must be a non-negative whole number, got -1"
    assert not list(tmp_path.iterdir())


# ---------------------------------------------------------------------- sample size
def test_sample_rows_are_bounded_before_allocating():
    net = our_network("cancer")
    most = MAX_SAMPLE_CELLS // 5
    message = (
        "1,000,000,000,000 rows of 5 variables are 5,000,000,000,000 values, more than one call may draw "
        f"(268,435,456 values, 2 GiB of codes); draw at most {most:,} rows at a time and join the tables with Table.concat"
    )
    with pytest.raises(DataError) as info:
        net.sample(10**12)
    assert str(info.value) == message
    with pytest.raises(DataError, match="more than one call may draw"):
        AncestralSampler(net.graph, net.cpts).sample_codes(10**12)
    with pytest.raises(DataError, match=f"^{most + 1:,} rows of 5 variables"):
        net.sample(most + 1)


def test_cli_sample_too_many_rows(capsys, tmp_path):
    rc, _, err = run(capsys, "sample", "--network", "cancer", "--rows", 10**12, "--out", tmp_path / "rows.csv")
    assert rc == 2 and "intervgnn: error: 1,000,000,000,000 rows of 5 variables are" in err
    assert "draw at most 53,687,091 rows at a time" in err
    assert not (tmp_path / "rows.csv").exists()


# --------------------------------------------------------------------- answer size
BIG_ANSWER = r"^the answer over 20 target variables \(HISTORY, CVP, .*\.\.\.\) would have 161,243,136 entries, more than the limit of 10,000,000; ask for fewer target variables at once$"


def test_joint_target_is_bounded_in_the_exact_engine():
    net = our_network("alarm")
    with pytest.raises(QueryError, match=BIG_ANSWER):
        net.query(alarm_twenty())
    engine = ExactEngine(net.graph, net.states, net.cpts)
    with pytest.raises(QueryError, match=BIG_ANSWER):
        engine.query_array(alarm_twenty())
    with pytest.raises(QueryError, match="^the joint distribution has .* entries, more than the limit of 10,000,000; too many to build$"):
        net.joint()


def test_query_each_counts_the_swept_states(monkeypatch):
    monkeypatch.setattr("intervgnn.query.MAX_ANSWER_ENTRIES", 4)
    net = our_network("cancer")
    assert net.query(["Cancer", "Xray"]).probs.size == 4
    with pytest.raises(
        QueryError,
        match=r"^the answer over 2 target variables \(Cancer, Xray\) for each of the 2 states of Smoker would have 8 entries, more than the limit of 4",
    ):
        net.query_each(["Cancer", "Xray"], "Smoker")


@pytest.mark.parametrize("make", [
    PluginEstimator, NaiveEstimator, BackdoorEstimator, EstimandEstimator,
    lambda: NeuralEstimator(steps=2, progress=False),
])
def test_every_estimator_bounds_the_answer(monkeypatch, make):
    net = our_network("cancer")
    est = make().fit(net.sample(300, seed=0), net.graph)
    monkeypatch.setattr("intervgnn.query.MAX_ANSWER_ENTRIES", 4)
    with pytest.raises(QueryError, match=r"^the answer over 3 target variables \(Cancer, Xray, Dyspnoea\) would have 8 entries, more than the limit of 4"):
        est.query(["Cancer", "Xray", "Dyspnoea"], do={"Smoker": "True"})


def test_estimator_on_alarm_refuses_the_big_joint():
    net = our_network("alarm")
    est = PluginEstimator().fit(net.sample(200, seed=0), net.graph)
    with pytest.raises(QueryError, match=BIG_ANSWER):
        est.query(alarm_twenty())


@pytest.mark.parametrize("command", [["exact"], ["estimate", "--estimator", "plugin", "--rows", "100"]])
def test_cli_big_joint_is_a_clean_error(capsys, command):
    rc, out, err = run(capsys, *command, "--network", "alarm", "--target", *alarm_twenty())
    assert rc == 2 and out == ""
    assert err.startswith("intervgnn: error: the answer over 20 target variables (HISTORY, CVP, ")
    assert "would have 161,243,136 entries, more than the limit of 10,000,000" in err


# -------------------------------------------------------------------------- printing
SEVEN = ["HR", "HRBP", "HREKG", "HRSAT", "CO", "CVP", "BP"]  # 3**7 = 2187 entries


def test_large_answer_prints_its_largest_entries():
    d = our_network("alarm").query(SEVEN)
    text = str(d)
    lines = text.splitlines()
    assert len(lines) == 1 + 2 + 20 + 1  # description, header, rule, 20 rows, note
    assert lines[-1] == (
        "... 2,167 of 2,187 entries left out (the 20 largest are listed); format(max_rows=None) prints them all, "
        "to_dict() returns them all, and on the command line --json prints them all"
    )
    shown_probs = [float(line.split()[-1]) for line in lines[3:-1]]
    assert shown_probs == sorted(shown_probs, reverse=True)
    top = np.sort(d.probs.reshape(-1))[::-1][:20]
    np.testing.assert_allclose(shown_probs, top, atol=5e-5)
    # the first row names the most likely combination
    best = np.unravel_index(int(np.argmax(d.probs)), d.probs.shape)
    assert lines[3].split()[:-1] == [d.states[i][int(c)] for i, c in enumerate(best)]
    assert len(d.format(max_rows=None).splitlines()) == 3 + 2187


def test_small_answers_print_in_full():
    d = Distribution(["A", "B"], [[str(i) for i in range(5)], [str(i) for i in range(10)]], np.full((5, 10), 0.02))
    assert len(str(d).splitlines()) == 2 + 50 and "left out" not in str(d)
    with pytest.raises(QueryError, match="^max_rows must be a whole number of at least 1, got 0$"):
        d.format(max_rows=0)
    with pytest.raises(QueryError, match="^show must be a whole number of at least 1, got 'x'$"):
        d.format(show="x")


def test_cli_prints_a_summary_and_json_prints_everything(capsys):
    rc, out, _ = run(capsys, "exact", "--network", "alarm", "--target", *SEVEN)
    assert rc == 0
    assert "... 2,167 of 2,187 entries left out (the 20 largest are listed)" in out
    assert len(out.splitlines()) < 40
    rc, out, _ = run(capsys, "exact", "--network", "alarm", "--target", *SEVEN, "--json")
    assert rc == 0 and np.asarray(json.loads(out)["probs"]).size == 2187


def test_cli_estimate_prints_a_summary(capsys):
    rc, out, _ = run(capsys, "estimate", "--network", "alarm", "--estimator", "plugin", "--rows", "200", "--target", *SEVEN)
    assert rc == 0 and out.count("... 2,167 of 2,187 entries left out") == 2  # the estimate and the exact answer


def test_query_set_seed_is_checked():
    from intervgnn.eval import make_query_set

    with pytest.raises(DataError, match="^seed must be a non-negative whole number, got -1$"):
        make_query_set(our_network("cancer"), 3, seed=-1)


@pytest.mark.parametrize("seed", [-1, "abc", 1.5, True])
def test_table_split_checks_its_seed(seed):
    rows = our_network("cancer").sample(20, seed=0)
    with pytest.raises(DataError, match=r"^seed must be a non-negative whole number, got "):
        rows.split(0.5, seed=seed)
