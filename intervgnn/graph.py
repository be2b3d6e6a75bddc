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
    bidirected : iterable of (str, str), optional
        Pairs ``A <-> B`` that share a hidden common cause (a semi-Markovian
        diagram). Their variables must be among the nodes.

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

    def __init__(
        self,
        edges: Iterable[Sequence[str]] = (),
        nodes: Sequence[str] | None = None,
        bidirected: Iterable[Sequence[str]] = (),
    ):
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
        pairs: list[tuple[str, str]] = []
        seen_pairs: set[frozenset] = set()
        for pair in bidirected:
            try:
                a, b = pair
            except (TypeError, ValueError):
                raise GraphError(f"a confounded pair must be (A, B), got {pair!r}") from None
            for w in (a, b):
                if w not in index:
                    raise GraphError(f"confounded pair '{a}' <-> '{b}' names '{w}', which is not in the graph")
            if a == b:
                raise GraphError(f"confounded pair '{a}' <-> '{b}' joins a variable to itself")
            key = frozenset((a, b))
            if key in seen_pairs:
                raise GraphError(f"duplicate confounded pair '{a}' <-> '{b}'")
            seen_pairs.add(key)
            pairs.append(tuple(sorted((a, b), key=index.__getitem__)))
        self._bidirected: tuple[tuple[str, str], ...] = tuple(sorted(pairs, key=lambda e: (index[e[0]], index[e[1]])))
        self._spouses: dict[str, tuple[str, ...]] = {v: () for v in order}
        for a, b in self._bidirected:
            self._spouses[a] += (b,)
            self._spouses[b] += (a,)

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
        return self._nodes == other._nodes and self._parents == other._parents and self._bidirected == other._bidirected

    def __hash__(self) -> int:
        return hash((self._nodes, tuple(self._parents[v] for v in self._nodes), self._bidirected))

    def __repr__(self) -> str:
        extra = f", num_bidirected={len(self._bidirected)}" if self._bidirected else ""
        return f"CausalGraph(num_nodes={self.num_nodes}, num_edges={self.num_edges}{extra})"

    # ------------------------------------------------- hidden common causes
    @property
    def bidirected(self) -> tuple[tuple[str, str], ...]:
        """Confounded pairs ``(A, B)`` (A before B in node order)."""
        return self._bidirected

    @property
    def has_hidden_confounding(self) -> bool:
        return bool(self._bidirected)

    def spouses(self, name: str) -> tuple[str, ...]:
        """Variables joined to ``name`` by a bidirected edge."""
        self.check(name)
        return self._spouses[name]

    def c_components(self, names: Iterable[str] | None = None) -> tuple[tuple[str, ...], ...]:
        """Confounded components: the connected parts of the bidirected edges.

        Parameters
        ----------
        names : iterable of str, optional
            Restrict to the subgraph induced on these variables.

        Returns
        -------
        tuple of tuples of str
            Each component in node order; components ordered by their first node.
        """
        keep = set(self._nodes if names is None else self.check(list(names)))
        seen: set[str] = set()
        comps = []
        for v in self._nodes:
            if v not in keep or v in seen:
                continue
            comp, stack = {v}, [v]
            while stack:
                u = stack.pop()
                for w in self._spouses[u]:
                    if w in keep and w not in comp:
                        comp.add(w)
                        stack.append(w)
            seen |= comp
            comps.append(tuple(u for u in self._nodes if u in comp))
        return tuple(comps)

    def project_out(self, hidden: Iterable[str]) -> CausalGraph:
        """The latent projection of this graph onto the variables that are not ``hidden``.

        Following Verma & Pearl (1990) and Tian & Pearl (2002): for observed
        A, B there is an edge ``A -> B`` when a directed path from A to B has
        only hidden variables inside it, and a bidirected edge ``A <-> B``
        when some hidden variable H reaches both A and B along directed paths
        with only hidden variables inside them (or when A and B already share
        a confounded pair, possibly through hidden variables). The result
        keeps every causal and every independence statement among the
        observed variables that the identification algorithm relies on.

        Raises
        ------
        UnknownVariableError
            A hidden name that is not a variable.
        """
        hidden_set = set(self.check(list(hidden), "hidden variable"))
        observed = [v for v in self._nodes if v not in hidden_set]
        # explicit latent node per existing bidirected edge, then project the DAG
        latent_parents: dict[str, list[str]] = {v: list(self._parents[v]) for v in self._nodes}
        latents = []
        for i, (a, b) in enumerate(self._bidirected):
            u = f"\0latent{i}"
            latents.append(u)
            latent_parents[u] = []
            latent_parents[a].append(u)
            latent_parents[b].append(u)
        hid = hidden_set | set(latents)

        def hidden_sources(v: str) -> set[str]:
            """Hidden variables with a directed path to v through hidden variables only."""
            out: set[str] = set()
            stack = [p for p in latent_parents[v] if p in hid]
            while stack:
                h = stack.pop()
                if h in out:
                    continue
                out.add(h)
                stack.extend(p for p in latent_parents[h] if p in hid)
            return out

        def observed_parents(v: str) -> list[str]:
            """Observed variables with a directed path to v through hidden variables only."""
            out: list[str] = []
            seen: set[str] = set()
            stack = list(latent_parents[v])
            while stack:
                p = stack.pop()
                if p in seen:
                    continue
                seen.add(p)
                if p in hid:
                    stack.extend(latent_parents[p])
                elif p not in out:
                    out.append(p)
            return out

        order = {v: i for i, v in enumerate(self._nodes)}
        edges = []
        for v in observed:
            direct = [p for p in self._parents[v] if p not in hidden_set]
            extra = sorted((p for p in observed_parents(v) if p not in direct), key=order.__getitem__)
            edges.extend((p, v) for p in direct + extra)
        sources = {v: hidden_sources(v) for v in observed}
        pairs = [
            (a, b)
            for i, a in enumerate(observed)
            for b in observed[i + 1 :]
            if sources[a] & sources[b]
        ]
        return CausalGraph(edges, nodes=observed, bidirected=pairs)

    def without_bidirected(self) -> CausalGraph:
        """The same directed graph with the confounded pairs dropped."""
        return CausalGraph(self.edges, nodes=self._nodes)

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
        return CausalGraph(
            [(p, v) for v in nodes for p in self._parents[v] if p in keep],
            nodes=nodes,
            bidirected=[(a, b) for a, b in self._bidirected if a in keep and b in keep],
        )

    def mutilate(self, do: Names | Mapping[str, object]) -> CausalGraph:
        """Return a new graph with every edge into the intervened variables removed.

        Bidirected edges touching an intervened variable are removed too: an
        intervention also cuts the variable off from its hidden causes.

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
            [(p, v) for v in self._nodes if v not in targets for p in self._parents[v]],
            nodes=self._nodes,
            bidirected=[(a, b) for a, b in self._bidirected if a not in targets and b not in targets],
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

    def to_networkx(self, latent_prefix: str | None = None) -> nx.DiGraph:
        """A ``networkx.DiGraph`` with the same nodes (in order) and edges.

        With ``latent_prefix``, each bidirected edge ``A <-> B`` becomes an
        explicit hidden node ``f"{latent_prefix}{A}_{B}"`` with edges to A
        and B (so that d-separation can be asked of the result).
        """
        g = nx.DiGraph()
        g.add_nodes_from(self._nodes)
        g.add_edges_from(self.edges)
        if latent_prefix is not None:
            for a, b in self._bidirected:
                u = f"{latent_prefix}{a}_{b}"
                g.add_edge(u, a)
                g.add_edge(u, b)
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
