"""Exact interventional inference by variable elimination.

P(T | do(D = d), E = e) is computed on the mutilated network (no CPT for the
intervened variables, whose values are fixed) after pruning to the ancestors
of T and E in the mutilated graph. An elimination plan (which factors are
multiplied and summed at each step, as ``numpy.einsum`` calls) is built once
per *query shape* (targets, intervened set, evidence set, swept variable)
and reused for every value of those variables.

One swept variable X can be left free: a single contraction then returns
P(T | do(X = x), ...) for every state x at once.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import ExactTooLarge, ZeroEvidenceError
from ..graph import CausalGraph
from ..query import check_answer_size

__all__ = ["ExactEngine", "MAX_FACTOR_ENTRIES"]

#: the largest intermediate table variable elimination may build (2^26 entries, 512 MiB of float64)
MAX_FACTOR_ENTRIES = 2**26


@dataclass(frozen=True)
class _Plan:
    # per factor: variable whose CPT it is, and the slice recipe
    factor_vars: tuple[str, ...]
    slices: tuple[tuple[tuple[int, str], ...], ...]  # (axis, fixed variable) per factor
    # contraction steps: (input slots, input sublists, output sublist); output slot appended
    steps: tuple[tuple[tuple[int, ...], tuple[tuple[tuple[int, ...], ...], tuple[int, ...]]], ...]
    final_slots: tuple[int, ...]
    final_sublists: tuple[tuple[int, ...], ...]
    out_sublist: tuple[int, ...]  # (sweep?) + targets, as variable ids
    has_sweep: bool
    n_factors: int


def _local(subs: tuple[tuple[int, ...], ...], out: tuple[int, ...]):
    """Renumber variable ids 0..k-1 within one einsum call (numpy allows 52 labels)."""
    ids: dict[int, int] = {}
    for sub in subs + (out,):
        for i in sub:
            ids.setdefault(i, len(ids))
    return tuple(tuple(ids[i] for i in sub) for sub in subs), tuple(ids[i] for i in out)


class ExactEngine:
    """Variable elimination over CPTs on a causal graph.

    Parameters
    ----------
    graph : CausalGraph
        The DAG; CPT axes follow ``graph.parents(v)`` then ``v``.
    states : mapping of str to sequence of str
        State names per variable (used in error messages).
    cpts : mapping of str to numpy.ndarray
        One CPT per variable.

    Notes
    -----
    The engine never changes the network. Its only state is the cache of
    elimination plans, keyed by query shape (never by array contents).
    """

    def __init__(self, graph: CausalGraph, states: Mapping[str, Sequence[str]], cpts: Mapping[str, np.ndarray]):
        self.graph = graph
        self.states = {v: tuple(states[v]) for v in graph.nodes}
        self.cards = {v: len(s) for v, s in self.states.items()}
        self.cpts = dict(cpts)
        self._ids = {v: i for i, v in enumerate(graph.nodes)}
        self._plans: dict[tuple, _Plan] = {}

    # ---------------------------------------------------------------- plans
    def plan(
        self,
        targets: Sequence[str],
        do_vars: Sequence[str] = (),
        given_vars: Sequence[str] = (),
        sweep: str | None = None,
    ) -> _Plan:
        """The cached elimination plan for a query shape (built on first use)."""
        key = (tuple(targets), frozenset(do_vars), frozenset(given_vars), sweep)
        p = self._plans.get(key)
        if p is None:
            p = self._build_plan(tuple(targets), frozenset(do_vars), frozenset(given_vars), sweep)
            self._plans[key] = p
        return p

    def _build_plan(self, targets, do_vars, given_vars, sweep) -> _Plan:
        g = self.graph
        fixed_do = set(do_vars) | ({sweep} if sweep is not None else set())
        # ancestors of targets and evidence in the mutilated graph: stop at intervened nodes
        seen: set[str] = set()
        stack = list(targets) + list(given_vars)
        while stack:
            v = stack.pop()
            if v in seen:
                continue
            seen.add(v)
            if v not in fixed_do:
                stack.extend(g.parents(v))
        relevant = [v for v in g.nodes if v in seen]
        has_sweep = sweep is not None and sweep in seen
        ids = self._ids
        factor_vars = tuple(v for v in relevant if v not in fixed_do)
        fixed_values = set(do_vars) | set(given_vars)
        slices = []
        scopes: list[set[int]] = []
        sublists: list[tuple[int, ...]] = []
        for v in factor_vars:
            axes = list(g.parents(v)) + [v]
            slices.append(tuple((a, name) for a, name in enumerate(axes) if name in fixed_values))
            kept = tuple(ids[name] for name in axes if name not in fixed_values)
            sublists.append(kept)
            scopes.append(set(kept))
        keep = {ids[t] for t in targets}
        if has_sweep:
            keep.add(ids[sweep])
        eliminate = {i for s in scopes for i in s} - keep
        card_of = {ids[v]: self.cards[v] for v in g.nodes}
        # greedy order: smallest resulting factor first, ties by fewest new fill edges
        live: dict[int, tuple[int, ...]] = dict(enumerate(sublists))
        next_slot = len(sublists)
        steps = []
        while eliminate:
            best = None
            for var in sorted(eliminate):
                involved = [s for s, sub in live.items() if var in sub]
                union = set().union(*(live[s] for s in involved)) - {var}
                size = math.prod(card_of[u] for u in union)  # Python integers: no overflow
                cand = (size, len(union), var)
                if best is None or cand < best[0]:
                    best = (cand, var, involved, union)
            _, var, involved, union = best
            work = best[0][0] * card_of[var]  # the table the contraction runs over
            if work > MAX_FACTOR_ENTRIES:
                raise ExactTooLarge(
                    f"exact inference would build a table of {work:,} entries (over {len(union) + 1} variables), more "
                    f"than the limit of {MAX_FACTOR_ENTRIES:,}: the query's ancestors are too densely connected"
                )
            out = tuple(sorted(union))
            steps.append((tuple(involved), _local(tuple(live[s] for s in involved), out)))
            for s in involved:
                del live[s]
            live[next_slot] = out
            next_slot += 1
            eliminate.discard(var)
        out_sublist = ((ids[sweep],) if has_sweep else ()) + tuple(ids[t] for t in targets)
        final_slots = tuple(live)
        final_subs, final_out = _local(tuple(live[s] for s in final_slots), out_sublist)
        return _Plan(
            factor_vars=factor_vars,
            slices=tuple(slices),
            steps=tuple(steps),
            final_slots=final_slots,
            final_sublists=final_subs,
            out_sublist=final_out,
            has_sweep=has_sweep,
            n_factors=len(factor_vars),
        )

    # -------------------------------------------------------------- compute
    def _contract(self, plan: _Plan, values: Mapping[str, int], batch: Mapping[str, np.ndarray] | None = None) -> np.ndarray:
        """Run a plan. ``batch`` replaces some CPTs by stacks ``[S, *cpt shape]``: the result then has a leading axis of S."""
        batch = batch or {}
        slots: dict[int, np.ndarray] = {}
        batched: set[int] = set()
        for i, (v, recipe) in enumerate(zip(plan.factor_vars, plan.slices)):
            stack = batch.get(v)
            f = self.cpts[v] if stack is None else stack
            lead = 0 if stack is None else 1
            if recipe:
                index: list = [slice(None)] * f.ndim
                for axis, name in recipe:
                    index[axis + lead] = values[name]
                f = f[tuple(index)]
            slots[i] = f
            if lead:
                batched.add(i)

        def run(ins, subs, out):
            # the batch axis gets the first label the call does not use (numpy allows 52)
            label = 1 + max([-1, *out, *(i for sub in subs for i in sub)])
            args = []
            for s, sub in zip(ins, subs):
                args.append(slots[s])
                args.append(((label,) + tuple(sub)) if s in batched else sub)
            any_batched = any(s in batched for s in ins)
            out = ((label,) + tuple(out)) if any_batched else out
            return (np.einsum(*args, out) if args else np.ones(())), any_batched

        slot = plan.n_factors
        for ins, (subs, out) in plan.steps:
            result, any_batched = run(ins, subs, out)
            for s in ins:
                slots.pop(s)
                batched.discard(s)
            slots[slot] = result
            if any_batched:
                batched.add(slot)
            slot += 1
        result, any_batched = run(plan.final_slots, plan.final_sublists, plan.out_sublist)
        # targets that have no factor cannot occur (a target always has its CPT)
        if batch and not any_batched:  # no stacked CPT reaches the answer: the same for every member
            size = len(next(iter(batch.values())))
            result = np.broadcast_to(result, (size,) + result.shape)
        return result

    def query_array_batch(
        self,
        targets: Sequence[str],
        cpts: Mapping[str, np.ndarray],
        do: Mapping[str, int] | None = None,
        given: Mapping[str, int] | None = None,
    ) -> np.ndarray:
        """:meth:`query_array` for S networks at once that differ only in some CPTs.

        ``cpts`` maps variables to stacks ``[S, *cpt shape]`` (the other CPTs
        are the engine's own); one contraction with a batch axis answers all
        S, e.g. for CPT sets drawn from a posterior. Returns ``[S, card(t)
        for t in targets]``.

        Raises
        ------
        QueryError, ZeroEvidenceError
            As :meth:`query_array` (the evidence having probability zero in
            any member).
        """
        check_answer_size(self.states, targets, None)
        do = dict(do or {})
        given = dict(given or {})
        plan = self.plan(targets, tuple(do), tuple(given), None)
        raw = self._contract(plan, {**do, **given}, cpts)
        norm = raw.sum(axis=tuple(range(1, raw.ndim)), keepdims=True)
        if np.any(norm <= 0.0):
            ev = ", ".join(f"{k}={self.states[k][c]}" for k, c in given.items())
            raise ZeroEvidenceError(f"the evidence {ev} has probability zero in some of the networks")
        return raw / norm

    def query_array(
        self,
        targets: Sequence[str],
        do: Mapping[str, int] | None = None,
        given: Mapping[str, int] | None = None,
        sweep: str | None = None,
    ) -> np.ndarray:
        """Normalised probabilities as an array.

        Parameters
        ----------
        targets : sequence of str
            Target variables (output axes, in this order).
        do, given : mapping of str to int
            Intervened and observed variables, as state *codes*.
        sweep : str, optional
            An extra intervened variable left free: the result gains a
            leading axis over its states.

        Returns
        -------
        numpy.ndarray
            Shape ``[card(sweep)?, card(t) for t in targets]``.

        Raises
        ------
        QueryError
            The answer would have more than
            :data:`~intervgnn.query.MAX_ANSWER_ENTRIES` entries.
        ZeroEvidenceError
            If the evidence has probability zero (for any swept value).
        """
        check_answer_size(self.states, targets, sweep)
        do = dict(do or {})
        given = dict(given or {})
        plan = self.plan(targets, tuple(do), tuple(given), sweep)
        values = {**do, **given}
        raw = self._contract(plan, values)
        if sweep is not None and not plan.has_sweep:
            raw = np.broadcast_to(raw, (self.cards[sweep],) + raw.shape).copy()
        lead = 1 if sweep is not None else 0
        axes = tuple(range(lead, raw.ndim))
        norm = raw.sum(axis=axes, keepdims=True)
        if np.any(norm <= 0.0):
            ev = ", ".join(f"{k}={self.states[k][c]}" for k, c in given.items())
            under = ", ".join(f"{k}={self.states[k][c]}" for k, c in do.items())
            if sweep is not None:
                bad = int(np.flatnonzero(norm.reshape(-1) <= 0.0)[0])
                under = ", ".join(filter(None, [under, f"{sweep}={self.states[sweep][bad]}"]))
            where = f" under do({under})" if under else ""
            raise ZeroEvidenceError(f"the evidence {ev} has probability zero{where}")
        return raw / norm
