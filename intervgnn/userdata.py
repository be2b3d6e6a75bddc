"""A user's own data: a graph file in YAML and rows in CSV (or a pandas DataFrame).

The graph file is plain YAML of this shape::

    edges:                 # parent -> child pairs
      - [Season, Irrigation]
      - [Season, Yield]
      - [Irrigation, Yield]
    variables: [Season, Irrigation, Yield, Notes]   # optional: order, isolated variables
    states:                # optional: declared states (in this order)
      Season: [cool, warm]
      Irrigation: [low, high]
    regime_column: regime  # optional: CSV column naming each row's intervened variables
    confounded:            # optional: pairs that share a hidden common cause (A <-> B)
      - [Irrigation, Yield]

Without ``states``, a variable's states are the distinct values found in the
data, sorted. States given for only some variables are fine: the others
come from the data.

Every value in a graph file is read as text: ``yes``, ``on``, ``01`` and
``1.0`` are the names ``"yes"``, ``"on"``, ``"01"`` and ``"1.0"`` (not true,
1 or 1.0). A key given twice, aliases (``*name``) standing for more than
100,000 values, or nesting more than 100 levels deep are refused (see
:mod:`intervgnn._yaml`).
"""

from __future__ import annotations

import io
import os
from collections.abc import Mapping
from dataclasses import dataclass, field


from ._yaml import read_yaml_file
from .errors import DataError, GraphError, did_you_mean, short_repr, shorten
from .graph import CausalGraph
from .table import REGIME_COLUMN, Table

__all__ = ["GraphSpec", "load_graph", "parse_graph", "read_csv", "from_dataframe", "GRAPH_KEYS"]

GRAPH_KEYS = ("edges", "variables", "states", "regime_column", "confounded")


@dataclass(frozen=True)
class GraphSpec:
    """What a graph file declares."""

    graph: CausalGraph
    states: dict[str, tuple[str, ...]] | None = None
    regime_column: str = REGIME_COLUMN
    confounded: tuple[tuple[str, str], ...] = field(default=())
    source: str = "<graph>"


def _name(value, source: str, what: str) -> str:
    """A variable or state name from the document: text (numbers, from a document built in Python, as text)."""
    if isinstance(value, str):
        return value
    if value is None:
        raise GraphError(f"{source}: {what} is empty")
    if isinstance(value, (int, float)):
        return str(value)
    raise GraphError(f"{source}: {what} must be a name, got {short_repr(value)}")


def parse_graph(doc, source: str = "<graph>") -> GraphSpec:
    """Build a :class:`GraphSpec` from the parsed YAML document.

    Raises
    ------
    GraphError
        Unknown key (with a suggestion), malformed edges or states, a cycle
        (named), a self-loop or a duplicate edge.
    """
    if not isinstance(doc, Mapping):
        raise GraphError(f"{source}: expected a mapping with an 'edges' list at the top")
    for key in doc:
        if key not in GRAPH_KEYS:
            raise GraphError(
                f"{source}: unknown key '{shorten(key)}'{did_you_mean(str(key), GRAPH_KEYS)}; keys are: {', '.join(GRAPH_KEYS)}"
            )
    raw_edges = doc.get("edges")
    if raw_edges is None:
        raw_edges = []
    if not isinstance(raw_edges, list):
        raise GraphError(f"{source}: 'edges' must be a list of [parent, child] pairs")
    edges = []
    for i, e in enumerate(raw_edges):
        if not (isinstance(e, (list, tuple)) and len(e) == 2 and all(isinstance(x, (str, int, float, bool)) for x in e)):
            raise GraphError(f"{source}: edge #{i + 1} must be a [parent, child] pair, got {short_repr(e)}")
        edges.append((str(e[0]), str(e[1])))
    variables = doc.get("variables")
    if variables is not None:
        if not isinstance(variables, list):
            raise GraphError(f"{source}: 'variables' must be a list of names")
        variables = [_name(v, source, f"variable #{i + 1}") for i, v in enumerate(variables)]
    try:
        graph = CausalGraph(edges, nodes=variables)
    except GraphError as exc:
        raise GraphError(f"{source}: {exc}") from None
    if graph.num_nodes == 0:
        raise GraphError(f"{source}: the graph has no variables")
    states = doc.get("states")
    if states is not None:
        if not isinstance(states, Mapping):
            raise GraphError(f"{source}: 'states' must map each variable to its list of states")
        out = {}
        for v, st in states.items():
            v = _name(v, source, "a variable name in 'states'")
            if v not in graph:
                raise GraphError(
                    f"{source}: states given for '{shorten(v)}', which is not in the graph{did_you_mean(v, graph.nodes)}"
                )
            if not isinstance(st, list) or not st:
                raise GraphError(f"{source}: states of '{shorten(v)}' must be a non-empty list")
            names = tuple(_name(s, source, f"state #{j + 1} of '{shorten(v)}'") for j, s in enumerate(st))
            if len(set(names)) != len(names):
                dup = next(s for s in names if names.count(s) > 1)
                raise GraphError(f"{source}: variable '{shorten(v)}' lists state '{shorten(dup)}' twice")
            out[v] = names
        states = out
    regime = doc.get("regime_column", REGIME_COLUMN)
    if not isinstance(regime, str) or not regime:
        raise GraphError(f"{source}: 'regime_column' must be a column name")
    confounded = []
    raw_pairs = doc.get("confounded") or []
    if not isinstance(raw_pairs, list):
        raise GraphError(f"{source}: 'confounded' must be a list of [A, B] pairs")
    for i, pair in enumerate(raw_pairs):
        if not (isinstance(pair, (list, tuple)) and len(pair) == 2):
            raise GraphError(f"{source}: confounded pair #{i + 1} must be [A, B], got {short_repr(pair)}")
        a, b = (_name(w, source, f"a name in confounded pair #{i + 1}") for w in pair)
        for w in (a, b):
            if w not in graph:
                raise GraphError(
                    f"{source}: confounded pair names '{shorten(w)}', which is not in the graph{did_you_mean(w, graph.nodes)}"
                )
        confounded.append((a, b))
    if confounded:
        try:
            graph = CausalGraph(graph.edges, nodes=graph.nodes, bidirected=confounded)
        except GraphError as exc:
            raise GraphError(f"{source}: {exc}") from None
    return GraphSpec(graph, states, regime, tuple(confounded), source)


def load_graph(path: str | os.PathLike) -> GraphSpec:
    """Read a graph file (YAML; every value read as text, see the module notes).

    Raises
    ------
    GraphError
        Missing file, YAML syntax error (with line), a key given twice in
        one mapping, aliases standing for too many values, nesting too deep,
        or any problem :func:`parse_graph` reports.
    """
    source = os.fspath(path)
    return parse_graph(read_yaml_file(source, GraphError, names=True), source)


def _graph_spec(graph) -> GraphSpec:
    if isinstance(graph, (str, os.PathLike)):
        return load_graph(graph)
    if isinstance(graph, CausalGraph):
        return GraphSpec(graph)
    if isinstance(graph, GraphSpec):
        return graph
    raise GraphError(f"graph must be a graph file path, a CausalGraph or a GraphSpec; got {type(graph).__name__}")


def _check_columns(names, graph: CausalGraph, where: str) -> None:
    """Every graph variable is a column and every column a graph variable."""
    present = set(names)
    for v in graph.nodes:
        if v not in present:
            raise DataError(f"{where}variable '{shorten(v)}' is in the graph but not in the data")
    for v in names:
        if v not in graph:
            raise DataError(
                f"{where}column '{shorten(v)}' is not in the graph{did_you_mean(v, graph.nodes)}; "
                "add it to the graph or drop the column"
            )


def read_csv(path: str | os.PathLike, graph) -> Table:
    """Read rows for a causal diagram.

    Parameters
    ----------
    path : path
        CSV file with a header row naming the variables (and optionally the
        regime column).
    graph : GraphSpec, CausalGraph, or path of a graph file

    Returns
    -------
    Table
        Columns in the graph's node order; the states the graph file
        declares, the others' states read from the rows.

    Raises
    ------
    DataError
        A graph variable missing from the data, a data column not in the
        graph, a value not among the declared states, a missing value (an
        empty cell, or ``NA``, ``NaN``, ``null`` and the other markers of
        :data:`~intervgnn.table.MISSING_MARKERS` unless declared as a
        state: the estimators have no model of missing data, so drop or
        fill such rows first), or a header without rows (all naming the file,
        and row and column where there is one).
    GraphError
        The graph file is invalid (for example it has a cycle).
    """
    spec = _graph_spec(graph)
    source = getattr(path, "name", "<stream>") if isinstance(path, io.TextIOBase) else os.fspath(path)
    table = Table._read_csv(path, spec.states, spec.regime_column, partial=True)
    _check_columns(table.variables, spec.graph, f"{source}: ")
    return table.select(spec.graph.nodes)


def from_dataframe(df, graph) -> Table:
    """Rows for a causal diagram from a ``pandas.DataFrame``, as :func:`read_csv` reads a CSV file.

    Parameters
    ----------
    df : pandas.DataFrame
        One column per graph variable, of state names (or categoricals),
        and optionally the graph's regime column (``;``-separated names of
        the variables set by intervention in that row, or lists of names).
    graph : GraphSpec, CausalGraph, or path of a graph file
        The states it declares are used for those variables; the others'
        states come from the data (category order, or the distinct values
        sorted).

    Returns
    -------
    Table
        Columns in the graph's node order.

    Raises
    ------
    DataError
        Not a data frame, a graph variable missing from the frame, a column
        not in the graph, a value not among the declared states, a missing
        value (None, NaN, ``pd.NA``), or no rows for a variable whose states
        the graph does not declare: the message names row and column.
    GraphError
        The graph file is invalid.

    Examples
    --------
    >>> import pandas as pd
    >>> from intervgnn.graph import CausalGraph
    >>> spec = GraphSpec(CausalGraph([("Season", "Yield")]), states={"Season": ("cool", "warm")})
    >>> df = pd.DataFrame({"Yield": ["good", "poor"], "Season": ["warm", "warm"]})
    >>> t = from_dataframe(df, spec)
    >>> t.variables, t.states["Season"], t.states["Yield"]
    (('Season', 'Yield'), ('cool', 'warm'), ('good', 'poor'))
    """
    spec = _graph_spec(graph)
    if not (hasattr(df, "columns") and hasattr(df, "iloc")):
        raise DataError(f"expected a pandas DataFrame, got {type(df).__name__}")
    _check_columns([str(c) for c in df.columns if c != spec.regime_column], spec.graph, "")
    table = Table.from_pandas(df, states=spec.states, regime_column=spec.regime_column)
    return table.select(spec.graph.nodes)
