"""Draws from a relational model on a skeleton of any size, without building the ground network.

:func:`sample_data` walks the ground graph generation by generation
(Kahn's algorithm on arrays: an instance attribute is drawn once every
attribute it depends on has been), and within a generation draws every
instance attribute of one mechanism at once: its own parents' states and,
per aggregate, the count of related instances in the aggregate's state, out
of how many, give the CPT row (the same binning as
:func:`~intervgnn.relational.ground`). Memory and time grow with instances
plus links, not with the ground CPTs, which grow exponentially with an
instance's related instances.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from ..errors import GraphError
from ..query import check_seed
from .data import RelationalData
from .grounding import check_template_skeleton
from .model import ALONG, Template
from .skeleton import Skeleton

__all__ = ["sample_data", "link_arrays"]

#: the most values (draws x instance attributes) one call may draw
MAX_SAMPLE_VALUES = 2**28


def link_arrays(skeleton: Skeleton) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Per relationship, ``(source positions, target positions)`` of its links in the skeleton's instance order."""
    pos = {t: {i: k for k, i in enumerate(ids)} for t, ids in skeleton.instances.items()}
    out = {}
    for r, rel in skeleton.schema.relationships.items():
        links = skeleton.links[r]
        ps, pt = pos[rel.source], pos[rel.target]
        src = np.fromiter((ps[s] for s, _ in links), dtype=np.int64, count=len(links))
        dst = np.fromiter((pt[t] for _, t in links), dtype=np.int64, count=len(links))
        out[r] = (src, dst)
    return out


def aggregate_edges(template: Template, skeleton: Skeleton, arrays=None):
    """Per mechanism and aggregate: ``(instance positions, related positions)``, one pair per related instance."""
    arrays = link_arrays(skeleton) if arrays is None else arrays
    out = {}
    for key, m in template.mechanisms.items():
        pairs = []
        for g in m.aggregates:
            src, dst = arrays[g.relationship]
            pairs.append((src, dst) if g.direction == ALONG else (dst, src))
        out[key] = pairs
    return out


def sample_data(template: Template, skeleton: Skeleton, draws: int = 1, seed=0, do=None) -> RelationalData:
    """``draws`` independent draws of every instance attribute of ``skeleton`` under ``template``.

    ``do`` (ground names -> states) sets those instance attributes in every
    draw, cut from their parents (the intervened model). Each attribute is
    drawn by inverse CDF from one uniform per draw, consumed in a fixed
    order, so two templates of one schema drawn with one seed use the same
    uniforms (common random numbers: their answers differ only where their
    CPTs do).

    The same template, skeleton, draws and seed give the same data. Use it
    where :func:`~intervgnn.relational.ground` would refuse the skeleton
    (too many instance attributes, or ground CPTs too large).

    An intervened attribute is still drawn after its parents (then set),
    so a skeleton cyclic only through edges the intervention cuts is refused
    all the same.

    Raises
    ------
    GraphError
        A template that is not a :class:`Template`, a skeleton over another
        schema, or links that make the ground graph cyclic (no order exists).
    DataError
        A bad ``draws`` or ``seed``, or more than ``2**28`` values to draw.
    QueryError
        A ``do`` that is not a mapping of ground names to states, or names
        an unknown instance, attribute or state.
    """
    from ..errors import DataError

    schema = check_template_skeleton(template, skeleton)
    if isinstance(draws, bool) or not isinstance(draws, (int, np.integer)) or draws < 1:
        raise DataError(f"draws must be a positive whole number, got {draws!r}")
    rng = np.random.default_rng(check_seed(seed))
    keys = list(template.mechanisms)
    fixed = _fixed(template, skeleton, do)
    sizes = {t: len(ids) for t, ids in skeleton.instances.items()}
    total = sum(sizes[t] * len(schema.entities[t]) for t in schema.entities)
    if int(draws) * total > MAX_SAMPLE_VALUES:
        raise DataError(f"{int(draws) * total:,} values to draw, more than the limit of {MAX_SAMPLE_VALUES:,}")
    # a global index per instance attribute: mechanism block after mechanism block
    base, start = {}, 0
    for t, a in keys:
        base[(t, a)] = start
        start += sizes[t]
    n_nodes = start
    agg = aggregate_edges(template, skeleton)
    # parent -> child edges of the ground graph, as arrays
    src_parts, dst_parts = [], []
    for t, a in keys:
        m = template.mechanisms[(t, a)]
        own = np.arange(sizes[t], dtype=np.int64)
        for p in m.parents:
            src_parts.append(base[(t, p)] + own)
            dst_parts.append(base[(t, a)] + own)
        for g, (inst, rel) in zip(m.aggregates, agg[(t, a)]):
            other = g.related_entity(schema)
            src_parts.append(base[(other, g.attribute)] + rel)
            dst_parts.append(base[(t, a)] + inst)
    src = np.concatenate(src_parts) if src_parts else np.zeros(0, np.int64)
    dst = np.concatenate(dst_parts) if dst_parts else np.zeros(0, np.int64)
    order = np.argsort(src, kind="stable")
    child_of = dst[order]
    first = np.searchsorted(src[order], np.arange(n_nodes + 1))
    indegree = np.bincount(dst, minlength=n_nodes)
    values = {t: np.zeros((int(draws), sizes[t], len(schema.entities[t])), dtype=np.int64) for t in schema.entities}
    attr_index = {t: {a: j for j, a in enumerate(schema.entities[t])} for t in schema.entities}
    frontier = np.flatnonzero(indegree == 0)
    done = 0
    while frontier.size:
        done += frontier.size
        for t, a in keys:
            lo = base[(t, a)]
            sel = frontier[(frontier >= lo) & (frontier < lo + sizes[t])] - lo
            if sel.size:
                _draw(template.mechanisms[(t, a)], sel, values, attr_index, agg[(t, a)], sizes[t], schema, rng)
                if (t, a) in fixed:  # intervened instances keep their set state whatever was drawn
                    where, code = fixed[(t, a)]
                    hit = np.isin(sel, where)
                    if hit.any():
                        pos = np.searchsorted(where, sel[hit])
                        values[t][:, sel[hit], attr_index[t][a]] = code[pos]
        # the children whose last parent was just drawn
        starts, stops = first[frontier], first[frontier + 1]
        count = stops - starts
        if count.sum():
            idx = np.repeat(starts - np.cumsum(count) + count, count) + np.arange(count.sum())
            children = child_of[idx]
            np.subtract.at(indegree, children, 1)
            frontier = np.unique(children[indegree[children] == 0])
        else:
            frontier = np.zeros(0, dtype=np.int64)
    if done < n_nodes:
        stuck = np.flatnonzero(indegree > 0)[0]
        for t, a in keys:
            if base[(t, a)] <= stuck < base[(t, a)] + sizes[t]:
                where = f"{t} '{skeleton.instances[t][stuck - base[(t, a)]]}' attribute '{a}'"
                break
        raise GraphError(
            f"the skeleton's links make the ground network cyclic (through {where}); remove a link on the cycle "
            "or change the template's aggregates"
        )
    return RelationalData(skeleton, values)


def _fixed(template: Template, skeleton: Skeleton, do) -> dict:
    """``{(entity, attribute): (sorted instance positions, their set codes)}`` of an intervention on ground names."""
    from ..errors import QueryError
    from .model import split_node_name

    if not do:
        return {}
    if not isinstance(do, Mapping):
        raise QueryError(f"do must map ground names to states, got {type(do).__name__}")
    schema = template.schema
    pos = {}
    out: dict = {}
    for name, state in do.items():
        t, i, a = split_node_name(name, schema)
        if t not in pos:
            pos[t] = {x: k for k, x in enumerate(skeleton.instances[t])}
        if i not in pos[t]:
            raise QueryError(f"'{t}' has no instance '{i}' in this skeleton (in '{name}')")
        states = schema.entities[t][a]
        if state not in states:
            raise QueryError(f"'{name}' has no state {state!r}; states: {', '.join(states)}")
        out.setdefault((t, a), []).append((pos[t][i], states.index(state)))
    result = {}
    for key, pairs in out.items():
        pairs.sort()
        result[key] = (np.array([p for p, _ in pairs], dtype=np.int64), np.array([c for _, c in pairs], dtype=np.int64))
    return result


def _draw(m, sel, values, attr_index, agg_pairs, n, schema, rng) -> None:
    """Draw mechanism ``m``'s attribute for the instances ``sel`` of its type, every draw at once."""
    t = m.entity
    vals = values[t]
    draws = vals.shape[0]
    row = np.zeros((draws, sel.size), dtype=np.int64)
    shape = []
    for p in m.parents:
        k = len(schema.entities[t][p])
        row = row * k + vals[:, sel, attr_index[t][p]]
        shape.append(k)
    mask = np.zeros(n, dtype=bool)
    mask[sel] = True
    where = np.full(n, -1, dtype=np.int64)
    where[sel] = np.arange(sel.size)
    for g, (inst, rel) in zip(m.aggregates, agg_pairs):
        other = g.related_entity(schema)
        code = schema.entities[other][g.attribute].index(g.state)
        keep = mask[inst]
        at, rel_sel = where[inst[keep]], rel[keep]
        degree = np.bincount(at, minlength=sel.size)
        hits = np.zeros((draws, sel.size), dtype=np.int64)
        if at.size:
            hit = (values[other][:, rel_sel, attr_index[other][g.attribute]] == code).astype(np.int64)
            for d in range(draws):
                hits[d] = np.bincount(at, weights=hit[d], minlength=sel.size).astype(np.int64)
        bins = np.zeros_like(hits)
        for dg in np.unique(degree):
            cols = degree == dg
            bins[:, cols] = g.bin_of_counts(int(dg))[hits[:, cols]]
        row = row * g.num_bins + bins
        shape.append(g.num_bins)
    k = len(schema.entities[t][m.attribute])
    cpt = np.asarray(m.cpt, dtype=np.float64).reshape(-1, k)
    cdf = np.cumsum(cpt[row], axis=-1)  # [draws, sel, k]
    u = rng.random((draws, sel.size, 1)) * cdf[..., -1:]
    vals[:, sel, attr_index[t][m.attribute]] = np.minimum((u > cdf).sum(-1), k - 1)
