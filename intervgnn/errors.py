"""Exceptions raised by intervgnn.

Every error a user can trigger derives from :class:`IntervgnnError` and from
the built-in exception that describes its kind (``ValueError`` for bad
values, ``KeyError`` is never used so messages print without quotes).
"""

from __future__ import annotations

import difflib
import reprlib

__all__ = [
    "IntervgnnError",
    "GraphError",
    "UnknownVariableError",
    "NetworkError",
    "ExactTooLarge",
    "UnknownNetworkError",
    "BIFParseError",
    "DataError",
    "QueryError",
    "ZeroEvidenceError",
    "LayerInputError",
    "UnsupportedQuery",
    "NotFittedError",
    "CheckpointError",
    "ConfigError",
    "NotIdentified",
    "WriteError",
    "RunError",
]


class IntervgnnError(Exception):
    """Base class of every error intervgnn raises on bad input."""


class GraphError(IntervgnnError, ValueError):
    """A causal graph is malformed (cycle, self-loop, duplicate edge)."""


class UnknownVariableError(GraphError):
    """A variable name is not part of the graph or network."""


class NetworkError(IntervgnnError, ValueError):
    """A Bayesian network's states or CPTs are invalid."""


class ExactTooLarge(NetworkError):
    """Exact inference would need an intermediate table beyond the bound (the network is too densely connected)."""


class UnknownNetworkError(IntervgnnError, ValueError):
    """A network name is neither in the catalog nor an existing BIF file."""


class BIFParseError(IntervgnnError, ValueError):
    """A BIF file could not be read; carries the file and line number.

    Parameters
    ----------
    message : str
        What was wrong.
    source : str
        File path (or ``"<string>"``).
    line : int
        1-based line number where the problem was found.
    """

    def __init__(self, message: str, source: str = "<string>", line: int | None = None):
        self.message = message
        self.source = source
        self.line = line
        where = f"{source}, line {line}" if line is not None else source
        super().__init__(f"{where}: {message}")


class DataError(IntervgnnError, ValueError):
    """Rows of data do not fit the declared variables and states."""


class QueryError(IntervgnnError, ValueError):
    """A query is malformed: unknown variable or state, overlapping roles."""


class ZeroEvidenceError(QueryError):
    """The evidence of a conditional query has probability zero."""


class LayerInputError(IntervgnnError, ValueError):
    """A message-passing layer got inputs of the wrong shape, dtype or kind."""


class UnsupportedQuery(IntervgnnError):
    """An estimator cannot answer this kind of query (the harness records it as such)."""


class NotIdentified(UnsupportedQuery):
    """The query is not identifiable on the diagram.

    ``identification`` holds the verdict (an
    :class:`~intervgnn.identify.Identification`, with the hedge).
    """

    def __init__(self, identification):
        self.identification = identification
        super().__init__(identification.describe())


class NotFittedError(IntervgnnError, RuntimeError):
    """An estimator was queried before ``fit``."""


class CheckpointError(IntervgnnError, ValueError):
    """A saved model is missing, tampered with, or does not match the data or graph."""


class ConfigError(IntervgnnError, ValueError):
    """An experiment config is invalid; the message names the key."""


class WriteError(IntervgnnError, OSError):
    """A file could not be written (missing folder, no permission, disk full); names the file.

    ``errno``, ``strerror`` and ``filename`` are those of the operating
    system error (its cause), so code that checks them keeps working.
    """

    def __str__(self) -> str:
        return str(self.args[0]) if self.args else ""


class RunError(IntervgnnError, RuntimeError):
    """Runs of a sweep failed; the other runs finished and were saved.

    ``failed`` maps each failed run's key to its exception; a later
    ``--resume`` does only the failed runs (and any never started).
    """

    def __init__(self, message: str, failed: dict):
        self.failed = failed
        super().__init__(message)


def did_you_mean(word, options) -> str:
    """`` (did you mean 'x'?)`` for the option nearest to ``word``, or ``""`` when none is near."""
    near = difflib.get_close_matches(str(word), [str(o) for o in options], n=1)
    return f" (did you mean '{near[0]}'?)" if near else ""


def shorten(text, limit: int = 80) -> str:
    """``text`` (as ``str``) for an error message: at most ``limit`` characters, cut ones ending in ``...``.

    >>> shorten("x" * 100, 10)
    'xxxxxxx...'
    """
    text = str(text)
    return text if len(text) <= limit else text[: max(limit - 3, 0)] + "..."


def short_repr(value, limit: int = 80) -> str:
    """``repr(value)`` for an error message, at most ``limit`` characters.

    Large or deeply nested containers are shown with :mod:`reprlib` (a few
    items per level, a few levels), so the work stays small whatever the
    value holds.

    >>> short_repr([["a", "b"], list(range(100))], 40)
    "[['a', 'b'], [0, 1, 2, 3, 4, 5, ...]]"
    """
    r = reprlib.Repr()
    r.maxstring = r.maxother = r.maxlong = limit
    r.maxlevel = 4
    return shorten(r.repr(value), limit)
