"""The answer to a query: a probability table over named variables."""

from __future__ import annotations

import itertools
from collections.abc import Iterator, Mapping, Sequence

import numpy as np

from .errors import QueryError

__all__ = ["Distribution", "Interval", "EffectEstimate"]


def _state_error(variable: str, state: object, states: Sequence[str]) -> QueryError:
    listed = ", ".join(sorted(states))
    return QueryError(f"unknown state '{state}' for variable '{variable}'; states are: {listed}")


class Interval:
    """A central interval for each probability of an answer, and the sample it came from.

    Attributes
    ----------
    level : float
        The central probability covered, e.g. 0.95.
    lower, upper : numpy.ndarray
        Bounds, the shape of the answer's ``probs``.
    method : str
        How the sample was drawn, e.g. ``"posterior"`` (CPT rows drawn from
        their posterior, a Dirichlet or a mixture of Dirichlets, each set
        answered exactly).
    samples : numpy.ndarray
        ``[draws, *shape]``: the answers the bounds are quantiles of (before
        the widening of ``include`` and ``estimate`` below).
    widened : numpy.ndarray
        Bool, the shape of the bounds: where ``include`` moved a bound
        beyond the draws' quantile (to a 0 or 1 the counts allow; printed
        with a ``*``).

    The bounds are the sample quantiles at positions ``p (n + 1)`` among the
    ``n`` sorted draws (Hyndman & Fan 1996, definition 6; numpy's
    ``"weibull"``), not numpy's default ``1 + p (n - 1)``. The k-th smallest
    of n draws holds on average k / (n + 1) of the distribution below it
    (the uniform order statistics' mean), so these bounds hold on average
    exactly ``level`` of the distribution the draws came from; the default
    positions hold less, ``level (n - 1) / (n + 1)``: 0.941 at 200 draws and
    0.913 at 50 (the bootstrap's default), which a coverage check reads as
    an interval too narrow. With fewer than ``2 / (1 - level) - 1`` draws
    (39 at 95%) the bounds are the sample's extremes, which hold on average
    (n - 1) / (n + 1).

    ``include``, if given (the shape of the bounds, or a stack of such
    arrays on a first axis), widens the bounds to contain it where it is
    not NaN: the posterior intervals pass the
    probabilities the counts alone make exactly 0 or 1 there. ``estimate``,
    if given, is the answer the interval goes with, and the bounds always
    contain it: a bootstrap's percentiles, or a posterior whose row priors
    are fitted per CPT row while the point answer smooths with one value
    per variable, can leave the answer outside the draws' quantiles (usually
    by little; by 0.085 for a row seen 21 times in one state whose point
    is smoothed with 1.0).
    """

    def __init__(self, level: float, samples, method: str, include=None, estimate=None):
        samples = np.asarray(samples, dtype=np.float64)
        self.level = float(level)
        self.method = method
        self.samples = samples
        tail = (1.0 - self.level) / 2.0
        self.lower, self.upper = np.quantile(samples, [tail, 1.0 - tail], axis=0, method="weibull")
        self.widened = np.zeros(self.lower.shape, dtype=bool)
        if include is not None:  # bounds widened to contain these values where not NaN (see Estimator._counts_only_answers)
            include = np.asarray(include, dtype=np.float64)
            if include.ndim == self.lower.ndim:
                include = include[None]
            lower = np.fmin(self.lower, np.fmin.reduce(include, axis=0))
            upper = np.fmax(self.upper, np.fmax.reduce(include, axis=0))
            self.widened = (lower < self.lower) | (upper > self.upper)
            self.lower, self.upper = lower, upper
        if estimate is not None:
            estimate = np.asarray(estimate, dtype=np.float64)
            self.lower, self.upper = np.minimum(self.lower, estimate), np.maximum(self.upper, estimate)
        for a in (self.samples, self.lower, self.upper, self.widened):
            a.setflags(write=False)

    @property
    def draws(self) -> int:
        return int(self.samples.shape[0])

    def to_dict(self) -> dict:
        return {"level": self.level, "method": self.method, "draws": self.draws,
                "lower": self.lower.tolist(), "upper": self.upper.tolist(), "widened": self.widened.tolist()}


def boundary_values(p) -> np.ndarray:
    """``p`` where it is exactly 0 or 1, NaN elsewhere: what an :class:`Interval`'s ``include`` takes.

    A probability that the counts alone make exactly 0 or 1 is one no
    posterior draw reaches; the interval's bound is widened to it there.
    """
    p = np.asarray(p, dtype=np.float64)
    return np.where((p == 0.0) | (p == 1.0), p, np.nan)


def boundary_layers(answers) -> np.ndarray:
    """``[3, *shape]`` for an :class:`Interval`'s ``include``, from answers the counts allow (the counts-only one first).

    Layer 0 the 0s and 1s of the first answer (:func:`boundary_values`),
    layer 1 every 0 and layer 2 every 1 that any of them takes; NaN
    elsewhere.
    """
    found = np.stack([np.asarray(a, dtype=np.float64) for a in answers])
    return np.stack([boundary_values(found[0]), np.where((found == 0.0).any(axis=0), 0.0, np.nan),
                     np.where((found == 1.0).any(axis=0), 1.0, np.nan)])


class EffectEstimate:
    """A contrast P(Y=y | do(X=a)) - P(Y=y | do(X=b)) with its interval and the decision view.

    Attributes
    ----------
    description : str
    estimate : float
        The contrast from the fitted estimator's answers.
    interval : Interval
        Over the contrast (``lower`` / ``upper`` are 0-d arrays).
    positive : float
        Share of the sample above zero (posterior or bootstrap probability
        that the effect is positive).
    """

    def __init__(self, description: str, estimate: float, interval: Interval):
        self.description = description
        self.estimate = float(estimate)
        self.interval = interval
        self.positive = float((interval.samples > 0).mean())

    @property
    def lower(self) -> float:
        return float(self.interval.lower)

    @property
    def upper(self) -> float:
        return float(self.interval.upper)

    @property
    def excludes_zero(self) -> bool:
        """True when the whole interval lies on one side of zero."""
        return self.lower > 0 or self.upper < 0

    def to_dict(self) -> dict:
        iv = self.interval
        return {"description": self.description, "estimate": self.estimate, "level": iv.level, "lower": self.lower,
                "upper": self.upper, "method": iv.method, "draws": iv.draws, "probability_positive": self.positive,
                "interval_excludes_zero": self.excludes_zero, "widened": bool(iv.widened.any())}

    def to_csv(self, path) -> None:
        """Write the contrast as a CSV file (a header and one row: the fields of :meth:`to_dict`).

        ``path`` is a file path (written whole or not at all) or an open text
        file; a file that cannot be written raises
        :class:`~intervgnn.errors.WriteError`.
        """
        d = self.to_dict()
        _write_csv(path, list(d), [[d[k] for k in d]])

    def __str__(self) -> str:
        iv = self.interval
        side = ("excludes zero" if self.excludes_zero else "includes zero")
        moved = (" (a bound moved beyond the draws' quantile to a value the counts leave possible)"
                 if iv.widened.any() else "")
        return (f"{self.description}\n  estimate {self.estimate:+.4f}, {iv.level:.0%} interval {self.lower:+.4f} to "
                f"{self.upper:+.4f} ({side}){moved}\n  probability the effect is positive: {self.positive:.3f} "
                f"({iv.draws:,} {iv.method} draws; the diagram's assumptions are not in it)")

    def __repr__(self) -> str:
        return f"EffectEstimate({self.description!r}, estimate={self.estimate:.4f}, lower={self.lower:.4f}, upper={self.upper:.4f})"


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
    interval : Interval, optional
        An uncertainty statement for every probability (bounds the shape of
        ``probs``); printed as one more column and kept by :meth:`to_dict`.

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
        interval: Interval | None = None,
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
        if interval is not None and (not isinstance(interval, Interval) or interval.lower.shape != arr.shape):
            raise QueryError(f"interval must be an Interval over probabilities of shape {arr.shape}")
        self.interval = interval

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
            **({"interval": self.interval.to_dict()} if self.interval is not None else {}),
        }

    def to_csv(self, path) -> None:
        """Write the distribution as a CSV file: one row per joint state, every entry listed.

        Columns: one per variable (the state), ``probability``, with an
        interval ``lower``, ``upper``, ``level`` and ``method``, and for an
        answer marked not identified ``identified`` (``no`` on every row).
        ``path`` is a file path (written whole or not at all) or an open text
        file.

        Raises
        ------
        QueryError
            A variable named like one of the fixed columns.
        WriteError
            The file cannot be written (missing folder, no permission, disk full).

        Examples
        --------
        >>> import io
        >>> out = io.StringIO()
        >>> Distribution(["Pump"], [["day", "night"]], [0.25, 0.75]).to_csv(out)
        >>> print(out.getvalue().strip())
        Pump,probability
        day,0.25
        night,0.75
        """
        iv = self.interval
        fixed = ["probability"] + (["lower", "upper", "level", "method"] if iv is not None else [])
        if self.identified is False:
            fixed.append("identified")
        clash = [v for v in self.variables if v in fixed]
        if clash:
            raise QueryError(f"cannot write CSV: the variable '{clash[0]}' has the name of a fixed column "
                             f"({', '.join(fixed)}); rename it")
        lower = iv.lower.reshape(-1) if iv is not None else None
        upper = iv.upper.reshape(-1) if iv is not None else None

        def rows():
            for j, (combo, p) in enumerate(self.items()):
                row = list(combo) + [repr(float(p))]
                if iv is not None:
                    row += [repr(float(lower[j])), repr(float(upper[j])), iv.level, iv.method]
                if self.identified is False:
                    row.append("no")
                yield row

        _write_csv(path, list(self.variables) + fixed, rows())

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
        iv = self.interval
        if iv is not None:
            header.append(f"{iv.level:.0%} interval")
        total = int(self.probs.size)
        note = None
        if iv is not None:  # a bound moved beyond the draws' quantile is marked; the others keep the column aligned
            flags = iv.widened.reshape(-1)
            marked = bool(flags.any())

            def cell(j):
                text = f"{iv.lower.reshape(-1)[j]:.{digits}f} to {iv.upper.reshape(-1)[j]:.{digits}f}"
                return text + ("*" if flags[j] else " ") if marked else text
        if max_rows is not None and total > max_rows:
            # the largest entries, found without walking every row in Python
            flat = self.probs.reshape(-1)
            k = min(int(show), total)
            top = np.argpartition(-flat, k - 1)[:k]
            top = top[np.lexsort((top, -flat[top]))]
            codes = np.unravel_index(top, self.probs.shape)
            rows = [
                [self.states[i][int(codes[i][r])] for i in range(len(self.variables))] + [f"{flat[j]:.{digits}f}"]
                + ([cell(j)] if iv is not None else [])
                for r, j in enumerate(top)
            ]
            note = (
                f"... {total - k:,} of {total:,} entries left out (the {k} largest are listed); "
                "format(max_rows=None) prints them all, to_dict() returns them all, "
                "and on the command line --json prints them all"
            )
        else:
            rows = [list(combo) + [f"{p:.{digits}f}"] for combo, p in self.items()]
            if iv is not None:
                for j, r in enumerate(rows):
                    r.append(cell(j))
        widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(header)]
        lines = []
        if self.description:
            lines.append(self.description)
        if self.identified is False:
            lines.append("NOT IDENTIFIED: no amount of observational data pins this number down; it rests on the model.")
        numeric = len(self.variables) + 1  # the probability column; the interval column after it

        lines.append("  ".join(h.ljust(w) for h, w in zip(header, widths)).rstrip())
        lines.append("  ".join("-" * w for w in widths))
        for r in rows:
            cells = [c.ljust(w) if i < numeric - 1 else c.rjust(w) for i, (c, w) in enumerate(zip(r, widths))]
            lines.append("  ".join(cells).rstrip())
        if note:
            lines.append(note)
        if iv is not None:
            lines.append(f"interval: central {iv.level:.0%} of {iv.draws:,} {iv.method} draws; it covers the "
                         "uncertainty from the rows, not the diagram's assumptions")
            if any(r[-1].endswith("*") for r in rows):
                lines.append("* a bound moved to 0 or 1 beyond the draws' quantile: the rows that decide this probability "
                             "leave that value possible (a state never seen there, or rows never seen at all)")
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


def _write_csv(path, header: list, rows) -> None:
    import csv

    from ._io import atomic_open

    def emit(fh):
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)

    if hasattr(path, "write"):
        emit(path)
    else:
        with atomic_open(path, "w", newline="") as fh:
            emit(fh)
