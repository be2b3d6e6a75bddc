"""Estimands: expressions over observational probabilities, printable and evaluable.

An expression is built from :class:`Prob` (an observational P(A | B)),
:class:`Product`, :class:`Sum` (marginalisation, which binds its variables)
and :class:`Quotient`. It is evaluated against an *oracle* that returns the
observational joint marginal of any set of variables (from an exact network,
or from counts over rows), with some free variables fixed to state codes.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

__all__ = ["Expr", "Prob", "Product", "Sum", "Quotient", "Factor", "evaluate"]


# ----------------------------------------------------------------- factors
@dataclass
class Factor:
    """A non-negative array over named variables (one axis each)."""

    variables: tuple[str, ...]
    values: np.ndarray

    def axis(self, v: str) -> int:
        return self.variables.index(v)

    def fix(self, fixed: Mapping[str, int]) -> Factor:
        idx = tuple(fixed[v] if v in fixed else slice(None) for v in self.variables)
        return Factor(tuple(v for v in self.variables if v not in fixed), self.values[idx])

    def sum_out(self, names) -> Factor:
        axes = tuple(i for i, v in enumerate(self.variables) if v in names)
        if not axes:
            return self
        return Factor(tuple(v for v in self.variables if v not in names), self.values.sum(axis=axes))

    def aligned(self, order: Sequence[str]) -> np.ndarray:
        """Values broadcast to the axes ``order`` (which contains all of this factor's variables)."""
        perm = [self.variables.index(v) for v in order if v in self.variables]
        arr = np.transpose(self.values, perm) if perm else self.values
        shape = [arr.shape[perm.index(self.variables.index(v))] if v in self.variables else 1 for v in order]
        return arr.reshape(shape)


def _multiply(factors: Sequence[Factor]) -> Factor:
    order: list[str] = []
    for f in factors:
        for v in f.variables:
            if v not in order:
                order.append(v)
    out = np.ones(())
    for f in factors:
        out = out * f.aligned(order)  # every variable is in some factor: broadcasting gives the full shape
    return Factor(tuple(order), out)


def _eliminate(factors: list[Factor], over: set[str]) -> Factor:
    """Sum ``over`` out of the product of ``factors`` one variable at a time (variable elimination)."""
    factors = list(factors)
    remaining = {v for v in over if any(v in f.variables for f in factors)}

    def cost(v):
        scope = set()
        for f in factors:
            if v in f.variables:
                scope |= {(u, f.values.shape[f.axis(u)]) for u in f.variables}
        return int(np.prod([size for u, size in scope if u != v])) if scope else 0

    while remaining:
        v = min(sorted(remaining), key=cost)
        involved = [f for f in factors if v in f.variables]
        factors = [f for f in factors if v not in f.variables] + [_multiply(involved).sum_out({v})]
        remaining.discard(v)
    return _multiply(factors)


def _divide(num: Factor, den: Factor, fill: float = 0.0) -> Factor:
    """num / den, with ``fill`` where den is 0 (then num is 0 too)."""
    order = list(num.variables) + [v for v in den.variables if v not in num.variables]
    a, b = num.aligned(order), den.aligned(order)
    out = np.where(b > 0, a / np.where(b > 0, b, 1.0), fill)
    return Factor(tuple(order), out)


# ------------------------------------------------------------- expressions
def _fmt(vs) -> str:
    return ", ".join(vs)


class Expr:
    """Base class of estimand expressions."""

    def free(self) -> frozenset[str]:  # pragma: no cover - abstract
        raise NotImplementedError

    def _eval(self, oracle, fixed: Mapping[str, int], uniform: bool = False) -> Factor:  # pragma: no cover - abstract
        raise NotImplementedError

    def text(self, context: frozenset = frozenset(), primed: frozenset = frozenset()) -> str:  # pragma: no cover
        """Notation; ``context`` holds the variables free around this expression (a sum over one of them
        renames it with a prime), ``primed`` those currently renamed."""
        raise NotImplementedError

    def __str__(self) -> str:
        return self.text(self.free())

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.text()!r})"


@dataclass(frozen=True, repr=False)
class Prob(Expr):
    """The observational P(variables | given)."""

    variables: tuple[str, ...]
    given: tuple[str, ...] = ()

    def free(self) -> frozenset[str]:
        return frozenset(self.variables) | frozenset(self.given)

    def text(self, context: frozenset = frozenset(), primed: frozenset = frozenset()) -> str:
        def name(v):
            return v + "'" if v in primed else v

        inner = _fmt(name(v) for v in self.variables)
        if self.given:
            inner += " | " + _fmt(name(v) for v in self.given)
        return f"P({inner})"

    def _eval(self, oracle, fixed, uniform=False):
        scope = tuple(self.variables) + tuple(v for v in self.given if v not in self.variables)
        joint = Factor(scope, oracle(scope))
        if self.given:
            den = joint.sum_out(set(self.variables))
            # where P(given) = 0 the conditional is undefined: 0, or uniform when probing for positivity
            fill = den.values.size / joint.values.size if uniform else 0.0  # 1 / (number of states of A)
            return _divide(joint.fix(fixed), den.fix(fixed), fill)
        return joint.fix(fixed)


@dataclass(frozen=True, repr=False)
class Product(Expr):
    terms: tuple[Expr, ...]

    def free(self) -> frozenset[str]:
        out: frozenset[str] = frozenset()
        for t in self.terms:
            out |= t.free()
        return out

    def text(self, context: frozenset = frozenset(), primed: frozenset = frozenset()) -> str:
        parts = []
        for t in self.terms:
            s = t.text(context, primed)
            parts.append(f"[{s}]" if isinstance(t, (Sum, Quotient)) and len(self.terms) > 1 else s)
        return " ".join(parts)

    def _eval(self, oracle, fixed, uniform=False):
        return _multiply([t._eval(oracle, fixed, uniform) for t in self.terms])


@dataclass(frozen=True, repr=False)
class Sum(Expr):
    """Sum over the states of ``over`` (these variables are bound inside)."""

    over: tuple[str, ...]
    term: Expr

    def free(self) -> frozenset[str]:
        return self.term.free() - frozenset(self.over)

    def text(self, context: frozenset = frozenset(), primed: frozenset = frozenset()) -> str:
        # a summed variable that is also free around the sum (X in the front-door formula) is printed X'
        shadow = frozenset(v for v in self.over if v in context)
        new_primed = (primed - frozenset(self.over)) | shadow
        names = [v + "'" if v in shadow else v for v in self.over]
        inner = self.term.text(context | frozenset(self.over), new_primed)
        return f"Σ_{{{_fmt(names)}}} {inner}"

    def _eval(self, oracle, fixed, uniform=False):
        inner_fixed = {k: v for k, v in fixed.items() if k not in self.over}
        if isinstance(self.term, Product):
            # never build the whole product: eliminate the summed variables one by one
            return _eliminate([t._eval(oracle, inner_fixed, uniform) for t in self.term.terms], set(self.over))
        return self.term._eval(oracle, inner_fixed, uniform).sum_out(set(self.over))


@dataclass(frozen=True, repr=False)
class Quotient(Expr):
    numerator: Expr
    denominator: Expr

    def free(self) -> frozenset[str]:
        return self.numerator.free() | self.denominator.free()

    def text(self, context: frozenset = frozenset(), primed: frozenset = frozenset()) -> str:
        return f"[{self.numerator.text(context, primed)}] / [{self.denominator.text(context, primed)}]"

    def _eval(self, oracle, fixed, uniform=False):
        return _divide(self.numerator._eval(oracle, fixed, uniform), self.denominator._eval(oracle, fixed, uniform))


def evaluate(
    expr: Expr,
    oracle: Callable[[tuple[str, ...]], np.ndarray],
    fixed: Mapping[str, int],
    order: Sequence[str],
    uniform: bool = False,
) -> np.ndarray:
    """Evaluate ``expr`` with ``fixed`` free variables set; return an array over ``order``.

    ``oracle(vars)`` must return the observational joint of ``vars`` as an
    array with one axis per variable, in that order. A conditional
    P(A | B = b) with P(B = b) = 0 is taken as 0, or as uniform over A with
    ``uniform=True``; an estimand whose value changes between the two needs
    a probability that the distribution does not support (positivity fails).
    Free variables that are neither fixed nor in ``order`` are an error.
    """
    f = expr._eval(oracle, dict(fixed), uniform)
    left = [v for v in f.variables if v not in order]
    if left:
        raise ValueError(f"the estimand still depends on {', '.join(left)}")
    missing = [v for v in order if v not in f.variables]
    if missing:
        raise ValueError(f"the estimand does not depend on {', '.join(missing)}; cannot lay it out")
    return np.transpose(f.values, [f.variables.index(v) for v in order])
