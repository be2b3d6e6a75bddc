"""Relational queries, their exact answers, and plug-in estimates from relational data.

Queries
-------
Instances' attributes are named by their ground variable (``"orchard_3__Yield"``,
see :func:`~intervgnn.relational.node_name`) or by a triple
``(entity type, instance id, attribute)``.

:class:`UnitQuery`
    P(one instance's attribute | do(some instances' attributes), given ...),
    answered on a ground network by its exact engine.
:class:`PopulationQuery`
    The average, over all instances of an entity type, of P(attribute of the
    instance | do(policy)), where a :class:`Policy` sets one attribute to one
    state on all instances of a type, on a listed subset, or on a seeded
    random share of them.
:class:`SpilloverQuery`
    Three contrasts for one outcome unit: its own treatment units treated
    alone, its neighbours' treatment units treated alone, both, each against
    none treated (see the class for the precise definition).

Answerers
---------
:func:`exact_answer` grounds the true template on a skeleton and asks the
ground network's exact engine (which keeps only the query's ancestors in the
mutilated graph). :class:`RelationalPluginEstimator` counts each mechanism's
CPT from :class:`~intervgnn.relational.RelationalData` over all instances of
its entity type and all draws (tied parameters) and answers the same way on
the fitted template; :class:`UnlinkedPluginEstimator` is its ablation that
ignores the links (every attribute counted from its own instance's parents
only), so any effect that crosses a link comes out as exactly zero.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from ..distribution import Distribution, Interval, boundary_layers
from ..errors import (DataError, GraphError, NetworkError, NotFittedError, QueryError, ZeroEvidenceError, did_you_mean,
                      short_repr, shorten)
from ..estimators.base import Estimator, check_alpha
from ..estimators.plugin import counts_only_rows, dirichlet_draws, dirichlet_params, unseen_row_variants
from .data import RelationalData
from .grounding import MAX_GROUND_VARIABLES, _related, ground
from .model import Mechanism, Schema, Template, node_name, split_node_name
from .skeleton import Skeleton

__all__ = [
    "UnitQuery",
    "Policy",
    "PopulationQuery",
    "SpilloverQuery",
    "SpilloverEffects",
    "exact_answer",
    "RelationalPluginEstimator",
    "UnlinkedPluginEstimator",
    "MAX_POPULATION_INSTANCES",
]

#: the most instances one population query averages over (one exact query each)
MAX_POPULATION_INSTANCES = 10_000


# ---------------------------------------------------------------- references


def _resolve(ref, skeleton: Skeleton, role: str) -> tuple[str, str, str]:
    """``(entity, instance, attribute)`` of a ground name or a triple, checked against the skeleton."""
    schema = skeleton.schema
    if isinstance(ref, str):
        try:
            entity, instance, attribute = split_node_name(ref, schema)
        except GraphError as exc:
            raise QueryError(f"{role}: {exc}") from None
    elif isinstance(ref, tuple) and len(ref) == 3 and all(isinstance(x, str) for x in ref):
        entity, instance, attribute = ref
        if entity not in schema.entities:
            raise QueryError(
                f"{role}: unknown entity type {short_repr(entity)}; types are: "
                f"{', '.join(sorted(schema.entities))}{did_you_mean(entity, schema.entities)}"
            )
        attrs = schema.entities[entity]
        if attribute not in attrs:
            raise QueryError(
                f"{role}: entity type '{entity}' has no attribute {short_repr(attribute)}; attributes are: "
                f"{', '.join(sorted(attrs))}{did_you_mean(attribute, attrs)}"
            )
    else:
        raise QueryError(
            f"{role}: expected a ground variable name such as 'orchard_1__Yield' or a triple "
            f"(entity type, instance id, attribute), got {short_repr(ref)}"
        )
    if instance not in skeleton.instances[entity]:
        ids = skeleton.instances[entity]
        raise QueryError(
            f"{role}: '{entity}' has no instance {short_repr(instance)} in this skeleton"
            f"{did_you_mean(instance, ids) if len(ids) <= 10_000 else ''}"
        )
    return entity, instance, attribute


def _state(schema: Schema, entity: str, attribute: str, state, role: str) -> str:
    states = schema.entities[entity][attribute]
    if not isinstance(state, str) or state not in states:
        raise QueryError(
            f"{role}: {short_repr(state)} is not a state of '{entity}.{attribute}'; states are: "
            f"{shorten(', '.join(states))}{did_you_mean(state, states) if isinstance(state, str) else ''}"
        )
    return state


def _assignment(raw, skeleton: Skeleton, role: str) -> dict[str, str]:
    """Ground name -> state of a mapping of references to states."""
    if raw is None:
        return {}
    if not isinstance(raw, Mapping):
        raise QueryError(f"{role} must be a mapping of instance attribute -> state, got {short_repr(raw)}")
    out = {}
    for ref, state in raw.items():
        e, i, a = _resolve(ref, skeleton, f"{role}")
        out[node_name(e, i, a)] = _state(skeleton.schema, e, a, state, f"{role} of '{node_name(e, i, a)}'")
    return out


def _entity_attribute(schema: Schema, entity, attribute, role: str) -> None:
    if not isinstance(entity, str) or entity not in schema.entities:
        raise QueryError(
            f"{role}: unknown entity type {short_repr(entity)}; types are: {', '.join(sorted(schema.entities))}"
            f"{did_you_mean(entity, schema.entities) if isinstance(entity, str) else ''}"
        )
    attrs = schema.entities[entity]
    if not isinstance(attribute, str) or attribute not in attrs:
        raise QueryError(
            f"{role}: entity type '{entity}' has no attribute {short_repr(attribute)}; attributes are: "
            f"{', '.join(sorted(attrs))}{did_you_mean(attribute, attrs) if isinstance(attribute, str) else ''}"
        )


# ---------------------------------------------------------------- queries


@dataclass(frozen=True)
class UnitQuery:
    """P(``target`` | do(``do``), ``given``) for instances' attributes of one skeleton.

    Parameters
    ----------
    target : str or (entity, instance, attribute)
        One instance's attribute (a ground name such as ``"orchard_1__Yield"``
        or a triple).
    do : mapping, optional
        Instance attributes (names or triples) -> the states they are set to.
    given : mapping, optional
        Instance attributes -> observed states (after the intervention).
    """

    target: str | tuple
    do: Mapping = field(default_factory=dict)
    given: Mapping = field(default_factory=dict)


@dataclass(frozen=True)
class Policy:
    """Set ``attribute`` to ``state`` on instances of ``entity``.

    With neither ``instances`` nor ``share``: on every instance. With
    ``instances``: on those listed ids. With ``share`` (0 to 1): on
    ``round(share * n)`` instances of the ``n``, drawn without repetition by
    ``numpy.random.default_rng(seed)`` from the skeleton's order of ids (the
    same skeleton and seed give the same instances).
    """

    entity: str
    attribute: str
    state: str
    instances: Sequence[str] | None = None
    share: float | None = None
    seed: int = 0

    def units(self, skeleton: Skeleton) -> list[str]:
        """The ids of the instances the policy sets, in the skeleton's order.

        Raises
        ------
        QueryError
            An unknown entity type, attribute, state or instance, both
            ``instances`` and ``share`` given, a share outside 0 to 1 or a
            bad seed.
        """
        schema = skeleton.schema
        _entity_attribute(schema, self.entity, self.attribute, "policy")
        _state(schema, self.entity, self.attribute, self.state, "policy")
        ids = skeleton.instances[self.entity]
        if self.instances is not None and self.share is not None:
            raise QueryError("policy: give either instances or share, not both")
        if self.instances is not None:
            if isinstance(self.instances, (str, bytes)) or not isinstance(self.instances, Sequence):
                raise QueryError(f"policy: instances must be a list of ids, got {short_repr(self.instances)}")
            known = set(ids)
            for i in self.instances:
                if not isinstance(i, str) or i not in known:
                    raise QueryError(
                        f"policy: '{self.entity}' has no instance {short_repr(i)} in this skeleton"
                        f"{did_you_mean(i, ids) if isinstance(i, str) and len(ids) <= 10_000 else ''}"
                    )
            chosen = set(self.instances)
            return [i for i in ids if i in chosen]
        if self.share is None:
            return list(ids)
        share = self.share
        if isinstance(share, bool) or not isinstance(share, (int, float, np.integer, np.floating)) or not 0 <= share <= 1:
            raise QueryError(f"policy: share must be a number from 0 to 1, got {short_repr(share)}")
        seed = self.seed
        if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or not 0 <= seed < 2**63:
            raise QueryError(f"policy: seed must be a non-negative whole number, got {short_repr(seed)}")
        k = int(round(float(share) * len(ids)))
        pick = np.random.default_rng(int(seed)).choice(len(ids), size=k, replace=False)
        return [ids[j] for j in sorted(pick.tolist())]


@dataclass(frozen=True)
class PopulationQuery:
    """The average over all instances ``i`` of ``entity`` of P(``attribute`` of i | do(``policy``)).

    ``policy`` may be ``None`` (no intervention: the average observational
    marginal). Where the policy sets the queried attribute of an instance
    itself, that instance contributes a point mass on the set state.
    """

    entity: str
    attribute: str
    policy: Policy | None = None


@dataclass(frozen=True)
class SpilloverQuery:
    """Own, neighbours' and both treatments' effects on one unit's outcome.

    Parameters
    ----------
    outcome : str or (entity, instance, attribute)
        The outcome attribute of the unit ``u``.
    treatment_entity, treatment_attribute : str
        The treatment: an attribute of an entity type.
    treated, untreated : str
        Its states for "treated" and "not treated".
    state : str
        The outcome state whose probability the contrasts compare.

    Definition
    ----------
    *Own treatment units* of ``u``: ``u`` itself when the treatment is an
    attribute of ``u``'s own entity type (the one-type peer case, e.g. a
    keeper's ``Training``); otherwise the instances of the treatment's type
    linked to ``u`` by any link in either direction (the bipartite case:
    for orchard ``o`` and ``hive.Treated``, the hives pollinating ``o``).
    *Neighbour treatment units*: in the one-type case, the instances linked
    to ``u`` in either direction, ``u`` left out (e.g. the keepers who
    advise ``u`` and those ``u`` advises); in the bipartite case, the
    treatment units of ``u``'s peers (the instances of ``u``'s type that
    share a treatment unit with ``u``) that are not ``u``'s own (the hives
    of the orchards sharing a hive with ``o``). With ``p(own, nbr)`` =
    P(outcome = state | do(own units = own, neighbour units = nbr)):

    * ``own = p(treated, untreated) - p(untreated, untreated)``
    * ``neighbours = p(untreated, treated) - p(untreated, untreated)``
    * ``both = p(treated, treated) - p(untreated, untreated)``

    An empty set of units leaves its contrast at 0. On the bipartite
    benchmark an orchard's yield depends only on the hives pollinating it,
    so there ``neighbours`` is 0 and the cross-link effect is ``own``.
    """

    outcome: str | tuple
    treatment_entity: str
    treatment_attribute: str
    treated: str
    untreated: str
    state: str


@dataclass(frozen=True)
class SpilloverEffects:
    """The answer to a :class:`SpilloverQuery`: three contrasts and the units behind them.

    ``intervals``, from :meth:`RelationalPluginEstimator.query_interval`,
    maps ``"own"``, ``"neighbours"`` and ``"both"`` to an
    :class:`~intervgnn.distribution.Interval` over that contrast.
    """

    own: float
    neighbours: float
    both: float
    own_units: tuple[str, ...]
    neighbour_units: tuple[str, ...]
    intervals: Mapping[str, Interval] | None = field(default=None, compare=False, repr=False)

    def to_dict(self) -> dict:
        """A JSON-ready dict: the contrasts, the units, and each contrast's interval where there is one."""
        out = {"own": self.own, "neighbours": self.neighbours, "both": self.both,
               "own_units": list(self.own_units), "neighbour_units": list(self.neighbour_units)}
        if self.intervals is not None:
            out["intervals"] = {name: iv.to_dict() for name, iv in self.intervals.items()}
        return out


# ---------------------------------------------------------------- answering


def _linked(skeleton: Skeleton, entity: str, instance: str, other: str) -> list[str]:
    """Instances of ``other`` linked to ``entity`` ``instance`` by any relationship, either direction (skeleton order)."""
    found: set[str] = set()
    for r, rel in skeleton.schema.relationships.items():
        for s, t in skeleton.links[r]:
            if rel.source == entity and rel.target == other and s == instance:
                found.add(t)
            if rel.target == entity and rel.source == other and t == instance:
                found.add(s)
    return [i for i in skeleton.instances[other] if i in found]


def _spillover_units(skeleton: Skeleton, entity: str, instance: str, t_entity: str) -> tuple[list[str], list[str]]:
    if t_entity == entity:
        own = [instance]
        nbrs = [i for i in _linked(skeleton, entity, instance, entity) if i != instance]
        return own, nbrs
    own = _linked(skeleton, entity, instance, t_entity)
    own_set = set(own)
    peers: set[str] = set()
    for h in own:
        peers.update(p for p in _linked(skeleton, t_entity, h, entity) if p != instance)
    nbr_set: set[str] = set()
    for p in peers:
        nbr_set.update(h for h in _linked(skeleton, entity, p, t_entity) if h not in own_set)
    return own, [i for i in skeleton.instances[t_entity] if i in nbr_set]


def _answer(template: Template, skeleton: Skeleton, query, net=None):
    if not isinstance(skeleton, Skeleton):
        raise QueryError(f"skeleton must be a Skeleton, got {type(skeleton).__name__}")
    if skeleton.schema != template.schema:
        raise QueryError("the skeleton is over another schema than the template; build both from one schema")
    schema = skeleton.schema
    if isinstance(query, UnitQuery):
        e, i, a = _resolve(query.target, skeleton, "target")
        do = _assignment(query.do, skeleton, "do")
        given = _assignment(query.given, skeleton, "given")
        target = node_name(e, i, a)
        try:
            if net is None:  # only the part of the ground network the query needs
                net = ground(template, skeleton, keep=[target, *do, *given], roots=do)
            return net.query(target, do=do, given=given)
        except NetworkError as exc:  # ground CPTs or elimination tables too large: Monte Carlo
            if given:
                raise QueryError(f"{exc}; a Monte Carlo answer with evidence (given) is not supported") from None
            return _mc_unit(template, skeleton, target, do, str(exc))
    if isinstance(query, PopulationQuery):
        _entity_attribute(schema, query.entity, query.attribute, "population query")
        if query.policy is not None and not isinstance(query.policy, Policy):
            raise QueryError(f"policy must be a Policy or None, got {type(query.policy).__name__}")
        ids = skeleton.instances[query.entity]
        if len(ids) > MAX_POPULATION_INSTANCES:
            raise QueryError(
                f"the population of '{query.entity}' has {len(ids):,} instances, more than the limit of "
                f"{MAX_POPULATION_INSTANCES:,} exact queries; use a smaller skeleton"
            )
        do = {}
        if query.policy is not None:
            p = query.policy
            do = {node_name(p.entity, u, p.attribute): p.state for u in p.units(skeleton)}
        states = schema.entities[query.entity][query.attribute]
        targets = [node_name(query.entity, i, query.attribute) for i in ids]
        label = f"{query.entity}.{query.attribute}"
        policy = "" if query.policy is None else f" | do({query.policy.entity}.{query.policy.attribute}={query.policy.state} on {len(do)})"
        description = f"average P({label}{policy})"
        try:
            net = ground(template, skeleton) if net is None else net
            total = np.sum(net.marginals(targets, do), axis=0) / len(ids)
        except NetworkError as exc:
            draws = MC_POPULATION_DRAWS
            counts = _mc_counts(template, skeleton, do, draws, query.entity, query.attribute)
            total = counts / counts.sum()
            description += f" (Monte Carlo, {draws:,} draws of the skeleton: {exc})"
        return Distribution([label], [states], total, description=description)
    if isinstance(query, SpilloverQuery):
        e, i, a = _resolve(query.outcome, skeleton, "outcome")
        state = _state(schema, e, a, query.state, "outcome state")
        te, ta = query.treatment_entity, query.treatment_attribute
        _entity_attribute(schema, te, ta, "treatment")
        on = _state(schema, te, ta, query.treated, "treated state")
        off = _state(schema, te, ta, query.untreated, "untreated state")
        own, nbrs = _spillover_units(skeleton, e, i, te)
        target = node_name(e, i, a)
        try:
            if net is None:
                treated = [node_name(te, u, ta) for u in own + nbrs]
                net = ground(template, skeleton, keep=[target] + treated, roots=[v for v in treated if v != target])
        except NetworkError:
            net = None  # Monte Carlo below

        def p(own_state: str, nbr_state: str) -> float:
            do = {node_name(te, u, ta): own_state for u in own}
            do.update({node_name(te, u, ta): nbr_state for u in nbrs})
            if target in do:
                return float(do[target] == state)
            if net is not None:
                try:
                    return net.query(target, do=do)[state]
                except NetworkError:
                    pass
            return _mc_unit(template, skeleton, target, do, "")[state]

        base = p(off, off)
        return SpilloverEffects(
            own=p(on, off) - base, neighbours=p(off, on) - base, both=p(on, on) - base,
            own_units=tuple(own), neighbour_units=tuple(nbrs),
        )
    raise QueryError(
        f"expected a UnitQuery, PopulationQuery or SpilloverQuery, got {type(query).__name__}"
    )


#: draws of the whole skeleton for a Monte Carlo unit answer (standard error at most 0.5 / sqrt(draws) = 0.0025)
MC_UNIT_DRAWS = 40_000
#: draws of the whole skeleton for a Monte Carlo population answer (averaged over the instances as well)
MC_POPULATION_DRAWS = 4_000
#: seed of every Monte Carlo answer: the truth and every estimator draw with the same uniforms, so their
#: answers differ only where their CPTs do (common random numbers)
MC_SEED = 0
#: the most values one batch of Monte Carlo draws holds
_MC_BATCH_VALUES = 2**25


def _mc_counts(template: Template, skeleton: Skeleton, do: Mapping[str, str], draws: int, entity: str,
               attribute: str, instance: int | None = None, seed: int = MC_SEED) -> np.ndarray:
    """Counts of each state of ``entity.attribute`` over draws of the whole skeleton under ``do``.

    Of one instance (its position ``instance``) or, with ``instance=None``,
    of every instance pooled. Drawn in batches that bound memory; only the
    counts of each batch are kept.
    """
    from .sampling import sample_data

    schema = skeleton.schema
    k = len(schema.entities[entity][attribute])
    col = list(schema.entities[entity]).index(attribute)
    values_per_draw = sum(len(skeleton.instances[t]) * len(a) for t, a in schema.entities.items())
    batch = max(1, min(draws, _MC_BATCH_VALUES // max(values_per_draw, 1)))
    counts = np.zeros(k)
    for b, start in enumerate(range(0, draws, batch)):
        data = sample_data(template, skeleton, draws=min(batch, draws - start), seed=seed + b, do=do)
        codes = data.values[entity][:, :, col] if instance is None else data.values[entity][:, instance, col]
        counts += np.bincount(codes.reshape(-1), minlength=k)
    return counts


def _mc_unit(template: Template, skeleton: Skeleton, target: str, do: Mapping[str, str], why: str) -> Distribution:
    """P(target | do) by Monte Carlo over whole draws of the skeleton (where exact inference is too large)."""
    e, i, a = split_node_name(target, skeleton.schema)
    states = skeleton.schema.entities[e][a]
    draws = MC_UNIT_DRAWS
    probs = _mc_counts(template, skeleton, do, draws, e, a, instance=skeleton.instances[e].index(i)) / draws
    se = float(np.sqrt((probs * (1 - probs)).max() / draws))
    do_text = ", ".join(f"{k}={v}" for k, v in do.items())
    note = f"Monte Carlo, {draws:,} draws, standard error at most {se:.4f}" + (f": {why}" if why else "")
    return Distribution([target], [states], probs, description=f"P({target}{' | do(' + do_text + ')' if do else ''}) ({note})")


def exact_answer(template: Template, skeleton: Skeleton, query, network=None):
    """The exact answer to a relational query under the true ``template`` on ``skeleton``.

    The template is grounded on the skeleton and the ground network's exact
    engine answers (it keeps only the ancestors of the target in the
    mutilated graph). ``network``, if given, is that ground network already
    built (``ground(template, skeleton)``), for many queries on one skeleton.

    Returns
    -------
    Distribution
        For a :class:`UnitQuery` or :class:`PopulationQuery`.
    SpilloverEffects
        For a :class:`SpilloverQuery`.

    Raises
    ------
    QueryError
        An unknown entity type, instance, attribute or state, a skeleton
        over another schema, a population of more than
        :data:`MAX_POPULATION_INSTANCES` instances, or not a query.
    NetworkError
        The ground network would be too large (more than
        :data:`~intervgnn.relational.MAX_GROUND_VARIABLES` variables or too
        large ground CPTs); refused before any table is built.
    GraphError
        The skeleton's links make the ground network cyclic.
    """
    if not isinstance(template, Template):
        raise QueryError(f"template must be a Template, got {type(template).__name__}")
    return _answer(template, skeleton, query, network)


# ---------------------------------------------------------------- estimators


def aggregate_counts(data: RelationalData, mech: Mechanism, g, related) -> tuple[np.ndarray, np.ndarray]:
    """``hits [draws, n]`` and ``degree [n]`` of aggregate ``g`` for every instance of the mechanism's type.

    ``hits``: related instances in the aggregate's state; ``degree``: related instances in all.
    """
    schema, skeleton = data.schema, data.skeleton
    ids = skeleton.instances[mech.entity]
    other = g.related_entity(schema)
    other_attrs = list(schema.entities[other])
    vals_other = data._values[other][:, :, other_attrs.index(g.attribute)]
    hit = (vals_other == schema.entities[other][g.attribute].index(g.state)).astype(np.int64)
    pos = {j: k for k, j in enumerate(skeleton.instances[other])}
    rel = related[(g.relationship, g.direction)]
    lists = [rel[i] for i in ids]
    degree = np.fromiter((len(x) for x in lists), dtype=np.int64, count=len(ids))
    src = np.repeat(np.arange(len(ids), dtype=np.int64), degree)
    dst = np.fromiter((pos[j] for x in lists for j in x), dtype=np.int64, count=int(degree.sum()))
    hits = np.zeros((hit.shape[0], len(ids)), dtype=np.int64)
    if src.size:
        np.add.at(hits, (slice(None), src), hit[:, dst])
    return hits, degree


def _count_mechanism(data: RelationalData, mech: Mechanism, aggregates, related) -> np.ndarray:
    """Counts of (own parents, aggregate bins, own state) over all instances and draws, CPT-shaped."""
    schema = data.schema
    t = mech.entity
    attrs = list(schema.entities[t])
    vals = data._values[t]  # [draws, instances, attributes]
    codes = [vals[:, :, attrs.index(p)] for p in mech.parents]
    shape = [len(schema.entities[t][p]) for p in mech.parents]
    for g in aggregates:
        count, degree = aggregate_counts(data, mech, g, related)
        bins = np.empty_like(count)
        for d in np.unique(degree):  # a loop over distinct degrees, not over rows
            cols = degree == d
            bins[:, cols] = g.bin_of_counts(int(d))[count[:, cols]]
        codes.append(bins)
        shape.append(g.num_bins)
    k = len(schema.entities[t][mech.attribute])
    codes.append(vals[:, :, attrs.index(mech.attribute)])
    shape.append(k)
    flat = np.ravel_multi_index(tuple(c.reshape(-1) for c in codes), shape)
    return np.bincount(flat, minlength=int(np.prod(shape))).reshape(shape).astype(np.float64)


def check_fit_data(datas, template) -> None:
    """DataError unless every item of ``datas`` is :class:`RelationalData` over the schema of the :class:`Template`."""
    for d in datas:
        if not isinstance(d, RelationalData):
            raise DataError(f"fit expects RelationalData, got {type(d).__name__}")
    if not isinstance(template, Template):
        raise DataError(f"fit expects a Template, got {type(template).__name__}")
    for d in datas:
        if d.schema != template.schema:
            raise DataError("the data are over another schema than the template; build both from one schema")


class RelationalPluginEstimator(Estimator):
    """Tied-parameter plug-in: count each mechanism's CPT over all instances and draws, then answer exactly.

    ``fit(data, template)`` reads the template's structure only (each
    mechanism's own parents and aggregates, not its CPTs): for every
    mechanism it counts, over all instances of its entity type and all
    draws of ``data``, how often each (own parents' states, aggregate bins,
    own state) configuration occurs, and turns the counts into a CPT with
    additive smoothing ``(count + alpha) / (row total + alpha * k)`` (a row
    never seen with ``alpha = 0`` gets the uniform row). :meth:`query`
    grounds the fitted template on the fitted skeleton or on another one and
    answers with the exact engine.

    Parameters
    ----------
    alpha : float, default 1.0
        Additive smoothing pseudo-count per state (1.0 is Laplace's rule).

    Attributes
    ----------
    template_ : Template
        The fitted template (the given structure with counted CPTs).
    counts_ : dict of (entity, attribute) to numpy.ndarray
        The raw counts, CPT-shaped.
    alpha_ : float
        The smoothing the CPTs were fitted with (the posterior's prior).
    skeleton_ : Skeleton
        The skeleton of the data (the default for queries).
    """

    name = "relational-plugin"

    def __init__(self, alpha: float = 1.0):
        self.alpha = alpha

    def _check_settings(self) -> None:
        check_alpha(self.alpha)

    def _aggregates(self, mech: Mechanism) -> tuple:
        return mech.aggregates

    def fit(self, data: RelationalData, template: Template) -> RelationalPluginEstimator:
        """Count the template's mechanisms from ``data``.

        Raises
        ------
        DataError
            A bad ``alpha``, data that are not :class:`RelationalData`, a
            template that is not a :class:`Template`, or data over another
            schema than the template.
        """
        self._check_settings()
        check_fit_data([data], template)
        self._clear_fitted()
        related = _related(data.skeleton)
        alpha = float(self.alpha)
        counts, mechs = {}, []
        for key, m in template.mechanisms.items():
            aggs = self._aggregates(m)
            c = _count_mechanism(data, m, aggs, related)
            params = dirichlet_params(c, alpha)
            c.setflags(write=False)
            counts[key] = c
            mechs.append(Mechanism(m.entity, m.attribute, params / params.sum(axis=-1, keepdims=True),
                                   parents=m.parents, aggregates=aggs))
        self.template_ = Template(template.schema, mechs)
        self.counts_ = counts
        self.alpha_ = alpha
        self.skeleton_ = data.skeleton
        return self

    def _check_fitted(self) -> None:
        if not hasattr(self, "template_"):
            raise NotFittedError(f"this {type(self).__name__} is not fitted yet; call fit(data, template) first")

    def query(self, query, skeleton: Skeleton | None = None):
        """Estimate a :class:`UnitQuery`, :class:`PopulationQuery` or :class:`SpilloverQuery`.

        Parameters
        ----------
        query
            The query.
        skeleton : Skeleton, optional
            Ground the fitted template here (default: the data's skeleton).

        Returns
        -------
        Distribution or SpilloverEffects
            As :func:`exact_answer`.

        Raises
        ------
        NotFittedError
            Before ``fit``.
        QueryError, NetworkError, GraphError
            As :func:`exact_answer`.
        """
        self._check_fitted()
        skeleton = self.skeleton_ if skeleton is None else skeleton
        # the ground network of the last skeleton asked about is kept for the next query on it
        # the ground network of the last skeleton asked about is kept for the next query on it; a skeleton
        # too large to ground whole is grounded per query, only as far as the query needs
        cached = getattr(self, "_grounded", None)
        if cached is None or cached[0] is not self.template_ or cached[1] is not skeleton:
            if not isinstance(skeleton, Skeleton) or skeleton.schema != self.template_.schema:
                return _answer(self.template_, skeleton, query)  # the refusal, with its message
            size = sum(len(skeleton.instances[t]) * len(a) for t, a in skeleton.schema.entities.items())
            whole = None
            if size <= MAX_GROUND_VARIABLES:
                try:
                    whole = ground(self.template_, skeleton)
                except NetworkError:  # ground CPTs too large in all: ground per query
                    whole = None
            cached = (self.template_, skeleton, whole)
            self._grounded = cached
        return _answer(self.template_, skeleton, query, cached[2])

    def effect(self, *args, **kwargs):  # the single-table contrast does not apply here
        raise QueryError(f"{type(self).__name__} answers relational queries; use a SpilloverQuery for contrasts")

    # ------------------------------------------------------------ intervals
    #: CPT sets drawn from the posterior when an interval is asked without ``draws``
    posterior_draws = 100

    def _draw_cpt(self, rng: np.random.Generator, key) -> np.ndarray:
        """One CPT of mechanism ``key`` from its posterior: each row Dirichlet(counts + alpha), a row never seen uniform."""
        return dirichlet_draws(rng, dirichlet_params(self.counts_[key], self.alpha_))

    def query_interval(self, query, skeleton: Skeleton | None = None, level: float = 0.95, draws: int | None = None,
                       seed: int = 0):
        """:meth:`query` with a central ``level`` interval from the posterior of the tied CPTs.

        Each of ``draws`` (default 100) CPT sets is drawn from the posterior
        of the tied CPTs (:meth:`_draw_cpt`: for the plug-in, every row a
        Dirichlet of its counts plus ``alpha``, whose mean the fitted CPTs
        are), grounded on the
        skeleton and answered exactly; the bounds are the quantiles of those
        answers, on every probability of a unit or population answer and on
        each of a spill-over answer's three contrasts. Like every interval
        of the package it covers the uncertainty from the data, not the
        template's assumptions. A probability the counts allow to be exactly
        0 or 1 keeps that value inside its interval (no draw reaches it; see
        :meth:`_boundary_layers`), and the interval always holds the answer
        itself.
        Each draw grounds the query's part of the skeleton again: a unit
        query costs draws times a pruned grounding, a population query
        draws times the whole skeleton. A query the exact engine cannot
        answer on the skeleton (a Monte Carlo answer) gets no interval.

        Raises
        ------
        NotFittedError, QueryError, NetworkError, GraphError
            As :meth:`query`; a bad ``level``, ``draws`` or ``seed``; a
            unit or population query answered by Monte Carlo.
        """
        from ..query import check_seed

        self._check_fitted()
        self._check_interval_settings(level, draws, seed)
        point = self.query(query, skeleton=skeleton)
        if isinstance(point, Distribution) and "Monte Carlo" in (point.description or ""):
            raise QueryError(
                "this query is answered by Monte Carlo on this skeleton (exact inference is too large), and an "
                "interval would repeat that simulation for each of its draws; ask on a smaller skeleton"
            )
        skeleton = self.skeleton_ if skeleton is None else skeleton
        draws = self.posterior_draws if draws is None else int(draws)
        rng = np.random.default_rng(check_seed(seed))
        samples = []
        for _ in range(draws):
            mechs = [Mechanism(m.entity, m.attribute, self._draw_cpt(rng, key), parents=m.parents,
                               aggregates=m.aggregates) for key, m in self.template_.mechanisms.items()]
            answer = _answer(Template(self.template_.schema, mechs), skeleton, query)
            if isinstance(answer, SpilloverEffects):
                samples.append([answer.own, answer.neighbours, answer.both])
            else:
                samples.append(answer.probs)
        samples = np.asarray(samples)
        if isinstance(point, SpilloverEffects):
            return replace(point, intervals={name: Interval(level, samples[:, j], "posterior",
                                                            estimate=getattr(point, name))
                                             for j, name in enumerate(("own", "neighbours", "both"))})
        return Distribution(point.variables, point.states, point.probs, description=point.description,
                            interval=Interval(level, samples, "posterior", self._boundary_layers(skeleton, query),
                                              estimate=point.probs))

    def _boundary_layers(self, skeleton: Skeleton, query) -> np.ndarray | None:
        """``[3, *shape]``: the answer's exact 0s and 1s that the counts allow, NaN elsewhere.

        As :meth:`Estimator._counts_only_answers` does for one table: layer 0
        the 0s and 1s of the counts-only answer (a probability no draw
        reaches, since every drawn row is inside the simplex); layers 1 and
        2 every 0 and every 1 the answer takes when the never-seen rows of
        the outcome's mechanism are all put on one of its states (the rows
        say nothing about them, so each such template fits them as well).
        None where the counts-only template gives the query's evidence
        probability zero.
        """
        try:
            found = [_answer(self._counts_only_template(), skeleton, query).probs]
        except ZeroEvidenceError:  # the evidence impossible under the counts alone: no widening
            return None
        if isinstance(query, UnitQuery):
            entity, _, attribute = _resolve(query.target, skeleton, "target")
        else:
            entity, attribute = query.entity, query.attribute
        counts = self.counts_[(entity, attribute)]
        if (counts.sum(axis=-1) == 0).any():
            for rows in unseen_row_variants(counts, counts_only_rows(counts)):
                try:
                    found.append(_answer(self._counts_only_template({(entity, attribute): rows}), skeleton, query).probs)
                except ZeroEvidenceError:  # the evidence impossible in this variant
                    pass
        return boundary_layers(found)

    def _counts_only_template(self, rows: Mapping | None = None) -> Template:
        """The fitted template with unsmoothed CPTs (count / row total; a row never seen uniform), or ``rows`` given."""
        rows = rows or {}
        return Template(self.template_.schema, [
            Mechanism(m.entity, m.attribute, rows[key] if key in rows else counts_only_rows(self.counts_[key]),
                      parents=m.parents, aggregates=m.aggregates)
            for key, m in self.template_.mechanisms.items()
        ])


class UnlinkedPluginEstimator(RelationalPluginEstimator):
    """The ablation that ignores the links: every attribute counted from its own instance's parents only.

    The template's aggregates are dropped before counting, so the fitted
    template treats instances as independent copies of one network. Any
    effect that crosses a link (a :class:`SpilloverQuery`'s neighbours'
    contrast, or in the bipartite case all three) comes out as exactly
    zero. Settings, attributes and queries as
    :class:`RelationalPluginEstimator`.
    """

    name = "unlinked-plugin"

    def _aggregates(self, mech: Mechanism) -> tuple:
        return ()
