"""Skeletons: the instances of each entity type and the links of each relationship.

On disk a skeleton is a folder of CSV files (UTF-8, a header row):

* ``<entity type>.csv`` for every entity type, with a column ``id``: one
  instance per row;
* ``<relationship>.csv`` for every relationship, with columns ``source`` and
  ``target``: one link per row, from an instance of the source type to one
  of the target type (a header-only file: no links).

Other columns are ignored. Errors name the file, the line and the column.
"""

from __future__ import annotations

import csv
import os
from collections.abc import Iterable, Mapping, Sequence

from ..errors import DataError, did_you_mean, short_repr, shorten
from .model import _WORD, Schema

__all__ = ["Skeleton", "read_skeleton", "MAX_INSTANCES", "MAX_LINKS"]

#: the most instances of all types a skeleton may have
MAX_INSTANCES = 2_000_000
#: the most links of all relationships a skeleton may have
MAX_LINKS = 10_000_000


def refuse_unknown_keys(given: Mapping, known: Mapping, what: str, kind: str, listed: str) -> None:
    """DataError for the first key of ``given`` not in ``known``, e.g. "links given for unknown relationship 'x'; ..."."""
    for key in given:
        if key not in known:
            raise DataError(
                f"{what} given for unknown {kind} {short_repr(key)}; {listed} are: "
                f"{', '.join(sorted(known)) or '(none)'}{did_you_mean(key, known)}"
            )


def _bad_id(value, where: str) -> DataError:
    return DataError(
        f"{where}: instance id {short_repr(value)} is not valid: use letters, digits, '_', '.' and '-' "
        "(at most 100 characters)"
    )


class Skeleton:
    """The instances and links a template is grounded on.

    Parameters
    ----------
    schema : Schema
    instances : mapping of str to sequence of str
        Ids of the instances of every entity type (order kept: it orders the
        ground variables and the related parents).
    links : mapping of str to iterable of (str, str), optional
        ``(source id, target id)`` pairs of each relationship; a relationship
        left out has no links.

    Raises
    ------
    DataError
        An unknown entity type or relationship, a type with no instances, an
        id that is not valid or is repeated within a type, a link naming an
        unknown instance, a link given twice, or more than
        :data:`MAX_INSTANCES` instances or :data:`MAX_LINKS` links.
    """

    def __init__(self, schema: Schema, instances: Mapping[str, Sequence[str]], links: Mapping | None = None):
        if not isinstance(schema, Schema):
            raise DataError(f"schema must be a Schema, got {type(schema).__name__}")
        self.schema = schema
        if not isinstance(instances, Mapping):
            raise DataError(f"instances must be a mapping of entity type -> ids, got {type(instances).__name__}")
        refuse_unknown_keys(instances, schema.entities, "instances", "entity type", "types")
        inst: dict[str, tuple[str, ...]] = {}
        total = 0
        for t in schema.entities:
            ids = instances.get(t)
            if ids is None or isinstance(ids, (str, bytes)) or not isinstance(ids, Sequence) or len(ids) == 0:
                raise DataError(f"entity type '{t}' has no instances; give at least one id")
            total += len(ids)
            if total > MAX_INSTANCES:
                raise DataError(f"more than {MAX_INSTANCES:,} instances in all; ground a smaller skeleton")
            seen: set[str] = set()
            for i in ids:
                if not isinstance(i, str) or not _WORD.match(i) or len(i) > 100:
                    raise _bad_id(i, f"entity type '{t}'")
                if i in seen:
                    raise DataError(f"entity type '{t}' lists instance id '{i}' twice")
                seen.add(i)
            inst[t] = tuple(ids)
        self.instances: dict[str, tuple[str, ...]] = inst
        links = links or {}
        if not isinstance(links, Mapping):
            raise DataError(f"links must be a mapping of relationship -> (source, target) pairs, got {type(links).__name__}")
        refuse_unknown_keys(links, schema.relationships, "links", "relationship", "relationships")
        known = {t: set(ids) for t, ids in inst.items()}
        out: dict[str, tuple[tuple[str, str], ...]] = {}
        count = 0
        for r, rel in schema.relationships.items():
            pairs: list[tuple[str, str]] = []
            seen_pairs: set[tuple[str, str]] = set()
            raw = links.get(r, ())
            if isinstance(raw, (str, bytes)) or not isinstance(raw, Iterable):
                raise DataError(f"links of '{r}' must be a list of (source, target) pairs, got {short_repr(raw)}")
            for pair in raw:
                count += 1
                if count > MAX_LINKS:
                    raise DataError(f"more than {MAX_LINKS:,} links in all; ground a smaller skeleton")
                pair = check_link(schema, known, r, pair, f"relationship '{r}'")
                if pair in seen_pairs:
                    raise DataError(f"relationship '{r}' lists the link {pair[0]} -> {pair[1]} twice")
                seen_pairs.add(pair)
                pairs.append(pair)
            out[r] = tuple(pairs)
        self.links: dict[str, tuple[tuple[str, str], ...]] = out

    def __repr__(self) -> str:
        return (
            f"Skeleton(instances={sum(map(len, self.instances.values()))}, "
            f"links={sum(map(len, self.links.values()))})"
        )


def check_link(schema: Schema, known: Mapping[str, set], r: str, pair, where: str) -> tuple[str, str]:
    """``(source, target)`` of one link of ``r``, checked against the known instance ids."""
    rel = schema.relationships[r]
    try:
        src, dst = pair
    except (TypeError, ValueError):
        raise DataError(f"{where}: a link must be a (source, target) pair, got {short_repr(pair)}") from None
    for role, end, t in (("source", src, rel.source), ("target", dst, rel.target)):
        if not isinstance(end, str) or end not in known[t]:
            raise DataError(
                f"{where}: the link's {role} {short_repr(end)} is not an instance of '{t}'"
                f"{did_you_mean(end, known[t]) if len(known[t]) <= 10_000 else ''}"
            )
    return src, dst


def _read_csv(path: str, columns: tuple[str, ...]) -> list[tuple[int, tuple[str, ...]]]:
    """``(line, values of columns)`` for every data row of ``path``."""
    rows = []
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            reader = csv.reader(fh)
            header = next(reader, None)
            if header is None:
                raise DataError(f"{path}: the file is empty; expected a header with column(s) {', '.join(columns)}")
            header = [h.strip() for h in header]
            idx = []
            for c in columns:
                if header.count(c) != 1:
                    raise DataError(
                        f"{path}, line 1: expected {'one' if c not in header else 'only one'} column '{c}'; "
                        f"the header is {short_repr(header)}"
                    )
                idx.append(header.index(c))
            for row in reader:
                if not row or all(not x.strip() for x in row):
                    continue
                if len(row) != len(header):
                    raise DataError(f"{path}, line {reader.line_num}: {len(row)} fields, the header has {len(header)}")
                rows.append((reader.line_num, tuple(row[i].strip() for i in idx)))
                if len(rows) > MAX_LINKS:
                    raise DataError(f"{path}: more than {MAX_LINKS:,} rows; ground a smaller skeleton")
    except FileNotFoundError:
        raise DataError(f"{path}: no such file") from None
    except csv.Error as exc:
        raise DataError(f"{path}: not valid CSV ({shorten(exc)})") from None
    except UnicodeDecodeError:
        raise DataError(f"{path}: not UTF-8 text") from None
    except OSError as exc:
        raise DataError(f"{path}: cannot read the file ({shorten(exc)})") from None
    return rows


def read_skeleton(folder: str | os.PathLike, schema: Schema) -> Skeleton:
    """Read a skeleton from a folder of CSV files (see the module notes).

    Raises
    ------
    DataError
        A missing folder or file, a file not named after an entity type or
        relationship of ``schema``, a missing column, a repeated or bad id,
        an entity type with no instances, a link to an unknown instance or a
        repeated link; the message names the file, line and column.
    """
    folder = os.fspath(folder)
    if not os.path.isdir(folder):
        raise DataError(f"{folder}: no such folder (a skeleton is a folder of CSV files)")
    expected = [f"{t}.csv" for t in schema.entities] + [f"{r}.csv" for r in schema.relationships]
    try:
        present = sorted(f for f in os.listdir(folder) if f.lower().endswith(".csv"))
    except OSError as exc:
        raise DataError(f"{folder}: cannot list the folder ({shorten(exc)})") from None
    for f in present:
        if f not in expected:
            raise DataError(
                f"{os.path.join(folder, f)}: not an entity type or relationship of the schema; "
                f"expected files: {', '.join(expected)}{did_you_mean(f, expected)}"
            )
    instances: dict[str, list[str]] = {}
    for t in schema.entities:
        path = os.path.join(folder, f"{t}.csv")
        ids: list[str] = []
        first: dict[str, int] = {}
        for line, (i,) in _read_csv(path, ("id",)):
            where = f"{path}, line {line}, column 'id'"
            if not _WORD.match(i) or len(i) > 100:
                raise _bad_id(i, where)
            if i in first:
                raise DataError(f"{where}: instance id '{i}' is repeated (first on line {first[i]})")
            first[i] = line
            ids.append(i)
        if not ids:
            raise DataError(f"{path}: entity type '{t}' has no instances; add rows with an id")
        instances[t] = ids
    known = {t: set(ids) for t, ids in instances.items()}
    links: dict[str, list[tuple[str, str]]] = {}
    for r, rel in schema.relationships.items():
        path = os.path.join(folder, f"{r}.csv")
        pairs: list[tuple[str, str]] = []
        first_link: dict[tuple[str, str], int] = {}
        for line, (src, dst) in _read_csv(path, ("source", "target")):
            for col, end, t in (("source", src, rel.source), ("target", dst, rel.target)):
                if end not in known[t]:
                    raise DataError(
                        f"{path}, line {line}, column '{col}': {short_repr(end)} is not an instance of '{t}'"
                        f"{did_you_mean(end, known[t]) if len(known[t]) <= 10_000 else ''}"
                    )
            if (src, dst) in first_link:
                raise DataError(f"{path}, line {line}: the link {src} -> {dst} is repeated (first on line {first_link[(src, dst)]})")
            first_link[(src, dst)] = line
            pairs.append((src, dst))
        links[r] = pairs
    return Skeleton(schema, instances, links)
