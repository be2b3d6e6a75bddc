"""Is P(Y | do(X), Z) answerable from observational data on this diagram? If so, how?"""

from __future__ import annotations

import itertools
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import QueryError
from ..graph import CausalGraph
from .algorithm import Hedge, _cut, d_separated, id_estimand, idc_estimand
from .expression import Expr, Prob, Product, Sum, evaluate

__all__ = ["Identification", "identify", "find_backdoor_set", "find_frontdoor_set", "backdoor_formula", "frontdoor_formula"]


def _names(v) -> list[str]:
    if v is None:
        return []
    if isinstance(v, str):
        return [v]
    return list(v)


def find_backdoor_set(graph: CausalGraph, treatment: str, outcome: Iterable[str]) -> tuple[str, ...] | None:
    """A minimal set satisfying the back-door criterion for (treatment, outcome), or None.

    The criterion (Pearl 2009, Def. 3.3.1): no member is a descendant of the
    treatment, and the set blocks every path between treatment and outcome
    that starts with an arrow into the treatment (bidirected edges count as
    such arrows). Candidates are the treatment's non-descendants among the
    ancestors of treatment and outcome; if any valid set exists, that whole
    candidate set is valid (Pearl 2009, Sec. 11.3.1 / van der Zander et al.
    2014), and it is then pruned to a minimal one.
    """
    ys = set(_names(outcome))
    desc = set(graph.descendants(treatment, include_self=True))
    cands = [v for v in graph.ancestors([treatment, *ys]) if v not in desc and v not in ys]
    g = _cut(graph, out_of={treatment})
    if not d_separated(g, {treatment}, ys, cands):
        return None
    chosen = list(cands)
    for v in list(cands):
        trial = [c for c in chosen if c != v]
        if d_separated(g, {treatment}, ys, trial):
            chosen = trial
    return tuple(chosen)


def find_frontdoor_set(graph: CausalGraph, treatment: str, outcome: str, max_size: int = 3) -> tuple[str, ...] | None:
    """A smallest set satisfying the front-door criterion (Pearl 2009, Def. 3.3.3), or None.

    M satisfies it when (i) it intercepts every directed path from the
    treatment to the outcome, (ii) there is no unblocked back-door path from
    the treatment to M, and (iii) every back-door path from M to the outcome
    is blocked by the treatment. Sets of up to ``max_size`` mediators are tried.
    """
    x, y = treatment, outcome
    cands = [v for v in graph.descendants(x) if v != y and v in graph.ancestors(y)]
    gx = _cut(graph, out_of={x})
    for k in range(1, min(max_size, len(cands)) + 1):
        for M in itertools.combinations(cands, k):
            Ms = set(M)
            # (i) no directed path from x to y avoiding M
            keep = [v for v in graph.nodes if v not in Ms]
            if y in graph.subgraph(keep).descendants(x):
                continue
            # (ii) x and M d-separated once x's outgoing edges are removed
            if not d_separated(gx, {x}, Ms, ()):
                continue
            # (iii) M and y d-separated by x once M's outgoing edges are removed
            if not d_separated(_cut(graph, out_of=Ms), Ms, {y}, {x}):
                continue
            return M
    return None


def backdoor_formula(treatment: str, outcome: Sequence[str], adjustment: Sequence[str]) -> Expr:
    """Σ_z P(y | x, z) P(z)."""
    y = tuple(outcome)
    z = tuple(adjustment)
    if not z:
        return Prob(y, (treatment,))
    return Sum(z, Product((Prob(y, (treatment, *z)), Prob(z))))


def frontdoor_formula(treatment: str, outcome: str, mediators: Sequence[str]) -> Expr:
    """Σ_m P(m | x) Σ_x' P(y | x', m) P(x')."""
    m = tuple(mediators)
    inner = Sum((treatment,), Product((Prob((outcome,), (treatment, *m)), Prob((treatment,)))))
    return Sum(m, Product((Prob(m, (treatment,)), inner)))


@dataclass(frozen=True)
class Identification:
    """The verdict on a query.

    Attributes
    ----------
    targets, treatments, evidence : tuple of str
    identifiable : bool
    estimand : Expr or None
        The estimand the complete algorithm (ID / IDC) returns.
    formula : Expr or None
        The simplest known estimand: back-door or front-door adjustment
        where one applies, otherwise ``estimand``.
    method : str
        ``"back-door"``, ``"front-door"``, ``"ID"``, ``"IDC"`` or ``"not identifiable"``.
    adjustment : tuple of str or None
        The back-door set or the front-door mediators used by ``formula``.
    hedge : tuple (F, F') or None
        The two c-forests of the hedge that witnesses non-identifiability.
    """

    targets: tuple[str, ...]
    treatments: tuple[str, ...]
    evidence: tuple[str, ...]
    identifiable: bool
    estimand: Expr | None = None
    formula: Expr | None = None
    method: str = ""
    adjustment: tuple[str, ...] | None = None
    hedge: tuple[tuple[str, ...], tuple[str, ...]] | None = None

    def query_text(self) -> str:
        cond = []
        if self.treatments:
            cond.append("do(" + ", ".join(self.treatments) + ")")
        if self.evidence:
            cond.append(", ".join(self.evidence))
        return f"P({', '.join(self.targets)}" + (" | " + ", ".join(cond) if cond else "") + ")"

    def describe(self) -> str:
        """Several lines: the verdict, the formula, and the hedge or the method."""
        q = self.query_text()
        if not self.identifiable:
            F, Fp = self.hedge
            return (
                f"{q} is not identifiable from observational data on this diagram.\n"
                f"Hedge (Shpitser & Pearl 2006): F = {{{', '.join(F)}}} contains F' = {{{', '.join(Fp)}}}; "
                "two models that agree on every observational distribution disagree on this query.\n"
                "Experimental rows on the treatment, or more measured variables, are needed."
            )
        lines = [f"{q} is identifiable ({self.method}).", f"{q} = {self.formula}"]
        if self.adjustment is not None:
            what = "adjustment set" if self.method == "back-door" else "mediators"
            lines.append(f"{what}: {{{', '.join(self.adjustment)}}}")
        if self.method in ("back-door", "front-door") and self.estimand is not None and str(self.estimand) != str(self.formula):
            lines.append(f"complete algorithm (ID): {self.estimand}")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.describe()

    def evaluate(self, oracle, fixed: Mapping[str, int], use: str = "formula") -> np.ndarray:
        """Value of the estimand: an array over the targets, normalised.

        Parameters
        ----------
        oracle : callable
            ``oracle(vars)`` returns the observational joint of ``vars`` (an
            array, one axis per variable in that order).
        fixed : mapping
            State codes of the treatments and the evidence.
        use : {"formula", "estimand"}
            Evaluate the simplest formula (default) or the complete algorithm's estimand.

        Notes
        -----
        ID may return an estimand that also depends on variables it treated
        as intervened along the way (line 3 of the algorithm); under the
        model it has the same value for every value of them, so they are
        averaged with their observational probabilities (which also lowers
        the noise of an estimate from rows).
        """
        if not self.identifiable:
            raise QueryError(f"{self.query_text()} is not identifiable; there is no estimand to evaluate")
        arr, _ = self._evaluate(oracle, fixed, use)
        return arr

    def _evaluate(self, oracle, fixed, use: str, uniform: bool = False):
        expr = self.formula if use == "formula" else self.estimand
        extra = tuple(v for v in sorted(expr.free()) if v not in fixed and v not in self.targets)
        if extra:
            expr = Sum(extra, Product((expr, Prob(extra))))
        arr = evaluate(expr, oracle, fixed, self.targets, uniform)
        total = arr.sum()
        return (arr / total if total > 0 else arr), total

    def supported(self, oracle, fixed: Mapping[str, int], use: str = "formula", tol: float = 1e-9) -> bool:
        """Whether the estimand's value is pinned down by the distribution (positivity holds where it matters).

        Identification assumes every configuration has positive probability.
        Where the estimand needs a conditional P(A | B = b) whose P(B = b)
        is 0 (deterministic mechanisms, or cells empty in the rows), its
        value is not determined; this is detected by evaluating with such
        conditionals set to 0 and to uniform and comparing.
        """
        a, ta = self._evaluate(oracle, fixed, use)
        b, tb = self._evaluate(oracle, fixed, use, uniform=True)
        return bool(np.abs(a - b).max() <= tol and abs(ta - tb) <= tol * max(1.0, abs(ta)))


def identify(graph: CausalGraph, target, do, given=None) -> Identification:
    """Decide whether P(target | do(...), given) is identifiable and give its estimand.

    Parameters
    ----------
    graph : CausalGraph
        The diagram over the observed variables; bidirected edges mark
        hidden common causes.
    target : str or sequence of str
    do : str, sequence of str, or mapping (keys are used)
        The intervened variables.
    given : str, sequence of str, or mapping, optional
        Observed evidence.

    Returns
    -------
    Identification

    Raises
    ------
    QueryError
        Unknown variable, empty target or treatment, or a variable with two roles.

    Examples
    --------
    >>> g = CausalGraph([("X", "M"), ("M", "Y")], bidirected=[("X", "Y")])   # the front-door diagram
    >>> r = identify(g, "Y", "X")
    >>> r.identifiable, r.method
    (True, 'front-door')
    >>> print(r.formula)
    Σ_{M} P(M | X) [Σ_{X'} P(Y | X', M) P(X')]
    """
    y, x, z = _names(target), _names(do), _names(given)
    for role, vs in (("target", y), ("intervened", x), ("observed", z)):
        for v in vs:
            if v not in graph:
                raise QueryError(f"unknown {role} variable '{v}'; variables are: {', '.join(sorted(graph.nodes))}")
    if not y:
        raise QueryError("a query needs at least one target variable")
    if not x:
        raise QueryError("identification needs at least one intervened variable")
    for a, b, what in ((y, x, "a target and intervened on"), (y, z, "a target and observed"), (x, z, "intervened on and observed")):
        both = set(a) & set(b)
        if both:
            raise QueryError(f"'{sorted(both)[0]}' is both {what}")
    order = graph.nodes
    ys = tuple(v for v in order if v in y)
    xs = tuple(v for v in order if v in x)
    zs = tuple(v for v in order if v in z)
    try:
        if zs:
            estimand, _ = idc_estimand(graph, ys, xs, zs)
            method = "IDC"
        else:
            estimand = id_estimand(graph, ys, xs)
            method = "ID"
    except Hedge as h:
        return Identification(ys, xs, zs, False, method="not identifiable", hedge=(h.forest, h.subforest))
    formula, adjustment = estimand, None
    if len(xs) == 1 and not zs:
        bd = find_backdoor_set(graph, xs[0], ys)
        if bd is not None:
            formula, method, adjustment = backdoor_formula(xs[0], ys, bd), "back-door", bd
        elif len(ys) == 1:
            fd = find_frontdoor_set(graph, xs[0], ys[0])
            if fd is not None:
                formula, method, adjustment = frontdoor_formula(xs[0], ys[0], fd), "front-door", fd
    return Identification(ys, xs, zs, True, estimand, formula, method, adjustment)
