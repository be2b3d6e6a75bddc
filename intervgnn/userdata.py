"""A user's own data: a graph file in YAML and rows in CSV.

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
data, sorted.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field

import yaml

from .errors import DataError, GraphError, did_you_mean
from .graph import CausalGraph
from .table import REGIME_COLUMN, Table

__all__ = ["GraphSpec", "load_graph", "parse_graph", "read_csv", "GRAPH_KEYS"]

GRAPH_KEYS = ("edges", "variables", "states", "regime_column", "confounded")


@dataclass(frozen=True)
class GraphSpec:
    """What a graph file declares."""

    graph: CausalGraph
    states: dict[str, tuple[str, ...]] | None = None
    regime_column: str = REGIME_COLUMN
    confounded: tuple[tuple[str, str], ...] = field(default=())
    source: str = "<graph>"


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
            raise GraphError(f"{source}: unknown key '{key}'{did_you_mean(str(key), GRAPH_KEYS)}; keys are: {', '.join(GRAPH_KEYS)}")
    raw_edges = doc.get("edges")
    if raw_edges is None:
        raw_edges = []
    if not isinstance(raw_edges, list):
        raise GraphError(f"{source}: 'edges' must be a list of [parent, child] pairs")
    edges = []
    for i, e in enumerate(raw_edges):
        if not (isinstance(e, (list, tuple)) and len(e) == 2 and all(isinstance(x, (str, int, float, bool)) for x in e)):
            raise GraphError(f"{source}: edge #{i + 1} must be a [parent, child] pair, got {e!r}")
        edges.append((str(e[0]), str(e[1])))
    variables = doc.get("variables")
    if variables is not None:
        if not isinstance(variables, list):
            raise GraphError(f"{source}: 'variables' must be a list of names")
        variables = [str(v) for v in variables]
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
            v = str(v)
            if v not in graph:
                raise GraphError(f"{source}: states given for '{v}', which is not in the graph{did_you_mean(v, graph.nodes)}")
            if not isinstance(st, list) or not st:
                raise GraphError(f"{source}: states of '{v}' must be a non-empty list")
            names = tuple(str(s) for s in st)
            if len(set(names)) != len(names):
                dup = next(s for s in names if names.count(s) > 1)
                raise GraphError(f"{source}: variable '{v}' lists state '{dup}' twice")
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
            raise GraphError(f"{source}: confounded pair #{i + 1} must be [A, B], got {pair!r}")
        a, b = str(pair[0]), str(pair[1])
        for w in (a, b):
            if w not in graph:
                raise GraphError(f"{source}: confounded pair names '{w}', which is not in the graph{did_you_mean(w, graph.nodes)}")
        confounded.append((a, b))
    if confounded:
        try:
            graph = CausalGraph(graph.edges, nodes=graph.nodes, bidirected=confounded)
        except GraphError as exc:
            raise GraphError(f"{source}: {exc}") from None
    return GraphSpec(graph, states, regime, tuple(confounded), source)


def load_graph(path: str | os.PathLike) -> GraphSpec:
    """Read a graph file (YAML, loaded with ``yaml.safe_load``).

    Raises
    ------
    GraphError
        Missing file, YAML syntax error (with line), or any problem
        :func:`parse_graph` reports.
    """
    source = os.fspath(path)
    try:
        with open(source, encoding="utf-8") as fh:
            doc = yaml.safe_load(fh)
    except FileNotFoundError:
        raise GraphError(f"{source}: no such file") from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f", line {mark.line + 1}" if mark is not None else ""
        raise GraphError(f"{source}{where}: not valid YAML ({getattr(exc, 'problem', exc)})") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise GraphError(f"{source}: cannot read the file ({exc})") from None
    return parse_graph(doc, source)


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
        Columns in the graph's node order.

    Raises
    ------
    DataError
        A graph variable missing from the data, a data column not in the
        graph, a value not among the declared states, a missing value (all
        naming row and column).
    GraphError
        The graph file is invalid (for example it has a cycle).
    """
    if isinstance(graph, (str, os.PathLike)):
        spec = load_graph(graph)
    elif isinstance(graph, CausalGraph):
        spec = GraphSpec(graph)
    elif isinstance(graph, GraphSpec):
        spec = graph
    else:
        raise GraphError(f"graph must be a graph file path, a CausalGraph or a GraphSpec; got {type(graph).__name__}")
    g = spec.graph
    table = Table.read_csv(path, states=None, regime_column=spec.regime_column)
    for v in g.nodes:
        if v not in table.variables:
            raise DataError(f"{os.fspath(path)}: variable '{v}' is in the graph but not in the data")
    for v in table.variables:
        if v not in g:
            raise DataError(
                f"{os.fspath(path)}: column '{v}' is not in the graph{did_you_mean(v, g.nodes)}; add it to the graph or drop the column"
            )
    table = table.select(g.nodes)
    if spec.states:
        try:
            table = table.with_states(spec.states)
        except DataError as exc:
            raise DataError(f"{os.fspath(path)}: {exc}") from None
    return table
