"""Discrete data tables: construction, selection, CSV and pandas round trips, errors."""

from __future__ import annotations

import errno
import io
import os
import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import intervgnn.table as table_module
from intervgnn import DataError, Table, WriteError

STATES = {"A": ("x", "y"), "B": ("u", "v", "w")}


@pytest.fixture
def table() -> Table:
    codes = [[0, 1], [1, 2], [0, 0], [1, 1], [0, 2]]
    mask = [[False, False], [True, False], [False, False], [True, True], [False, True]]
    return Table(codes, ["A", "B"], STATES, intervened=mask)


def raises(match: str):
    return pytest.raises(DataError, match=re.escape(match))


# ------------------------------------------------------------------ construction
def test_construct_from_codes(table):
    assert table.variables == ("A", "B")
    assert table.states == {"A": ("x", "y"), "B": ("u", "v", "w")}
    assert table.cardinalities == (2, 3)
    assert table.n_rows == len(table) == 5
    assert table.codes.dtype == np.int64
    assert table.codes.tolist() == [[0, 1], [1, 2], [0, 0], [1, 1], [0, 2]]
    assert table.column("B").tolist() == [1, 2, 0, 1, 2]
    assert table.labels("A") == ["x", "y", "x", "y", "x"]
    assert repr(table) == "Table(rows=5, variables=2, experimental_rows=3)"


def test_states_as_a_sequence_and_values_made_strings():
    t = Table([[0, 1]], ["A", "B"], [["x", "y"], [1, 2]])
    assert t.states == {"A": ("x", "y"), "B": ("1", "2")}


def test_arrays_are_read_only_copies():
    codes = np.array([[0, 1]])
    t = Table(codes, ["A", "B"], STATES)
    codes[0, 0] = 1
    assert t.codes[0, 0] == 0
    with pytest.raises(ValueError):
        t.codes[0, 0] = 1
    with pytest.raises(ValueError):
        t.intervened[0, 0] = True
    t.states["A"] = ("changed",)
    assert t.states["A"] == ("x", "y")


def test_empty_tables():
    for codes in ([], np.zeros((0, 2), dtype=np.int64)):
        t = Table(codes, ["A", "B"], STATES)
        assert t.n_rows == 0 and t.codes.shape == (0, 2) and t.intervened.shape == (0, 2)
        assert t.regimes() == [] and t.is_observational
    assert Table([], ["A", "B"], STATES, intervened=[]).n_rows == 0
    assert Table([], [], {}).codes.shape == (0, 0)


def test_equality():
    a = Table([[0, 1]], ["A", "B"], STATES)
    assert a == Table(np.array([[0, 1]], dtype=np.int8), ["A", "B"], STATES)
    assert a != Table([[0, 1]], ["A", "B"], STATES, intervened=[[True, False]])
    assert a != Table([[0, 1]], ["A", "B"], {"A": ("x", "y"), "B": ("u", "v", "z")})
    assert a != "not a table"


def test_intervened_mask(table):
    assert table.intervened.dtype == bool
    assert table.intervened.shape == (5, 2)
    assert not table.is_observational
    assert Table([[0, 1]], ["A", "B"], STATES).intervened.tolist() == [[False, False]]
    assert Table([[0, 1]], ["A", "B"], STATES).is_observational


def test_regimes_and_observational_rows(table):
    assert table.regimes() == [(), ("A",), ("B",), ("A", "B")]
    obs = table.observational_rows()
    assert obs.codes.tolist() == [[0, 1], [0, 0]]
    assert obs.is_observational and obs.regimes() == [()]
    only_do = table.take([1, 3])
    assert only_do.regimes() == [("A",), ("A", "B")]
    assert only_do.observational_rows().n_rows == 0


def test_from_labels_infers_sorted_states():
    t = Table.from_labels({"Pump": ["night", "day", "night"], "Flow": ["3", "10", "3"]})
    assert t.variables == ("Pump", "Flow")
    assert t.states == {"Pump": ("day", "night"), "Flow": ("10", "3")}
    assert t.labels("Pump") == ["night", "day", "night"]
    assert t.column("Flow").tolist() == [1, 0, 1]


def test_from_labels_with_declared_states_and_regimes():
    t = Table.from_labels(
        {"B": ["w", "u"], "A": ["y", "x"]},
        states={"A": ["y", "x", "z"], "B": ["w", "v", "u"]},
        intervened=[["B"], []],
    )
    assert t.variables == ("A", "B")  # declared order
    assert t.states == {"A": ("y", "x", "z"), "B": ("w", "v", "u")}
    assert t.codes.tolist() == [[0, 0], [1, 2]]
    assert t.intervened.tolist() == [[False, True], [False, False]]


def test_from_labels_errors():
    with raises("row 2, column 'A': unknown state 'z'; states are: x, y"):
        Table.from_labels({"A": ["x", "z"]}, states={"A": ["y", "x"]})
    for missing in (None, "", float("nan"), np.nan):
        with raises("row 3, column 'A': missing value"):
            Table.from_labels({"A": ["x", "y", missing]})
    with raises("unexpected column 'C'; expected columns: A, B"):
        Table.from_labels({"A": ["x"], "B": ["u"], "C": ["c"]}, states=STATES)
    with raises("missing column 'B'"):
        Table.from_labels({"A": ["x"]}, states=STATES)
    with raises("column 'B' has 1 values, expected 2"):
        Table.from_labels({"A": ["x", "y"], "B": ["u"]})
    with raises("row 2, regime: unknown variable 'Q'; variables are: A, B"):
        Table.from_labels({"A": ["x", "y"], "B": ["u", "u"]}, intervened=[[], ["Q"]])
    with raises("1 regimes given for 2 rows"):
        Table.from_labels({"A": ["x", "y"]}, intervened=[[]])


# --------------------------------------------------------------------- selection
def test_take_indices_and_mask(table):
    t = table.take([3, 0])
    assert t.codes.tolist() == [[1, 1], [0, 1]]
    assert t.intervened.tolist() == [[True, True], [False, False]]
    assert table.take(np.array([True, False, False, False, True])).codes.tolist() == [[0, 1], [0, 2]]
    assert table.take([-1]).codes.tolist() == [[0, 2]]
    assert table.take([]).n_rows == 0
    assert table.take(np.array([], dtype=np.int64)).variables == ("A", "B")


def test_take_errors(table):
    with raises("row index 5 is out of range for 5 rows"):
        table.take([0, 5])
    with raises("row index -6 is out of range for 5 rows"):
        table.take([-6])
    with raises("boolean mask has 2 entries for 5 rows"):
        table.take([True, False])
    with raises("boolean mask has 0 entries for 5 rows"):
        table.take(np.array([], dtype=bool))
    with raises("rows must be integer indices or a boolean mask, got dtype float64"):
        table.take([0.0, 1.0])
    with raises("rows must be a 1-d sequence of indices or a boolean mask, got shape ()"):
        table.take(1)


def test_select(table):
    t = table.select(["B", "A"])
    assert t.variables == ("B", "A")
    assert t.codes.tolist() == [[1, 0], [2, 1], [0, 0], [1, 1], [2, 0]]
    assert t.intervened[:, 0].tolist() == table.intervened[:, 1].tolist()
    assert t.states == {"B": ("u", "v", "w"), "A": ("x", "y")}
    with raises("unknown column 'Z'; the table has: A, B"):
        table.select(["A", "Z"])
    with raises("unknown column 'Z'; the table has: A, B"):
        table.column("Z")
    with raises("unknown column 'Z'; the table has: A, B"):
        table.labels("Z")


def test_split():
    n = 50
    t = Table(np.arange(n)[:, None], ["id"], {"id": [str(i) for i in range(n)]})
    a, b = t.split(0.3, seed=7)
    assert (a.n_rows, b.n_rows) == (15, 35)
    ids = sorted(a.column("id").tolist() + b.column("id").tolist())
    assert ids == list(range(n))
    a2, b2 = t.split(0.3, seed=7)
    assert a2 == a and b2 == b
    assert t.split(0.3, seed=8)[0] != a
    for bad in (0, 1, 1.5, -0.1, float("nan"), "0.5", True, None):
        with raises("fraction must lie strictly between 0 and 1, got"):
            t.split(bad)


def test_concat(table):
    both = Table.concat([table, table.take([0])])
    assert both.n_rows == 6
    assert both.codes[-1].tolist() == [0, 1]
    assert both.intervened[:5].tolist() == table.intervened.tolist()
    assert Table.concat([table]) == table
    with raises("nothing to concatenate"):
        Table.concat([])
    with raises("tables to concatenate must have the same variables and states"):
        Table.concat([table, table.select(["B", "A"])])
    with raises("tables to concatenate must have the same variables and states"):
        Table.concat([table, Table([[0, 0]], ["A", "B"], {"A": ("x", "y"), "B": ("u", "v", "q")})])


# ------------------------------------------------------------------ bad input
def test_codes_out_of_range_name_row_and_column():
    with raises("row 2, column 'B': code 3 is out of range for 3 states"):
        Table([[0, 1], [1, 3]], ["A", "B"], STATES)
    with raises("row 1, column 'A': code -1 is out of range for 2 states"):
        Table([[-1, 1], [1, 2]], ["A", "B"], STATES)


def test_wrong_shapes_and_types():
    with raises("codes must have shape [rows, 2], got (2,)"):
        Table([0, 1], ["A", "B"], STATES)
    with raises("codes must have shape [rows, 2], got (1, 3)"):
        Table([[0, 1, 0]], ["A", "B"], STATES)
    with raises("codes must have shape [rows, 2], got (1, 1, 2)"):
        Table([[[0, 1]]], ["A", "B"], STATES)
    with raises("codes must have shape [rows, 2], got (3, 0)"):
        Table(np.zeros((3, 0), dtype=int), ["A", "B"], STATES)
    with raises("codes must be a rectangular array of shape [rows, 2]"):
        Table([[0, 1], [1]], ["A", "B"], STATES)
    with raises("codes must be integers, got dtype float64"):
        Table([[0.0, 1.0]], ["A", "B"], STATES)
    with raises("codes must be integers, got dtype bool"):
        Table([[True, False]], ["A", "B"], STATES)
    with raises("intervened mask has shape (1, 1), expected (1, 2)"):
        Table([[0, 1]], ["A", "B"], STATES, intervened=[[True]])
    with raises("intervened mask must be a rectangular array of shape (2, 2)"):
        Table([[0, 1], [1, 1]], ["A", "B"], STATES, intervened=[[True, False], [True]])


def test_duplicate_names_and_bad_states():
    with raises("column 'A' appears twice"):
        Table([[0, 1]], ["A", "A"], {"A": ["x", "y"]})
    with raises("variable 'B' lists state 'u' twice"):
        Table([[0, 1]], ["A", "B"], {"A": ["x", "y"], "B": ["u", "v", "u"]})
    with raises("no states given for variable 'B'"):
        Table([[0, 1]], ["A", "B"], {"A": ["x", "y"]})
    with raises("2 variables but 1 state lists"):
        Table([[0, 1]], ["A", "B"], [["x", "y"]])
    with raises("variable 'A' has no states"):
        Table(np.zeros((0, 1), dtype=int), ["A"], {"A": []})


# ------------------------------------------------------------------------- CSV
def test_csv_round_trip_with_regime_column(table, tmp_path):
    path = tmp_path / "data.csv"
    table.to_csv(path)
    assert path.read_text() == "A,B,regime\nx,v,\ny,w,A\nx,u,\ny,v,A;B\nx,w,B\n"
    assert os.listdir(tmp_path) == ["data.csv"]
    back = Table.read_csv(path, states=STATES)
    assert back == table
    # without declared states the states are the values seen, sorted
    inferred = Table.read_csv(str(path))
    assert inferred.states == {"A": ("x", "y"), "B": ("u", "v", "w")}
    assert inferred == table


def test_csv_round_trip_without_regime_column(tmp_path):
    t = Table([[1, 0], [0, 2]], ["A", "B"], STATES)
    path = tmp_path / "obs.csv"
    t.to_csv(path)
    assert path.read_text() == "A,B\ny,u\nx,w\n"
    assert Table.read_csv(path, states=STATES) == t


def test_csv_custom_or_no_regime_column(table, tmp_path):
    path = tmp_path / "do.csv"
    table.to_csv(path, regime_column="do")
    assert path.read_text().splitlines()[0] == "A,B,do"
    assert Table.read_csv(path, states=STATES, regime_column="do") == table
    # with regime_column=None a column named "regime" is just another variable
    plain = Table.read_csv(io.StringIO("A,regime\nx,A\ny,B\n"), regime_column=None)
    assert plain.variables == ("A", "regime")
    assert plain.states["regime"] == ("A", "B")
    assert plain.is_observational


def test_read_csv_declared_states_keep_order_and_column_order():
    text = "B,A\n w , y \nu,x\n"
    t = Table.read_csv(io.StringIO(text), states={"A": ["y", "x"], "B": ["w", "v", "u"]})
    assert t.variables == ("A", "B")
    assert t.states == {"A": ("y", "x"), "B": ("w", "v", "u")}
    assert t.codes.tolist() == [[0, 0], [1, 2]]


def test_read_csv_regime_cells():
    text = "A,B,regime\nx,u, A ; B \ny,v,\nx,w,B;\n"
    t = Table.read_csv(io.StringIO(text), states=STATES)
    assert t.intervened.tolist() == [[True, True], [False, False], [False, True]]


def test_read_csv_quoted_fields_and_byte_order_mark(tmp_path):
    path = tmp_path / "quoted.csv"
    path.write_bytes(b'\xef\xbb\xbf"A","B"\n"x","u"\n"y","v"\n')
    t = Table.read_csv(path, states=STATES)
    assert t.codes.tolist() == [[0, 0], [1, 1]]
    t2 = Table.read_csv(io.StringIO('\ufeffA,B\nx,"u"\n'), states=STATES)
    assert t2.variables == ("A", "B")


def read_error(text: str, **kwargs) -> str:
    stream = io.StringIO(text)
    stream.name = "data.csv"
    with pytest.raises(DataError) as info:
        Table.read_csv(stream, **kwargs)
    return str(info.value)


def test_read_csv_errors_name_row_and_column():
    assert read_error("A,B\nx,u\ny,q\n", states=STATES) == (
        "data.csv: row 2 (line 3), column 'B': unknown state 'q'; states are: u, v, w"
    )
    assert read_error("A,B\nx,u\n,v\n") == "data.csv: row 2 (line 3), column 'A': missing value"
    assert read_error("A,B\nx,u\ny,  \n", states=STATES) == "data.csv: row 2 (line 3), column 'B': missing value"
    assert read_error("A\nx\n", states=STATES) == "data.csv: missing column 'B'"
    assert read_error("A,B,C\nx,u,c\n", states=STATES) == "data.csv: unexpected column 'C'; expected columns: A, B"
    assert read_error("A,B\nx,u\ny\n") == "data.csv, line 3: expected 2 fields, got 1"
    assert read_error("A,B\nx,u,w\n") == "data.csv, line 2: expected 2 fields, got 3"
    assert read_error("") == "data.csv: the file is empty; expected a header row"
    assert read_error("\n\n") == "data.csv: the file is empty; expected a header row"
    assert read_error("A,B,A\nx,u,y\n") == "data.csv: column 'A' appears twice in the header"
    assert read_error("A,,B\nx,y,z\n") == "data.csv: column 2 of the header has no name"
    assert read_error("A,B,regime\nx,u,A\ny,v,A;C\n") == (
        "data.csv: row 2 (line 3), column 'regime': unknown variable 'C'; variables are: A, B"
    )


def test_read_csv_line_numbers_follow_quoted_newlines():
    text = 'A,B\n"x\ny",u\nx,q\n'
    assert read_error(text, states={"A": ["x\ny", "x"], "B": ["u"]}) == (
        "data.csv: row 2 (line 4), column 'B': unknown state 'q'; states are: u"
    )
    assert read_error('A,B\n"x,u\n').startswith("data.csv, line ")


def test_read_csv_file_errors(tmp_path):
    missing = tmp_path / "absent.csv"
    with raises(f"{missing}: no such file"):
        Table.read_csv(missing)
    latin = tmp_path / "latin.csv"
    latin.write_bytes("A\ncaf\xe9\n".encode("latin-1"))
    with raises(f"{latin}: the file is not UTF-8 text"):
        Table.read_csv(latin)
    with raises("cannot read the file"):
        Table.read_csv(tmp_path)


def test_read_csv_skips_blank_lines_but_not_a_blank_single_column_value():
    # a blank line carries no record (common practice, no source; Python's csv module yields [] for it)
    t = Table.read_csv(io.StringIO("\nA,B\n\nx,u\n\n\ny,v\n\n"), states=STATES)
    assert t.codes.tolist() == [[0, 0], [1, 1]]
    assert read_error("A,B\nx,u\n\ny,q\n", states=STATES) == (
        "data.csv: row 2 (line 4), column 'B': unknown state 'q'; states are: u, v, w"
    )
    assert read_error("A\nx\n\ny\n") == "data.csv: row 2 (line 3), column 'A': missing value"
    assert Table.read_csv(io.StringIO("A\nx\ny\n\n\n")).n_rows == 2  # trailing blank lines of one column
    assert Table.read_csv(io.StringIO("A,B\nx,u\n   \ny,v\n \n"), states=STATES).n_rows == 2


def test_read_csv_header_only():
    assert Table.read_csv(io.StringIO("A,B\n"), states=STATES).n_rows == 0
    assert read_error("A,B\n") == "data.csv: the file has a header but no rows"


def test_to_csv_stream_and_atomic_write(table, tmp_path, monkeypatch):
    out = io.StringIO()
    table.take([0, 1]).to_csv(out)
    assert out.getvalue() == "A,B,regime\nx,v,\ny,w,A\n"
    path = tmp_path / "kept.csv"
    path.write_text("old")

    def failing_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(table_module.os, "replace", failing_replace)
    with pytest.raises(WriteError, match=f"{path}: cannot write the file \\(OSError: disk full\\)"):
        table.to_csv(path)
    assert path.read_text() == "old"
    assert os.listdir(tmp_path) == ["kept.csv"]


def test_to_csv_into_a_missing_folder_names_the_file(table, tmp_path):
    target = tmp_path / "no" / "such" / "rows.csv"
    with pytest.raises(WriteError, match="rows.csv: cannot write the file \\(FileNotFoundError: No such file or directory\\)") as info:
        table.to_csv(target)
    assert info.value.errno == errno.ENOENT and info.value.filename == str(target)


def test_atomic_open_leaves_other_files_errors_alone(tmp_path):
    from intervgnn._io import atomic_open

    with pytest.raises(FileNotFoundError) as info:
        with atomic_open(tmp_path / "out.txt") as fh:
            fh.write("x")
            open(tmp_path / "absent.txt")
    assert not isinstance(info.value, WriteError)
    assert os.listdir(tmp_path) == []


def test_to_csv_refuses_what_read_csv_would_misread(tmp_path):
    clash = Table([[0]], ["regime"], {"regime": ["a", "b"]})
    with raises("regime column 'regime' clashes with a variable of that name"):
        clash.to_csv(tmp_path / "x.csv")
    clash.to_csv(tmp_path / "x.csv", regime_column=None)
    assert Table.read_csv(tmp_path / "x.csv", regime_column=None) == Table([[0]], ["regime"], {"regime": ["a"]})
    semi = Table([[0]], ["a;b"], {"a;b": ["x"]}, intervened=[[True]])
    with raises("variable 'a;b' is intervened but its name contains ';'"):
        semi.to_csv(tmp_path / "y.csv")
    assert not os.path.exists(tmp_path / "y.csv")


# Safe labels: no surrounding whitespace (fields are stripped), not empty.
labels = st.text(alphabet="abxyz019 ,\"'-é", min_size=1, max_size=5).filter(lambda s: s == s.strip())


@st.composite
def tables(draw) -> Table:
    names = labels.filter(lambda s: ";" not in s and s != "regime")
    variables = draw(st.lists(names, min_size=1, max_size=4, unique=True))
    states = {v: draw(st.lists(labels, min_size=1, max_size=4, unique=True)) for v in variables}
    n = draw(st.integers(0, 8))
    codes = np.array(
        [[draw(st.integers(0, len(states[v]) - 1)) for v in variables] for _ in range(n)], dtype=np.int64
    ).reshape(n, len(variables))
    mask = np.array(draw(st.lists(st.booleans(), min_size=n * len(variables), max_size=n * len(variables))), dtype=bool)
    return Table(codes, variables, states, mask.reshape(n, len(variables)))


@settings(max_examples=100, deadline=None)
@given(tables())
def test_random_tables_round_trip_through_csv(t):
    out = io.StringIO()
    t.to_csv(out)
    back = Table.read_csv(io.StringIO(out.getvalue()), states=t.states)
    assert back == t


# ----------------------------------------------------------------------- pandas
def test_pandas_round_trip_keeps_state_order(table):
    pd = pytest.importorskip("pandas")
    df = table.to_pandas()
    assert list(df.columns) == ["A", "B"]
    for v in table.variables:
        assert isinstance(df[v].dtype, pd.CategoricalDtype)
        assert list(df[v].cat.categories) == list(table.states[v])
    assert df["B"].tolist() == table.labels("B")
    back = Table.from_pandas(df)
    assert back.states == table.states
    assert back.codes.tolist() == table.codes.tolist()
    assert back.is_observational
    # states not in declared order and an unused state survive too
    t = Table([[1], [1]], ["Z"], {"Z": ["zz", "aa", "mm"]})
    assert Table.from_pandas(t.to_pandas()) == t


def test_pandas_round_trip_with_regime_column(table):
    pytest.importorskip("pandas")
    df = table.to_pandas(regime_column="regime")
    assert df["regime"].tolist() == ["", "A", "", "A;B", "B"]
    assert Table.from_pandas(df, regime_column="regime") == table
    with raises("regime column 'A' clashes with a variable of that name"):
        table.to_pandas(regime_column="A")


def test_from_pandas_plain_and_mixed_columns():
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame({"A": ["y", "x", "y"], "B": pd.Categorical(["v", "u", "v"], categories=["v", "u"])})
    t = Table.from_pandas(df)
    assert t.states == {"A": ("x", "y"), "B": ("v", "u")}
    assert t.codes.tolist() == [[1, 0], [0, 1], [1, 0]]
    declared = Table.from_pandas(df, states={"A": ["y", "x"], "B": ["u", "v"]})
    assert declared.codes.tolist() == [[0, 1], [1, 0], [0, 1]]
    numbered = Table.from_pandas(pd.DataFrame({0: ["a", "b"], 1: [1, 2]}))
    assert numbered.variables == ("0", "1")
    assert numbered.states["1"] == ("1", "2")
    lists = Table.from_pandas(
        pd.DataFrame({"A": ["x", "y"], "do": [["A"], None]}), states={"A": ["x", "y"]}, regime_column="do"
    )
    assert lists.intervened.tolist() == [[True], [False]]


def test_from_pandas_errors():
    pd = pytest.importorskip("pandas")
    for missing in (None, np.nan, pd.NA):
        df = pd.DataFrame({"A": pd.Series(["x", missing], dtype=object), "B": ["u", "v"]})
        with raises("row 2, column 'A': missing value"):
            Table.from_pandas(df)
    with raises("row 2, column 'B': missing value"):
        Table.from_pandas(pd.DataFrame({"A": ["x", "y"], "B": pd.Categorical(["u", None])}))
    with raises("row 1, column 'A': missing value"):
        Table.from_pandas(pd.DataFrame({"A": pd.Series([pd.NA, "x"], dtype="string")}))
    with raises("row 2, column 'B': unknown state 'q'; states are: u, v, w"):
        Table.from_pandas(pd.DataFrame({"A": ["x", "y"], "B": ["u", "q"]}), states=STATES)
    with raises("column 'A' appears twice"):
        Table.from_pandas(pd.DataFrame([["x", "y"]], columns=["A", "A"]))
    with raises("row 1, column 'regime': unknown variable 'Q'; variables are: A"):
        Table.from_pandas(pd.DataFrame({"A": ["x"], "regime": ["Q"]}), regime_column="regime")
    with raises("row 1, column 'regime': expected variable names separated by ';', got 5"):
        Table.from_pandas(pd.DataFrame({"A": ["x"], "regime": [5]}), regime_column="regime")
