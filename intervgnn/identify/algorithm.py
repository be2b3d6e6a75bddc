"""Identification of interventional distributions in diagrams with hidden common causes.

Implements the complete identification algorithm ``ID`` of Shpitser & Pearl
(2006), which builds on the c-component factorisation of Tian & Pearl
(2002), and its conditional extension ``IDC`` (Shpitser & Pearl, 2006,
"Identification of conditional interventional distributions"). ``ID``
returns an estimand (an expression over observational probabilities) or
fails with a *hedge*: two c-forests F' inside F that witness that the query
is not identifiable.

In lines 5b and 5c the factor P(v_i | v_pi^(i-1)) conditions on every
earlier variable; it is replaced by the equal P(v_i | (T_i u Pa(T_i)) \\ v_i),
where T_i is the c-component of v_i in the graph induced on v_i and the
variables before it (Tian & Pearl 2002), which keeps every term small.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

import networkx as nx

from ..graph import CausalGraph
from .expression import Expr, Prob, Product, Quotient, Sum

__all__ = ["Hedge", "id_estimand", "idc_estimand", "d_separated", "simplify"]


class Hedge(Exception):
    """Raised inside the algorithm when a hedge is found (the query is not identifiable)."""

    def __init__(self, forest: tuple[str, ...], subforest: tuple[str, ...]):
        self.forest = forest
        self.subforest = subforest
        super().__init__(f"hedge: F = {{{', '.join(forest)}}}, F' = {{{', '.join(subforest)}}}")


@dataclass(frozen=True)
class _Dist:
    """The current distribution of the recursion, over ``variables``.

    ``expr`` is None while it is still the observational joint of those
    variables; otherwise it is an expression (which may also depend on
    intervened values outside ``variables``).
    """

    variables: frozenset
    expr: Expr | None
    order: tuple[str, ...]

    def _sorted(self, vs) -> tuple[str, ...]:
        vs = set(vs)
        return tuple(v for v in self.order if v in vs)

    def marginal(self, keep) -> Expr:
        keep = set(keep)
        if self.expr is None:
            return Prob(self._sorted(keep))
        drop = self._sorted(self.variables - keep)
        return Sum(drop, self.expr) if drop else self.expr

    def restrict(self, keep) -> _Dist:
        keep = frozenset(keep)
        if self.expr is None:
            return _Dist(keep, None, self.order)
        return _Dist(keep, self.marginal(keep), self.order)

    def conditional(self, v: str, cond) -> Expr:
        cond = self._sorted(cond)
        if self.expr is None:
            return Prob((v,), cond)
        if not cond:
            return self.marginal({v})
        return Quotient(self.marginal({v, *cond}), self.marginal(cond))


def _factors(G: CausalGraph, members: Iterable[str], P: _Dist) -> list[Expr]:
    """P(v_i | (T_i u Pa(T_i)) \\ v_i) for the members, in topological order of G."""
    order = G.topological_order()
    members = set(members)
    out = []
    for i, v in enumerate(order):
        if v not in members:
            continue
        prefix = order[: i + 1]
        comp = next(c for c in G.subgraph(prefix).c_components() if v in c)
        cond = set(comp)
        for w in comp:
            cond |= set(G.parents(w))
        cond.discard(v)
        out.append(P.conditional(v, cond))
    return out


def _id(y: frozenset, x: frozenset, P: _Dist, G: CausalGraph) -> Expr:
    V = frozenset(G.nodes)
    order = P.order

    def srt(vs):
        vs = set(vs)
        return tuple(v for v in order if v in vs)

    # line 1
    if not x:
        return P.marginal(y)
    # line 2
    an = frozenset(G.ancestors(srt(y), include_self=True))
    if an != V:
        return _id(y, x & an, P.restrict(an), G.subgraph(srt(an)))
    # line 3
    gx = G.mutilate(srt(x))
    w = (V - x) - frozenset(gx.ancestors(srt(y), include_self=True))
    if w:
        return _id(y, x | w, P, G)
    # line 4
    comps = G.subgraph(srt(V - x)).c_components()
    if len(comps) > 1:
        terms = tuple(_id(frozenset(s), V - frozenset(s), P, G) for s in comps)
        over = srt(V - (y | x))
        prod = Product(terms)
        return Sum(over, prod) if over else prod
    S = frozenset(comps[0])
    cg = [frozenset(c) for c in G.c_components()]
    # line 5
    if len(cg) == 1 and cg[0] == V:
        raise Hedge(srt(V), srt(S))
    # line 6
    if S in cg:
        prod = Product(tuple(_factors(G, S, P)))
        over = srt(S - y)
        return Sum(over, prod) if over else prod
    # line 7
    s_prime = next(c for c in cg if S <= c)
    new_p = _Dist(s_prime, Product(tuple(_factors(G, s_prime, P))), order)
    return _id(y, x & s_prime, new_p, G.subgraph(srt(s_prime)))


def d_separated(G: CausalGraph, a: Iterable[str], b: Iterable[str], given: Iterable[str] = ()) -> bool:
    """Whether ``a`` and ``b`` are d-separated by ``given`` (bidirected edges as explicit hidden parents)."""
    a, b, given = set(a), set(b), set(given)
    if not a or not b:
        return True
    if a & b:
        return False
    nxg = G.to_networkx(latent_prefix="\0u:")
    return nx.is_d_separator(nxg, a, b, given - a - b)


def _cut(G: CausalGraph, into: Iterable[str] = (), out_of: Iterable[str] = ()) -> CausalGraph:
    """G with the edges into ``into`` (directed and bidirected) and the directed edges out of ``out_of`` removed."""
    into, out_of = set(into), set(out_of)
    edges = [(p, c) for p, c in G.edges if c not in into and p not in out_of]
    bi = [(a, b) for a, b in G.bidirected if a not in into and b not in into]
    return CausalGraph(edges, nodes=G.nodes, bidirected=bi)


def id_estimand(G: CausalGraph, y: Iterable[str], x: Iterable[str]) -> Expr:
    """Estimand of P(y | do(x)); raises :class:`Hedge` if there is none."""
    P = _Dist(frozenset(G.nodes), None, G.nodes)
    return simplify(_id(frozenset(y), frozenset(x), P, G))


def idc_estimand(G: CausalGraph, y: Iterable[str], x: Iterable[str], z: Iterable[str]) -> tuple[Expr, frozenset]:
    """Estimand of P(y | do(x), z) and the treatments it ended with (IDC moves some of z into x)."""
    y, x, z = frozenset(y), frozenset(x), frozenset(z)
    order = G.nodes
    for zi in [v for v in order if v in z]:
        g = _cut(G, into=x, out_of={zi})
        if d_separated(g, y, {zi}, x | (z - {zi})):
            return idc_estimand(G, y, x | {zi}, z - {zi})
    if not z:
        return id_estimand(G, y, x), x
    joint = id_estimand(G, y | z, x)
    ys = tuple(v for v in order if v in y)
    return simplify(Quotient(joint, Sum(ys, joint))), x


# ---------------------------------------------------------- simplification
def simplify(e: Expr) -> Expr:
    """Readable, equal form: flatten nested sums and products, fold marginals and ratios of P."""
    if isinstance(e, Prob):
        return e
    if isinstance(e, Product):
        terms = []
        for t in (simplify(t) for t in e.terms):
            terms.extend(t.terms if isinstance(t, Product) else [t])
        return terms[0] if len(terms) == 1 else Product(tuple(terms))
    if isinstance(e, Sum):
        term = simplify(e.term)
        over = tuple(v for v in e.over if v in term.free())
        if not over:
            return term
        if isinstance(term, Sum):
            return simplify(Sum(over + term.over, term.term))
        if isinstance(term, Prob) and not term.given:
            keep = tuple(v for v in term.variables if v not in over)
            return Prob(keep)
        return Sum(over, term)
    if isinstance(e, Quotient):
        num, den = simplify(e.numerator), simplify(e.denominator)
        if isinstance(num, Prob) and isinstance(den, Prob) and not num.given and not den.given:
            if set(den.variables) <= set(num.variables):
                head = tuple(v for v in num.variables if v not in den.variables)
                if head:
                    return Prob(head, den.variables)
        return Quotient(num, den)
    return e
