"""Named causal DAGs.

A :class:`CausalGraph` is the causal diagram a user draws: named variables
and directed edges ``parent -> child``. It is immutable; operations such as
:meth:`CausalGraph.mutilate` return a new graph.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from typing import Union

import networkx as nx

from .errors import GraphError, UnknownVariableError

__all__ = ["CausalGraph"]

Names = Union[str, Iterable[str]]


def _as_names(names: Names) -> list[str]:
    if isinstance(names, str):
        return [names]
    return list(names)


class CausalGraph:
    """A directed acyclic graph over named variables.

    Parameters
    ----------
    edges : iterable of (str, str)
        Directed edges ``(parent, child)``. The order in which a child's
        parents appear is kept: it is the order of the CPT axes of a network
        built on this graph.
    nodes : sequence of str, optional
        All variables, in the order that fixes node indices (for example the
        rows of :attr:`edge_index`). Variables that only appear in ``edges``
        are appended in order of first appearance. When ``nodes`` is given,
        every edge must name listed variables.

    Raises
    ------
    GraphError
        On a self-loop, a duplicate edge, a repeated node, an edge naming an
        unlisted variable, or a cycle (the message names the cycle).

    Examples
    --------
    >>> g = CausalGraph([("Rain", "Wet"), ("Sprinkler", "Wet")])
    >>> g.parents("Wet")
    ('Rain', 'Sprinkler')
    >>> g.mutilate(["Wet"]).parents("Wet")
    ()
    """

    def __init__(self, edges: Iterable[Sequence[str]] = (), nodes: Sequence[str] | None = None):
        order: list[str] = []
        index: dict[str, int] = {}
        if nodes is not None:
            for v in nodes:
                if not isinstance(v, str) or not v:
                    raise GraphError(f"node names must be non-empty strings, got {v!r}")
                if v in index:
                    raise GraphError(f"node '{v}' is listed twice")
                index[v] = len(order)
                order.append(v)
        strict = nodes is not None
        parents: dict[str, list[str]] = {}
        seen: set[tuple[str, str]] = set()
        for edge in edges:
            try:
                u, v = edge
            except (TypeError, ValueError):
                raise GraphError(f"an edge must be a (parent, child) pair, got {edge!r}") from None
            for w in (u, v):
                if not isinstance(w, str) or not w:
                    raise GraphError(f"node names must be non-empty strings, got {w!r} in edge {edge!r}")
                if w not in index:
                    if strict:
                        raise GraphError(
                            f"edge '{u}' -> '{v}' names '{w}', which is not among the listed nodes"
                        )
                    index[w] = len(order)
                    order.append(w)
            if u == v:
                raise GraphError(f"self-loop on '{u}': a variable cannot be its own parent")
            if (u, v) in seen:
                raise GraphError(f"duplicate edge '{u}' -> '{v}'")
            seen.add((u, v))
            parents.setdefault(v, []).append(u)
        self._nodes: tuple[str, ...] = tuple(order)
        self._index: dict[str, int] = index
        self._parents: dict[str, tuple[str, ...]] = {v: tuple(parents.get(v, ())) for v in order}
        children: dict[str, list[str]] = {v: [] for v in order}
        for v in order:
            for p in self._parents[v]:
                children[p].append(v)
        # children listed in node order for determinism
        self._children: dict[str, tuple[str, ...]] = {
            v: tuple(sorted(cs, key=index.__getitem__)) for v, cs in children.items()
        }
        self._generations = self._compute_generations()
        self._edge_index = None

    # ------------------------------------------------------------------ build
    def _compute_generations(self) -> tuple[tuple[str, ...], ...]:
        indeg = {v: len(self._parents[v]) for v in self._nodes}
        current = [v for v in self._nodes if indeg[v] == 0]
        gens: list[tuple[str, ...]] = []
        done = 0
        while current:
            gens.append(tuple(current))
            done += len(current)
            nxt = []
            for v in current:
                for c in self._children[v]:
                    indeg[c] -= 1
                    if indeg[c] == 0:
                        nxt.append(c)
            current = sorted(nxt, key=self._index.__getitem__)
        if done != len(self._nodes):
            left = [v for v in self._nodes if indeg[v] > 0]
            sub = nx.DiGraph()
            sub.add_nodes_from(left)
            sub.add_edges_from((p, v) for v in left for p in self._parents[v] if p in indeg and indeg[p] > 0)
            cycle = nx.find_cycle(sub)
            path = [cycle[0][0]] + [e[1] for e in cycle]
            raise GraphError("the graph has a cycle: " + " -> ".join(path))
        return tuple(gens)

    # ------------------------------------------------------------ accessors
    @property
    def nodes(self) -> tuple[str, ...]:
        """Variable names in index order."""
        return self._nodes

    @property
    def edges(self) -> tuple[tuple[str, str], ...]:
        """Edges ``(parent, child)``, ordered by child index then parent order."""
        return tuple((p, v) for v in self._nodes for p in self._parents[v])

    @property
    def num_nodes(self) -> int:
        return len(self._nodes)

    @property
    def num_edges(self) -> int:
        return sum(len(ps) for ps in self._parents.values())

    def __len__(self) -> int:
        return len(self._nodes)

    def __contains__(self, name: object) -> bool:
        return name in self._index

    def __iter__(self):
        return iter(self._nodes)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, CausalGraph):
            return NotImplemented
        return self._nodes == other._nodes and self._parents == other._parents

    def __hash__(self) -> int:
        return hash((self._nodes, tuple(self._parents[v] for v in self._nodes)))

    def __repr__(self) -> str:
        return f"CausalGraph(num_nodes={self.num_nodes}, num_edges={self.num_edges})"

    def check(self, names: Names, what: str = "variable") -> list[str]:
        """Return ``names`` as a list, raising if any is not in the graph.

        Raises
        ------
        UnknownVariableError
            If a name is not a node; the message lists the known variables.
        """
        out = _as_names(names)
        for v in out:
            if v not in self._index:
                known = ", ".join(sorted(self._nodes))
                raise UnknownVariableError(f"unknown {what} '{v}'; the graph has: {known}")
        return out

    def index(self, name: str) -> int:
        """Position of ``name`` in :attr:`nodes`."""
        self.check(name)
        return self._index[name]

    def parents(self, name: str) -> tuple[str, ...]:
        """Parents of ``name`` in CPT-axis order."""
        self.check(name)
        return self._parents[name]

    def children(self, name: str) -> tuple[str, ...]:
        """Children of ``name`` in node order."""
        self.check(name)
        return self._children[name]

    def _closure(self, start: Names, step: Mapping[str, tuple[str, ...]], include_self: bool) -> tuple[str, ...]:
        names = self.check(start)
        seen: set[str] = set(names) if include_self else set()
        stack = list(names)
        while stack:
            v = stack.pop()
            for w in step[v]:
                if w not in seen:
                    seen.add(w)
                    stack.append(w)
        return tuple(v for v in self._nodes if v in seen)

    def ancestors(self, names: Names, include_self: bool = False) -> tuple[str, ...]:
        """Ancestors of one variable or a set of variables, in node order.

        Parameters
        ----------
        names : str or iterable of str
            Start variables.
        include_self : bool, default False
            Whether the start variables belong to the result.
        """
        return self._closure(names, self._parents, include_self)

    def descendants(self, names: Names, include_self: bool = False) -> tuple[str, ...]:
        """Descendants of one variable or a set of variables, in node order."""
        return self._closure(names, self._children, include_self)

    def generations(self) -> tuple[tuple[str, ...], ...]:
        """Topological generations: roots first; each node after all its parents.

        A node belongs to generation ``k`` when its longest path from a root
        has ``k`` edges. Within a generation, nodes are in index order.
        """
        return self._generations

    def topological_order(self) -> tuple[str, ...]:
        """All nodes, every parent before its children (generations flattened)."""
        return tuple(v for g in self._generations for v in g)

    def subgraph(self, names: Iterable[str]) -> CausalGraph:
        """The graph induced on ``names`` (kept in this graph's node order)."""
        keep = set(self.check(names))
        nodes = [v for v in self._nodes if v in keep]
        return CausalGraph([(p, v) for v in nodes for p in self._parents[v] if p in keep], nodes=nodes)

    def mutilate(self, do: Names | Mapping[str, object]) -> CausalGraph:
        """Return a new graph with every edge into the intervened variables removed.

        Parameters
        ----------
        do : str, iterable of str, or mapping
            The intervened variables (a mapping's keys are used, so a
            ``do={"X": "x"}`` dictionary can be passed directly).

        Returns
        -------
        CausalGraph
            Same nodes in the same order; this graph is left unchanged.
        """
        targets = set(self.check(list(do.keys()) if isinstance(do, Mapping) else do, "intervened variable"))
        return CausalGraph(
            [(p, v) for v in self._nodes if v not in targets for p in self._parents[v]], nodes=self._nodes
        )

    # ------------------------------------------------------------- exports
    @property
    def edge_index(self):
        """Edges as a ``torch.long`` tensor of shape ``[2, E]``: row 0 parents, row 1 children.

        Node indices follow :attr:`nodes`; edges follow :attr:`edges`.
        """
        import torch

        if self._edge_index is None:
            src = [self._index[p] for v in self._nodes for p in self._parents[v]]
            dst = [self._index[v] for v in self._nodes for _ in self._parents[v]]
            self._edge_index = torch.tensor([src, dst], dtype=torch.long).reshape(2, -1)
        return self._edge_index.clone()

    def to_networkx(self) -> nx.DiGraph:
        """A ``networkx.DiGraph`` with the same nodes (in order) and edges."""
        g = nx.DiGraph()
        g.add_nodes_from(self._nodes)
        g.add_edges_from(self.edges)
        return g

    @classmethod
    def from_networkx(cls, graph: nx.DiGraph) -> CausalGraph:
        """Build from a ``networkx.DiGraph`` whose nodes are strings.

        Raises
        ------
        GraphError
            If the input is not directed, or is not a DAG (cycle named).
        """
        if not isinstance(graph, nx.DiGraph) or isinstance(graph, nx.MultiDiGraph):
            raise GraphError(f"expected a networkx.DiGraph, got {type(graph).__name__}")
        return cls(list(graph.edges()), nodes=list(graph.nodes()))
