"""Grounding: a template on a skeleton becomes an ordinary :class:`~intervgnn.CausalNetwork`.

Every attribute of every instance is one variable, named by
:func:`~intervgnn.relational.node_name` (``hive_4__Treated``). Its parents
are, in this order, the instance's own parent attributes (the mechanism's
order), then for each aggregate the aggregated attribute of every related
instance (in the skeleton's order of instances), each variable once. Its CPT
row for a configuration of the parents is the mechanism's row for the own
parents' states and the bins that the aggregates compute from the related
instances' states; the whole table is built with array operations.
"""

from __future__ import annotations

import math

import numpy as np

from ..bn.network import MAX_CPT_ENTRIES, MAX_NETWORK_ENTRIES, CausalNetwork
from ..errors import GraphError, NetworkError
from ..graph import CausalGraph
from .model import Schema, Template, find_cycle, node_name
from .skeleton import Skeleton

__all__ = ["ground", "MAX_GROUND_VARIABLES"]

#: the most variables a ground network may have
MAX_GROUND_VARIABLES = 100_000


def _related(skeleton: Skeleton) -> dict[tuple[str, str], dict[str, list[str]]]:
    """``(relationship, direction) -> instance id -> related ids``, in the skeleton's instance order.

    Built once per skeleton and kept on it (a skeleton is not changed after it is made).
    """
    cached = skeleton.__dict__.get("_related_ids")
    if cached is not None:
        return cached
    schema = skeleton.schema
    out = {}
    for r, rel in schema.relationships.items():
        along = {i: [] for i in skeleton.instances[rel.source]}
        against = {i: [] for i in skeleton.instances[rel.target]}
        for s, t in skeleton.links[r]:
            along[s].append(t)
            against[t].append(s)
        src_pos = {i: k for k, i in enumerate(skeleton.instances[rel.source])}
        dst_pos = {i: k for k, i in enumerate(skeleton.instances[rel.target])}
        for ids in along.values():
            ids.sort(key=dst_pos.__getitem__)
        for ids in against.values():
            ids.sort(key=src_pos.__getitem__)
        out[(r, "along")] = along
        out[(r, "against")] = against
    skeleton.__dict__["_related_ids"] = out
    return out


def ancestors(template: Template, skeleton: Skeleton, variables, stop=()) -> list[tuple[str, str, str]]:
    """The ``(entity, instance, attribute)`` of ``variables`` (ground names) and of all their ground ancestors.

    The walk does not go past the ground names in ``stop`` (intervened
    variables: their parents cannot reach anything through them).

    In the skeleton's order (entity types, then instances, then attributes,
    as :func:`ground` lays them out). Unknown names raise QueryError.
    """
    from .model import split_node_name

    schema = template.schema
    related = _related(skeleton)
    known = {t: set(ids) for t, ids in skeleton.instances.items()}
    todo = []
    for v in variables:
        e, i, a = split_node_name(v, schema)
        if i not in known[e]:
            from ..errors import QueryError

            raise QueryError(f"'{e}' has no instance '{i}' in this skeleton (in '{v}')")
        todo.append((e, i, a))
    seen = set(todo)
    stop = set(stop)
    while todo:
        t, i, a = todo.pop()
        if node_name(t, i, a) in stop:
            continue
        m = template.mechanisms[(t, a)]
        found = [(t, i, p) for p in m.parents]
        for g in m.aggregates:
            other = g.related_entity(schema)
            found += [(other, j, g.attribute) for j in related[(g.relationship, g.direction)][i]]
        for node in found:
            if node not in seen:
                seen.add(node)
                todo.append(node)
    pos = {t: {i: k for k, i in enumerate(ids)} for t, ids in skeleton.instances.items()} if len(seen) > 64 else None
    types = list(schema.entities)
    attrs = {t: list(schema.entities[t]) for t in types}

    def order(node):
        t, i, a = node
        k = pos[t][i] if pos is not None else skeleton.instances[t].index(i)
        return types.index(t), k, attrs[t].index(a)

    return sorted(seen, key=order)


def check_template_skeleton(template, skeleton) -> Schema:
    """The schema of ``template`` after checking that ``skeleton`` is a :class:`Skeleton` over it (GraphError)."""
    if not isinstance(template, Template):
        raise GraphError(f"template must be a Template, got {type(template).__name__}")
    if not isinstance(skeleton, Skeleton):
        raise GraphError(f"skeleton must be a Skeleton, got {type(skeleton).__name__}")
    if skeleton.schema != template.schema:
        raise GraphError("the skeleton is over another schema than the template; build both from one schema")
    return template.schema


def ground(template: Template, skeleton: Skeleton, name: str = "ground", keep=None, roots=()) -> CausalNetwork:
    """The ground causal network of ``template`` on ``skeleton`` (or the part a query needs).

    Parameters
    ----------
    template : Template
    skeleton : Skeleton
        Over the same schema as the template.
    name : str, default ``"ground"``
        The network's name.
    keep : iterable of str, optional
        Ground names; when given, only these variables and their ancestors
        are grounded (what an exact query on them needs: the rest of the
        ground network cannot change their distribution), so that a query
        on one unit of a skeleton of a million instances stays small.
    roots : iterable of str, optional
        Ground names grounded without parents and with uniform CPTs: the
        variables a query intervenes on, whose mechanisms the intervention
        replaces (their ancestors are then not grounded either). The result
        answers only queries that intervene on all of them.

    Returns
    -------
    CausalNetwork
        One variable per (instance, attribute); sample it with
        ``.sample(n, seed=...)`` and ask do-queries with ``.query``.

    Raises
    ------
    GraphError
        A skeleton over another schema, or links that make the ground graph
        cyclic (the message names a cycle of instance attributes).
    NetworkError
        More than :data:`MAX_GROUND_VARIABLES` variables, or a ground CPT of
        more than :data:`~intervgnn.bn.network.MAX_CPT_ENTRIES` entries (an
        instance with too many related instances), or CPTs of more than
        :data:`~intervgnn.bn.network.MAX_NETWORK_ENTRIES` in all; refused
        before any table is built.
    """
    schema = check_template_skeleton(template, skeleton)
    if keep is not None:
        if isinstance(keep, str):
            keep = [keep]
        nodes = ancestors(template, skeleton, keep, stop=roots)
        n_vars = len(nodes)
    else:
        nodes = None
        n_vars = sum(len(skeleton.instances[t]) * len(attrs) for t, attrs in schema.entities.items())
    if n_vars > MAX_GROUND_VARIABLES:
        raise NetworkError(
            f"the ground network would have {n_vars:,} variables, more than the limit of {MAX_GROUND_VARIABLES:,}"
        )
    related = _related(skeleton)
    states: dict[str, tuple[str, ...]] = {}
    parents: dict[str, list[str]] = {}
    plan: dict[str, tuple] = {}  # variable -> (mechanism, own parent positions, per-aggregate positions)
    total = 0
    if nodes is None:
        nodes = ((t, i, a) for t, attrs in schema.entities.items() for i in skeleton.instances[t] for a in attrs)
    roots = set(roots)
    for t, i, a in nodes:
        v = node_name(t, i, a)
        states[v] = schema.entities[t][a]
        if v in roots:
            parents[v], plan[v] = [], None
            continue
        m = template.mechanisms[(t, a)]
        pos: dict[str, int] = {}
        for p in m.parents:
            pos.setdefault(node_name(t, i, p), len(pos))
        agg_pos = []
        for g in m.aggregates:
            other = g.related_entity(schema)
            ids = related[(g.relationship, g.direction)][i]
            agg_pos.append([pos.setdefault(node_name(other, j, g.attribute), len(pos)) for j in ids])
        parents[v] = list(pos)
        plan[v] = (m, [pos[node_name(t, i, p)] for p in m.parents], agg_pos)
    for v, ps in parents.items():
        size = math.prod(len(states[p]) for p in ps) * len(states[v])  # Python integers: no overflow
        if size > MAX_CPT_ENTRIES:
            raise NetworkError(
                f"the ground CPT of '{v}' would have {size:,} entries ({len(ps)} parents), more than the limit of "
                f"{MAX_CPT_ENTRIES:,}; it has too many related instances for an exact table"
            )
        total += size
    if total > MAX_NETWORK_ENTRIES:
        raise NetworkError(
            f"the ground CPTs would have {total:,} entries in all, more than the limit of {MAX_NETWORK_ENTRIES:,}; "
            "ground a smaller skeleton"
        )
    cycle = find_cycle(parents)
    if cycle:
        raise GraphError(
            "the skeleton's links make the ground network cyclic: " + " -> ".join(cycle)
            + "; remove a link on this cycle or change the template's aggregates"
        )
    cpts = {
        v: np.full(len(states[v]), 1.0 / len(states[v])) if plan[v] is None else _ground_cpt(v, parents[v], states, *plan[v])
        for v in parents
    }
    graph = CausalGraph([(p, v) for v in parents for p in parents[v]], nodes=list(parents))
    return CausalNetwork(graph, states, cpts, name=name)


def _ground_cpt(v, ps, states, mech, own_pos, agg_pos) -> np.ndarray:
    cards = tuple(len(states[p]) for p in ps)
    nd = len(cards)

    def codes(k: int) -> np.ndarray:  # the codes of parent k along its own axis
        return np.arange(cards[k]).reshape([cards[k] if j == k else 1 for j in range(nd)])

    index = [codes(k) for k in own_pos]
    for g, positions in zip(mech.aggregates, agg_pos):
        lookup = g.bin_of_counts(len(positions))
        count = np.zeros((1,) * nd, dtype=np.int64)
        for k in positions:
            state = states[ps[k]].index(g.state)
            count = count + (codes(k) == state)
        index.append(lookup[count])
    table = mech.cpt[tuple(index)]
    return np.array(np.broadcast_to(table, cards + (len(states[v]),)), dtype=np.float64)
