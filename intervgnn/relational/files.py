"""Schema and template (with CPTs) as a YAML file.

The layout (every name is read as text, numbers where numbers belong)::

    relational: 1                      # format version
    entities:                          # entity type -> attribute -> states
      hive:
        Treated: [no, yes]
      orchard:
        Soil: [poor, rich]
        Yield: [low, high]
    relationships:                     # name -> source and target types
      pollinates: {source: hive, target: orchard}
    mechanisms:                        # entity type -> attribute -> mechanism
      hive:
        Treated:
          cpt: [[0.6, 0.4]]
      orchard:
        Soil:
          cpt: [[0.5, 0.5]]
        Yield:
          parents: [Soil]              # attributes of the same instance
          aggregates:                  # see intervgnn.relational.model
            - {relationship: pollinates, direction: against, attribute: Treated,
               state: yes, kind: share, edges: [0, 0.5, 1]}
          cpt:                         # one row per configuration, last axis fastest:
            - [0.5, 0.5]               # Soil=poor, share=no related
            - [0.7, 0.3]               # Soil=poor, share=[0, 0.5]
            - [0.4, 0.6]               # Soil=poor, share=(0.5, 1]
            - [0.5, 0.5]               # Soil=rich, ...
            - [0.3, 0.7]
            - [0.1, 0.9]

``parents`` and ``aggregates`` may be left out (none); ``direction``
defaults to ``along``. Every attribute needs a mechanism. A *structure
file*, read with ``cpts=False`` (what the relational estimators' ``fit``
and ``intervgnn relational-fit`` need), may leave every ``cpt`` out: the
mechanism then gets uniform rows, which fitting replaces.
"""

from __future__ import annotations

import math
import os

import numpy as np
import yaml

from .._io import atomic_open
from .._yaml import read_yaml_file
from ..errors import GraphError, NetworkError, did_you_mean, short_repr
from .model import ALONG, Aggregate, Mechanism, Schema, Template

__all__ = ["parse_template", "read_template", "format_template", "write_template", "FORMAT_VERSION"]

FORMAT_VERSION = "1"
_TOP = ("relational", "entities", "relationships", "mechanisms")
_MECH = ("parents", "aggregates", "cpt")
_AGG = ("relationship", "direction", "attribute", "state", "kind", "edges")


def _mapping(value, where: str, source: str) -> dict:
    if value is None:
        return {}
    if not isinstance(value, dict):
        raise GraphError(f"{source}: {where} must be a mapping, got {short_repr(value)}")
    return value


def _keys(d: dict, allowed, where: str, source: str) -> None:
    for k in d:
        if k not in allowed:
            raise GraphError(
                f"{source}: unknown key {short_repr(k)} in {where}; keys are: {', '.join(allowed)}{did_you_mean(k, allowed)}"
            )


def _number(x, where: str, source: str, error: type[Exception] = NetworkError) -> float:
    """``x`` as a finite float; else ``error`` (NetworkError for CPT entries, GraphError for template numbers)."""
    if isinstance(x, bool) or x is None or isinstance(x, (list, dict)):
        raise error(f"{source}: {where}: {short_repr(x)} is not a number")
    try:
        v = float(x)
    except (TypeError, ValueError, OverflowError):
        raise error(f"{source}: {where}: {short_repr(x)} is not a number") from None
    if not math.isfinite(v):
        raise error(f"{source}: {where}: {short_repr(x)} is not a finite number")
    return v


def _numbers(value, where: str, source: str, depth: int = 0):
    """Nested lists of numbers (text as read) to nested lists of floats."""
    if isinstance(value, list):
        if depth > 64:
            raise NetworkError(f"{source}: {where}: lists nested too deeply")
        return [_numbers(x, where, source, depth + 1) for x in value]
    return _number(value, where, source)


def parse_template(doc, source: str = "<template>", cpts: bool = True) -> Template:
    """A :class:`Template` from the document of a template file (see the module notes).

    With ``cpts=False`` a mechanism without ``cpt`` gets uniform rows (a
    structure file, for fitting).

    Raises
    ------
    GraphError
        A missing or unknown key, a wrong version, or a schema or template
        problem; the message starts with ``source``.
    NetworkError
        A CPT entry that is not a number, or a bad CPT.
    """
    doc = _mapping(doc, "the document", source)
    _keys(doc, _TOP, "the document", source)
    version = doc.get("relational")
    if str(version) != FORMAT_VERSION:
        raise GraphError(f"{source}: expected 'relational: {FORMAT_VERSION}' (the format version), got {short_repr(version)}")
    try:
        entities = _mapping(doc.get("entities"), "'entities'", source)
        for t, attrs in entities.items():
            _mapping(attrs, f"the attributes of '{t}'", source)
        schema = Schema(entities, _mapping(doc.get("relationships"), "'relationships'", source))
        mechanisms = []
        mechs = _mapping(doc.get("mechanisms"), "'mechanisms'", source)
        for t, attrs in mechs.items():
            schema.check_entity(t)
            for a, spec in _mapping(attrs, f"the mechanisms of '{t}'", source).items():
                where = f"the mechanism of '{t}.{a}'"
                spec = _mapping(spec, where, source)
                _keys(spec, _MECH, where, source)
                if "cpt" not in spec and cpts:
                    raise GraphError(f"{source}: {where} has no 'cpt'")
                parents = spec.get("parents") or []
                if not isinstance(parents, list):
                    raise GraphError(f"{source}: {where}: 'parents' must be a list, got {short_repr(parents)}")
                aggs = spec.get("aggregates") or []
                if not isinstance(aggs, list):
                    raise GraphError(f"{source}: {where}: 'aggregates' must be a list, got {short_repr(aggs)}")
                built = []
                for k, g in enumerate(aggs, 1):
                    gw = f"aggregate {k} of {where}"
                    g = _mapping(g, gw, source)
                    _keys(g, _AGG, gw, source)
                    missing = [key for key in _AGG if key not in g and key != "direction"]
                    if missing:
                        raise GraphError(f"{source}: {gw} has no '{missing[0]}'")
                    edges = g["edges"]
                    if isinstance(edges, list):
                        edges = [_number(x, f"{gw}, edges", source, GraphError) for x in edges]
                    built.append(
                        Aggregate(g["relationship"], g["attribute"], g["state"], g["kind"], edges, g.get("direction") or ALONG)
                    )
                if "cpt" not in spec:  # a structure file: uniform rows of the mechanism's shape
                    schema.check_attribute(t, a)
                    for p in parents:
                        schema.check_attribute(t, p)
                    shape = [len(schema.states(t, p)) for p in parents] + [g.num_bins for g in built]
                    k = len(schema.states(t, a))
                    mechanisms.append(Mechanism(t, a, _uniform(shape, k), parents, built))
                    continue
                cpt = spec["cpt"]
                if not isinstance(cpt, list):
                    raise NetworkError(f"{source}: {where}: 'cpt' must be a list of rows, got {short_repr(cpt)}")
                mechanisms.append(Mechanism(t, a, _numbers(cpt, f"{where}, cpt", source), parents, built))
        return Template(schema, mechanisms)
    except (GraphError, NetworkError) as exc:
        text = str(exc)
        if text.startswith(f"{source}: "):
            raise
        raise type(exc)(f"{source}: {text}") from None


def _uniform(shape: list[int], k: int) -> np.ndarray:
    size = math.prod(shape) * k
    if size > 10_000_000:
        raise NetworkError(f"the mechanism's CPT would have {size:,} entries, more than the limit of 10,000,000")
    return np.full(shape + [k], 1.0 / k)


def read_template(path: str | os.PathLike, cpts: bool = True) -> Template:
    """Read a schema and template from a YAML file (see the module notes).

    Raises
    ------
    GraphError
        A missing or unreadable file, YAML that is not valid or is refused
        (repeated keys, too many aliases, nesting too deep; the line is
        named), or any problem :func:`parse_template` reports.
    NetworkError
        A bad CPT.
    """
    source = os.fspath(path)
    return parse_template(read_yaml_file(source, GraphError, names=True), source, cpts)


def _plain(x):
    return repr(float(x))


def format_template(template: Template) -> str:
    """The schema and template as YAML text that :func:`read_template` reads back exactly."""
    if not isinstance(template, Template):
        raise GraphError(f"expected a Template, got {type(template).__name__}")
    schema = template.schema
    doc: dict = {
        "relational": int(FORMAT_VERSION),
        "entities": {t: {a: list(s) for a, s in attrs.items()} for t, attrs in schema.entities.items()},
        "relationships": {r: {"source": rel.source, "target": rel.target} for r, rel in schema.relationships.items()},
        "mechanisms": {},
    }
    for (t, a), m in template.mechanisms.items():
        spec: dict = {}
        if m.parents:
            spec["parents"] = list(m.parents)
        if m.aggregates:
            spec["aggregates"] = [
                {
                    "relationship": g.relationship,
                    "direction": g.direction,
                    "attribute": g.attribute,
                    "state": g.state,
                    "kind": g.kind,
                    "edges": [float(e) if g.kind == "share" else int(e) for e in g.edges],
                }
                for g in m.aggregates
            ]
        spec["cpt"] = [[float(x) for x in row] for row in m.cpt.reshape(-1, m.cpt.shape[-1])]
        doc["mechanisms"].setdefault(t, {})[a] = spec
    return yaml.safe_dump(doc, sort_keys=False, default_flow_style=None, width=100)


def write_template(template: Template, path: str | os.PathLike) -> None:
    """Write the schema and template to ``path`` as YAML, atomically.

    Raises
    ------
    WriteError
        The file cannot be written (missing folder, no permission).
    """
    text = format_template(template)
    with atomic_open(os.fspath(path), "w") as fh:
        fh.write(text)
