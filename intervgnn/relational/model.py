"""Schema and template of a relational causal model, and the names of ground variables.

A **schema** lists entity types, each with discrete attributes (ordered
state names), and relationship types, each from a source entity type to a
target entity type. A **template** gives every (entity type, attribute) one
mechanism: its parents are other attributes of the same instance and
aggregates over related instances; its CPT has axes ``(*own parents,
*aggregate bins, own states)``.

Aggregates
----------
An :class:`Aggregate` looks along a relationship (``direction="along"``: the
instances this one links to, so this entity type must be the relationship's
source) or against it (``"against"``: the instances that link to this one,
this type being the target), at one attribute of the related type, and
counts the related instances in one ``state`` of it. Its ``kind`` says how
the count becomes a bin:

``share``
    ``edges`` run from 0 to 1, strictly increasing, e.g. ``[0, 0.5, 1]``.
    Bin 0 is ``"no related"`` (no related instance: the share is undefined);
    then one bin per pair of edges, the first closed ``[0, e1]`` and the
    others open on the left ``(e_i, e_i+1]``: with ``[0, 0.5, 1]`` the bins
    are ``no related``, ``[0, 0.5]`` and ``(0.5, 1]``, so exactly half
    falls in the middle bin.
``count``
    ``edges`` are whole numbers from 0, strictly increasing, e.g.
    ``[0, 1, 3]``; bin ``i`` holds counts ``e_i <= c < e_i+1`` and the last
    bin is open, ``c >= e_last``: here ``0``, ``1-2`` and ``3+``. No related
    instance is a count of 0 (the first bin).

Ground variable names
---------------------
The attribute ``a`` of instance ``i`` of entity type ``t`` is the variable
``f"{t}_{i}__{a}"`` (e.g. ``hive_4__Treated``). Entity, relationship and
attribute names are letters and digits joined by single underscores
(starting with a letter); instance ids and state names are letters, digits,
``_``, ``.`` and ``-`` (words in BIF without quoting); no entity type name
may be another's followed by ``_``. So the name splits back uniquely:
:func:`split_node_name`.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from ..errors import GraphError, NetworkError, UnknownVariableError, did_you_mean, short_repr, shorten
from ..bn.network import MAX_CPT_ENTRIES

__all__ = [
    "Relationship",
    "Schema",
    "Aggregate",
    "Mechanism",
    "Template",
    "node_name",
    "split_node_name",
    "SHARE",
    "COUNT",
    "ALONG",
    "AGAINST",
]

SHARE, COUNT = "share", "count"
ALONG, AGAINST = "along", "against"
NO_RELATED = "no related"
_ROW_TOL = 1e-6
#: the most edges one aggregate may have
MAX_EDGES = 1000

_TYPE_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9]*(?:_[A-Za-z0-9]+)*$")
_WORD = re.compile(r"^[A-Za-z0-9_.\-]+$")


def _check_name(name, what: str, err=GraphError) -> str:
    if not isinstance(name, str) or not _TYPE_NAME.match(name) or len(name) > 100:
        raise err(
            f"{what} {short_repr(name)} is not a valid name: use letters and digits joined by single "
            "underscores, starting with a letter (at most 100 characters)"
        )
    return name


def _check_word(name, what: str, err=GraphError) -> str:
    if not isinstance(name, str) or not _WORD.match(name) or len(name) > 100:
        raise err(
            f"{what} {short_repr(name)} is not a valid name: use letters, digits, '_', '.' and '-' "
            "(at most 100 characters)"
        )
    return name


def node_name(entity: str, instance: str, attribute: str) -> str:
    """The ground variable of ``attribute`` of instance ``instance`` of type ``entity``.

    >>> node_name("hive", "4", "Treated")
    'hive_4__Treated'
    """
    return f"{entity}_{instance}__{attribute}"


def split_node_name(name: str, schema: Schema) -> tuple[str, str, str]:
    """``(entity, instance, attribute)`` of a ground variable name (the inverse of :func:`node_name`).

    Raises
    ------
    UnknownVariableError
        ``name`` is not of the form ``<entity>_<id>__<attribute>`` for an
        entity type and attribute of ``schema``.

    Examples
    --------
    >>> s = Schema({"hive": {"Treated": ["no", "yes"]}})
    >>> split_node_name("hive_a_1__Treated", s)
    ('hive', 'a_1', 'Treated')
    """
    text = str(name)
    entity = next((t for t in schema.entities if text.startswith(t + "_")), None)
    if entity is not None:
        rest = text[len(entity) + 1 :]
        cut = rest.rfind("__")
        instance, attribute = rest[:cut], rest[cut + 2 :]
        if cut > 0 and _WORD.match(instance) and attribute in schema.entities[entity]:
            return entity, instance, attribute
    raise UnknownVariableError(
        f"'{shorten(text)}' is not a ground variable of this schema: expected <entity>_<id>__<attribute> "
        f"with an entity type among: {', '.join(sorted(schema.entities))}"
    )


@dataclass(frozen=True)
class Relationship:
    """A relationship type: links from instances of ``source`` to instances of ``target``."""

    name: str
    source: str
    target: str


class Schema:
    """Entity types with their attributes, and relationship types between them.

    Parameters
    ----------
    entities : mapping of str to mapping of str to sequence of str
        ``entities[type][attribute]`` is the ordered list of state names.
    relationships : mapping of str to (source, target), optional
        Each relationship's source and target entity types (a pair, or a
        mapping with keys ``source`` and ``target``).

    Raises
    ------
    GraphError
        A bad name, a type with no attributes, an attribute with no or
        repeated states, a relationship naming an unknown entity type, a
        relationship named like an entity type, or two entity type names
        where one is the other followed by ``_`` (ground names would clash).
    """

    def __init__(self, entities: Mapping[str, Mapping[str, Sequence[str]]], relationships: Mapping | None = None):
        if not isinstance(entities, Mapping) or not entities:
            raise GraphError("a schema needs at least one entity type (a mapping of type -> attributes)")
        ents: dict[str, dict[str, tuple[str, ...]]] = {}
        for t, attrs in entities.items():
            _check_name(t, "entity type")
            if not isinstance(attrs, Mapping) or not attrs:
                raise GraphError(f"entity type '{t}' needs at least one attribute (a mapping of attribute -> states)")
            ents[t] = {}
            for a, states in attrs.items():
                _check_name(a, f"attribute of '{t}'")
                if isinstance(states, (str, bytes)) or not isinstance(states, Sequence) or not states:
                    raise GraphError(f"attribute '{t}.{a}' needs a non-empty list of state names, got {short_repr(states)}")
                names = tuple(_check_word(s, f"state of '{t}.{a}'") for s in states)
                if len(set(names)) != len(names):
                    dup = next(s for s in names if names.count(s) > 1)
                    raise GraphError(f"attribute '{t}.{a}' lists state '{dup}' twice")
                ents[t][a] = names
        for t in ents:
            for u in ents:
                if u != t and u.startswith(t + "_"):
                    raise GraphError(
                        f"entity types '{t}' and '{u}' would give clashing ground names ('{u}' starts with '{t}_'); "
                        "rename one"
                    )
        rels: dict[str, Relationship] = {}
        if relationships is not None and not isinstance(relationships, Mapping):
            raise GraphError(
                f"relationships must map each name to its (source, target) entity types, got {type(relationships).__name__}"
            )
        for r, ends in (relationships or {}).items():
            _check_name(r, "relationship")
            if r in ents:
                raise GraphError(f"relationship '{r}' has the name of an entity type; rename it")
            if isinstance(ends, Relationship):
                ends = (ends.source, ends.target)
            if isinstance(ends, Mapping):
                extra = set(ends) - {"source", "target"}
                if extra or len(ends) != 2:
                    raise GraphError(f"relationship '{r}' needs exactly the keys 'source' and 'target', got {short_repr(list(ends))}")
                ends = (ends["source"], ends["target"])
            try:
                src, dst = ends
            except (TypeError, ValueError):
                raise GraphError(f"relationship '{r}' needs a (source, target) pair of entity types, got {short_repr(ends)}") from None
            for end in (src, dst):
                if not isinstance(end, str) or end not in ents:
                    raise GraphError(
                        f"relationship '{r}' names entity type {short_repr(end)}, which is not in the schema; "
                        f"types are: {', '.join(sorted(ents))}{did_you_mean(end, ents)}"
                    )
            rels[r] = Relationship(r, src, dst)
        self.entities: dict[str, dict[str, tuple[str, ...]]] = ents
        self.relationships: dict[str, Relationship] = rels

    def states(self, entity: str, attribute: str) -> tuple[str, ...]:
        """State names of ``entity.attribute``."""
        self.check_attribute(entity, attribute)
        return self.entities[entity][attribute]

    def check_entity(self, entity) -> str:
        if not isinstance(entity, str) or entity not in self.entities:
            raise GraphError(
                f"unknown entity type {short_repr(entity)}; types are: {', '.join(sorted(self.entities))}"
                f"{did_you_mean(entity, self.entities)}"
            )
        return entity

    def check_attribute(self, entity, attribute) -> str:
        self.check_entity(entity)
        attrs = self.entities[entity]
        if not isinstance(attribute, str) or attribute not in attrs:
            raise GraphError(
                f"entity type '{entity}' has no attribute {short_repr(attribute)}; attributes are: "
                f"{', '.join(sorted(attrs))}{did_you_mean(attribute, attrs)}"
            )
        return attribute

    def __eq__(self, other) -> bool:
        # the order of attributes matters: data and ground tables lay their columns out in it
        def layout(schema):
            return [(t, list(attrs.items())) for t, attrs in sorted(schema.entities.items())]

        return isinstance(other, Schema) and layout(self) == layout(other) and self.relationships == other.relationships

    def __repr__(self) -> str:
        return f"Schema(entities={sorted(self.entities)}, relationships={sorted(self.relationships)})"


def _edges(kind: str, raw, where: str) -> tuple:
    if isinstance(raw, (str, bytes)) or not isinstance(raw, Sequence) or not raw:
        raise GraphError(f"{where}: 'edges' must be a non-empty list of numbers, got {short_repr(raw)}")
    if len(raw) > MAX_EDGES:
        raise GraphError(f"{where}: {len(raw):,} edges, more than the limit of {MAX_EDGES:,}")
    vals = []
    for x in raw:
        if isinstance(x, bool):
            x = None
        try:
            v = float(x)
        except (TypeError, ValueError, OverflowError):
            raise GraphError(f"{where}: edge {short_repr(x)} is not a number") from None
        if not math.isfinite(v):
            raise GraphError(f"{where}: edge {short_repr(x)} is not a finite number")
        vals.append(v)
    if any(b <= a for a, b in zip(vals, vals[1:])):
        raise GraphError(f"{where}: edges must increase strictly, got {short_repr(list(raw))}")
    if kind == SHARE:
        if len(vals) < 2 or vals[0] != 0 or vals[-1] != 1:
            raise GraphError(f"{where}: share edges must run from 0 to 1 (e.g. [0, 0.5, 1]), got {short_repr(list(raw))}")
        return tuple(vals)
    if vals[0] != 0 or any(v != int(v) for v in vals):
        raise GraphError(f"{where}: count edges must be whole numbers from 0 (e.g. [0, 1, 3]), got {short_repr(list(raw))}")
    return tuple(int(v) for v in vals)


@dataclass(frozen=True)
class Aggregate:
    """Binned count or share of related instances in one state (see the module notes).

    Parameters
    ----------
    relationship : str
        The relationship type followed.
    attribute : str
        The attribute of the related entity type.
    state : str
        The state of it whose instances are counted.
    kind : ``"share"`` or ``"count"``
    edges : sequence of numbers
        Bin edges (share: from 0 to 1; count: whole numbers from 0).
    direction : ``"along"`` or ``"against"``, default ``"along"``
        ``along``: related instances are the targets of this instance's
        links; ``against``: the sources of links to this instance.

    Raises
    ------
    GraphError
        A bad kind, direction or edges.
    """

    relationship: str
    attribute: str
    state: str
    kind: str
    edges: tuple
    direction: str = ALONG
    _lookups: dict = field(default_factory=dict, init=False, compare=False, repr=False)

    def __post_init__(self):
        object.__setattr__(self, "_lookups", {})  # a copy (dataclasses.replace) starts with an empty cache
        _check_name(self.relationship, "the relationship of an aggregate")
        _check_name(self.attribute, "the attribute of an aggregate")
        _check_word(self.state, "the state of an aggregate")
        where = f"aggregate over '{shorten(self.relationship, 40)}'.'{shorten(self.attribute, 40)}'"
        if self.kind not in (SHARE, COUNT):
            raise GraphError(f"{where}: kind must be 'share' or 'count', got {short_repr(self.kind)}")
        if self.direction not in (ALONG, AGAINST):
            raise GraphError(f"{where}: direction must be 'along' or 'against', got {short_repr(self.direction)}")
        object.__setattr__(self, "edges", _edges(self.kind, self.edges, where))

    @property
    def bins(self) -> tuple[str, ...]:
        """Labels of the bins, in CPT axis order."""
        e = self.edges
        if self.kind == SHARE:
            return (NO_RELATED,) + tuple(
                f"{'[' if i == 0 else '('}{e[i]:g}, {e[i + 1]:g}]" for i in range(len(e) - 1)
            )
        out = [str(e[i]) if e[i + 1] - e[i] == 1 else f"{e[i]}-{e[i + 1] - 1}" for i in range(len(e) - 1)]
        return tuple(out) + (f"{e[-1]}+",)

    @property
    def num_bins(self) -> int:
        return len(self.edges)  # share: "no related" + one per pair of edges; count: one per edge

    def bin_of_counts(self, total: int) -> np.ndarray:
        """Bin index for each count ``0..total`` of related instances in ``state``, out of ``total`` related."""
        hit = self._lookups.get(total)
        if hit is not None:
            return hit
        k = np.arange(total + 1)
        if self.kind == COUNT:
            out = np.searchsorted(np.asarray(self.edges), k, side="right") - 1
        elif total == 0:
            out = np.zeros(1, dtype=np.int64)
        else:
            out = 1 + np.searchsorted(np.asarray(self.edges[1:-1], dtype=float), k / total, side="left")
        out = out.astype(np.int64)
        if len(self._lookups) < 64:
            self._lookups[total] = out
        return out

    def related_entity(self, schema: Schema) -> str:
        rel = schema.relationships[self.relationship]
        return rel.target if self.direction == ALONG else rel.source


class Mechanism:
    """The mechanism of one attribute of one entity type.

    Parameters
    ----------
    entity, attribute : str
    cpt : array_like
        Axes ``(*own parents, *aggregate bins, own states)``; a 2-D array of
        one row per parent configuration (in that order, the last axis
        fastest) is accepted too.
    parents : sequence of str, optional
        Other attributes of the same instance.
    aggregates : sequence of Aggregate, optional

    The CPT is checked against a schema when the mechanism joins a
    :class:`Template`.
    """

    def __init__(self, entity: str, attribute: str, cpt, parents: Sequence[str] = (), aggregates: Sequence[Aggregate] = ()):
        self.entity = entity
        self.attribute = attribute
        if isinstance(parents, str) or not isinstance(parents, Sequence):
            raise GraphError(f"parents of '{shorten(entity, 40)}.{shorten(attribute, 40)}' must be a list of attributes, got {short_repr(parents)}")
        if isinstance(aggregates, Aggregate) or not isinstance(aggregates, Sequence):
            raise GraphError(f"aggregates of '{shorten(entity, 40)}.{shorten(attribute, 40)}' must be a list of Aggregate")
        for a in aggregates:
            if not isinstance(a, Aggregate):
                raise GraphError(f"aggregates of '{shorten(entity, 40)}.{shorten(attribute, 40)}' must be Aggregate objects, got {type(a).__name__}")
        self.parents = tuple(parents)
        self.aggregates = tuple(aggregates)
        self.cpt = cpt

    @property
    def label(self) -> str:
        return f"{self.entity}.{self.attribute}"

    def _validate(self, schema: Schema) -> None:
        schema.check_attribute(self.entity, self.attribute)
        where = f"mechanism of '{self.label}'"
        for p in self.parents:
            if not isinstance(p, str):
                raise GraphError(f"{where}: parent {short_repr(p)} is not an attribute name")
            if p == self.attribute:
                raise GraphError(f"{where}: an attribute cannot be its own parent")
            if p not in schema.entities[self.entity]:
                schema.check_attribute(self.entity, p)
            if self.parents.count(p) > 1:
                raise GraphError(f"{where}: parent '{p}' is listed twice")
        for a in self.aggregates:
            if a.relationship not in schema.relationships:
                raise GraphError(
                    f"{where}: unknown relationship {short_repr(a.relationship)}; relationships are: "
                    f"{', '.join(sorted(schema.relationships)) or '(none)'}{did_you_mean(a.relationship, schema.relationships)}"
                )
            rel = schema.relationships[a.relationship]
            own_end = rel.source if a.direction == ALONG else rel.target
            if own_end != self.entity:
                raise GraphError(
                    f"{where}: aggregate {a.direction} '{a.relationship}' ({rel.source} -> {rel.target}) needs "
                    f"'{self.entity}' as the relationship's {'source' if a.direction == ALONG else 'target'}"
                )
            other = a.related_entity(schema)
            if a.attribute not in schema.entities[other]:
                attrs = schema.entities[other]
                raise GraphError(
                    f"{where}: entity type '{other}' has no attribute {short_repr(a.attribute)}; attributes are: "
                    f"{', '.join(sorted(attrs))}{did_you_mean(a.attribute, attrs)}"
                )
            if a.state not in schema.entities[other][a.attribute]:
                raise GraphError(
                    f"{where}: '{other}.{a.attribute}' has no state {short_repr(a.state)}; states are: "
                    f"{', '.join(schema.entities[other][a.attribute])}"
                )
        dup = [a for a in self.aggregates if self.aggregates.count(a) > 1]
        if dup:
            raise GraphError(f"{where}: the aggregate over '{dup[0].relationship}'.'{dup[0].attribute}' is given twice")
        own = schema.entities[self.entity]
        shape = tuple(len(own[p]) for p in self.parents) + tuple(len(a.bins) for a in self.aggregates) + (len(own[self.attribute]),)
        size = math.prod(shape)
        if size > MAX_CPT_ENTRIES:
            raise NetworkError(f"{where}: the CPT would have {size:,} entries, more than the limit of {MAX_CPT_ENTRIES:,}")
        try:
            arr = np.array(self.cpt, dtype=np.float64)
        except (TypeError, ValueError, OverflowError):
            raise NetworkError(f"{where}: the CPT is not an array of numbers") from None
        rows = math.prod(shape[:-1])
        if arr.shape == (rows, shape[-1]) or (arr.ndim == 1 and rows == 1 and arr.shape == shape[-1:]):
            arr = arr.reshape(shape)
        if arr.shape != shape:
            raise NetworkError(
                f"{where}: the CPT has shape {arr.shape}, expected {shape} for ({', '.join(self.axis_names)}) "
                f"or {rows} rows of {shape[-1]}"
            )
        flat = arr.reshape(-1, shape[-1])
        bad = ~np.isfinite(flat) | (flat < 0)
        sums = flat.sum(axis=1)
        wrong = np.flatnonzero(bad.any(axis=1) | ~(np.abs(sums - 1.0) <= _ROW_TOL))
        if wrong.size:
            r = int(wrong[0])
            label = self._row_label(schema, r, shape)
            if bad[r].any():
                raise NetworkError(f"{where}, row {label}: probabilities must be finite and non-negative, got {short_repr(flat[r].tolist())}")
            raise NetworkError(f"{where}, row {label}: probabilities sum to {sums[r]:.9g}, expected 1 (within {_ROW_TOL:g})")
        off = np.abs(sums - 1.0) > 1e-12
        if off.any():
            flat[off] /= sums[off, None]
        arr = flat.reshape(shape)
        arr.setflags(write=False)
        self.cpt = arr

    @property
    def axis_names(self) -> tuple[str, ...]:
        """Names of the CPT axes: own parents, aggregates (``count/share(rel.attr=state)``), the attribute."""
        aggs = tuple(f"{a.kind}({a.relationship} {a.direction}: {a.attribute}={a.state})" for a in self.aggregates)
        return self.parents + aggs + (self.attribute,)

    def _row_label(self, schema: Schema, r: int, shape) -> str:
        if len(shape) == 1:
            return "(no parents)"
        labels = [schema.entities[self.entity][p] for p in self.parents] + [a.bins for a in self.aggregates]
        codes = np.unravel_index(r, shape[:-1])
        return "(" + ", ".join(f"{n}={lab[int(c)]}" for n, lab, c in zip(self.axis_names, labels, codes)) + ")"

    def __repr__(self) -> str:
        return f"Mechanism({self.label!r}, parents={list(self.parents)}, aggregates={len(self.aggregates)})"


def find_cycle(parents: Mapping[str, Sequence[str]]) -> list[str] | None:
    """A directed cycle ``[a, b, ..., a]`` (edges parent -> child) in ``parents``, or ``None``; iterative."""
    children: dict[str, list[str]] = {v: [] for v in parents}
    for v, ps in parents.items():
        for p in ps:
            children.setdefault(p, []).append(v)
    colour: dict[str, int] = {}
    for start in children:
        if colour.get(start):
            continue
        path = [start]
        stack = [iter(children[start])]
        colour[start] = 1
        while stack:
            nxt = next(stack[-1], None)
            if nxt is None:
                colour[path.pop()] = 2
                stack.pop()
                continue
            c = colour.get(nxt, 0)
            if c == 1:
                return path[path.index(nxt) :] + [nxt]
            if c == 0:
                colour[nxt] = 1
                path.append(nxt)
                stack.append(iter(children.get(nxt, ())))
    return None


class Template:
    """The dependencies of a relational causal model: one :class:`Mechanism` per (entity type, attribute).

    Parameters
    ----------
    schema : Schema
    mechanisms : iterable of Mechanism
        Exactly one for every attribute of every entity type.

    Raises
    ------
    GraphError
        A mechanism for an unknown or already given attribute, a missing
        mechanism, an unknown parent, relationship, attribute or state in an
        aggregate, an aggregate whose relationship does not start (along) or
        end (against) at the mechanism's entity type, or a cycle among the
        own attributes of one entity type (named).
    NetworkError
        A CPT of the wrong shape, with a bad entry or a row not summing to 1.
    """

    def __init__(self, schema: Schema, mechanisms: Iterable[Mechanism]):
        if not isinstance(schema, Schema):
            raise GraphError(f"schema must be a Schema, got {type(schema).__name__}")
        self.schema = schema
        if isinstance(mechanisms, (str, bytes, Mapping)) or not isinstance(mechanisms, Iterable):
            raise GraphError(f"mechanisms must be a list of Mechanism objects, got {type(mechanisms).__name__}")
        mechs: dict[tuple[str, str], Mechanism] = {}
        for m in mechanisms:
            if not isinstance(m, Mechanism):
                raise GraphError(f"mechanisms must be Mechanism objects, got {type(m).__name__}")
            m._validate(schema)
            key = (m.entity, m.attribute)
            if key in mechs:
                raise GraphError(f"two mechanisms are given for '{m.label}'; keep one")
            mechs[key] = m
        for t, attrs in schema.entities.items():
            for a in attrs:
                if (t, a) not in mechs:
                    raise GraphError(f"no mechanism is given for '{t}.{a}'")
            cycle = find_cycle({a: mechs[(t, a)].parents for a in attrs})
            if cycle:
                raise GraphError(
                    f"the template of entity type '{t}' has a cycle among the attributes of one instance: "
                    + " -> ".join(cycle)
                )
        self.mechanisms: dict[tuple[str, str], Mechanism] = {
            (t, a): mechs[(t, a)] for t, attrs in schema.entities.items() for a in attrs
        }

    def mechanism(self, entity: str, attribute: str) -> Mechanism:
        self.schema.check_attribute(entity, attribute)
        return self.mechanisms[(entity, attribute)]

    def __repr__(self) -> str:
        return f"Template({self.schema!r}, mechanisms={len(self.mechanisms)})"
