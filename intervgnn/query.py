"""Validation of query arguments shared by the exact engine and every estimator."""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from .errors import DataError, QueryError, short_repr, shorten

__all__ = [
    "Query",
    "make_query",
    "describe",
    "check_assignment",
    "check_variable",
    "check_state",
    "check_answer_size",
    "check_seed",
    "shown",
    "MAX_ANSWER_ENTRIES",
]

#: the most entries (state combinations) one answer may have: 80 MB of float64
MAX_ANSWER_ENTRIES = 10_000_000


def shown(value: object, limit: int = 80) -> str:
    """A user's value for an error message: strings as they are, others as ``repr``, cut to ``limit`` characters."""
    return shorten(value, limit) if isinstance(value, str) else short_repr(value, limit)


@dataclass(frozen=True)
class Query:
    """A validated query P(targets | do(...), given).

    Attributes hold variable names and state *names*; ``do`` and ``given``
    are tuples of ``(variable, state)`` pairs in the order the user gave.
    """

    targets: tuple[str, ...]
    do: tuple[tuple[str, str], ...] = ()
    given: tuple[tuple[str, str], ...] = ()

    @property
    def do_dict(self) -> dict[str, str]:
        return dict(self.do)

    @property
    def given_dict(self) -> dict[str, str]:
        return dict(self.given)

    def describe(self) -> str:
        """Readable notation, e.g. ``P(Y | do(X=a), Z=c)``."""
        return describe(self.targets, self.do_dict, self.given_dict)


def describe(targets: Sequence[str], do: Mapping[str, str] | None = None, given: Mapping[str, str] | None = None) -> str:
    """Readable notation for a query, e.g. ``P(Y | do(X=a), Z=c)``."""
    parts = []
    if do:
        parts.append("do(" + ", ".join(f"{k}={v}" for k, v in do.items()) + ")")
    if given:
        parts.append(", ".join(f"{k}={v}" for k, v in given.items()))
    cond = " | " + ", ".join(parts) if parts else ""
    return f"P({', '.join(targets)}{cond})"


def check_variable(states: Mapping[str, Sequence[str]], name: object, role: str) -> str:
    """Return ``name`` if it is a string naming a variable of ``states``; else raise QueryError.

    ``role`` (target, intervened, observed) goes into the message.
    """
    if not isinstance(name, str):
        raise QueryError(f"{role} variable names must be strings, got {type(name).__name__} {shown(name)}")
    if name not in states:
        known = ", ".join(sorted(states))
        raise QueryError(f"unknown {role} variable '{shown(name)}'; variables are: {known}")
    return name


def check_state(states: Mapping[str, Sequence[str]], var: str, state: object) -> str:
    """Return ``state`` if it is a string naming a state of ``var``; else raise QueryError."""
    st = states[var]
    if not isinstance(state, str):
        raise QueryError(
            f"the state of '{var}' must be a string (a state name), got {type(state).__name__} {shown(state)}; "
            f"states are: {', '.join(sorted(st))}"
        )
    if state not in st:
        raise QueryError(f"unknown state '{shown(state)}' for variable '{var}'; states are: {', '.join(sorted(st))}")
    return state


def check_answer_size(states: Mapping[str, Sequence[str]], targets: Sequence[str], sweep: str | None = None) -> int:
    """Raise QueryError if the answer over ``targets`` (and ``sweep``) would exceed :data:`MAX_ANSWER_ENTRIES`.

    Called before anything is allocated; returns the number of entries.
    """
    names = list(targets) + ([sweep] if sweep is not None else [])
    size = math.prod(len(states[v]) for v in names)  # Python integers: no overflow
    if size > MAX_ANSWER_ENTRIES:
        what = shown(", ".join(targets))
        per = f" for each of the {len(states[sweep])} states of {sweep}" if sweep is not None else ""
        raise QueryError(
            f"the answer over {len(targets)} target variables ({what}){per} would have {size:,} entries, "
            f"more than the limit of {MAX_ANSWER_ENTRIES:,}; ask for fewer target variables at once"
        )
    return size


def check_seed(seed: object, allow_none: bool = False, allow_generator: bool = False, name: str = "seed"):
    """Return ``seed`` if it is a non-negative whole number (bool excluded); else raise DataError.

    Parameters
    ----------
    seed : object
        The value given.
    allow_none : bool, default False
        Accept ``None`` (fresh randomness from the operating system).
    allow_generator : bool, default False
        Accept a ``numpy.random.Generator`` as it is.
    name : str, default ``"seed"``
        What the value is called in the message (e.g. ``"--seed"``).

    Raises
    ------
    DataError
        Anything else: a negative number, a fraction, a string, ``True``.
    """
    if seed is None and allow_none:
        return None
    if allow_generator and isinstance(seed, np.random.Generator):
        return seed
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise DataError(f"{name} must be a non-negative whole number, got {short_repr(seed)}")
    return int(seed)


def check_assignment(states: Mapping[str, Sequence[str]], assignment, role: str = "intervened") -> dict[str, str]:
    """Validate a ``{variable: state}`` mapping; return it as a dict.

    Raises
    ------
    QueryError
        Not a mapping, unknown variable or unknown state.
    """
    if assignment is None:
        return {}
    if not isinstance(assignment, Mapping):
        raise QueryError(f"{role} values must map variable names to state names, got {type(assignment).__name__}")
    for v, s in assignment.items():
        check_state(states, check_variable(states, v, role), s)
    return dict(assignment)


def make_query(
    states: Mapping[str, Sequence[str]],
    target: str | Sequence[str],
    do: Mapping[str, str] | None = None,
    given: Mapping[str, str] | None = None,
) -> Query:
    """Validate a query against the variables and states it will be asked of.

    Parameters
    ----------
    states : mapping of str to sequence of str
        State names per variable.
    target : str or sequence of str
        One variable, or several for a joint distribution.
    do : mapping, optional
        Intervened variables and the states they are set to.
    given : mapping, optional
        Observed evidence, variable to state.

    Returns
    -------
    Query

    Raises
    ------
    QueryError
        A name or state that is not a string, unknown variable or state, an
        empty or repeated target, a variable with two roles (target,
        intervened, observed), or an answer of more than
        :data:`MAX_ANSWER_ENTRIES` entries.
    """
    if isinstance(target, str):
        targets = [target]
    elif isinstance(target, (bytes, bytearray, Mapping)) or not isinstance(target, Iterable):
        raise QueryError(
            f"target must be a variable name or a list of names, got {type(target).__name__} {shown(target)}"
        )
    else:
        targets = list(target)
    if not targets:
        raise QueryError("a query needs at least one target variable")
    for t in targets:
        check_variable(states, t, "target")
    if len(set(targets)) != len(targets):
        dup = next(t for t in targets if targets.count(t) > 1)
        raise QueryError(f"target '{dup}' is listed twice")
    check_answer_size(states, targets)
    do = check_assignment(states, do, "intervened")
    given = check_assignment(states, given, "observed")
    for t in targets:
        if t in do:
            raise QueryError(f"'{t}' is both a target and intervened on")
        if t in given:
            raise QueryError(f"'{t}' is both a target and observed")
    for v in do:
        if v in given:
            raise QueryError(f"'{v}' is both intervened on and observed")
    return Query(tuple(targets), tuple(do.items()), tuple(given.items()))
