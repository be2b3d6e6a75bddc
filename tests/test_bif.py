"""Reading and writing networks in BIF: the shipped files, the dialect, errors, fuzzing."""

from __future__ import annotations

import gzip
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import intervgnn as ig
import intervgnn.bn.bif as bif_module
from intervgnn import BIFParseError, CausalGraph, CausalNetwork, format_bif, parse_bif, read_bif, write_bif
from intervgnn.bn.catalog import catalog_path

NETWORKS = ig.list_networks()
CATALOG_DIR = os.path.dirname(catalog_path(NETWORKS[0]))


def assert_same_network(a: CausalNetwork, b: CausalNetwork) -> None:
    """Same name, variables (in order), states, parents (in order), properties and exact CPTs."""
    assert a.name == b.name
    assert a.variables == b.variables
    assert a.states == b.states
    for v in a.variables:
        assert a.graph.parents(v) == b.graph.parents(v), v
        assert np.array_equal(a.cpt(v), b.cpt(v)), v
        assert a.cpt(v).dtype == b.cpt(v).dtype == np.float64
    assert a.properties == b.properties
    assert a.variable_properties == b.variable_properties


def parse_error(text: str, source: str = "nets/bad.bif") -> BIFParseError:
    with pytest.raises(BIFParseError) as info:
        parse_bif(text, source=source)
    err = info.value
    assert err.source == source
    assert str(err).startswith(source)
    return err


def assert_error_at(err: BIFParseError, line: int, *fragments: str) -> None:
    assert err.line == line, str(err)
    assert f"{err.source}, line {line}: " in str(err)
    for f in fragments:
        assert f in str(err), f"{f!r} not in {str(err)!r}"


# A small valid document used by several tests: A -> C <- B, B has 3 states.
SMALL = """\
network small {
  property author = someone;
}
variable A {
  type discrete [ 2 ] { a0, a1 };
}
variable B {
  type discrete [ 3 ] { b0, b1, b2 };
}
variable C {
  type discrete [ 2 ] { no, yes };
}
probability ( A ) {
  table 0.3, 0.7;
}
probability ( B ) {
  table 0.2, 0.3, 0.5;
}
probability ( C | A, B ) {
  (a0, b0) 0.1, 0.9;
  (a0, b1) 0.2, 0.8;
  (a0, b2) 0.3, 0.7;
  (a1, b0) 0.4, 0.6;
  (a1, b1) 0.5, 0.5;
  (a1, b2) 0.6, 0.4;
}
"""


# ----------------------------------------------------------------- shipped files
@pytest.fixture(scope="module")
def shipped() -> dict[str, CausalNetwork]:
    return {name: read_bif(catalog_path(name)) for name in NETWORKS}


def test_catalog_lists_exactly_the_shipped_files():
    files = sorted(f[: -len(".bif")] for f in os.listdir(CATALOG_DIR) if f.endswith(".bif"))
    assert sorted(NETWORKS) == files


@pytest.mark.parametrize("name", NETWORKS)
def test_shipped_network_reads(name, shipped):
    net = shipped[name]
    assert net.name == name
    assert len(net.variables) >= 5
    for v in net.variables:
        cpt = net.cpt(v)
        assert cpt.shape == tuple(len(net.states[p]) for p in net.graph.parents(v)) + (len(net.states[v]),)
        assert np.allclose(cpt.sum(axis=-1), 1.0, atol=1e-6)
    assert ig.load_network(name).variables == net.variables


@pytest.mark.parametrize("name", NETWORKS)
def test_shipped_network_round_trips_exactly(name, shipped):
    net = shipped[name]
    text = format_bif(net)
    back = parse_bif(text)
    assert_same_network(net, back)
    # writing again gives the same text: the layout is a fixed point
    assert format_bif(back) == text


@pytest.mark.parametrize("name", NETWORKS)
def test_shipped_network_agrees_with_pgmpy(name, shipped):
    # pgmpy's BIF reader is the reference implementation we check against.
    readwrite = pytest.importorskip("pgmpy.readwrite")
    path = catalog_path(name)
    model = readwrite.BIFReader(path).get_model()
    net = shipped[name]
    assert sorted(model.nodes()) == sorted(net.variables)
    assert sorted(model.edges()) == sorted(net.graph.edges)
    for cpd in model.get_cpds():
        child, *parents = cpd.variables
        assert tuple(parents) == net.graph.parents(child), child
        for v in cpd.variables:
            assert tuple(cpd.state_names[v]) == net.states[v], (child, v)
        theirs = cpd.get_values()  # (child states, parent configurations), last parent fastest
        ours = net.cpt(child).reshape(-1, len(net.states[child])).T
        assert ours.shape == theirs.shape
        np.testing.assert_allclose(ours, theirs, rtol=0, atol=1e-6)
        # the numbers are the file's own wherever the file's rows sum to one
        exact_cols = np.abs(theirs.sum(axis=0) - 1.0) <= 1e-12
        assert np.array_equal(ours[:, exact_cols], theirs[:, exact_cols]), child


# ----------------------------------------------------------------------- dialect
def test_small_document_values():
    net = parse_bif(SMALL)
    assert net.name == "small"
    assert net.variables == ("A", "B", "C")
    assert net.states == {"A": ("a0", "a1"), "B": ("b0", "b1", "b2"), "C": ("no", "yes")}
    assert net.graph.parents("C") == ("A", "B")
    assert net.cpt("A").tolist() == [0.3, 0.7]
    assert net.cpt("B").tolist() == [0.2, 0.3, 0.5]
    assert net.cpt("C")[1, 2].tolist() == [0.6, 0.4]
    assert net.cpt("C")[0, 1].tolist() == [0.2, 0.8]
    assert net.properties == {"author": "someone"}


def test_comments_everywhere():
    text = """\
// a line comment before anything
/* a block comment
   spanning lines */ network "commented" { // after the brace
  property note = kept; /* trailing */
}
variable A { /* inside a block */ type discrete [ 2 ] { a0, /* between states */ a1 };
}
variable "B//not a comment" {
  type discrete [ 2 ] { b0, b1 }; // comment
}
probability ( A ) { table 0.25, /* mid-row
  still comment */ 0.75; }
probability ( "B//not a comment" | A ) {
  // a row comment
  (a0) 0.5, 0.5;/**/(a1)/*x*/0.1,0.9;
}
/* final comment */"""
    net = parse_bif(text)
    assert net.name == "commented"
    assert net.variables == ("A", "B//not a comment")
    assert net.properties == {"note": "kept"}
    assert net.cpt("A").tolist() == [0.25, 0.75]
    assert net.cpt("B//not a comment").tolist() == [[0.5, 0.5], [0.1, 0.9]]


def test_line_numbers_count_lines_inside_comments():
    text = "/* one\ntwo\nthree */\nvariable A {\n  type discrete [ 2 ] { a, a };\n}\n"
    assert_error_at(parse_error(text), 5, "variable 'A' lists state 'a' twice")


def test_properties_in_every_block():
    text = """\
network n {
  property author = Jane Doe;
  property flag;
  property url = "http://example.org/x;y";
}
variable A {
  type discrete [ 2 ] { a0, a1 };
  property position = (10, 20);
  property label = "the A";
}
variable B {
  property first = before type;
  type discrete [ 2 ] { b0, b1 };
}
probability ( A ) {
  property ignored = yes;
  table 0.5, 0.5;
}
probability ( B | A ) {
  (a0) 0.5, 0.5;
  property also ignored;
  (a1) 0.5, 0.5;
}
"""
    net = parse_bif(text)
    assert net.properties == {"author": "Jane Doe", "flag": "", "url": '"http://example.org/x;y"'}
    assert net.variable_properties == {
        "A": {"position": "(10, 20)", "label": '"the A"'},
        "B": {"first": "before type"},
    }
    assert_same_network(net, parse_bif(format_bif(net)))


def test_table_form_of_a_root_and_of_a_child():
    # child state slowest, then A, then B (last parent fastest): value index c*6 + a*3 + b
    p_no = {(a, b): (1 + a * 3 + b) / 10 for a in range(2) for b in range(3)}
    order = [(a, b) for a in range(2) for b in range(3)]
    values = [p_no[ab] for ab in order] + [1 - p_no[ab] for ab in order]
    text = SMALL.split("probability ( C")[0] + (
        "probability ( C | A, B ) {\n  table " + ", ".join(repr(x) for x in values) + ";\n}\n"
    )
    net = parse_bif(text)
    for (a, b), p in p_no.items():
        assert net.cpt("C")[a, b].tolist() == [p, 1 - p]
    assert net.cpt("A").tolist() == [0.3, 0.7]
    # the same numbers as the row form
    row_form = parse_bif(SMALL)
    np.testing.assert_allclose(net.cpt("C"), row_form.cpt("C"), rtol=0, atol=1e-15)


def test_table_form_agrees_with_pgmpy(tmp_path):
    # pgmpy's reader is the reference for the order of values in the table form.
    readwrite = pytest.importorskip("pgmpy.readwrite")
    values = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.9, 0.8, 0.7, 0.6, 0.5, 0.4]
    text = SMALL.split("probability ( C")[0] + (
        "probability ( C | A, B ) {\n  table " + ", ".join(map(str, values)) + ";\n}\n"
    )
    path = tmp_path / "table_form.bif"
    path.write_text(text)
    ours = read_bif(path)
    cpd = readwrite.BIFReader(str(path)).get_model().get_cpds("C")
    assert cpd.variables == ["C", "A", "B"]
    assert np.array_equal(ours.cpt("C").reshape(-1, 2).T, cpd.get_values())


def test_default_row_fills_rows_not_listed():
    text = SMALL.split("probability ( C")[0] + """\
probability ( C | A, B ) {
  default 0.5, 0.5;
  (a1, b2) 0.9, 0.1;
  (a0, b1) 0.2, 0.8;
}
"""
    cpt = parse_bif(text).cpt("C")
    assert cpt[1, 2].tolist() == [0.9, 0.1]
    assert cpt[0, 1].tolist() == [0.2, 0.8]
    for a, b in [(0, 0), (0, 2), (1, 0), (1, 1)]:
        assert cpt[a, b].tolist() == [0.5, 0.5]


def test_rows_override_an_earlier_table():
    text = SMALL.split("probability ( C")[0] + """\
probability ( C | A, B ) {
  table 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.9, 0.9, 0.9, 0.9, 0.9, 0.9;
  (a1, b1) 0.7, 0.3;
}
"""
    cpt = parse_bif(text).cpt("C")
    assert cpt[1, 1].tolist() == [0.7, 0.3]
    assert cpt[0, 0].tolist() == [0.1, 0.9]


def test_odd_whitespace_and_no_spaces():
    compact = (
        "variable A{type discrete[2]{a0,a1};}variable B{type discrete[2]{b0,b1};}"
        "probability(A){table 0.3,0.7;}probability(B|A){(a0)0.1,0.9;(a1)0.8,0.2;}"
    )
    spaced = "\n\n\t variable\tA\t{\n\ttype\tdiscrete\t[\t2\t]\t{\ta0\t,\ta1\t}\t;\n}\n\n\n" + (
        "variable B {\n type discrete [ 2 ] {\n b0,\n b1\n };\n}\n"
        "probability ( A )\n{\n table\n 0.3 ,\n 0.7 ;\n}\n"
        "probability\n(\nB\n|\nA\n)\n{\n(\na0\n)\n0.1\n,\n0.9\n;\n( a1 ) 0.8, 0.2;\n}\n\n"
    )
    crlf = spaced.replace("\n", "\r\n")
    nets = [parse_bif(t) for t in (compact, spaced, crlf)]
    for net in nets[1:]:
        assert_same_network(nets[0], net)
    assert nets[0].cpt("B").tolist() == [[0.1, 0.9], [0.8, 0.2]]


def test_crlf_keeps_line_numbers(tmp_path):
    text = SMALL.replace("(a1, b1) 0.5, 0.5;", "(a1, b1) 0.5, 0.6;").replace("\n", "\r\n")
    err = parse_error(text)
    assert_error_at(err, 24, "CPT of 'C', row (A=a1, B=b1)")
    path = tmp_path / "crlf.bif"
    path.write_bytes(text.encode())
    with pytest.raises(BIFParseError) as info:
        read_bif(path)
    assert info.value.line == 24
    # and a valid CRLF file reads the same as the LF one
    path.write_bytes(SMALL.replace("\n", "\r\n").encode())
    assert_same_network(read_bif(path), parse_bif(SMALL))


def test_byte_order_mark_is_skipped(tmp_path):
    path = tmp_path / "bom.bif"
    path.write_bytes(b"\xef\xbb\xbf" + SMALL.encode())
    assert_same_network(read_bif(path), parse_bif(SMALL))


def test_quoted_names_with_spaces_and_escapes():
    text = r"""
network "my net" { }
variable "Blood pressure" { type discrete [ 3 ] { "very low", normal, "say \"high\"" }; }
variable "table" { type discrete [ 2 ] { "{", "}" }; }
probability ( "Blood pressure" ) { table 0.2, 0.3, 0.5; }
probability ( "table" | "Blood pressure" ) {
  ("very low") 0.1, 0.9;
  (normal) 0.2, 0.8;
  ("say \"high\"") 0.3, 0.7;
}
"""
    net = parse_bif(text)
    assert net.name == "my net"
    assert net.variables == ("Blood pressure", "table")
    assert net.states["Blood pressure"] == ("very low", "normal", 'say "high"')
    assert net.states["table"] == ("{", "}")
    assert net.cpt("table")[2].tolist() == [0.3, 0.7]
    out = format_bif(net)
    assert '"Blood pressure"' in out and r'"say \"high\""' in out and 'variable "table"' in out
    assert_same_network(net, parse_bif(out))


def test_commas_are_optional():
    text = """
variable A { type discrete [ 3 ] { a0 a1 a2 }; }
variable B { type discrete [ 2 ] { b0, b1 }; }
variable C { type discrete [ 2 ] { c0 c1 }; }
probability ( A ) { table 0.2 0.3 0.5; }
probability ( B ) { table 0.5, 0.5; }
probability ( C | A B ) {
  (a0 b0) 0.1 0.9;
  (a0, b1) 0.2, 0.8;
  (a1 b0) 0.3, 0.7;
  (a1, b1) 0.4 0.6;
  (a2 b0) 0.5 0.5;
  (a2 b1) 0.6 0.4;
}
"""
    net = parse_bif(text)
    assert net.graph.parents("C") == ("A", "B")
    assert net.cpt("C")[2, 1].tolist() == [0.6, 0.4]
    assert net.cpt("A").tolist() == [0.2, 0.3, 0.5]


def test_probability_block_before_its_variable_and_empty_network_block():
    text = """
network { }
probability ( B | A ) { (x) 0.5, 0.5; (y) 0.25, 0.75; }
variable A { type discrete [ 2 ] { x, y }; }
probability ( A ) { table 1, 0; }
variable B { type discrete [ 2 ] { u, v }; }
"""
    net = parse_bif(text)
    assert net.name == "network"
    assert net.variables == ("A", "B")
    assert net.cpt("A").tolist() == [1.0, 0.0]
    assert net.cpt("B")[1].tolist() == [0.25, 0.75]


def test_read_bif_names_an_unnamed_network_after_the_file(tmp_path):
    path = tmp_path / "sprinkler.v2.bif"
    path.write_text(SMALL.replace("network small", "network unknown"))
    assert read_bif(path).name == "sprinkler"


def test_read_gzip(tmp_path):
    path = tmp_path / "small.bif.gz"
    with gzip.open(path, "wt", encoding="utf-8") as fh:
        fh.write(SMALL)
    assert_same_network(read_bif(path), parse_bif(SMALL))


# ------------------------------------------------------------------------ errors
def test_error_unknown_parent_state_in_a_row():
    err = parse_error(SMALL.replace("(a1, b1) 0.5, 0.5;", "(a1, b9) 0.5, 0.5;"))
    assert_error_at(err, 24, "row of 'C': unknown state 'b9' for parent 'B'; states are: b0, b1, b2")


def test_error_wrong_number_of_values():
    err = parse_error(SMALL.replace("(a0, b1) 0.2, 0.8;", "(a0, b1) 0.2, 0.3, 0.5;"))
    assert_error_at(err, 21, "row of 'C' has 3 values, expected 2")
    err = parse_error(SMALL.replace("table 0.2, 0.3, 0.5;", "table 0.2, 0.8;"))
    assert_error_at(err, 17, "table of 'B' has 2 values, expected 3")
    err = parse_error(SMALL.replace("(a0, b0) 0.1, 0.9;", "default 1.0;\n  (a0, b0) 0.1, 0.9;"))
    assert_error_at(err, 20, "default row of 'C' has 1 values, expected 2")
    err = parse_error(SMALL.replace("(a0, b0) 0.1, 0.9;", "(a0) 0.1, 0.9;"))
    assert_error_at(err, 20, "row of 'C' names 1 parent states, expected 2")


def test_error_missing_row_without_default():
    err = parse_error(SMALL.replace("  (a1, b0) 0.4, 0.6;\n", ""))
    assert_error_at(err, 19, "'C' has no row for (A=a1, B=b0)")


def test_error_repeated_row_table_or_default():
    # a repeated configuration would silently overwrite the earlier row (common practice, no
    # source); rows after a table still override it (test_rows_override_an_earlier_table)
    err = parse_error(SMALL.replace("  (a1, b0) 0.4, 0.6;\n", "  (a0, b1) 0.4, 0.6;\n"))
    assert_error_at(err, 23, "'C' has two rows for (A=a0, B=b1); the first is on line 21")
    err = parse_error(SMALL.replace("  table 0.3, 0.7;\n", "  table 0.3, 0.7;\n  table 0.5, 0.5;\n"))
    assert_error_at(err, 15, "'A' has a table after earlier entries (line 14); a table must come first")
    err = parse_error(SMALL.replace("(a1, b2) 0.6, 0.4;", "(a1, b2) 0.6, 0.4;\n  default 0.5, 0.5;\n  default 0.4, 0.6;"))
    assert_error_at(err, 27, "'C' has a second default row (the first is on line 26)")
    err = parse_error(SMALL.replace("  table 0.3, 0.7;\n", "  default 0.3, 0.7;\n  table 0.3, 0.7;\n"))
    assert_error_at(err, 15, "'A' has a table after earlier entries (line 14)")


def test_error_undeclared_variable_and_parent():
    err = parse_error(SMALL + "probability ( Z ) {\n  table 1.0;\n}\n")
    assert_error_at(err, 27, "probability block for undeclared variable 'Z'")
    err = parse_error(SMALL.replace("probability ( C | A, B )", "probability ( C | A, Q )"))
    assert_error_at(err, 19, "'C' has undeclared parent 'Q'")


def test_error_state_count_mismatch():
    err = parse_error(SMALL.replace("[ 3 ] { b0, b1, b2 }", "[ 4 ] { b0, b1, b2 }"))
    assert_error_at(err, 8, "variable 'B' declares 4 states but lists 3")


def test_error_duplicate_variable_and_state():
    err = parse_error(SMALL.replace("variable C {", "variable A {"))
    assert_error_at(err, 10, "variable 'A' is declared twice")
    err = parse_error(SMALL.replace("{ b0, b1, b2 }", "{ b0, b1, b0 }"))
    assert_error_at(err, 8, "variable 'B' lists state 'b0' twice")


def test_error_cycle():
    text = """\
variable A { type discrete [ 2 ] { a0, a1 }; }
variable B { type discrete [ 2 ] { b0, b1 }; }
variable C { type discrete [ 2 ] { c0, c1 }; }
probability ( A | C ) { (c0) 0.5, 0.5; (c1) 0.5, 0.5; }
probability ( B | A ) { (a0) 0.5, 0.5; (a1) 0.5, 0.5; }
probability ( C | B ) { (b0) 0.5, 0.5; (b1) 0.5, 0.5; }
"""
    err = parse_error(text)
    assert "the graph has a cycle: " in str(err)
    cycle = str(err).split("cycle: ")[1].split(" -> ")
    assert cycle[0] == cycle[-1] and sorted(cycle[:-1]) == ["A", "B", "C"]
    assert err.line in (4, 5, 6)
    assert f"nets/bad.bif, line {err.line}: " in str(err)


def test_error_own_parent_and_repeated_parent():
    err = parse_error(SMALL.replace("probability ( C | A, B )", "probability ( C | A, C )"))
    assert_error_at(err, 19, "'C' is listed as its own parent")
    err = parse_error(SMALL.replace("probability ( C | A, B )", "probability ( C | A, A )"))
    assert_error_at(err, 19, "'C' lists parent 'A' twice")


def test_error_row_not_summing_to_one_names_variable_and_row():
    err = parse_error(SMALL.replace("(a1, b1) 0.5, 0.5;", "(a1, b1) 0.5, 0.6;"))
    assert_error_at(err, 24, "CPT of 'C', row (A=a1, B=b1): probabilities sum to 1.1, expected 1")
    err = parse_error(SMALL.replace("table 0.3, 0.7;", "table 0.3, 0.6;"))
    assert_error_at(err, 14, "CPT of 'A', row (no parents): probabilities sum to 0.9")
    # a row filled in by the default points at the default line
    text = SMALL.replace("  (a1, b0) 0.4, 0.6;\n", "")
    text = text.replace("(a0, b0) 0.1, 0.9;", "(a0, b0) 0.1, 0.9;\n  default 0.5, 0.2;")
    assert_error_at(parse_error(text), 21, "CPT of 'C', row (A=a1, B=b0): probabilities sum to 0.7")


def test_error_negative_or_non_finite_probability():
    err = parse_error(SMALL.replace("(a0, b2) 0.3, 0.7;", "(a0, b2) -0.3, 1.3;"))
    assert_error_at(
        err,
        22,
        "CPT of 'C', row (A=a0, B=b2): entry for state 'no' is -0.3; probabilities must be finite and non-negative",
    )
    err = parse_error(SMALL.replace("table 0.3, 0.7;", "table nan, 1.0;"))
    assert_error_at(err, 14, "CPT of 'A', row (no parents): entry for state 'a0' is nan")
    err = parse_error(SMALL.replace("table 0.3, 0.7;", "table 0.3, inf;"))
    assert_error_at(err, 14, "entry for state 'a1' is inf")


def test_error_message_names_the_right_variable_when_names_repeat_as_states():
    # 'B' is also a state of A: the error about B's row must point at B's block
    text = """\
variable A { type discrete [ 2 ] { B, x }; }
variable B { type discrete [ 2 ] { A, y }; }
probability ( A ) { table 0.5, 0.5; }
probability ( B | A ) {
  (B) 0.5, 0.5;
  (x) 0.5, 0.7;
}
"""
    assert_error_at(parse_error(text), 6, "CPT of 'B', row (A=x): probabilities sum to 1.2")


def test_error_unterminated_comment_and_quote():
    err = parse_error(SMALL.replace("variable C {", "/* oops\nvariable C {"))
    assert_error_at(err, 10, "unterminated /* comment")
    err = parse_error(SMALL.replace("variable C {", 'variable "C {'))
    assert_error_at(err, 10, "unterminated quoted name")


def test_error_syntax():
    assert_error_at(parse_error(SMALL.replace("table 0.3, 0.7;", "table 0.3, zero;")), 14, "'zero' is not a number")
    assert_error_at(parse_error(SMALL.replace("type discrete [ 2 ] { a0", "type continuous [ 2 ] { a0")), 5,
                    "variable 'A': only 'discrete' variables are supported, found 'continuous'")
    assert_error_at(parse_error(SMALL.replace("[ 2 ] { a0", "[ two ] { a0")), 5, "'two' is not a number of states")
    assert_error_at(parse_error(SMALL + "}\n"), 27, "expected 'network', 'variable' or 'probability', found '}'")
    assert_error_at(parse_error("network n {\n  property author = someone\n}\n"), 2,
                    "property is missing its closing ';'")
    assert_error_at(parse_error(SMALL + "network again { }\n"), 27, "a second 'network' block")
    assert_error_at(
        parse_error(SMALL + "probability ( A ) { table 0.5, 0.5; }\n"), 27, "a second probability block for 'A'"
    )
    assert_error_at(parse_error(SMALL.replace("  table 0.3, 0.7;\n}\n", "  table 0.3, 0.7;\n  oops;\n}\n")), 15,
                    "unexpected 'oops' in the probability block of 'A'")
    assert_error_at(parse_error(SMALL.rstrip("}\n")), 25, "probability block of 'C' is not closed")
    assert_error_at(parse_error(SMALL.replace("variable C {\n  type discrete [ 2 ] { no, yes };\n}", "variable C { }")),
                    10, "variable 'C' has no 'type discrete' line")
    assert_error_at(parse_error('variable "" { type discrete [ 1 ] { x }; }'), 1, "a variable name is empty")
    assert_error_at(parse_error(SMALL.replace("[ 2 ] { a0, a1 }", "[ 0 ] { }")), 5, "variable 'A' has no states")
    assert_error_at(parse_error(SMALL.replace("probability ( B ) {\n  table 0.2, 0.3, 0.5;\n}\n", "")), 7,
                    "variable 'B' has no probability block")
    assert "no variables declared" in str(parse_error("// nothing here\n"))


def test_error_file_not_found(tmp_path):
    path = tmp_path / "absent.bif"
    with pytest.raises(BIFParseError) as info:
        read_bif(path)
    assert str(info.value) == f"{path}: no such file"


def test_error_not_utf8(tmp_path):
    path = tmp_path / "latin1.bif"
    path.write_bytes(SMALL.replace("variable C", "variable C\xe9").encode("latin-1"))
    with pytest.raises(BIFParseError) as info:
        read_bif(path)
    assert_error_at(info.value, 10, "not UTF-8", "0xe9")
    assert str(path) in str(info.value)


def test_error_unreadable_files(tmp_path):
    with pytest.raises(BIFParseError, match="cannot read the file"):
        read_bif(tmp_path)  # a directory
    plain = tmp_path / "plain.bif.gz"
    plain.write_text(SMALL)
    with pytest.raises(BIFParseError, match="cannot read the file"):
        read_bif(plain)
    data = bytearray(gzip.compress(SMALL.encode() * 20))
    data[20] ^= 0xFF
    corrupt = tmp_path / "corrupt.bif.gz"
    corrupt.write_bytes(bytes(data))
    with pytest.raises(BIFParseError, match="cannot read the file"):
        read_bif(corrupt)
    truncated = tmp_path / "truncated.bif.gz"
    truncated.write_bytes(gzip.compress(SMALL.encode())[:-30])
    with pytest.raises(BIFParseError, match="cannot read the file"):
        read_bif(truncated)


def test_errors_are_value_errors_and_intervgnn_errors():
    err = parse_error("variable")
    assert isinstance(err, ValueError) and isinstance(err, ig.IntervgnnError)
    assert err.message == "expected a variable name but the file ended"


# ------------------------------------------------------------------- write_bif
def test_write_bif_rereads_equal_and_leaves_no_temporary(tmp_path):
    net = parse_bif(SMALL)
    path = tmp_path / "small.bif"
    path.write_text("old contents")
    write_bif(net, path)
    assert os.listdir(tmp_path) == ["small.bif"]
    assert_same_network(read_bif(path), net)
    write_bif(net, str(tmp_path / "small.bif.gz"))
    assert_same_network(read_bif(tmp_path / "small.bif.gz"), net)


def test_write_bif_is_atomic(tmp_path, monkeypatch):
    net = parse_bif(SMALL)
    path = tmp_path / "kept.bif"
    path.write_text("old contents")

    def failing_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(bif_module.os, "replace", failing_replace)
    with pytest.raises(OSError, match="disk full"):
        write_bif(net, path)
    assert path.read_text() == "old contents"
    assert os.listdir(tmp_path) == ["kept.bif"]


@pytest.mark.parametrize("name", NETWORKS[:3])
def test_write_bif_shipped(name, shipped, tmp_path):
    path = tmp_path / f"{name}.bif"
    write_bif(shipped[name], path)
    assert_same_network(read_bif(path), shipped[name])


# -------------------------------------------------------------- property-based
# names from an alphabet that includes characters needing quotes (space,
# quote, backslash, braces, comment starts, a keyword, non-ASCII)
NAME_CHARS = "abcXYZ019_-.+ \"\\{};,|()/*é\t"
names = st.one_of(
    st.text(alphabet=NAME_CHARS, min_size=1, max_size=6),
    st.sampled_from(["table", "default", "network", "property", "variable", "probability", "discrete", "type"]),
)
prop_keys = st.text(alphabet="abcdefxyz_", min_size=1, max_size=5)
prop_values = st.text(alphabet="abc 0123.=-()", max_size=8).map(str.strip)


@st.composite
def networks(draw) -> CausalNetwork:
    n = draw(st.integers(1, 6))
    variables = draw(st.lists(names, min_size=n, max_size=n, unique=True))
    topo = draw(st.permutations(variables))
    parents = {}
    for i, v in enumerate(topo):
        earlier = list(topo[:i])
        pa = draw(st.lists(st.sampled_from(earlier), unique=True, max_size=min(3, len(earlier)))) if earlier else []
        parents[v] = pa
    states = {v: draw(st.lists(names, min_size=1, max_size=4, unique=True)) for v in variables}
    cpts = {}
    for v in variables:
        shape = [len(states[p]) for p in parents[v]] + [len(states[v])]
        rows = int(np.prod(shape[:-1]))
        weights = np.array(
            draw(st.lists(st.floats(0.0, 1.0), min_size=rows * shape[-1], max_size=rows * shape[-1]))
        ).reshape(rows, shape[-1])
        weights[weights.sum(axis=1) == 0, 0] = 1.0
        cpts[v] = (weights / weights.sum(axis=1, keepdims=True)).reshape(shape)
    graph = CausalGraph([(p, v) for v in variables for p in parents[v]], nodes=variables)
    props = draw(st.dictionaries(prop_keys, prop_values, max_size=3))
    var_props = {
        v: p for v in variables if (p := draw(st.dictionaries(prop_keys, prop_values, max_size=2)))
    }
    return CausalNetwork(
        graph, states, cpts, name=draw(names), properties=props, variable_properties=var_props
    )


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(networks())
def test_random_networks_round_trip_exactly(net):
    text = format_bif(net)
    back = parse_bif(text)
    assert_same_network(net, back)
    assert format_bif(back) == text


def check_parse_only_raises_bif_errors(text: str) -> None:
    try:
        net = parse_bif(text, source="<fuzz>")
    except BIFParseError as err:
        assert err.source == "<fuzz>"
        assert err.line is None or 1 <= err.line <= text.count("\n") + 1
        assert str(err).strip()
    else:
        assert isinstance(net, CausalNetwork)


@settings(max_examples=200, deadline=None)
@given(st.text())
def test_garbage_text_raises_only_bif_errors(text):
    check_parse_only_raises_bif_errors(text)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.sampled_from(list("{}()[];,|\"/*\n \t0123456789.-e") + [
    "network", "variable", "probability", "property", "type", "discrete", "table", "default", "A", "B", "x",
]), max_size=60).map("".join))
def test_token_soup_raises_only_bif_errors(text):
    check_parse_only_raises_bif_errors(text)


SEED_DOCUMENTS = [
    SMALL,
    """\
/* comment */ network "n" { property k = v; }
variable "A b" { type discrete [ 2 ] { x, "y z" }; property p = 1; }
variable B { type discrete [ 3 ] { u v w }; }
probability ( "A b" ) { table 0.5 0.5; }
probability ( B | "A b" ) { default 0.2, 0.3, 0.5; (x) 0.1, 0.1, 0.8; // row
}
""",
]
INSERTS = list("{}()[];,|\"\\/*\n\r\t 0123456789.-e") + [
    "nan", "inf", "1e999", "-1", "//", "/*", "*/", "default", "table", "property", "variable",
    "probability", "network", "type", "discrete", "\ufeff", "\x00", "é", "0" * 50,
]


@st.composite
def mutated_documents(draw) -> str:
    text = draw(st.sampled_from(SEED_DOCUMENTS))
    for _ in range(draw(st.integers(1, 5))):
        op = draw(st.sampled_from(["delete", "duplicate", "insert", "replace"]))
        i = draw(st.integers(0, len(text)))
        j = min(len(text), i + draw(st.integers(0, 12)))
        if op == "delete":
            text = text[:i] + text[j:]
        elif op == "duplicate":
            text = text[:j] + text[i:j] + text[j:]
        elif op == "insert":
            text = text[:i] + draw(st.one_of(st.sampled_from(INSERTS), st.text(max_size=3))) + text[i:]
        else:
            text = text[:i] + draw(st.sampled_from(INSERTS)) + text[j:]
    return text


@settings(max_examples=200, deadline=None)
@given(mutated_documents())
def test_mutated_documents_raise_only_bif_errors(text):
    check_parse_only_raises_bif_errors(text)
