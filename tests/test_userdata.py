"""A user's own graph file (YAML) and CSV rows."""

from __future__ import annotations

import pytest

from intervgnn import DataError, GraphError
from intervgnn.userdata import load_graph, read_csv

GRAPH = """\
edges:
  - [Season, Irrigation]
  - [Season, Yield]
  - [Irrigation, Yield]
states:
  Season: [cool, warm]
  Irrigation: [low, high]
"""


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return str(p)


def test_graph_file_and_rows(tmp_path):
    g = write(tmp_path, "g.yaml", GRAPH)
    csv = write(tmp_path, "rows.csv", "Yield,Season,Irrigation,regime\ngood,cool,low,\npoor,warm,high,Irrigation\n")
    spec = load_graph(g)
    assert spec.graph.parents("Yield") == ("Season", "Irrigation")
    table = read_csv(csv, g)
    assert table.variables == ("Season", "Irrigation", "Yield")
    assert table.states["Irrigation"] == ("low", "high")  # declared order kept
    assert table.states["Yield"] == ("good", "poor")  # inferred, sorted
    assert table.intervened[:, 1].tolist() == [False, True]
    assert read_csv(csv, spec) == table and read_csv(csv, spec.graph).n_rows == 2


def test_value_not_in_declared_states(tmp_path):
    g = write(tmp_path, "g.yaml", GRAPH)
    csv = write(tmp_path, "rows.csv", "Season,Irrigation,Yield\ncool,low,good\ncool,medium,poor\n")
    with pytest.raises(DataError, match=r"rows.csv: row 2 \(line 3\), column 'Irrigation': unknown state 'medium'; states are: high, low"):
        read_csv(csv, g)


def test_variable_missing_from_data_and_extra_column(tmp_path):
    g = write(tmp_path, "g.yaml", GRAPH)
    csv = write(tmp_path, "a.csv", "Season,Irrigation\ncool,low\n")
    with pytest.raises(DataError, match="a.csv: variable 'Yield' is in the graph but not in the data"):
        read_csv(csv, g)
    csv = write(tmp_path, "b.csv", "Season,Irrigation,Yield,Yeild2\ncool,low,good,x\n")
    with pytest.raises(DataError, match="column 'Yeild2' is not in the graph .did you mean 'Yield'.."):
        read_csv(csv, g)


def test_graph_file_errors(tmp_path):
    cyc = write(tmp_path, "cyc.yaml", "edges:\n  - [A, B]\n  - [B, C]\n  - [C, A]\n")
    with pytest.raises(GraphError, match=r"cyc.yaml: the graph has a cycle: "):
        load_graph(cyc)
    bad_key = write(tmp_path, "k.yaml", "edge:\n  - [A, B]\n")
    with pytest.raises(GraphError, match=r"unknown key 'edge' \(did you mean 'edges'\?\)"):
        load_graph(bad_key)
    bad_yaml = write(tmp_path, "y.yaml", "edges:\n  - [A, B\n  - [B, C]\n")
    with pytest.raises(GraphError, match=r"y.yaml, line \d+: not valid YAML"):
        load_graph(bad_yaml)
    bad_edge = write(tmp_path, "e.yaml", "edges:\n  - [A, B, C]\n")
    with pytest.raises(GraphError, match=r"edge #1 must be a \[parent, child\] pair"):
        load_graph(bad_edge)
    bad_states = write(tmp_path, "s.yaml", "edges:\n  - [A, B]\nstates:\n  Q: [x]\n")
    with pytest.raises(GraphError, match="states given for 'Q', which is not in the graph"):
        load_graph(bad_states)
    with pytest.raises(GraphError, match="no such file"):
        load_graph(str(tmp_path / "none.yaml"))
    dup = write(tmp_path, "d.yaml", "edges:\n  - [A, B]\n  - [A, B]\n")
    with pytest.raises(GraphError, match="duplicate edge 'A' -> 'B'"):
        load_graph(dup)
