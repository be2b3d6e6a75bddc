"""Discrete causal Bayesian networks: a graph, named states and CPTs."""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence

import numpy as np

from ..distribution import Distribution
from ..errors import NetworkError, QueryError
from ..graph import CausalGraph
from ..query import (
    MAX_ANSWER_ENTRIES,
    check_answer_size,
    check_assignment,
    check_seed,
    check_variable,
    describe,
    make_query,
)
from ..table import Table
from .exact import ExactEngine
from .sampling import AncestralSampler, check_sample_size

__all__ = ["CausalNetwork"]

_ROW_TOL = 1e-6
#: the most entries one CPT may have (80 MB of float64); larger tables are refused before they are built
MAX_CPT_ENTRIES = 10_000_000
#: the most entries all CPTs of a network may have together
MAX_NETWORK_ENTRIES = 20_000_000


class CausalNetwork:
    """A discrete causal Bayesian network.

    Parameters
    ----------
    graph : CausalGraph
        The causal DAG.
    states : mapping of str to sequence of str
        State names of every variable (unique within a variable).
    cpts : mapping of str to array_like
        ``cpts[v]`` has axes ``(*graph.parents(v), v)``: the last axis is the
        variable's own state, the others its parents in graph order. Rows
        that sum to one within 1e-6 but not within 1e-12 are rescaled to sum
        to one.
    name : str, default ``"network"``
        A label (used in reports).
    properties : mapping, optional
        Free-form ``key -> value`` strings for the network (kept by BIF I/O).
    variable_properties : mapping, optional
        Per-variable free-form properties (kept by BIF I/O).

    Raises
    ------
    NetworkError
        Missing or extra variables, a repeated state name, a CPT of the wrong
        shape or of more than :data:`MAX_CPT_ENTRIES` entries (or CPTs of
        more than :data:`MAX_NETWORK_ENTRIES` in all), a negative or
        non-finite entry, or a row that does not sum to one within 1e-6; the
        message names the variable and the row.

    Examples
    --------
    >>> g = CausalGraph([("Rain", "Wet")])
    >>> net = CausalNetwork(g, {"Rain": ["no", "yes"], "Wet": ["no", "yes"]},
    ...     {"Rain": [0.8, 0.2], "Wet": [[0.9, 0.1], [0.1, 0.9]]})
    >>> round(net.query("Wet")["yes"], 4)
    0.26
    >>> round(net.query("Wet", do={"Rain": "yes"})["yes"], 4)
    0.9
    """

    def __init__(
        self,
        graph: CausalGraph,
        states: Mapping[str, Sequence[str]],
        cpts: Mapping[str, object],
        name: str = "network",
        properties: Mapping[str, str] | None = None,
        variable_properties: Mapping[str, Mapping[str, str]] | None = None,
    ):
        if not isinstance(graph, CausalGraph):
            raise NetworkError(f"graph must be a CausalGraph, got {type(graph).__name__}")
        self.graph = graph
        self.name = str(name)
        self.properties = dict(properties or {})
        self.variable_properties = {v: dict(p) for v, p in (variable_properties or {}).items()}
        for v in list(states) + list(cpts):
            if v not in graph:
                raise NetworkError(f"states or CPT given for '{v}', which is not in the graph")
        st: dict[str, tuple[str, ...]] = {}
        for v in graph.nodes:
            if v not in states:
                raise NetworkError(f"no states given for variable '{v}'")
            names = tuple(str(s) for s in states[v])
            if not names:
                raise NetworkError(f"variable '{v}' has no states")
            if len(set(names)) != len(names):
                dup = next(s for s in names if names.count(s) > 1)
                raise NetworkError(f"variable '{v}' lists state '{dup}' twice")
            st[v] = names
        self._states = st
        sizes = {v: math.prod(len(st[p]) for p in graph.parents(v)) * len(st[v]) for v in graph.nodes}
        if sum(sizes.values()) > MAX_NETWORK_ENTRIES and max(sizes.values()) <= MAX_CPT_ENTRIES:
            raise NetworkError(
                f"the CPTs would have {sum(sizes.values()):,} entries in all, more than the limit of "
                f"{MAX_NETWORK_ENTRIES:,}; use fewer parents or states"
            )
        tables: dict[str, np.ndarray] = {}
        for v in graph.nodes:
            if v not in cpts:
                raise NetworkError(f"no CPT given for variable '{v}'")
            tables[v] = self._validate_cpt(v, cpts[v])
        self._cpts = tables
        self._engine = ExactEngine(graph, st, tables)
        self._sampler: AncestralSampler | None = None

    def _validate_cpt(self, v: str, raw) -> np.ndarray:
        pa = self.graph.parents(v)
        expected = tuple(len(self._states[p]) for p in pa) + (len(self._states[v]),)
        entries = math.prod(expected)  # Python integers: no overflow
        if entries > MAX_CPT_ENTRIES:
            raise NetworkError(
                f"CPT of '{v}' would have {entries:,} entries (states of its {len(pa)} parents times its own), "
                f"more than the limit of {MAX_CPT_ENTRIES:,}; use fewer parents or states"
            )
        try:
            arr = np.array(raw, dtype=np.float64)
        except (TypeError, ValueError):
            raise NetworkError(f"CPT of '{v}' is not an array of numbers") from None
        if arr.shape != expected:
            who = f"parents ({', '.join(pa)}) and itself" if pa else "itself (no parents)"
            raise NetworkError(f"CPT of '{v}' has shape {arr.shape}, expected {expected} for {who}")
        rows = arr.reshape(-1, expected[-1])
        # all rows at once; the first wrong row is reported
        bad = ~np.isfinite(rows) | (rows < 0)
        sums = rows.sum(axis=1)
        wrong = np.flatnonzero(bad.any(axis=1) | ~(np.abs(sums - 1.0) <= _ROW_TOL))
        if wrong.size:
            r = int(wrong[0])
            row, label = rows[r], self._row_label(v, r)
            if bad[r].any():
                j = int(np.flatnonzero(bad[r])[0])
                raise NetworkError(
                    f"CPT of '{v}', row {label}: entry for state '{self._states[v][j]}' is {float(row[j])!r}; "
                    "probabilities must be finite and non-negative"
                )
            raise NetworkError(
                f"CPT of '{v}', row {label}: probabilities sum to {row.sum():.9g}, expected 1 (within {_ROW_TOL:g})"
            )
        # rows that sum to one only within the tolerance are rescaled, so that
        # every route to an answer (elimination, adjustment, sampling) agrees
        off = np.abs(sums - 1.0) > 1e-12
        if off.any():
            rows[off] /= sums[off, None]
        arr = rows.reshape(expected)
        arr.setflags(write=False)
        return arr

    def _row_label(self, v: str, r: int) -> str:
        pa = self.graph.parents(v)
        if not pa:
            return "(no parents)"
        cards = [len(self._states[p]) for p in pa]
        codes = np.unravel_index(r, cards)
        return "(" + ", ".join(f"{p}={self._states[p][int(c)]}" for p, c in zip(pa, codes)) + ")"

    # ------------------------------------------------------------ accessors
    @property
    def variables(self) -> tuple[str, ...]:
        return self.graph.nodes

    @property
    def states(self) -> dict[str, tuple[str, ...]]:
        """State names per variable (a fresh dict)."""
        return dict(self._states)

    def cardinality(self, v: str) -> int:
        self.graph.check(v)
        return len(self._states[v])

    def cpt(self, v: str) -> np.ndarray:
        """Read-only CPT of ``v``, axes ``(*parents, v)``."""
        self.graph.check(v)
        return self._cpts[v]

    @property
    def cpts(self) -> dict[str, np.ndarray]:
        return dict(self._cpts)

    @property
    def num_parameters(self) -> int:
        """Free parameters: sum over variables of rows x (states - 1)."""
        return int(sum(c.size // c.shape[-1] * (c.shape[-1] - 1) for c in self._cpts.values()))

    def __repr__(self) -> str:
        return (
            f"CausalNetwork(name={self.name!r}, variables={len(self.variables)}, "
            f"edges={self.graph.num_edges}, parameters={self.num_parameters})"
        )

    def _codes(self, assignment: Mapping[str, str]) -> dict[str, int]:
        return {v: self._states[v].index(s) for v, s in assignment.items()}

    # ----------------------------------------------------------- intervene
    def intervene(self, do: Mapping[str, str]) -> CausalNetwork:
        """A new network where each ``do`` variable is cut from its parents and fixed.

        The intervened variables get a point-mass CPT on the given state;
        this network is unchanged.
        """
        do = check_assignment(self._states, do)
        mutilated = self.graph.mutilate(list(do))
        cpts = {}
        for v in self.variables:
            if v in do:
                t = np.zeros(len(self._states[v]))
                t[self._states[v].index(do[v])] = 1.0
                cpts[v] = t
            else:
                cpts[v] = self._cpts[v]
        return CausalNetwork(mutilated, self._states, cpts, name=f"{self.name} under do", properties=self.properties)

    # ------------------------------------------------------------- sample
    def sample(self, n: int, do: Mapping[str, str] | None = None, seed=None) -> Table:
        """Draw ``n`` rows by ancestral sampling, observational or under ``do``.

        Parameters
        ----------
        n : int
            Number of rows (>= 0).
        do : mapping of str to str, optional
            Intervened variables and their states; those columns are marked
            as intervened in every row.
        seed : int or numpy.random.Generator, optional
            A non-negative whole number: the same seed gives the same rows.

        Returns
        -------
        Table

        Raises
        ------
        QueryError
            A bad row count, or an unknown variable or state in ``do``.
        DataError
            A seed that is not a non-negative whole number, or more rows
            than one call may draw (rows x variables above
            :data:`~intervgnn.bn.sampling.MAX_SAMPLE_CELLS`, 2 GiB of codes).
        """
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 0:
            raise QueryError(f"number of rows must be a non-negative integer, got {n!r}")
        check_sample_size(n, len(self.variables))
        seed = check_seed(seed, allow_none=True, allow_generator=True)
        do = check_assignment(self._states, do)
        if self._sampler is None:
            self._sampler = AncestralSampler(self.graph, self._cpts)
        codes = self._sampler.sample_codes(int(n), self._codes(do), seed)
        mask = np.zeros(codes.shape, dtype=bool)
        for v in do:
            mask[:, self.graph.index(v)] = True
        return Table._trusted(codes, self.variables, self._states, mask)

    # -------------------------------------------------------------- query
    def query(
        self,
        target: str | Sequence[str],
        do: Mapping[str, str] | None = None,
        given: Mapping[str, str] | None = None,
    ) -> Distribution:
        """Exact P(target | do(...), given) by variable elimination.

        Parameters
        ----------
        target : str or sequence of str
            One variable, or several for their joint distribution.
        do : mapping of str to str, optional
            Interventions ``{variable: state}``.
        given : mapping of str to str, optional
            Evidence ``{variable: state}``, observed after the intervention.

        Returns
        -------
        Distribution

        Raises
        ------
        QueryError
            A name or state that is not a string, an unknown variable or
            state, a variable with two roles, or an answer of more than
            :data:`~intervgnn.query.MAX_ANSWER_ENTRIES` entries.
        ZeroEvidenceError
            The evidence has probability zero under the intervention.
        """
        q = make_query(self._states, target, do, given)
        probs = self._engine.query_array(q.targets, self._codes(q.do_dict), self._codes(q.given_dict))
        return Distribution(q.targets, [self._states[t] for t in q.targets], probs, description=q.describe())

    def marginals(self, targets: Sequence[str], do: Mapping[str, str] | None = None) -> list[np.ndarray]:
        """P(v | do(...)) for each variable ``v`` of ``targets``, one exact query each, ``do`` checked once.

        For many targets under one large intervention (a population query
        on a ground network sets thousands of variables): the assignment is
        validated and coded once, not per target. A target that is itself
        intervened gets the point mass on its set state.

        Raises
        ------
        QueryError
            As :meth:`query`.
        """
        do = check_assignment(self._states, do)
        codes = self._codes(do)
        out = []
        for v in targets:
            check_variable(self._states, v, "target")
            if v in do:
                p = np.zeros(len(self._states[v]))
                p[codes[v]] = 1.0
                out.append(p)
            else:
                out.append(self._engine.query_array([v], codes, {}))
        return out

    def query_each(
        self,
        target: str | Sequence[str],
        over: str,
        do: Mapping[str, str] | None = None,
        given: Mapping[str, str] | None = None,
    ) -> dict[str, Distribution]:
        """P(target | do(over = x, ...), given) for every state x of ``over``, in one contraction.

        Returns
        -------
        dict of str to Distribution
            Keyed by the state of ``over``, in state order.
        """
        check_variable(self._states, over, "intervened")
        do = check_assignment(self._states, do)
        if over in do:
            raise QueryError(f"'{over}' is swept over and also given a value in do=")
        q = make_query(self._states, target, {**(do or {}), over: self._states[over][0]}, given)
        check_answer_size(self._states, q.targets, sweep=over)
        rest = {k: v for k, v in q.do if k != over}
        probs = self._engine.query_array(q.targets, self._codes(rest), self._codes(q.given_dict), sweep=over)
        out = {}
        for i, s in enumerate(self._states[over]):
            out[s] = Distribution(
                q.targets,
                [self._states[t] for t in q.targets],
                probs[i],
                description=describe(q.targets, {**rest, over: s}, q.given_dict),
            )
        return out

    def joint(self) -> Distribution:
        """The full joint distribution (only sensible for small networks)."""
        size = math.prod(len(s) for s in self._states.values())  # Python integers: no overflow
        if size > MAX_ANSWER_ENTRIES:
            raise QueryError(
                f"the joint distribution has {size:,} entries, more than the limit of {MAX_ANSWER_ENTRIES:,}; "
                "too many to build"
            )
        return self.query(list(self.variables))

    def all_parent_configurations(self, v: str):
        """Iterate over ``(parent state names tuple)`` for ``v`` in CPT row order."""
        pa = self.graph.parents(v)
        return itertools.product(*[self._states[p] for p in pa])
