"""Relational data: observed attribute values of every instance of a skeleton, in and out.

A :class:`RelationalData` holds a :class:`~intervgnn.relational.Skeleton`
(and so its schema) and, per entity type, integer codes into the schema's
state lists: ``values[type][draw, instance, attribute]``, instances in the
skeleton's order and attributes in the schema's order. Several draws are
several worlds over the same skeleton (e.g. the rows of a ground network's
sample); the files and :class:`~torch_geometric.data.HeteroData` hold one.

Layouts
-------
CSV folder (UTF-8, a header row)
    ``<entity type>.csv`` with a column ``id`` and one column per attribute
    (state names); ``<relationship>.csv`` with columns ``source`` and
    ``target`` (instance ids). The skeleton part is read by
    :func:`~intervgnn.relational.read_skeleton`; other columns are ignored.
SQLite database file
    One table per entity type and per relationship, named and with columns
    as in the CSV folder; values are text (whole numbers are read as their
    decimal text). Other tables are ignored; rows are read in rowid order.
HeteroData
    Node type = entity type: ``x`` (``torch.long``, ``[instances,
    attributes]``, the codes), ``node_id`` (list of instance ids) and
    ``attributes`` (list of attribute names, schema order). Edge type =
    ``(source type, relationship, target type)``: ``edge_index``
    (``torch.long``, ``[2, links]``, positions into the instance order).

Errors from a file name the file (or table), the line (or row) and the column.
"""

from __future__ import annotations

import os
import sqlite3
import tempfile
from collections.abc import Mapping

import numpy as np

from .._io import atomic_open, make_folder
from ..errors import DataError, WriteError, did_you_mean, short_repr, shorten
from ..table import Table
from .model import _WORD, Schema, Template, node_name
from .skeleton import MAX_INSTANCES, MAX_LINKS, Skeleton, _read_csv, read_skeleton, refuse_unknown_keys

__all__ = ["RelationalData"]


def _states_text(states) -> str:
    return shorten(", ".join(states), 80)


def _code_text(schema: Schema, t: str, a: str, value: str, where: str) -> DataError:
    states = schema.entities[t][a]
    return DataError(
        f"{where}: {short_repr(value)} is not a state of '{t}.{a}'; states are: {_states_text(states)}"
        f"{did_you_mean(value, states)}"
    )


def _code_rows(schema: Schema, t: str, rows, where) -> np.ndarray:
    """Codes ``[instances, attributes]`` of ``rows`` (``(locator, state names)``); ``where(loc, column)`` locates."""
    attrs = list(schema.entities[t])
    lookups = [{s: k for k, s in enumerate(schema.entities[t][a])} for a in attrs]
    out = np.empty((len(rows), len(attrs)), dtype=np.int64)
    for r, (loc, names) in enumerate(rows):
        for j, (a, name) in enumerate(zip(attrs, names)):
            code = lookups[j].get(name)
            if code is None:
                raise _code_text(schema, t, a, name, where(loc, a))
            out[r, j] = code
    return out


class RelationalData:
    """Observed attribute values of the instances of a skeleton (one or several draws).

    Parameters
    ----------
    skeleton : Skeleton
        The instances and links; its schema gives the attributes and states.
    values : mapping of str to array_like of int
        For every entity type, codes of shape ``[instances, attributes]``
        (one draw) or ``[draws, instances, attributes]``; ``values[t][..., i,
        j]`` indexes the states of attribute ``j`` (schema order) of instance
        ``i`` (skeleton order). Every type has the same number of draws.

    Raises
    ------
    DataError
        Not a skeleton, a missing or unknown entity type, values that are not
        integers, an array of the wrong shape, types with different numbers
        of draws, or a code that is not a state (the message names the type,
        draw, instance and attribute).

    Examples
    --------
    >>> schema = Schema({"hive": {"Treated": ["no", "yes"]}})
    >>> data = RelationalData(Skeleton(schema, {"hive": ["1", "2"]}), {"hive": [[1], [0]]})
    >>> data.num_draws, data.values["hive"].shape
    (1, (1, 2, 1))
    >>> data.labels("hive", "Treated")
    ['yes', 'no']
    """

    def __init__(self, skeleton: Skeleton, values: Mapping):
        if not isinstance(skeleton, Skeleton):
            raise DataError(f"skeleton must be a Skeleton, got {type(skeleton).__name__}")
        schema = skeleton.schema
        if not isinstance(values, Mapping):
            raise DataError(f"values must be a mapping of entity type -> codes, got {type(values).__name__}")
        refuse_unknown_keys(values, schema.entities, "values", "entity type", "types")
        out: dict[str, np.ndarray] = {}
        draws = None
        for t, attrs in schema.entities.items():
            if t not in values:
                raise DataError(f"no values are given for entity type '{t}'")
            n, k = len(skeleton.instances[t]), len(attrs)
            try:
                arr = np.asarray(values[t])
            except (TypeError, ValueError):
                arr = None
            if arr is None or arr.dtype == object:
                raise DataError(f"values of '{t}' must be a rectangular array of integer codes, got {short_repr(values[t])}")
            if arr.ndim == 2:
                arr = arr[None]
            if arr.ndim != 3 or arr.shape[1:] != (n, k):
                raise DataError(
                    f"values of '{t}' have shape {tuple(np.shape(values[t]))}, expected [{n}, {k}] "
                    f"([instances, attributes]) or [draws, {n}, {k}]"
                )
            if not np.issubdtype(arr.dtype, np.integer):
                raise DataError(f"values of '{t}' must be integer codes into the states, got dtype {arr.dtype}")
            if draws is None:
                draws = arr.shape[0]
            elif arr.shape[0] != draws:
                raise DataError(f"values of '{t}' have {arr.shape[0]} draws, those of the other types {draws}")
            arr = arr.astype(np.int64, copy=True)
            cards = np.array([len(s) for s in attrs.values()], dtype=np.int64)
            bad = (arr < 0) | (arr >= cards)
            if bad.any():
                d, i, j = (int(x[0]) for x in np.nonzero(bad))
                a = list(attrs)[j]
                raise DataError(
                    f"values of '{t}', draw {d + 1}, instance '{skeleton.instances[t][i]}', attribute '{a}': "
                    f"code {int(arr[d, i, j])} is not a state; '{t}.{a}' has {len(attrs[a])} states "
                    f"({_states_text(attrs[a])}), codes 0 to {len(attrs[a]) - 1}"
                )
            arr.setflags(write=False)
            out[t] = arr
        self.skeleton = skeleton
        self._values = out

    # ----------------------------------------------------------------- basics
    @property
    def schema(self) -> Schema:
        return self.skeleton.schema

    @property
    def values(self) -> dict[str, np.ndarray]:
        """Read-only codes per entity type, shape ``[draws, instances, attributes]`` (a fresh dict)."""
        return dict(self._values)

    @property
    def num_draws(self) -> int:
        return next(iter(self._values.values())).shape[0]

    def draw(self, k: int) -> RelationalData:
        """The data of draw ``k`` (from 0) alone."""
        n = self.num_draws
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or not 0 <= k < n:
            raise DataError(f"draw must be a whole number from 0 to {n - 1}, got {short_repr(k)}")
        return RelationalData(self.skeleton, {t: v[k] for t, v in self._values.items()})

    def labels(self, entity: str, attribute: str, draw: int = 0) -> list[str]:
        """State names of ``entity.attribute`` of every instance in draw ``draw``."""
        if (not isinstance(entity, str) or not isinstance(attribute, str) or entity not in self.schema.entities
                or attribute not in self.schema.entities[entity]):
            raise DataError(f"unknown attribute {short_repr(entity)}.{short_repr(attribute)} of the schema")
        j = list(self.schema.entities[entity]).index(attribute)
        states = self.schema.entities[entity][attribute]
        return [states[c] for c in self.draw(draw)._values[entity][0, :, j].tolist()]

    def __eq__(self, other) -> bool:
        if not isinstance(other, RelationalData):
            return NotImplemented
        sk, ok = self.skeleton, other.skeleton
        return (
            sk.schema == ok.schema and sk.instances == ok.instances and sk.links == ok.links
            and all(np.array_equal(v, other._values[t]) for t, v in self._values.items())
        )

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"RelationalData({self.skeleton!r}, draws={self.num_draws})"

    def _one_draw(self, what: str) -> dict[str, np.ndarray]:
        if self.num_draws != 1:
            raise DataError(f"{what} holds one draw and this data has {self.num_draws}; pick one with .draw(k)")
        return {t: v[0] for t, v in self._values.items()}

    # ------------------------------------------------------- ground networks
    def _ground_names(self) -> list[str]:
        sk = self.skeleton
        return [node_name(t, i, a) for t, attrs in self.schema.entities.items() for i in sk.instances[t] for a in attrs]

    @classmethod
    def from_ground_rows(cls, template_or_schema, skeleton: Skeleton, table: Table) -> RelationalData:
        """Data from rows of the ground network: one draw per row of ``table``.

        Parameters
        ----------
        template_or_schema : Template or Schema
        skeleton : Skeleton
            The skeleton the network was grounded on (same schema).
        table : Table
            E.g. ``ground(template, skeleton).sample(n, seed=...)``: one
            column per ground variable (:func:`~intervgnn.relational.node_name`).

        Raises
        ------
        DataError
            A skeleton over another schema, a missing column or one that is
            not a ground variable of the skeleton, a state not in the schema
            (row and column named), or a row with intervened variables
            (relational data holds observed worlds; keep
            ``table.observational_rows()``).
        """
        if isinstance(template_or_schema, Template):
            schema = template_or_schema.schema
        elif isinstance(template_or_schema, Schema):
            schema = template_or_schema
        else:
            raise DataError(f"expected a Template or a Schema, got {type(template_or_schema).__name__}")
        if not isinstance(skeleton, Skeleton):
            raise DataError(f"skeleton must be a Skeleton, got {type(skeleton).__name__}")
        if skeleton.schema != schema:
            raise DataError("the skeleton is over another schema; build both from one schema")
        if not isinstance(table, Table):
            raise DataError(f"table must be an intervgnn Table, got {type(table).__name__}")
        names = [node_name(t, i, a) for t, attrs in schema.entities.items() for i in skeleton.instances[t] for a in attrs]
        wanted = set(names)
        for v in table.variables:
            if v not in wanted:
                raise DataError(
                    f"column '{shorten(v)}' is not a ground variable of this skeleton; sample the network "
                    "grounded on it"
                )
        for v in names:
            if v not in table._col:
                raise DataError(f"the table has no column '{v}'; sample the network grounded on this skeleton")
        if table.intervened.any():
            r, j = (int(x[0]) for x in np.nonzero(table.intervened))
            raise DataError(
                f"row {r + 1}, column '{table.variables[j]}': set by an intervention; relational data holds "
                "observed draws only (keep table.observational_rows())"
            )
        declared = {}
        for t, attrs in schema.entities.items():
            for i in skeleton.instances[t]:
                for a, states in attrs.items():
                    declared[node_name(t, i, a)] = states
        table = table.with_states({v: s for v, s in declared.items() if table.states[v] != s})
        codes = table.codes[:, [table._col[v] for v in names]]
        values, start = {}, 0
        for t, attrs in schema.entities.items():
            n, k = len(skeleton.instances[t]), len(attrs)
            values[t] = codes[:, start : start + n * k].reshape(-1, n, k)
            start += n * k
        return cls(skeleton, values)

    def to_ground_table(self) -> Table:
        """The draws as rows of a :class:`~intervgnn.Table` over the ground variables (ground order)."""
        names = self._ground_names()
        parts = [v.reshape(v.shape[0], -1) for v in self._values.values()]
        states = {
            node_name(t, i, a): s
            for t, attrs in self.schema.entities.items()
            for i in self.skeleton.instances[t]
            for a, s in attrs.items()
        }
        return Table(np.concatenate(parts, axis=1), names, states)

    # ------------------------------------------------------------ CSV folder
    @classmethod
    def from_csv_folder(cls, folder: str | os.PathLike, schema: Schema) -> RelationalData:
        """Read one draw from a folder of CSV files (see the module notes).

        Raises
        ------
        DataError
            Anything :func:`~intervgnn.relational.read_skeleton` reports (a
            missing folder or file, a link to an unknown instance, a type with
            no instances, ...), a missing attribute column, or a value that is
            not a state of its attribute; the message names the file, line and
            column.
        """
        if not isinstance(schema, Schema):
            raise DataError(f"schema must be a Schema, got {type(schema).__name__}")
        folder = os.fspath(folder)
        skeleton = read_skeleton(folder, schema)
        values = {}
        for t, attrs in schema.entities.items():
            path = os.path.join(folder, f"{t}.csv")
            rows = _read_csv(path, ("id", *attrs))
            if [r[1][0] for r in rows] != list(skeleton.instances[t]):
                raise DataError(f"{path}: the file changed while it was read; read it again")
            values[t] = _code_rows(
                schema, t, [(line, r[1:]) for line, r in rows], lambda line, a: f"{path}, line {line}, column '{a}'"
            )
        return cls(skeleton, values)

    def to_csv_folder(self, folder: str | os.PathLike) -> None:
        """Write the one draw as a folder of CSV files (created if missing; each file written atomically).

        Raises
        ------
        DataError
            More than one draw.
        WriteError
            A file cannot be written.
        """
        import csv

        values = self._one_draw("a CSV folder")
        folder = os.fspath(folder)
        make_folder(folder)
        for t, attrs in self.schema.entities.items():
            states = list(attrs.values())
            with atomic_open(os.path.join(folder, f"{t}.csv"), "w", newline="") as fh:
                w = csv.writer(fh, lineterminator="\n")
                w.writerow(["id", *attrs])
                for i, row in zip(self.skeleton.instances[t], values[t].tolist()):
                    w.writerow([i, *(s[c] for s, c in zip(states, row))])
        for r, pairs in self.skeleton.links.items():
            with atomic_open(os.path.join(folder, f"{r}.csv"), "w", newline="") as fh:
                w = csv.writer(fh, lineterminator="\n")
                w.writerow(["source", "target"])
                w.writerows(pairs)

    # ---------------------------------------------------------------- SQLite
    @classmethod
    def from_sqlite(cls, path: str | os.PathLike, schema: Schema) -> RelationalData:
        """Read one draw from an SQLite database file (see the module notes).

        Raises
        ------
        DataError
            A missing file or one that is not an SQLite database, a missing
            table or column, an empty (NULL) or non-text value, a bad or
            repeated id, a type with no instances, a link to an unknown
            instance or a repeated link, a value that is not a state of its
            attribute, or more than :data:`~intervgnn.relational.MAX_INSTANCES`
            instances or :data:`~intervgnn.relational.MAX_LINKS` links; the
            message names the file, table, row and column.
        """
        if not isinstance(schema, Schema):
            raise DataError(f"schema must be a Schema, got {type(schema).__name__}")
        path = os.fspath(path)
        if os.path.isdir(path):
            raise DataError(f"{path}: a folder, expected an SQLite database file")
        if not os.path.isfile(path):
            raise DataError(f"{path}: no such file (expected an SQLite database)")
        try:
            from urllib.parse import quote

            con = sqlite3.connect(f"file:{quote(os.path.abspath(path))}?mode=ro", uri=True)
        except sqlite3.Error as exc:
            raise DataError(f"{path}: cannot open the database ({shorten(exc)})") from None
        try:
            return cls._read_sqlite(con, path, schema)
        except sqlite3.Error as exc:
            raise DataError(f"{path}: cannot read the database ({shorten(exc)})") from None
        finally:
            con.close()

    @classmethod
    def _read_sqlite(cls, con, path: str, schema: Schema) -> RelationalData:
        tables = {row[0] for row in con.execute("SELECT name FROM sqlite_master WHERE type IN ('table', 'view')")}

        def rows(name: str, columns: tuple[str, ...], limit: int):
            if name not in tables:
                raise DataError(
                    f"{path}: no table '{name}'; expected tables: "
                    f"{', '.join([*schema.entities, *schema.relationships])}{did_you_mean(name, tables)}"
                )
            have = [row[1] for row in con.execute(f'PRAGMA table_info("{name}")')]
            for c in columns:
                if c not in have:
                    raise DataError(
                        f"{path}, table '{name}': no column '{c}'; the columns are: {short_repr(have)}"
                        f"{did_you_mean(c, have)}"
                    )
            cols = ", ".join(f'"{c}"' for c in columns)
            try:
                cur = con.execute(f'SELECT {cols} FROM "{name}" ORDER BY rowid LIMIT ?', (limit + 1,))
            except sqlite3.OperationalError:  # a table without rowid: its own order
                cur = con.execute(f'SELECT {cols} FROM "{name}" LIMIT ?', (limit + 1,))
            out = []
            for k, raw in enumerate(cur, 1):
                if k > limit:
                    raise DataError(f"{path}, table '{name}': more than {limit:,} rows; use a smaller skeleton")
                vals = []
                for c, x in zip(columns, raw):
                    if isinstance(x, int) and not isinstance(x, bool):
                        x = str(x)
                    elif not isinstance(x, str):
                        what = "empty (NULL)" if x is None else f"{short_repr(x)}, not text"
                        raise DataError(f"{path}, table '{name}', row {k}, column '{c}': the value is {what}")
                    vals.append(x.strip())
                out.append((k, tuple(vals)))
            return out

        instances, values, total = {}, {}, 0
        for t, attrs in schema.entities.items():
            got = rows(t, ("id", *attrs), MAX_INSTANCES - total)
            if not got:
                raise DataError(f"{path}, table '{t}': entity type '{t}' has no instances; add rows with an id")
            first: dict[str, int] = {}
            for k, (i, *_rest) in got:
                where = f"{path}, table '{t}', row {k}, column 'id'"
                if not _WORD.match(i) or len(i) > 100:
                    raise DataError(
                        f"{where}: instance id {short_repr(i)} is not valid: use letters, digits, '_', '.' and '-' "
                        "(at most 100 characters)"
                    )
                if i in first:
                    raise DataError(f"{where}: instance id '{i}' is repeated (first on row {first[i]})")
                first[i] = k
            total += len(got)
            instances[t] = [r[0] for _, r in got]
            values[t] = _code_rows(
                schema, t, [(k, r[1:]) for k, r in got], lambda k, a, t=t: f"{path}, table '{t}', row {k}, column '{a}'"
            )
        known = {t: set(ids) for t, ids in instances.items()}
        links, count = {}, 0
        for r, rel in schema.relationships.items():
            got = rows(r, ("source", "target"), MAX_LINKS - count)
            count += len(got)
            first_link: dict[tuple[str, str], int] = {}
            for k, (src, dst) in got:
                for col, end, t in (("source", src, rel.source), ("target", dst, rel.target)):
                    if end not in known[t]:
                        raise DataError(
                            f"{path}, table '{r}', row {k}, column '{col}': {short_repr(end)} is not an instance "
                            f"of '{t}'{did_you_mean(end, known[t]) if len(known[t]) <= 10_000 else ''}"
                        )
                if (src, dst) in first_link:
                    raise DataError(
                        f"{path}, table '{r}', row {k}: the link {src} -> {dst} is repeated "
                        f"(first on row {first_link[(src, dst)]})"
                    )
                first_link[(src, dst)] = k
            links[r] = [p for _, p in got]
        return cls(Skeleton(schema, instances, links), values)

    def to_sqlite(self, path: str | os.PathLike) -> None:
        """Write the one draw as a new SQLite database file, replacing ``path`` atomically.

        Raises
        ------
        DataError
            More than one draw.
        WriteError
            The file cannot be written.
        """
        values = self._one_draw("an SQLite database")
        path = os.fspath(path)
        folder = os.path.dirname(os.path.abspath(path))
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{os.path.basename(path)}.", suffix=".intervgnn.tmp", dir=folder)
            os.close(fd)
        except OSError as exc:
            raise WriteError(f"{path}: cannot write the file ({exc.strerror or exc})") from exc
        try:
            con = sqlite3.connect(tmp)
            try:
                with con:
                    for t, attrs in self.schema.entities.items():
                        states = list(attrs.values())
                        cols = ", ".join(['"id" TEXT', *(f'"{a}" TEXT' for a in attrs)])
                        con.execute(f'CREATE TABLE "{t}" ({cols})')
                        marks = ", ".join("?" * (len(attrs) + 1))
                        con.executemany(
                            f'INSERT INTO "{t}" VALUES ({marks})',
                            ([i, *(s[c] for s, c in zip(states, row))]
                             for i, row in zip(self.skeleton.instances[t], values[t].tolist())),
                        )
                    for r, pairs in self.skeleton.links.items():
                        con.execute(f'CREATE TABLE "{r}" ("source" TEXT, "target" TEXT)')
                        con.executemany(f'INSERT INTO "{r}" VALUES (?, ?)', pairs)
            finally:
                con.close()
            os.replace(tmp, path)
        except (OSError, sqlite3.Error) as exc:
            raise WriteError(f"{path}: cannot write the database ({shorten(exc)})") from exc
        finally:
            if os.path.exists(tmp):
                os.remove(tmp)

    # ------------------------------------------------------------- HeteroData
    def to_hetero_data(self):
        """The one draw as a :class:`torch_geometric.data.HeteroData` (layout in the module notes).

        Raises
        ------
        DataError
            More than one draw.
        """
        import torch
        from torch_geometric.data import HeteroData

        values = self._one_draw("a HeteroData")
        data = HeteroData()
        for t, attrs in self.schema.entities.items():
            data[t].x = torch.from_numpy(np.array(values[t], dtype=np.int64))
            data[t].node_id = list(self.skeleton.instances[t])
            data[t].attributes = list(attrs)
        for r, rel in self.schema.relationships.items():
            src = {i: k for k, i in enumerate(self.skeleton.instances[rel.source])}
            dst = {i: k for k, i in enumerate(self.skeleton.instances[rel.target])}
            pairs = self.skeleton.links[r]
            index = [[src[s] for s, _ in pairs], [dst[d] for _, d in pairs]]
            data[rel.source, r, rel.target].edge_index = torch.tensor(index, dtype=torch.long).reshape(2, len(pairs))
        return data

    @classmethod
    def from_hetero_data(cls, schema: Schema, data) -> RelationalData:
        """One draw from a :class:`torch_geometric.data.HeteroData` (layout in the module notes).

        ``node_id`` may be left out: the ids are then the positions ``"0"``,
        ``"1"``, ...; ``attributes``, when given, must list the schema's
        attributes in order.

        Raises
        ------
        DataError
            Not a HeteroData, a node or edge type not in the schema, a missing
            node type, ``x`` or edge type, an ``x`` or ``edge_index`` that is
            not an integer tensor of the right shape, ``node_id`` or
            ``attributes`` that do not match, an edge index out of range (the
            edge and row named), or anything :class:`RelationalData` or
            :class:`~intervgnn.relational.Skeleton` refuse.
        """
        import torch
        from torch_geometric.data import HeteroData

        if not isinstance(schema, Schema):
            raise DataError(f"schema must be a Schema, got {type(schema).__name__}")
        if not isinstance(data, HeteroData):
            raise DataError(f"expected a torch_geometric HeteroData, got {type(data).__name__}")
        edge_keys = {(rel.source, r, rel.target): r for r, rel in schema.relationships.items()}
        for t in data.node_types:
            if t not in schema.entities:
                raise DataError(
                    f"node type {short_repr(t)} is not an entity type of the schema; types are: "
                    f"{', '.join(sorted(schema.entities))}{did_you_mean(t, schema.entities)}"
                )
        for e in data.edge_types:
            if e not in edge_keys:
                raise DataError(
                    f"edge type {short_repr(e)} is not a relationship of the schema; expected: "
                    f"{', '.join(map(str, edge_keys)) or '(none)'}"
                )
        instances, values = {}, {}
        for t, attrs in schema.entities.items():
            if t not in data.node_types or "x" not in data[t]:
                raise DataError(f"node type '{t}' has no 'x' (attribute codes, shape [instances, {len(attrs)}])")
            x = data[t].x
            if not isinstance(x, torch.Tensor) or x.dim() != 2 or x.dtype.is_floating_point or x.is_complex() or x.dtype == torch.bool:
                raise DataError(
                    f"node type '{t}': 'x' must be an integer tensor of shape [instances, {len(attrs)}], got "
                    f"{type(x).__name__}{'' if not isinstance(x, torch.Tensor) else f' {x.dtype} {tuple(x.shape)}'}"
                )
            n = x.shape[0]
            if n > MAX_INSTANCES:
                raise DataError(f"node type '{t}' has {n:,} nodes, more than the limit of {MAX_INSTANCES:,}")
            names = data[t].attributes if "attributes" in data[t] else list(attrs)
            if not isinstance(names, (list, tuple)) or list(names) != list(attrs):
                raise DataError(
                    f"node type '{t}': 'attributes' is {short_repr(names)}, expected the schema's {short_repr(list(attrs))}"
                )
            ids = data[t].node_id if "node_id" in data[t] else [str(k) for k in range(n)]
            if not isinstance(ids, (list, tuple)) or len(ids) != n:
                raise DataError(f"node type '{t}': 'node_id' must be a list of {n} instance ids, got {short_repr(ids)}")
            instances[t] = list(ids)
            values[t] = x.detach().cpu().numpy()
        links = {}
        for (s, r, d) in edge_keys:
            if (s, r, d) not in data.edge_types or "edge_index" not in data[s, r, d]:
                raise DataError(
                    f"edge type ('{s}', '{r}', '{d}') has no 'edge_index'; give one of shape [2, 0] for no links"
                )
            ei = data[s, r, d].edge_index
            if not isinstance(ei, torch.Tensor) or ei.dim() != 2 or ei.shape[0] != 2 or ei.dtype.is_floating_point \
                    or ei.is_complex() or ei.dtype == torch.bool:
                raise DataError(
                    f"edge type ('{s}', '{r}', '{d}'): 'edge_index' must be an integer tensor of shape [2, links], got "
                    f"{type(ei).__name__}{'' if not isinstance(ei, torch.Tensor) else f' {ei.dtype} {tuple(ei.shape)}'}"
                )
            if ei.shape[1] > MAX_LINKS:
                raise DataError(f"edge type ('{s}', '{r}', '{d}') has {ei.shape[1]:,} edges, more than {MAX_LINKS:,}")
            arr = ei.detach().cpu().numpy().astype(np.int64)
            for row, t in enumerate((s, d)):
                n = len(instances[t])
                bad = np.flatnonzero((arr[row] < 0) | (arr[row] >= n))
                if bad.size:
                    k = int(bad[0])
                    raise DataError(
                        f"edge type ('{s}', '{r}', '{d}'), edge {k}, row {row} ({'source' if row == 0 else 'target'}): "
                        f"index {int(arr[row, k])} is not a node of '{t}' (0 to {n - 1})"
                    )
            src, dst = instances[s], instances[d]
            links[r] = [(src[a], dst[b]) for a, b in arr.T.tolist()]
        return cls(Skeleton(schema, instances, links), values)
