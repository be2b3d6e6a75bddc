"""The answer to a query: a probability table over named variables."""

from __future__ import annotations

import itertools
from collections.abc import Iterator, Mapping, Sequence

import numpy as np

from .errors import QueryError

__all__ = ["Distribution"]


def _state_error(variable: str, state: object, states: Sequence[str]) -> QueryError:
    listed = ", ".join(sorted(states))
    return QueryError(f"unknown state '{state}' for variable '{variable}'; states are: {listed}")


class Distribution:
    """A discrete (joint) distribution over named variables with named states.

    Exact engines and every estimator return this type.

    Parameters
    ----------
    variables : sequence of str
        Variable names, one per axis of ``probs``.
    states : sequence of sequence of str
        State names per variable, in axis order.
    probs : array_like
        Probabilities, shape ``[len(states[0]), len(states[1]), ...]``.
    description : str, optional
        What the distribution answers, e.g. ``"P(Y | do(X=a))"``; used when
        printing.
    identified : bool or None, optional
        False marks an answer to a query that is not identifiable from the
        data on the diagram: it rests on the model's assumptions alone.

    Examples
    --------
    >>> d = Distribution(["Pump"], [["day", "night"]], [0.25, 0.75])
    >>> d["night"]
    0.75
    >>> print(d)
    Pump   probability
    -----  -----------
    day         0.2500
    night       0.7500
    """

    def __init__(
        self,
        variables: Sequence[str],
        states: Sequence[Sequence[str]],
        probs,
        description: str | None = None,
        identified: bool | None = None,
    ):
        self.identified = identified
        self.variables: tuple[str, ...] = tuple(variables)
        self.states: tuple[tuple[str, ...], ...] = tuple(tuple(s) for s in states)
        arr = np.array(probs, dtype=np.float64)
        if len(self.states) != len(self.variables):
            raise QueryError(
                f"{len(self.variables)} variables but {len(self.states)} state lists were given"
            )
        expected = tuple(len(s) for s in self.states)
        if arr.shape != expected:
            raise QueryError(f"probabilities have shape {arr.shape}, expected {expected}")
        arr.setflags(write=False)
        self.probs: np.ndarray = arr
        self.description = description

    # ----------------------------------------------------------------- lookup
    def _code(self, axis: int, state: object) -> int:
        try:
            return self.states[axis].index(state)  # type: ignore[arg-type]
        except ValueError:
            raise _state_error(self.variables[axis], state, self.states[axis]) from None

    def __getitem__(self, key) -> float:
        """Probability of a state (one variable) or of a state combination.

        ``d["high"]`` for one variable, ``d["high", "low"]`` for a joint in
        variable order, or ``d[{"A": "high"}]`` (variables left out are
        summed over).
        """
        if isinstance(key, Mapping):
            for v in key:
                if v not in self.variables:
                    raise QueryError(
                        f"variable '{v}' is not in this distribution; it has: {', '.join(self.variables)}"
                    )
            index = tuple(
                self._code(i, key[v]) if v in key else slice(None) for i, v in enumerate(self.variables)
            )
            return float(np.sum(self.probs[index]))
        if not isinstance(key, tuple):
            key = (key,)
        if len(key) != len(self.variables):
            raise QueryError(
                f"expected {len(self.variables)} state(s) for {', '.join(self.variables)}, got {len(key)}"
            )
        return float(self.probs[tuple(self._code(i, s) for i, s in enumerate(key))])

    def items(self) -> Iterator[tuple[tuple[str, ...], float]]:
        """Pairs ``(state tuple, probability)`` in row-major order."""
        for combo in itertools.product(*[range(len(s)) for s in self.states]):
            yield tuple(self.states[i][c] for i, c in enumerate(combo)), float(self.probs[combo])

    def marginal(self, variables: str | Sequence[str]) -> Distribution:
        """The marginal over a subset of the variables (in the order given)."""
        names = [variables] if isinstance(variables, str) else list(variables)
        for v in names:
            if v not in self.variables:
                raise QueryError(f"variable '{v}' is not in this distribution; it has: {', '.join(self.variables)}")
        axes = [self.variables.index(v) for v in names]
        rest = tuple(i for i in range(len(self.variables)) if i not in axes)
        summed = self.probs.sum(axis=rest) if rest else self.probs
        kept = sorted(axes)
        arr = np.transpose(summed, [kept.index(a) for a in axes])
        return Distribution(names, [self.states[a] for a in axes], arr)

    # ------------------------------------------------------------- exports
    def to_dict(self) -> dict:
        """A JSON-ready dict: variables, states, probabilities as nested lists."""
        return {
            "description": self.description,
            "identified": self.identified,
            "variables": list(self.variables),
            "states": [list(s) for s in self.states],
            "probs": self.probs.tolist(),
        }

    def format(self, digits: int = 4, max_rows: int | None = 50, show: int = 20) -> str:
        """The distribution as an aligned text table.

        Parameters
        ----------
        digits : int, default 4
            Decimals of each probability.
        max_rows : int or None, default 50
            An answer with more entries than this is summarised: only its
            ``show`` largest entries are listed (largest first), followed by
            a line saying how many were left out. ``None`` lists every entry.
        show : int, default 20
            Entries listed when the answer is summarised.
        """
        for key, value in (("max_rows", max_rows), ("show", show)):
            if value is None and key == "max_rows":
                continue
            if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
                raise QueryError(f"{key} must be a whole number of at least 1, got {value!r}")
        header = list(self.variables) + ["probability"]
        total = int(self.probs.size)
        note = None
        if max_rows is not None and total > max_rows:
            # the largest entries, found without walking every row in Python
            flat = self.probs.reshape(-1)
            k = min(int(show), total)
            top = np.argpartition(-flat, k - 1)[:k]
            top = top[np.lexsort((top, -flat[top]))]
            codes = np.unravel_index(top, self.probs.shape)
            rows = [
                [self.states[i][int(codes[i][r])] for i in range(len(self.variables))] + [f"{flat[j]:.{digits}f}"]
                for r, j in enumerate(top)
            ]
            note = (
                f"... {total - k:,} of {total:,} entries left out (the {k} largest are listed); "
                "format(max_rows=None) prints them all, to_dict() returns them all, "
                "and on the command line --json prints them all"
            )
        else:
            rows = [list(combo) + [f"{p:.{digits}f}"] for combo, p in self.items()]
        widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
        lines = []
        if self.description:
            lines.append(self.description)
        if self.identified is False:
            lines.append("NOT IDENTIFIED: no amount of observational data pins this number down; it rests on the model.")
        lines.append("  ".join(h.ljust(w) for h, w in zip(header, widths)).rstrip())
        lines.append("  ".join("-" * w for w in widths))
        for r in rows:
            cells = [c.ljust(w) for c, w in zip(r[:-1], widths)] + [r[-1].rjust(widths[-1])]
            lines.append("  ".join(cells))
        if note:
            lines.append(note)
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.format()

    def __repr__(self) -> str:
        desc = f", description={self.description!r}" if self.description else ""
        return f"Distribution(variables={list(self.variables)}, shape={self.probs.shape}{desc})"

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Distribution):
            return NotImplemented
        return (
            self.variables == other.variables
            and self.states == other.states
            and np.array_equal(self.probs, other.probs)
        )

    __hash__ = None  # type: ignore[assignment]
