"""Discrete data: integer codes plus state names, with a per-row regime.

A :class:`Table` holds ``n`` rows over named discrete variables. Each value
is stored as an integer code into its variable's list of state names. Each
row also records its *regime*: which variables were set by an intervention
in that row (all ``False`` for an observational row).
"""

from __future__ import annotations

import csv
import io
import os
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

from ._io import atomic_open
from .errors import DataError, short_repr, shorten

__all__ = ["Table", "REGIME_COLUMN", "REGIME_SEPARATOR", "MISSING_MARKERS"]

#: Default name of the CSV column that lists a row's intervened variables.
REGIME_COLUMN = "regime"
#: Separator between variable names inside the regime column.
REGIME_SEPARATOR = ";"


def _is_missing(x) -> bool:
    """True for None, NaN and pandas' missing markers (NA, NaT)."""
    if x is None:
        return True
    if isinstance(x, (float, np.floating)):
        return bool(np.isnan(x))
    if type(x).__module__.startswith("pandas") and type(x).__name__ in ("NAType", "NaTType"):
        return True
    return False


#: CSV cells read as a missing value (besides an empty cell), unless declared as a state of their column;
#: the spellings spreadsheets, R and pandas write for "no value" (common practice, no source)
MISSING_MARKERS = frozenset({"NA", "N/A", "n/a", "NaN", "nan", "NULL", "null", "#N/A", "<NA>"})


def _factorize(col) -> tuple[list[str], np.ndarray]:
    """Sorted distinct strings of ``col`` and each row's index into them.

    A dict, not a fixed-width numpy string array: one very long cell would
    make such an array as wide as itself in every row.
    """
    index: dict[str, int] = {}
    first = [index.setdefault(x, len(index)) for x in col.tolist()]
    uniq = sorted(index)
    rank = np.empty(len(uniq), dtype=np.int64)
    rank[[index[u] for u in uniq]] = np.arange(len(uniq))
    return uniq, rank[np.asarray(first, dtype=np.int64)]


def _as_labels(values) -> np.ndarray:
    """Values as an object array of str, with missing values as ``""``."""
    return np.asarray(["" if _is_missing(x) else str(x) for x in values], dtype=object)


def _normalise_states(variables: Sequence[str], states) -> dict[str, tuple[str, ...]]:
    if isinstance(states, Mapping):
        missing = [v for v in variables if v not in states]
        if missing:
            raise DataError(f"no states given for variable '{missing[0]}'")
        out = {v: tuple(str(s) for s in states[v]) for v in variables}
    else:
        states = list(states)
        if len(states) != len(variables):
            raise DataError(f"{len(variables)} variables but {len(states)} state lists")
        out = {v: tuple(str(s) for s in st) for v, st in zip(variables, states)}
    for v, st in out.items():
        if len(st) == 0:
            raise DataError(f"variable '{v}' has no states")
        if len(set(st)) != len(st):
            dup = next(s for s in st if st.count(s) > 1)
            raise DataError(f"variable '{v}' lists state '{dup}' twice")
    return out


class Table:
    """Rows of discrete data over named variables.

    Parameters
    ----------
    codes : array_like of int, shape ``[n, V]``
        ``codes[r, j]`` indexes ``states[variables[j]]``.
    variables : sequence of str
        Column names, in column order.
    states : mapping or sequence
        State names per variable (a mapping by name, or a sequence aligned
        with ``variables``).
    intervened : array_like of bool, shape ``[n, V]``, optional
        ``intervened[r, j]`` is True when variable ``j`` was set by an
        intervention in row ``r``. Defaults to all False (observational).

    Raises
    ------
    DataError
        On duplicate variables, duplicate state names, a code out of range
        (the message names row and column), or misshapen arrays.

    Examples
    --------
    >>> t = Table.from_labels({"Pump": ["day", "night", "night"]}, states={"Pump": ["day", "night"]})
    >>> t.column("Pump").tolist()
    [0, 1, 1]
    >>> t.labels("Pump")
    ['day', 'night', 'night']
    """

    def __init__(self, codes, variables: Sequence[str], states, intervened=None):
        variables = tuple(str(v) for v in variables)
        if len(set(variables)) != len(variables):
            dup = next(v for v in variables if variables.count(v) > 1)
            raise DataError(f"column '{dup}' appears twice")
        self._variables = variables
        self._states = _normalise_states(variables, states)
        try:
            arr = np.asarray(codes)
        except (TypeError, ValueError):
            raise DataError(f"codes must be a rectangular array of shape [rows, {len(variables)}]") from None
        if arr.ndim == 1 and arr.size == 0:
            arr = np.zeros((0, len(variables)), dtype=np.int64)  # no rows, e.g. []
        if arr.ndim != 2 or arr.shape[1] != len(variables):
            raise DataError(f"codes must have shape [rows, {len(variables)}], got {tuple(arr.shape)}")
        if not np.issubdtype(arr.dtype, np.integer):
            raise DataError(f"codes must be integers, got dtype {arr.dtype}")
        arr = arr.astype(np.int64, order="K", copy=True)
        if arr.shape[0]:
            cards = np.array([len(self._states[v]) for v in variables])
            low, high = arr.min(axis=0), arr.max(axis=0)
            for j in np.flatnonzero((low < 0) | (high >= cards)):
                v, k = variables[j], int(cards[j])
                r = int(np.flatnonzero((arr[:, j] < 0) | (arr[:, j] >= k))[0])
                raise DataError(
                    f"row {r + 1}, column '{v}': code {int(arr[r, j])} is out of range for {k} states"
                )
        if intervened is None:
            mask = np.zeros(arr.shape, dtype=bool)
        else:
            try:
                mask = np.array(intervened, dtype=bool)
            except (TypeError, ValueError):
                raise DataError(f"intervened mask must be a rectangular array of shape {arr.shape}") from None
            if mask.ndim == 1 and mask.size == 0:
                mask = np.zeros(arr.shape, dtype=bool)
            if mask.shape != arr.shape:
                raise DataError(f"intervened mask has shape {mask.shape}, expected {arr.shape}")
        arr.setflags(write=False)
        mask.setflags(write=False)
        self._codes = arr
        self._intervened = mask
        self._col = {v: j for j, v in enumerate(variables)}

    @classmethod
    def _trusted(cls, codes: np.ndarray, variables, states, intervened: np.ndarray) -> Table:
        """Wrap arrays produced by intervgnn itself, without copying or checking them."""
        self = cls.__new__(cls)
        self._variables = tuple(variables)
        self._states = {v: tuple(states[v]) for v in self._variables}
        codes.setflags(write=False)
        intervened.setflags(write=False)
        self._codes = codes
        self._intervened = intervened
        self._col = {v: j for j, v in enumerate(self._variables)}
        return self

    # --------------------------------------------------------------- basics
    @property
    def variables(self) -> tuple[str, ...]:
        return self._variables

    @property
    def states(self) -> dict[str, tuple[str, ...]]:
        """State names per variable (a fresh dict)."""
        return dict(self._states)

    @property
    def cardinalities(self) -> tuple[int, ...]:
        return tuple(len(self._states[v]) for v in self._variables)

    @property
    def codes(self) -> np.ndarray:
        """Read-only integer codes, shape ``[n, V]``."""
        return self._codes

    @property
    def intervened(self) -> np.ndarray:
        """Read-only regime mask, shape ``[n, V]``."""
        return self._intervened

    @property
    def n_rows(self) -> int:
        return self._codes.shape[0]

    def __len__(self) -> int:
        return self._codes.shape[0]

    def __repr__(self) -> str:
        n_exp = int(self._intervened.any(axis=1).sum())
        return f"Table(rows={self.n_rows}, variables={len(self._variables)}, experimental_rows={n_exp})"

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Table):
            return NotImplemented
        return (
            self._variables == other._variables
            and self._states == other._states
            and np.array_equal(self._codes, other._codes)
            and np.array_equal(self._intervened, other._intervened)
        )

    __hash__ = None  # type: ignore[assignment]

    def _check_column(self, name: str) -> int:
        if name not in self._col:
            raise DataError(f"unknown column '{name}'; the table has: {', '.join(sorted(self._variables))}")
        return self._col[name]

    def column(self, name: str) -> np.ndarray:
        """Codes of one variable, shape ``[n]``."""
        return self._codes[:, self._check_column(name)]

    def labels(self, name: str) -> list[str]:
        """State names of one variable, one per row."""
        st = self._states[name] if name in self._states else None
        codes = self.column(name)
        return [st[c] for c in codes.tolist()]  # type: ignore[index]

    @property
    def is_observational(self) -> bool:
        """True when no row has an intervened variable."""
        return not bool(self._intervened.any())

    def regimes(self) -> list[tuple[str, ...]]:
        """The distinct intervened sets present, observational ``()`` first if present."""
        uniq = np.unique(self._intervened, axis=0) if self.n_rows else np.zeros((0, len(self._variables)), bool)
        out = [tuple(v for v, m in zip(self._variables, row) if m) for row in uniq]
        return sorted(out, key=lambda r: (len(r), r))

    # ----------------------------------------------------------- selection
    def take(self, rows) -> Table:
        """A new table with the given rows (indices or boolean mask).

        Raises
        ------
        DataError
            An index out of range, a mask of the wrong length, or rows that
            are neither integers nor booleans.
        """
        rows = np.asarray(rows)
        n = self.n_rows
        if rows.ndim != 1:
            raise DataError(f"rows must be a 1-d sequence of indices or a boolean mask, got shape {rows.shape}")
        if rows.size == 0 and rows.dtype != bool:
            rows = rows.astype(np.int64)  # [] arrives as float64
        if rows.dtype == bool:
            if rows.shape[0] != n:
                raise DataError(f"boolean mask has {rows.shape[0]} entries for {n} rows")
        elif np.issubdtype(rows.dtype, np.integer):
            out = (rows < -n) | (rows >= n)
            if out.any():
                raise DataError(f"row index {int(rows[out][0])} is out of range for {n} rows")
        else:
            raise DataError(f"rows must be integer indices or a boolean mask, got dtype {rows.dtype}")
        return Table(self._codes[rows], self._variables, self._states, self._intervened[rows])

    def select(self, variables: Iterable[str]) -> Table:
        """A new table with only the given columns (in the order given)."""
        cols = [self._check_column(v) for v in variables]
        names = [self._variables[j] for j in cols]
        return Table(self._codes[:, cols], names, {v: self._states[v] for v in names}, self._intervened[:, cols])

    def with_states(self, states: Mapping[str, Sequence[str]]) -> Table:
        """The same rows re-coded against declared state lists (variables not listed keep theirs).

        Raises
        ------
        DataError
            A value that is not among the declared states (names row and
            column).
        """
        codes = self._codes.copy()
        new_states = dict(self._states)
        for v, declared in states.items():
            j = self._check_column(v)
            declared = tuple(str(s) for s in declared)
            lookup = {s: i for i, s in enumerate(declared)}
            mapping = np.empty(len(self._states[v]), dtype=np.int64)
            for old, name in enumerate(self._states[v]):
                if name not in lookup:
                    used = np.flatnonzero(self._codes[:, j] == old)
                    if used.size == 0:
                        mapping[old] = 0
                        continue
                    r = int(used[0])
                    raise DataError(
                        f"row {r + 1}, column '{v}': unknown state '{name}'; "
                        f"states are: {', '.join(sorted(declared))}"
                    )
                mapping[old] = lookup[name]
            codes[:, j] = mapping[self._codes[:, j]]
            new_states[v] = declared
        return Table(codes, self._variables, new_states, self._intervened)

    def observational_rows(self) -> Table:
        """The rows with no intervened variable."""
        return self.take(~self._intervened.any(axis=1))

    def split(self, fraction: float, seed: int | None = None) -> tuple[Table, Table]:
        """Shuffle the rows with ``seed`` and split them ``fraction : 1 - fraction``."""
        is_number = isinstance(fraction, (int, float, np.integer, np.floating)) and not isinstance(fraction, bool)
        if not is_number or not 0.0 < fraction < 1.0:
            raise DataError(f"fraction must lie strictly between 0 and 1, got {fraction}")
        from .query import check_seed

        order = np.random.default_rng(check_seed(seed, allow_none=True)).permutation(self.n_rows)
        cut = int(round(fraction * self.n_rows))
        return self.take(order[:cut]), self.take(order[cut:])

    @classmethod
    def concat(cls, tables: Sequence[Table]) -> Table:
        """Stack tables with identical variables and states."""
        tables = list(tables)
        if not tables:
            raise DataError("nothing to concatenate")
        first = tables[0]
        for t in tables[1:]:
            if t._variables != first._variables or t._states != first._states:
                raise DataError("tables to concatenate must have the same variables and states")
        return cls(
            np.concatenate([t._codes for t in tables]),
            first._variables,
            first._states,
            np.concatenate([t._intervened for t in tables]),
        )

    # ------------------------------------------------------------- builders
    @classmethod
    def from_labels(
        cls,
        columns: Mapping[str, Sequence[object]],
        states: Mapping[str, Sequence[str]] | None = None,
        intervened: Sequence[Iterable[str]] | None = None,
    ) -> Table:
        """Build from columns of state names.

        Parameters
        ----------
        columns : mapping of str to sequence
            Column name to one state name per row.
        states : mapping, optional
            Declared states per variable. Without it, each variable's states
            are the distinct values found, sorted.
        intervened : sequence of iterables of str, optional
            Per row, the names of the variables set by intervention.

        Raises
        ------
        DataError
            Missing or extra column, unknown state or missing value (None,
            NaN or ``""``; the message names row and column).
        """
        names = list(columns)
        return cls._from_strings(
            names,
            [_as_labels(columns[v]) for v in names],
            states,
            intervened,
            row_label=lambda r: f"row {r + 1}",
        )

    @classmethod
    def _from_strings(
        cls, names, cols, states, intervened, row_label, n=None, regime_label="regime", partial=False, markers=frozenset()
    ) -> Table:
        # partial: ``states`` may leave out columns (their states come from the data) and name
        # variables that are not columns (the caller checks the columns); markers: cells that
        # are missing values unless declared as a state of their column
        if states is not None and not partial:
            expected = list(states)
            for v in names:
                if v not in states:
                    raise DataError(f"unexpected column '{v}'; expected columns: {', '.join(expected)}")
            for v in expected:
                if v not in names:
                    raise DataError(f"missing column '{v}'")
            order = expected
        else:
            order = names
        if n is None:
            n = len(cols[0]) if cols else 0
        for v, c in zip(names, cols):
            if len(c) != n:
                raise DataError(f"column '{v}' has {len(c)} values, expected {n}")
        by_name = dict(zip(names, cols))
        codes = np.empty((n, len(order)), dtype=np.int64)
        final_states: dict[str, tuple[str, ...]] = {}
        for j, v in enumerate(order):
            col = by_name[v]
            uniq, inverse = _factorize(col)  # cells are str: _as_labels and read_csv make them so
            declared = None if states is None or v not in states else tuple(str(s) for s in states[v])
            if n == 0 and declared is None:
                raise DataError(f"no rows, so the states of '{shorten(v)}' cannot be read from the data; give its states")
            for u_i, u in enumerate(uniq):
                if u == "":
                    r = int(np.flatnonzero(inverse == u_i)[0])
                    raise DataError(f"{row_label(r)}, column '{shorten(v)}': missing value")
                if u in markers and (declared is None or u not in declared):
                    r = int(np.flatnonzero(inverse == u_i)[0])
                    raise DataError(
                        f"{row_label(r)}, column '{shorten(v)}': missing value '{u}'; drop or fill such rows "
                        f"(if '{u}' is a state, declare it among the variable's states)"
                    )
            st = declared if declared is not None else tuple(uniq)
            lookup = {s: i for i, s in enumerate(st)}
            mapping = np.empty(len(uniq), dtype=np.int64)
            for u_i, u in enumerate(uniq):
                if u not in lookup:
                    r = int(np.flatnonzero(inverse == u_i)[0])
                    listed = shorten(", ".join(sorted(st)), 200)
                    raise DataError(f"{row_label(r)}, column '{shorten(v)}': unknown state '{shorten(u)}'; states are: {listed}")
                mapping[u_i] = lookup[u]
            codes[:, j] = mapping[inverse.reshape(-1)] if n else mapping[:0]
            final_states[v] = st
        mask = None
        if intervened is not None:
            intervened = list(intervened)
            if len(intervened) != n:
                raise DataError(f"{len(intervened)} regimes given for {n} rows")
            mask = np.zeros((n, len(order)), dtype=bool)
            pos = {v: j for j, v in enumerate(order)}
            for r, names_r in enumerate(intervened):
                for name in names_r:
                    if name not in pos:
                        raise DataError(
                            f"{row_label(r)}, {regime_label}: unknown variable '{shorten(name)}'; "
                            f"variables are: {shorten(', '.join(sorted(order)), 200)}"
                        )
                    mask[r, pos[name]] = True
        return cls(codes, order, final_states, mask)

    # ------------------------------------------------------------------ CSV
    @classmethod
    def read_csv(
        cls,
        path: str | os.PathLike | io.TextIOBase,
        states: Mapping[str, Sequence[str]] | None = None,
        regime_column: str | None = REGIME_COLUMN,
    ) -> Table:
        """Read a CSV file with a header row of variable names.

        Parameters
        ----------
        path : path or text file
            The CSV file.
        states : mapping, optional
            Declared states per variable; the columns must be exactly these
            variables (plus the regime column). Without it, every column is
            a variable and its states are the distinct values, sorted.
        regime_column : str or None, default ``"regime"``
            A column (optional in the file) listing, per row, the variables
            set by intervention, separated by ``;``. Empty means observational.

        Raises
        ------
        DataError
            Empty file, a header without rows (unless ``states`` declares
            every column's states), ragged line, missing or extra column,
            unknown state, missing value: the message names the file, row
            and column. Blank lines are skipped (in a one-column file only
            trailing ones: a blank line between rows is a missing value
            there).

        Notes
        -----
        A missing value is an error, because the estimators have no model of
        missing data: drop or fill such rows first. A cell is missing when it
        is empty (or only spaces) or holds one of :data:`MISSING_MARKERS`
        (``NA``, ``N/A``, ``n/a``, ``NaN``, ``nan``, ``NULL``, ``null``,
        ``#N/A``, ``<NA>``), unless that marker is a declared state of its
        column.
        """
        return cls._read_csv(path, states, regime_column)

    @classmethod
    def _read_csv(cls, path, states, regime_column, partial: bool = False) -> Table:
        # partial: ``states`` may cover only some columns, and name variables that are not
        # columns (userdata.read_csv checks the columns against the graph itself)
        source = str(path) if not isinstance(path, io.TextIOBase) else getattr(path, "name", "<stream>")

        def records(fh):
            # (first line, fields) per CSV record; a quoted field may span lines
            reader = csv.reader(fh)
            first = 1
            try:
                for fields in reader:
                    yield first, fields
                    first = reader.line_num + 1
            except csv.Error as exc:
                raise DataError(f"{source}, line {reader.line_num}: {exc}") from None

        try:
            if isinstance(path, io.TextIOBase):
                text_rows = list(records(path))
            else:
                with open(path, newline="", encoding="utf-8-sig") as fh:
                    text_rows = list(records(fh))
        except FileNotFoundError:
            raise DataError(f"{source}: no such file") from None
        except UnicodeDecodeError as exc:
            raise DataError(f"{source}: the file is not UTF-8 text ({exc.reason} at byte {exc.start})") from None
        except OSError as exc:
            why = f"{exc.__class__.__name__}: {exc.strerror or exc}"
            raise DataError(f"{source}: cannot read the file ({why})") from None
        while text_rows and not text_rows[0][1]:  # blank lines before the header
            text_rows.pop(0)
        if not text_rows or not any(h.strip() for h in text_rows[0][1]):
            raise DataError(f"{source}: the file is empty; expected a header row")
        header = [h.strip() for h in text_rows[0][1]]
        if header[0].startswith("\ufeff"):  # a stream opened without utf-8-sig
            header[0] = header[0][1:].strip()
        # a blank (or whitespace-only) line carries no row; in a one-column file
        # it is that column's value left empty (a missing value) unless it trails
        records_ = text_rows[1:]
        blank = lambda f: not f or (len(header) > 1 and len(f) == 1 and not f[0].strip())  # noqa: E731
        while records_ and blank(records_[-1][1]):  # trailing blank lines
            records_.pop()
        data_rows = [(first, fields or [""]) for first, fields in records_ if len(header) == 1 or not blank(fields)]
        body = [fields for _, fields in data_rows]
        lines = [first for first, _ in data_rows]
        for line, row in zip(lines, body):
            if len(row) != len(header):
                raise DataError(f"{source}, line {line}: expected {len(header)} fields, got {len(row)}")
        seen = set()
        for j, h in enumerate(header):
            if not h:
                raise DataError(f"{source}: column {j + 1} of the header has no name")
            if h in seen:
                raise DataError(f"{source}: column '{shorten(h)}' appears twice in the header")
            seen.add(h)
        matrix = np.array(body, dtype=object).reshape(len(body), len(header))
        regimes = None
        names = header
        if regime_column is not None and regime_column in header:
            j = header.index(regime_column)
            regimes = [
                [s.strip() for s in cell.split(REGIME_SEPARATOR) if s.strip()] for cell in matrix[:, j].tolist()
            ]
            names = [h for h in header if h != regime_column]
            matrix = np.delete(matrix, j, axis=1)
        if not body and (states is None or (partial and any(v not in states for v in names))):
            raise DataError(f"{source}: the file has a header but no rows")
        cols = [np.array([c.strip() for c in matrix[:, j].tolist()], dtype=object) for j in range(len(names))]
        try:
            return cls._from_strings(
                names,
                cols,
                states,
                regimes,
                row_label=lambda r: f"row {r + 1} (line {lines[r]})",
                n=len(body),
                regime_label=f"column '{regime_column}'",
                partial=partial,
                markers=MISSING_MARKERS,
            )
        except DataError as exc:
            raise DataError(f"{source}: {exc}") from None

    def to_csv(self, path: str | os.PathLike | io.TextIOBase, regime_column: str | None = REGIME_COLUMN) -> None:
        """Write the rows as CSV with a header row (and a regime column if any row has one).

        The file is written to a temporary name and moved into place, so a
        failure never leaves half a file behind.

        Raises
        ------
        DataError
            A variable is named like ``regime_column`` (:meth:`read_csv`
            would read that column as the regimes), or an intervened
            variable's name contains ``;``.
        """
        write_regime = regime_column is not None and not self.is_observational
        if regime_column is not None and regime_column in self._variables:
            raise DataError(
                f"regime column '{regime_column}' clashes with a variable of that name; "
                "choose another regime_column (or None) and read the file back with the same"
            )
        if write_regime:
            for j in np.flatnonzero(self._intervened.any(axis=0)):
                v = self._variables[j]
                if REGIME_SEPARATOR in v:
                    raise DataError(
                        f"variable '{v}' is intervened but its name contains '{REGIME_SEPARATOR}', "
                        "which separates names in the regime column"
                    )

        def emit(fh):
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(list(self._variables) + ([regime_column] if write_regime else []))
            labels = [np.asarray(self._states[v], dtype=object)[self._codes[:, j]] for j, v in enumerate(self._variables)]
            if write_regime:
                names = np.asarray(self._variables, dtype=object)
                reg = [REGIME_SEPARATOR.join(names[m].tolist()) for m in self._intervened]
                labels.append(np.asarray(reg, dtype=object))
            w.writerows(zip(*[lab.tolist() for lab in labels]) if labels else [])

        if isinstance(path, io.TextIOBase):
            emit(path)
            return
        with atomic_open(path, "w", newline="") as fh:
            emit(fh)

    # --------------------------------------------------------------- pandas
    def to_pandas(self, regime_column: str | None = None):
        """A ``pandas.DataFrame`` of categorical columns (states in declared order).

        With ``regime_column`` set, a column of ``;``-joined intervened
        variables is added.
        """
        import pandas as pd

        if regime_column is not None and regime_column in self._variables:
            raise DataError(f"regime column '{regime_column}' clashes with a variable of that name")
        data = {
            v: pd.Categorical.from_codes(self._codes[:, j], categories=list(self._states[v]))
            for j, v in enumerate(self._variables)
        }
        df = pd.DataFrame(data)
        if regime_column is not None:
            names = np.asarray(self._variables, dtype=object)
            df[regime_column] = [REGIME_SEPARATOR.join(names[m].tolist()) for m in self._intervened]
        return df

    @classmethod
    def from_pandas(cls, df, states: Mapping[str, Sequence[str]] | None = None, regime_column: str | None = None) -> Table:
        """Build from a ``pandas.DataFrame`` of state names (or categoricals).

        ``states`` may declare the states of only some columns (say, those
        a graph file declares); every variable it names must be a column.
        Columns it leaves out keep their category order as states if
        categorical, else their distinct values, sorted. Columns follow
        ``states`` when it names them all, else the frame's order. Missing
        values (None, NaN, ``pd.NA``) are errors. A regime cell is a
        ``;``-separated string or a list of variable names; a missing or
        empty cell means observational.
        :func:`intervgnn.userdata.from_dataframe` builds the table for a
        graph file.

        Raises
        ------
        DataError
            Duplicate column, a variable of ``states`` that is not a column,
            a frame without rows for a column whose states are not given,
            missing value, unknown state, or a malformed regime cell: the
            message names row and column.
        """
        import pandas as pd

        labels = [c for c in df.columns if c != regime_column]
        names = [str(c) for c in labels]
        seen: set[str] = set()
        for v in names:
            if v in seen:
                raise DataError(f"column '{shorten(v)}' appears twice")
            seen.add(v)
        if states is not None:
            for v in states:
                if v not in seen:
                    raise DataError(f"missing column '{shorten(v)}'")
        n = len(df)
        regimes = None
        if regime_column is not None and regime_column in df.columns:
            regimes = []
            for r, cell in enumerate(df[regime_column].tolist()):
                if isinstance(cell, str):
                    regimes.append([x.strip() for x in cell.split(REGIME_SEPARATOR) if x.strip()])
                elif isinstance(cell, (list, tuple, set, frozenset)) and all(isinstance(x, str) for x in cell):
                    regimes.append(list(cell))
                elif _is_missing(cell):
                    regimes.append([])
                else:
                    raise DataError(
                        f"row {r + 1}, column '{regime_column}': expected variable names separated by "
                        f"'{REGIME_SEPARATOR}', got {short_repr(cell)}"
                    )
        cols = [_as_labels(df.iloc[:, j].tolist()) for j, c in enumerate(df.columns) if c != regime_column]
        partial = states is None or any(v not in states for v in names)
        if partial:  # the others: category order, or the distinct values found
            declared = dict(states or {})
            for v, c in zip(names, labels):
                if v not in declared and isinstance(df[c].dtype, pd.CategoricalDtype):
                    declared[v] = [str(x) for x in df[c].cat.categories]
            states = declared
        return cls._from_strings(
            names,
            cols,
            states,
            regimes,
            row_label=lambda r: f"row {r + 1}",
            n=n,
            regime_label=f"column '{regime_column}'",
            partial=partial,
        )
