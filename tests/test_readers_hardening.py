"""Readers refuse hostile or surprising input quickly and plainly: BIF files, graph files, configs, CSV rows, data frames.

Refusing bad input with a clear error of the package's own type, in bounded
time and memory, is common practice (no source). Every pathological input
here is refused in well under a second.
"""

from __future__ import annotations

import io

import numpy as np
import pytest

from intervgnn import BIFParseError, CausalGraph, CausalNetwork, ConfigError, DataError, GraphError, NetworkError, Table
from intervgnn._yaml import MAX_DEPTH, YAMLRefused, load_yaml
from intervgnn.bn.bif import parse_bif
from intervgnn.cli import main
from intervgnn.errors import short_repr, shorten
from intervgnn.harness import load_config
from intervgnn.userdata import GraphSpec, from_dataframe, load_graph, read_csv

def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return str(p)


def run_cli(capsys, *argv):
    """Exit code and stderr of the command; no traceback may be printed."""
    code = main(list(argv))
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, err


# ---------------------------------------------------------------- helpers
def test_shorten_and_short_repr_bound_what_a_message_quotes():
    assert shorten("abc") == "abc"
    assert shorten("x" * 1000) == "x" * 77 + "..."
    nested = [[["deep"] * 10_000] * 10_000] * 10_000  # stands for 10^12 strings; shown without walking them
    text = short_repr(nested)
    assert len(text) <= 80 and text.startswith("[[[")


# ------------------------------------------------------------ BIF (item 3)
def bif_with_parents(n_parents: int, children: int = 1, default: str = "0.5, 0.5") -> str:
    text = "network t {}\n"
    for i in range(n_parents):
        text += f"variable P{i} {{ type discrete [ 2 ] {{ a, b }}; }}\n"
        text += f"probability ( P{i} ) {{ table 0.5, 0.5; }}\n"
    for c in range(children):
        text += f"variable C{c} {{ type discrete [ 2 ] {{ a, b }}; }}\n"
        text += f"probability ( C{c} | " + ", ".join(f"P{i}" for i in range(n_parents)) + f" ) {{ default {default}; }}\n"
    return text


def test_bif_state_count_of_thousands_of_digits():
    text = "variable A { type discrete [ " + "9" * 5000 + " ] { a, b }; }\nprobability ( A ) { table 0.5, 0.5; }\n"
    with pytest.raises(BIFParseError, match=r"<string>, line 1: variable 'A' declares 9{37}\.\.\. states but lists 2$"):
        parse_bif(text)


def test_bif_cpt_above_the_limit_is_refused_before_it_is_built():
    text = bif_with_parents(24)  # 2^24 rows x 2 states, from 3 KB of text
    with pytest.raises(
        BIFParseError,
        match=r"<string>, line 51: the CPT of 'C0' would have 33,554,432 entries \(states of its 24 parents times its own\), "
        r"more than the limit of 10,000,000$",
    ):
        parse_bif(text)


def test_bif_cpts_above_the_limit_in_all_are_refused():
    text = bif_with_parents(22, children=3)  # three CPTs of 8,388,608 entries each
    with pytest.raises(BIFParseError, match=r"the CPTs would have 25,165,\d{3} entries in all, more than the limit of 20,000,000"):
        parse_bif(text)


def test_bif_validation_of_a_large_default_filled_cpt_is_vectorised():
    # 2^19 rows, checked all at once (the time is measured by experiments/bench/fuzz_readers.py, not here)
    net = parse_bif(bif_with_parents(19))
    assert net.cpt("C0").shape == (2,) * 19 + (2,)
    with pytest.raises(BIFParseError, match=r"line 41: CPT of 'C0', row \(P0=a, .*\): probabilities sum to 0.9, expected 1"):
        parse_bif(bif_with_parents(19, default="0.5, 0.4"))


def test_network_cpt_above_the_limit_is_refused_before_conversion():
    parents = [f"P{i}" for i in range(24)]
    graph = CausalGraph([(p, "C") for p in parents])
    states = {v: ["a", "b"] for v in [*parents, "C"]}
    cpts = {p: [0.5, 0.5] for p in parents}
    cpts["C"] = [0.5, 0.5]  # never converted: the size is checked first
    with pytest.raises(NetworkError, match=r"CPT of 'C' would have 33,554,432 entries .*more than the limit of 10,000,000"):
        CausalNetwork(graph, states, cpts)


def test_network_reports_the_first_wrong_row():
    graph = CausalGraph([("A", "B")])
    cpts = {"A": [0.2, 0.3, 0.5], "B": [[0.5, 0.5], [0.5, 0.6], [-1, 2]]}
    with pytest.raises(NetworkError, match=r"CPT of 'B', row \(A=y\): probabilities sum to 1.1, expected 1"):
        CausalNetwork(graph, {"A": ["x", "y", "z"], "B": ["u", "v"]}, cpts)
    cpts["B"][1] = [0.5, 0.5]
    with pytest.raises(NetworkError, match=r"CPT of 'B', row \(A=z\): entry for state 'u' is -1.0"):
        CausalNetwork(graph, {"A": ["x", "y", "z"], "B": ["u", "v"]}, cpts)


def test_bif_problems_through_the_cli(capsys, tmp_path):
    digits = write(tmp_path, "digits.bif", "variable A { type discrete [ " + "9" * 5000 + " ] { a }; }\n")
    code, err = run_cli(capsys, "exact", "--network", digits, "--target", "A")
    assert code == 2 and "declares 999" in err and len(err) < 300
    huge = write(tmp_path, "huge.bif", bif_with_parents(24))
    code, err = run_cli(capsys, "exact", "--network", huge, "--target", "C0")
    assert code == 2 and "more than the limit of 10,000,000" in err


# ------------------------------------------------- YAML: size and depth (item 4)
def alias_bomb(prefix: str = "", suffix: str = "") -> str:
    """Nine levels of nine aliases each: 280 bytes that stand for 9^9 (387 million) strings."""
    items = ["&a0 [x,x,x,x,x,x,x,x,x]"] + [f"&a{i} [" + ",".join([f"*a{i - 1}"] * 9) + "]" for i in range(1, 9)]
    return prefix + "[" + ", ".join(items) + "]" + suffix


def test_alias_bomb_in_a_graph_file(tmp_path):
    g = write(tmp_path, "g.yaml", alias_bomb("edges:\n  - ", "\n"))
    with pytest.raises(GraphError, match=r"g.yaml, line 2: aliases stand for more than 100,000 values in all; "
                                         r"write the repeated parts out instead$"):
        load_graph(g)


def test_alias_bomb_in_a_config(tmp_path):
    c = write(tmp_path, "c.yaml", alias_bomb("networks: [cancer]\nrows: [100]\nseeds: [0]\nestimators: [plugin]\nname: ", "\n"))
    with pytest.raises(ConfigError, match=r"c.yaml, line 5: aliases stand for more than 100,000 values"):
        load_config(c)


def test_ordinary_anchors_and_merges_still_work():
    doc = load_yaml("base: &b {steps: 2, seed: 1}\nquick: {<<: *b, steps: 5}\nagain: *b\n")
    assert doc == {"base": {"steps": 2, "seed": 1}, "quick": {"steps": 5, "seed": 1}, "again": {"steps": 2, "seed": 1}}


def test_an_alias_inside_its_own_anchor_is_refused():
    with pytest.raises(YAMLRefused, match=r"alias '\*a' stands for a node that contains it"):
        load_yaml("edges: &a [*a]\n")


def test_deep_nesting_in_a_graph_file_and_a_config(tmp_path):
    g = write(tmp_path, "g.yaml", "edges: " + "[" * 500 + "]" * 500 + "\n")
    with pytest.raises(GraphError, match=rf"g.yaml, line 1: lists and mappings nested more than {MAX_DEPTH} deep$"):
        load_graph(g)
    c = write(tmp_path, "c.yaml", "networks: " + "[" * 500 + "]" * 500 + "\n")
    with pytest.raises(ConfigError, match=rf"c.yaml, line 1: lists and mappings nested more than {MAX_DEPTH} deep$"):
        load_config(c)


def test_python_recursion_limit_is_a_yaml_error(monkeypatch):
    import intervgnn._yaml as loader

    monkeypatch.setattr(loader, "MAX_DEPTH", 10**6)  # as if the depth check were missing
    with pytest.raises(YAMLRefused, match="nested too deeply"):
        load_yaml("- " * 2000 + "x\n")


def test_long_values_are_cut_in_graph_file_messages(tmp_path):
    long_key = write(tmp_path, "k.yaml", "? " + "k" * 10_000 + "\n: 1\n")  # an explicit key: plain ones stop at 1024
    with pytest.raises(GraphError, match=r"k.yaml: unknown key 'k{77}\.\.\.'") as info:
        load_graph(long_key)
    assert len(str(info.value)) < 300
    long_edge = write(tmp_path, "e.yaml", "edges:\n  - [" + ", ".join(["A"] * 10_000) + "]\n")
    with pytest.raises(GraphError, match=r"edge #1 must be a \[parent, child\] pair, got \['A', 'A', ") as info:
        load_graph(long_edge)
    assert len(str(info.value)) < 300
    long_alias = write(tmp_path, "a.yaml", "edges: *" + "z" * 10_000 + "\n")
    with pytest.raises(GraphError, match=r"found undefined alias 'zzz") as info:
        load_graph(long_alias)
    assert len(str(info.value)) < 300


def test_yaml_problems_through_the_cli(capsys, tmp_path):
    bomb = write(tmp_path, "bomb.yaml", alias_bomb("edges:\n  - ", "\n"))
    code, err = run_cli(capsys, "identify", "--graph", bomb, "--target", "B", "--do", "A")
    assert code == 2 and "aliases stand for more than 100,000 values" in err and len(err) < 300
    deep = write(tmp_path, "deep.yaml", "edges: " + "[" * 500 + "]" * 500 + "\n")
    code, err = run_cli(capsys, "identify", "--graph", deep, "--target", "B", "--do", "A")
    assert code == 2 and "nested more than 100 deep" in err
    config = write(tmp_path, "c.yaml", alias_bomb("name: ", "\n"))
    code, err = run_cli(capsys, "run", config)
    assert code == 2 and "aliases stand for more than 100,000 values" in err


# ------------------------------------------- YAML: types and repeated keys (item 10)
def test_graph_file_names_are_text(tmp_path):
    g = write(tmp_path, "g.yaml", "edges:\n  - [yes, 01]\n  - [on, 1.0]\nstates:\n  yes: [1, 01, true, off]\n")
    spec = load_graph(g)
    assert spec.graph.nodes == ("yes", "01", "on", "1.0")
    assert spec.states == {"yes": ("1", "01", "true", "off")}
    rows = write(tmp_path, "rows.csv", "yes,01,on,1.0\n01,a,b,c\noff,a,b,c\n")
    table = read_csv(rows, g)
    assert table.variables == ("yes", "01", "on", "1.0") and table.labels("yes") == ["01", "off"]


def test_graph_file_names_that_are_not_names(tmp_path):
    g = write(tmp_path, "g.yaml", "edges:\n  - [A, B]\nvariables: [A, B, [C, D]]\n")
    with pytest.raises(GraphError, match=r"g.yaml: variable #3 must be a name, got \['C', 'D'\]"):
        load_graph(g)
    g = write(tmp_path, "s.yaml", "edges:\n  - [A, B]\nstates:\n  A: [x, ~]\n")
    with pytest.raises(GraphError, match=r"s.yaml: state #2 of 'A' is empty"):
        load_graph(g)


def test_configs_keep_numbers(tmp_path):
    c = write(tmp_path, "c.yaml", "networks: [cancer]\nrows: [100, 2.0e+2]\nseeds: [0]\nestimators: [plugin]\n")
    with pytest.raises(ConfigError, match=r"rows: expected whole numbers, got 200.0"):
        load_config(c)
    assert load_yaml("rows: [100, 2.5, true, null, yes]") == {"rows": [100, 2.5, True, None, True]}


@pytest.mark.parametrize(
    "text, line, key",
    [
        ("edges:\n  - [A, B]\nedges:\n  - [B, C]\n", 3, "edges"),
        ("edges:\n  - [A, B]\nstates:\n  A: [x, y]\n  B: [u]\n  A: [z]\n", 6, "A"),
    ],
)
def test_repeated_key_in_a_graph_file(tmp_path, text, line, key):
    g = write(tmp_path, "g.yaml", text)
    with pytest.raises(GraphError, match=rf"g.yaml, line {line}: key '{key}' appears twice in one mapping, first on line \d+; keep one$"):
        load_graph(g)


def test_repeated_key_in_a_config(tmp_path, capsys):
    c = write(tmp_path, "c.yaml", "networks: [cancer]\nrows: [100]\nseeds: [0]\nestimators: [plugin]\nrows: [200]\n")
    with pytest.raises(ConfigError, match=r"c.yaml, line 5: key 'rows' appears twice in one mapping, first on line 2"):
        load_config(c)
    code, err = run_cli(capsys, "run", c)
    assert code == 2 and "key 'rows' appears twice" in err


def test_repeated_key_through_the_cli(capsys, tmp_path):
    g = write(tmp_path, "g.yaml", "edges:\n  - [A, B]\nedges:\n  - [B, C]\n")
    code, err = run_cli(capsys, "identify", "--graph", g, "--target", "B", "--do", "A")
    assert code == 2 and "g.yaml, line 3: key 'edges' appears twice" in err


@pytest.mark.parametrize(
    "value, problem",
    [("2024-13-01", r"cannot read the value '2024-13-01' \(month must be in 1..12\)"),
     ("9" * 5000, r"cannot read the value '9{20}.*\.\.\.")],
)
def test_a_value_its_type_cannot_hold(tmp_path, value, problem):
    c = write(tmp_path, "c.yaml", f"name: {value}\nnetworks: [cancer]\n")
    with pytest.raises(ConfigError, match=rf"c.yaml, line 1: {problem}") as info:
        load_config(c)
    assert len(str(info.value)) < 400


# ----------------------------------------------------------- missing values in a CSV
@pytest.mark.parametrize("marker", ["NA", "NaN", "nan", "N/A", "null", "#N/A"])
def test_missing_value_markers_in_a_csv(tmp_path, marker):
    g = write(tmp_path, "g.yaml", "edges:\n  - [A, B]\n")
    rows = write(tmp_path, "rows.csv", f"A,B\nx,u\ny,{marker}\n")
    with pytest.raises(DataError, match=rf"rows.csv: row 2 \(line 3\), column 'B': missing value '{marker}'; drop or fill"):
        read_csv(rows, g)
    with pytest.raises(DataError, match=rf"row 2 \(line 3\), column 'B': missing value '{marker}'"):
        Table.read_csv(rows)


def test_a_declared_marker_is_a_state(tmp_path):
    g = write(tmp_path, "g.yaml", "edges:\n  - [A, B]\nstates:\n  B: [u, NA]\n")
    rows = write(tmp_path, "rows.csv", "A,B\nx,u\ny,NA\n")
    assert read_csv(rows, g).labels("B") == ["u", "NA"]
    assert Table.read_csv(rows, states={"A": ["x", "y"], "B": ["u", "NA"]}).labels("B") == ["u", "NA"]


def test_missing_values_through_the_cli(capsys, tmp_path):
    g = write(tmp_path, "g.yaml", "edges:\n  - [A, B]\n")
    for cell, shown in (("NA", "missing value 'NA'"), ("", "missing value")):
        rows = write(tmp_path, "rows.csv", f"A,B\nx,u\ny,{cell}\n")
        code, err = run_cli(capsys, "estimate", "--data", rows, "--graph", g, "--estimator", "plugin", "--target", "B")
        assert code == 2 and f"row 2 (line 3), column 'B': {shown}" in err


def test_a_very_long_cell_costs_no_more_than_its_own_length(tmp_path):
    # a fixed-width string array would hold 2,000 copies of the longest cell's width
    rows = write(tmp_path, "rows.csv", "A\n" + "x\n" * 2000 + "y" * 100_000 + "\n")
    with pytest.raises(DataError, match=r"row 2001 \(line 2002\), column 'A': unknown state 'y{77}\.\.\.'; states are: x") as info:
        Table.read_csv(rows, {"A": ["x"]})
    assert len(str(info.value)) < 300


# -------------------------------------------------------------- pandas and no rows (item 13)
def test_from_pandas_with_states_for_some_columns():
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame({"Yield": ["good", "poor", "good"], "Season": ["warm", "warm", "cool"]})
    t = Table.from_pandas(df, states={"Season": ["warm", "cool", "mild"]})
    assert t.variables == ("Yield", "Season")
    assert t.states == {"Yield": ("good", "poor"), "Season": ("warm", "cool", "mild")}
    assert t.labels("Season") == ["warm", "warm", "cool"]
    with pytest.raises(DataError, match=r"^missing column 'Irrigation'$"):
        Table.from_pandas(df, states={"Irrigation": ["low", "high"]})
    with pytest.raises(DataError, match=r"row 3, column 'Season': unknown state 'cool'; states are: warm"):
        Table.from_pandas(df, states={"Season": ["warm"]})


def test_from_dataframe_for_a_graph_file(tmp_path):
    pd = pytest.importorskip("pandas")
    g = write(tmp_path, "g.yaml", "edges:\n  - [Season, Yield]\nstates:\n  Season: [cool, warm]\n")
    df = pd.DataFrame({"Yield": ["good", "poor"], "Season": ["warm", "warm"], "regime": ["", "Season"]})
    t = from_dataframe(df, load_graph(g))
    assert t.variables == ("Season", "Yield")
    assert t.states == {"Season": ("cool", "warm"), "Yield": ("good", "poor")}
    assert t.intervened.tolist() == [[False, False], [True, False]]
    assert from_dataframe(df, g) == t
    with pytest.raises(DataError, match=r"^variable 'Season' is in the graph but not in the data$"):
        from_dataframe(df[["Yield"]], g)
    with pytest.raises(DataError, match=r"^column 'Yeild2' is not in the graph \(did you mean 'Yield'\?\)"):
        from_dataframe(df.assign(Yeild2="x"), g)
    with pytest.raises(DataError, match=r"row 1, column 'Season': unknown state 'hot'; states are: cool, warm"):
        from_dataframe(df.assign(Season=["hot", "warm"]), g)
    with pytest.raises(DataError, match=r"row 2, column 'Yield': missing value"):
        from_dataframe(df.assign(Yield=["good", None]), g)
    with pytest.raises(DataError, match=r"expected a pandas DataFrame, got dict"):
        from_dataframe({"Season": ["warm"]}, g)


def test_an_empty_frame_says_it_has_no_rows():
    pd = pytest.importorskip("pandas")
    spec = GraphSpec(CausalGraph([("A", "B")]), states={"A": ("x", "y")})
    empty = pd.DataFrame({"A": [], "B": []})
    with pytest.raises(DataError, match=r"no rows, so the states of 'B' cannot be read from the data; give its states"):
        from_dataframe(empty, spec)
    with pytest.raises(DataError, match=r"no rows, so the states of 'A' cannot be read from the data"):
        Table.from_pandas(empty)


def test_a_csv_with_only_a_header_says_it_has_no_rows(capsys, tmp_path):
    with pytest.raises(DataError, match=r"^data.csv: the file has a header but no rows$"):
        stream = io.StringIO("A,B\n")
        stream.name = "data.csv"
        Table.read_csv(stream)
    g = write(tmp_path, "g.yaml", "edges:\n  - [A, B]\nstates:\n  A: [x, y]\n")
    rows = write(tmp_path, "rows.csv", "A,B\n")
    with pytest.raises(DataError, match=r"rows.csv: the file has a header but no rows$"):
        read_csv(rows, g)
    code, err = run_cli(capsys, "estimate", "--data", rows, "--graph", g, "--estimator", "plugin", "--target", "B")
    assert code == 2 and "rows.csv: the file has a header but no rows" in err
    code, err = run_cli(capsys, "fit", "--data", rows, "--graph", g, "--out", str(tmp_path / "m"), "--quiet")
    assert code == 2 and "rows.csv: the file has a header but no rows" in err
    assert not np.any([p.name == "m" for p in tmp_path.iterdir()])
