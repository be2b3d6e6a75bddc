"""Seeded query sets with their exact answers.

A query set is drawn from a network and a seed. Each drawn (treatment,
target[, evidence]) pattern is asked for every state of the treatment, so
one pattern gives one query per treatment state. Each query stores the exact
interventional answer, the exact naive answer P(Y | X = x, given) and its
"confounded" flag: the two differ by more than 0.02 in total variation.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..bn.network import CausalNetwork
from ..distribution import Distribution
from ..errors import QueryError, ZeroEvidenceError
from ..query import check_seed
from .metrics import total_variation

__all__ = ["EvalQuery", "make_query_set", "QUERY_KINDS", "CONFOUNDED_TV"]

#: kinds of queries a set can hold
QUERY_KINDS = ("do", "conditional", "joint", "null")
#: a query is confounded when naive and interventional answers differ by more than this (TV)
CONFOUNDED_TV = 0.02


@dataclass(frozen=True)
class EvalQuery:
    """One query with its exact answer.

    Attributes
    ----------
    qid : str
        Stable identifier within its set, e.g. ``"do-3:HIGH"``.
    kind : str
        One of :data:`QUERY_KINDS`.
    target : tuple of str
    do, given : tuple of (variable, state) pairs
    exact : Distribution
        P(target | do, given) from the network.
    naive : Distribution or None
        P(target | do-variables observed, given) from the network; None when
        the observation has probability zero.
    confounded : bool
        ``TV(naive, exact) > CONFOUNDED_TV`` (True when ``naive`` is None).
    identifiable : bool or None
        Whether the query is identifiable from the observed variables of a
        diagram with hidden variables (None when nothing is hidden).
    """

    qid: str
    kind: str
    target: tuple[str, ...]
    do: tuple[tuple[str, str], ...]
    given: tuple[tuple[str, str], ...] = ()
    exact: Distribution | None = field(default=None, compare=False)
    naive: Distribution | None = field(default=None, compare=False)
    confounded: bool = False
    identifiable: bool | None = None

    @property
    def do_dict(self) -> dict[str, str]:
        return dict(self.do)

    @property
    def given_dict(self) -> dict[str, str]:
        return dict(self.given)

    @property
    def naive_gap(self) -> float:
        """TV between the naive and the interventional answer (1.0 if naive is undefined)."""
        return 1.0 if self.naive is None else total_variation(self.naive, self.exact)

    def describe(self) -> str:
        return self.exact.description if self.exact is not None else self.qid


def _finish(net: CausalNetwork, qid, kind, target, do, given) -> EvalQuery | None:
    try:
        exact = net.query(list(target), do=do, given=given)
    except ZeroEvidenceError:
        return None
    try:
        naive = net.query(list(target), given={**given, **do})
    except ZeroEvidenceError:
        naive = None
    confounded = naive is None or total_variation(naive, exact) > CONFOUNDED_TV
    return EvalQuery(qid, kind, tuple(target), tuple(do.items()), tuple(given.items()), exact, naive, confounded)


def make_query_set(
    net: CausalNetwork,
    n: int = 50,
    kinds: Sequence[str] = ("do",),
    seed: int = 0,
    observed: Sequence[str] | None = None,
) -> list[EvalQuery]:
    """Draw ``n`` query patterns (spread over ``kinds``) and ask each for every treatment state.

    Parameters
    ----------
    net : CausalNetwork
        The ground truth.
    n : int
        Number of patterns; each gives one query per state of its treatment
        (per pair of states for joint interventions, capped at 4 pairs).
        Small networks may have fewer distinct ``do`` / ``null`` patterns
        than asked; each is then asked once.
    kinds : sequence of str
        Any of ``"do"`` (target a descendant of the treatment),
        ``"conditional"`` (``do`` plus evidence on another variable, a
        descendant or not), ``"joint"`` (two treatments, target a descendant
        of one) and ``"null"`` (target not a descendant of the treatment).
        Patterns are dealt to the kinds in turn.
    seed : int
        The same seed gives the same set.
    observed : sequence of str, optional
        Restrict treatments, targets and evidence to these variables (for
        networks with hidden variables).

    Returns
    -------
    list of EvalQuery
    """
    for k in kinds:
        if k not in QUERY_KINDS:
            raise QueryError(f"unknown query kind '{k}'; kinds are: {', '.join(QUERY_KINDS)}")
    if not kinds:
        raise QueryError("at least one query kind is needed")
    rng = np.random.default_rng(check_seed(seed))
    g = net.graph
    obs = list(g.nodes) if observed is None else [v for v in g.nodes if v in set(observed)]
    obs_set = set(obs)
    desc = {x: [y for y in g.descendants(x) if y in obs_set] for x in obs}
    pairs = [(x, y) for x in obs for y in desc[x]]
    null_pairs = [(x, y) for x in obs for y in obs if y != x and y not in desc[x]]
    out: list[EvalQuery] = []
    counts = {k: 0 for k in kinds}
    per_kind = [n // len(kinds) + (1 if i < n % len(kinds) else 0) for i in range(len(kinds))]
    for kind, want in zip(kinds, per_kind):
        pool = {"do": pairs, "conditional": pairs, "joint": pairs, "null": null_pairs}[kind]
        if not pool:
            continue
        order = rng.permutation(len(pool))
        # fixed patterns are asked once; patterns with a random part may recur with a new draw
        stream = order if kind in ("do", "null") else itertools.cycle(order)
        tries = 0
        for idx in stream:
            if counts[kind] >= want or tries > 20 * max(want, 1) + len(pool):
                break
            tries += 1
            x, y = pool[int(idx)]
            if kind == "joint":
                others = [w for w in obs if w not in (x, y)]
                if not others:
                    continue
                x2 = others[int(rng.integers(len(others)))]
                combos = list(itertools.product(net.states[x], net.states[x2]))
                pick = rng.permutation(len(combos))[:4]
                patterns = [{x: combos[i][0], x2: combos[i][1]} for i in pick]
                given: dict[str, str] = {}
            else:
                patterns = [{x: s} for s in net.states[x]]
                given = {}
                if kind == "conditional":
                    others = [w for w in obs if w not in (x, y)]
                    if not others:
                        continue
                    z = others[int(rng.integers(len(others)))]
                    given = {z: net.states[z][int(rng.integers(len(net.states[z])))]}
            base = f"{kind}-{counts[kind]}"
            made = []
            for do in patterns:
                label = ",".join(do.values())
                q = _finish(net, f"{base}:{label}", kind, (y,), do, given)
                if q is not None:
                    made.append(q)
            if not made:
                continue
            out.extend(made)
            counts[kind] += 1
    return out
