"""Seeded relational benchmarks: three invented templates and random skeletons for them.

Each benchmark is a :class:`~intervgnn.relational.Template` whose mechanism
CPT rows are drawn from a symmetric Dirichlet of a given ``concentration``
(small: peaked rows; 1: uniform over the simplex; large: flat rows), as the
random networks of :mod:`intervgnn.bn.synthetic` draw theirs, together with
a seeded random :class:`~intervgnn.relational.Skeleton` generator.

``bipartite``
    An invented fruit co-operative. Hives (``Treated`` {no, yes},
    ``Strength`` {weak, strong} depending on ``Treated``) pollinate orchards
    (``Soil`` {poor, rich}, ``Yield`` {low, mid, high} depending on ``Soil``,
    on the share of the hives pollinating the orchard that are treated and
    on the share that are strong). Relationship ``pollinates``: hive ->
    orchard.
``peer``
    Beekeepers of one entity type ``keeper`` (``Training`` {none, some},
    ``Practice`` {old, new} depending on the keeper's own ``Training`` and on
    the share of the keepers who advise them that follow the new practice).
    Relationship ``advises``: keeper -> keeper. A one-type template like this
    grounds to a cycle when the links are cyclic, so :func:`peer_skeleton`
    only makes links from a keeper to a keeper of a higher number.
``chain``
    Three types in a chain: nurseries (``Stock`` {poor, good}) supply groves
    (``Vigour`` {low, high}, depending on the share of supplying nurseries
    with good stock), groves sell to markets (``Price`` {low, mid, high},
    depending on the count of vigorous groves selling there: 0, 1-2 or 3+).
    Relationships ``supplies``: nursery -> grove, ``sells_to``: grove ->
    market.

Skeletons
---------
Instance ids are ``"1"``, ``"2"``, ... in every type. ``degree`` is the mean
number of instances each aggregating instance is linked from (the in-degree
of orchards, keepers, groves and markets; it sets the size of their ground
CPTs). The total number of links is ``round(degree * instances)`` of the
aggregating type, spread over its instances by ``distribution``:

``poisson``
    Every link falls on an instance uniformly at random (degrees are
    binomial, close to Poisson for many instances).
``uniform``
    Degrees spread evenly from 0 to about ``2 * degree``.
``heavy-tailed``
    Degrees follow a Pareto (Lomax, shape 2.5) law: most instances have few
    links, a few hubs have many.

The linked sources of an instance are drawn uniformly without repetition
among its candidates. Where an instance draws more links than it has
candidates (or than ``max_degree``), it keeps only that many, so the mean
falls a little below ``degree``. The same arguments and seed give the same
template and skeleton on every machine (numpy's ``default_rng``).

Configs and the command line name a benchmark with a spec such as
``relational:bipartite,instances=200,degree=3,seed=0`` (see
:func:`parse_relational_spec`).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from ..errors import DataError, did_you_mean, short_repr, shorten
from .model import AGAINST, COUNT, SHARE, Aggregate, Mechanism, Schema, Template
from .skeleton import MAX_INSTANCES, MAX_LINKS, Skeleton

__all__ = [
    "bipartite_template",
    "peer_template",
    "chain_template",
    "bipartite_skeleton",
    "peer_skeleton",
    "chain_skeleton",
    "RelationalSpec",
    "relational_benchmark",
    "parse_relational_spec",
    "is_relational_spec",
    "RELATIONAL_PREFIX",
    "RELATIONAL_BENCHMARKS",
    "DEGREE_DISTRIBUTIONS",
]

#: prefix of a relational benchmark spec in configs and on the command line
RELATIONAL_PREFIX = "relational:"
#: names of the benchmarks, for :func:`relational_benchmark`
RELATIONAL_BENCHMARKS = ("bipartite", "peer", "chain")
#: degree distributions the skeleton generators accept
DEGREE_DISTRIBUTIONS = ("poisson", "uniform", "heavy-tailed")
#: bump when a drawing procedure changes (a spec then names another benchmark)
GENERATOR_VERSION = 1
_PARETO_SHAPE = 2.5
#: the most bins a benchmark's aggregate may have
MAX_BINS = 100
_TEMPLATE_STREAM, _SKELETON_STREAM = 1, 2


# ---------------------------------------------------------------- argument checks


def _whole(value, name: str, lo: int, hi: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not lo <= value <= hi:
        raise DataError(f"{name} must be a whole number from {lo:,} to {hi:,}, got {short_repr(value)}")
    return int(value)


def _number(value, name: str, lo: float, hi: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise DataError(f"{name} must be a number from {lo:g} to {hi:g}, got {short_repr(value)}")
    v = float(value)
    if not (math.isfinite(v) and lo <= v <= hi):
        raise DataError(f"{name} must be a number from {lo:g} to {hi:g}, got {short_repr(value)}")
    return v


def _seed(seed) -> int:
    return _whole(seed, "seed", 0, 2**63 - 1)


def _concentration(value) -> float:
    return _number(value, "concentration", 0.01, 1000)


def _distribution(value) -> str:
    if not isinstance(value, str) or value not in DEGREE_DISTRIBUTIONS:
        raise DataError(
            f"distribution must be one of: {', '.join(DEGREE_DISTRIBUTIONS)}; got {short_repr(value)}"
            f"{did_you_mean(value, DEGREE_DISTRIBUTIONS) if isinstance(value, str) else ''}"
        )
    return value


def _max_degree(value) -> int | None:
    return None if value is None else _whole(value, "max_degree", 1, MAX_LINKS)


# ---------------------------------------------------------------- templates


def _rows(rng: np.random.Generator, shape: tuple[int, ...], concentration: float) -> np.ndarray:
    """CPT of ``shape`` (last axis: the states) with Dirichlet rows, no entry exactly zero."""
    k = shape[-1]
    table = rng.dirichlet(np.full(k, concentration), size=math.prod(shape[:-1]))
    # a Dirichlet draw with a small concentration may round entries to zero; keep every state possible
    table = np.maximum(table, 1e-9)
    table /= table.sum(axis=1, keepdims=True)
    return table.reshape(shape)


def _bins_setting(bins) -> int | None:
    if bins is None:
        return None
    return _whole(bins, "bins", 2, MAX_BINS)


def _share(attribute: str, state: str, relationship: str, bins: int | None) -> Aggregate:
    edges = [0, 0.5, 1] if bins is None else np.linspace(0.0, 1.0, bins + 1).round(6).tolist()
    return Aggregate(relationship, attribute, state, SHARE, edges, direction=AGAINST)


def _count(attribute: str, state: str, relationship: str, bins: int | None) -> Aggregate:
    edges = [0, 1, 3] if bins is None else list(range(bins))
    return Aggregate(relationship, attribute, state, COUNT, edges, direction=AGAINST)


def _positions(g: Aggregate) -> np.ndarray:
    """Where each bin of ``g`` lies on [0, 1] (share: its middle, "no related" at 0; count: evenly)."""
    if g.kind == SHARE:
        e = np.asarray(g.edges, dtype=float)
        return np.concatenate([[0.0], (e[:-1] + e[1:]) / 2])
    return np.linspace(0.0, 1.0, g.num_bins)


def _aggregated_rows(rng, own_shape: tuple, aggregates, k: int, c: float, smooth: bool) -> np.ndarray:
    """CPT rows over (own parents, aggregate bins, state).

    Not ``smooth``: every row drawn on its own, as :func:`_rows`. ``smooth``:
    a Dirichlet row per own configuration, moved on the logit scale along a
    random direction per aggregate in proportion to the bin's position
    (``logit = log base + sum_j pos_j(bin_j) v_j``, ``v_j ~ N(0, 2^2 I)``),
    so that neighbouring bins have similar rows: the shape of effect a
    model that shares strength across bins can use.
    """
    bins = tuple(g.num_bins for g in aggregates)
    if not smooth:
        return _rows(rng, own_shape + bins + (k,), c)
    base = np.log(_rows(rng, own_shape + (k,), c))
    logits = base.reshape(own_shape + (1,) * len(bins) + (k,))
    for j, g in enumerate(aggregates):
        v = rng.normal(0.0, 2.0, size=k)
        pos = _positions(g).reshape((1,) * (len(own_shape) + j) + (-1,) + (1,) * (len(bins) - j - 1) + (1,))
        logits = logits + pos * v
    logits = np.broadcast_to(logits, own_shape + bins + (k,))
    p = np.exp(logits - logits.max(axis=-1, keepdims=True))
    return p / p.sum(axis=-1, keepdims=True)


def _template_rng(seed, concentration) -> tuple[np.random.Generator, float]:
    return np.random.default_rng([_seed(seed), _TEMPLATE_STREAM]), _concentration(concentration)


def bipartite_template(seed: int = 0, concentration: float = 1.0, bins: int | None = None) -> Template:
    """The fruit co-operative: hives pollinate orchards (see the module notes).

    Mechanisms and CPT axes: ``hive.Treated`` (Treated); ``hive.Strength``
    (Treated, Strength); ``orchard.Soil`` (Soil); ``orchard.Yield`` (Soil,
    share of pollinating hives with Treated=yes, share with Strength=strong,
    Yield), the shares binned ``no related``, ``[0, 0.5]``, ``(0.5, 1]``.
    Every row is drawn from a symmetric Dirichlet of ``concentration``.

    Parameters
    ----------
    seed : int, default 0
        Seed of the CPT draw (a non-negative whole number).
    concentration : float, default 1.0
        From 0.01 to 1000.
    bins : int, optional
        Bins of every aggregate (2 to 100) instead of the default ones
        (shares: ``bins`` equal intervals plus "no related"; counts: 0, 1,
        ..., ``bins - 1`` or more). With ``bins`` the rows of an aggregating
        mechanism vary smoothly with the bin (see :func:`_aggregated_rows`).

    Raises
    ------
    DataError
        A bad seed or concentration.

    Examples
    --------
    >>> t = bipartite_template(seed=1)
    >>> t.mechanism("orchard", "Yield").cpt.shape
    (2, 3, 3, 3)
    """
    rng, c = _template_rng(seed, concentration)
    bins = _bins_setting(bins)
    schema = Schema(
        {
            "hive": {"Treated": ["no", "yes"], "Strength": ["weak", "strong"]},
            "orchard": {"Soil": ["poor", "rich"], "Yield": ["low", "mid", "high"]},
        },
        {"pollinates": ("hive", "orchard")},
    )
    treated = _share("Treated", "yes", "pollinates", bins)
    strong = _share("Strength", "strong", "pollinates", bins)
    return Template(
        schema,
        [
            Mechanism("hive", "Treated", _rows(rng, (2,), c)),
            Mechanism("hive", "Strength", _rows(rng, (2, 2), c), parents=["Treated"]),
            Mechanism("orchard", "Soil", _rows(rng, (2,), c)),
            Mechanism("orchard", "Yield", _aggregated_rows(rng, (2,), [treated, strong], 3, c, bins is not None),
                      parents=["Soil"], aggregates=[treated, strong]),
        ],
    )


def peer_template(seed: int = 0, concentration: float = 1.0, bins: int | None = None) -> Template:
    """Beekeepers who advise each other (see the module notes).

    Mechanisms and CPT axes: ``keeper.Training`` (Training);
    ``keeper.Practice`` (Training, share of the keepers advising this one
    with Practice=new, Practice), the share binned ``no related``,
    ``[0, 0.5]``, ``(0.5, 1]``. The aggregate looks against ``advises``
    (keeper -> keeper): it grounds to an acyclic network only on a skeleton
    whose links make no cycle, such as those of :func:`peer_skeleton` (links
    only from a lower to a higher number). Rows are drawn as in
    :func:`bipartite_template`.

    Raises
    ------
    DataError
        A bad seed or concentration.
    """
    rng, c = _template_rng(seed, concentration)
    bins = _bins_setting(bins)
    schema = Schema(
        {"keeper": {"Training": ["none", "some"], "Practice": ["old", "new"]}},
        {"advises": ("keeper", "keeper")},
    )
    peers_new = _share("Practice", "new", "advises", bins)
    return Template(
        schema,
        [
            Mechanism("keeper", "Training", _rows(rng, (2,), c)),
            Mechanism("keeper", "Practice", _aggregated_rows(rng, (2,), [peers_new], 2, c, bins is not None),
                      parents=["Training"], aggregates=[peers_new]),
        ],
    )


def chain_template(seed: int = 0, concentration: float = 1.0, bins: int | None = None) -> Template:
    """Nurseries supply groves, groves sell to markets (see the module notes).

    Mechanisms and CPT axes: ``nursery.Stock`` (Stock); ``grove.Vigour``
    (share of supplying nurseries with Stock=good, binned ``no related``,
    ``[0, 0.5]``, ``(0.5, 1]``; Vigour); ``market.Price`` (count of groves
    selling there with Vigour=high, binned ``0``, ``1-2``, ``3+``; Price).
    Rows are drawn as in :func:`bipartite_template`.

    Raises
    ------
    DataError
        A bad seed or concentration.
    """
    rng, c = _template_rng(seed, concentration)
    bins = _bins_setting(bins)
    schema = Schema(
        {
            "nursery": {"Stock": ["poor", "good"]},
            "grove": {"Vigour": ["low", "high"]},
            "market": {"Price": ["low", "mid", "high"]},
        },
        {"supplies": ("nursery", "grove"), "sells_to": ("grove", "market")},
    )
    good_stock = _share("Stock", "good", "supplies", bins)
    vigorous = _count("Vigour", "high", "sells_to", bins)
    return Template(
        schema,
        [
            Mechanism("nursery", "Stock", _rows(rng, (2,), c)),
            Mechanism("grove", "Vigour", _aggregated_rows(rng, (), [good_stock], 2, c, bins is not None),
                      aggregates=[good_stock]),
            Mechanism("market", "Price", _aggregated_rows(rng, (), [vigorous], 3, c, bins is not None),
                      aggregates=[vigorous]),
        ],
    )


# ---------------------------------------------------------------- skeletons


def _degrees(rng, n: int, degree: float, distribution: str) -> np.ndarray:
    """In-degrees of ``n`` instances summing to ``round(degree * n)``, shaped by ``distribution``."""
    total = int(round(degree * n))
    if distribution == "poisson":
        return rng.multinomial(total, np.full(n, 1.0 / n))
    if distribution == "uniform":
        weights = rng.uniform(0.0, 2.0, n)
    else:
        weights = rng.pareto(_PARETO_SHAPE, n)
    if not weights.sum() > 0:
        weights = np.ones(n)
    # systematic rounding: each degree is the floor or the ceiling of its share, and they sum to total
    edges = np.floor(np.concatenate(([0.0], np.cumsum(weights * (total / weights.sum())))) + rng.random())
    edges[-1] = total + edges[0]
    return np.diff(edges).astype(np.int64)


def _links(rng, sources: int, targets: int, degree, distribution, max_degree, where: str, lower_only=False) -> list:
    """``(source id, target id)`` links, ``degree`` per target on average (see the module notes)."""
    degree = _number(degree, "degree", 0, MAX_LINKS)
    most = (targets - 1) / 2 if lower_only else sources
    if degree > most:
        raise DataError(
            f"{where}: degree {degree:g} is more than the most possible, {most:g} "
            f"({'half the keepers less one: links only go to a higher number' if lower_only else 'every source linked to every target'}); "
            "lower the degree or add instances"
        )
    if degree * targets > MAX_LINKS:
        raise DataError(f"{where}: about {degree * targets:,.0f} links, more than the limit of {MAX_LINKS:,}; lower the degree")
    d = _degrees(rng, targets, degree, distribution)
    cap = np.arange(targets) if lower_only else np.full(targets, sources)
    if max_degree is not None:
        cap = np.minimum(cap, max_degree)
    d = np.minimum(d, cap)
    out = []
    for t in np.flatnonzero(d):
        pool = int(t) if lower_only else sources
        for s in np.sort(rng.choice(pool, size=int(d[t]), replace=False)):
            out.append((str(int(s) + 1), str(int(t) + 1)))
    return out


def _sizes(where: str, **sizes) -> dict[str, int]:
    out = {name: _whole(n, f"{where}: {name}", 1, MAX_INSTANCES) for name, n in sizes.items()}
    if sum(out.values()) > MAX_INSTANCES:
        raise DataError(f"{where}: {sum(out.values()):,} instances in all, more than the limit of {MAX_INSTANCES:,}")
    return out


def _ids(n: int) -> list[str]:
    return [str(i + 1) for i in range(n)]


def bipartite_skeleton(
    hives: int, orchards: int, degree: float = 2.0, distribution: str = "poisson", seed: int = 0,
    max_degree: int | None = None,
) -> Skeleton:
    """A random skeleton for :func:`bipartite_template`.

    Parameters
    ----------
    hives, orchards : int
        Instances of each type (at least 1; ids ``"1"``, ``"2"``, ...).
    degree : float, default 2.0
        Mean number of hives pollinating an orchard (0 to ``hives``).
    distribution : ``"poisson"``, ``"uniform"`` or ``"heavy-tailed"``
        How the degrees spread (see the module notes).
    seed : int, default 0
    max_degree : int, optional
        The most hives one orchard may have (keeps ground CPTs small; the
        mean then falls below ``degree``).

    Returns
    -------
    Skeleton

    Raises
    ------
    DataError
        A size, degree, distribution, seed or max_degree that is not valid,
        a degree above ``hives``, or more than
        :data:`~intervgnn.relational.MAX_INSTANCES` instances or
        :data:`~intervgnn.relational.MAX_LINKS` links.

    Examples
    --------
    >>> sk = bipartite_skeleton(hives=5, orchards=4, degree=2, seed=1)
    >>> len(sk.links["pollinates"])
    8
    """
    where = "bipartite skeleton"
    n = _sizes(where, hives=hives, orchards=orchards)
    distribution, max_degree = _distribution(distribution), _max_degree(max_degree)
    rng = np.random.default_rng([_seed(seed), _SKELETON_STREAM])
    links = _links(rng, n["hives"], n["orchards"], degree, distribution, max_degree, where)
    schema = bipartite_template().schema
    return Skeleton(schema, {"hive": _ids(n["hives"]), "orchard": _ids(n["orchards"])}, {"pollinates": links})


def peer_skeleton(
    keepers: int, degree: float = 2.0, distribution: str = "poisson", seed: int = 0, max_degree: int | None = None,
) -> Skeleton:
    """A random skeleton for :func:`peer_template`, acyclic by construction.

    Every link of ``advises`` goes from a keeper to a keeper of a higher
    number (``"2" -> "5"``, never back), so the links make no cycle and the
    ground network of :func:`peer_template` is acyclic. Keeper ``k`` can be
    advised by at most the ``k - 1`` keepers before it; the first keepers'
    draws are cut to that.

    Parameters
    ----------
    keepers : int
        Number of keepers (at least 1).
    degree : float, default 2.0
        Mean number of keepers advising a keeper (0 to ``(keepers - 1) / 2``).
    distribution, seed, max_degree
        As in :func:`bipartite_skeleton`.

    Raises
    ------
    DataError
        As in :func:`bipartite_skeleton`; a degree above ``(keepers - 1) / 2``.
    """
    where = "peer skeleton"
    n = _sizes(where, keepers=keepers)["keepers"]
    distribution, max_degree = _distribution(distribution), _max_degree(max_degree)
    rng = np.random.default_rng([_seed(seed), _SKELETON_STREAM])
    links = _links(rng, n, n, degree, distribution, max_degree, where, lower_only=True)
    return Skeleton(peer_template().schema, {"keeper": _ids(n)}, {"advises": links})


def chain_skeleton(
    nurseries: int, groves: int, markets: int, degree: float = 2.0, distribution: str = "poisson", seed: int = 0,
    max_degree: int | None = None,
) -> Skeleton:
    """A random skeleton for :func:`chain_template`.

    ``degree`` is both the mean number of nurseries supplying a grove (at
    most ``nurseries``) and the mean number of groves selling to a market
    (at most ``groves``); other arguments as in :func:`bipartite_skeleton`.

    Raises
    ------
    DataError
        As in :func:`bipartite_skeleton`.
    """
    where = "chain skeleton"
    n = _sizes(where, nurseries=nurseries, groves=groves, markets=markets)
    distribution, max_degree = _distribution(distribution), _max_degree(max_degree)
    rng = np.random.default_rng([_seed(seed), _SKELETON_STREAM])
    supplies = _links(rng, n["nurseries"], n["groves"], degree, distribution, max_degree, f"{where} (supplies)")
    sells_to = _links(rng, n["groves"], n["markets"], degree, distribution, max_degree, f"{where} (sells_to)")
    return Skeleton(
        chain_template().schema,
        {"nursery": _ids(n["nurseries"]), "grove": _ids(n["groves"]), "market": _ids(n["markets"])},
        {"supplies": supplies, "sells_to": sells_to},
    )


# ---------------------------------------------------------------- registry and specs


def _format_number(x: float) -> str:
    x = float(x)
    return str(int(x)) if x.is_integer() else repr(x)


@dataclass(frozen=True)
class RelationalSpec:
    """Settings of a relational benchmark.

    Attributes
    ----------
    name : str
        One of :data:`RELATIONAL_BENCHMARKS`.
    instances : int
        Instances of every entity type (1 to
        :data:`~intervgnn.relational.MAX_INSTANCES`).
    degree : float
        Mean in-degree of the aggregating types (see the module notes).
    seed : int
        Seed of both the template's CPTs and the skeleton.
    distribution : str
        One of :data:`DEGREE_DISTRIBUTIONS`.
    concentration : float
        Dirichlet concentration of the CPT rows (0.01 to 1000).
    max_degree : int or None
        The most links into one instance, or no bound.
    bins : int or None
        Bins of every aggregate, with smooth rows (see
        :func:`bipartite_template`), or the default bins.

    Raises
    ------
    DataError
        A value that is not valid (checked when the spec is made).
    """

    name: str = "bipartite"
    instances: int = 20
    degree: float = 2.0
    seed: int = 0
    distribution: str = "poisson"
    concentration: float = 1.0
    max_degree: int | None = None
    bins: int | None = None

    def __post_init__(self):
        if not isinstance(self.name, str) or self.name not in RELATIONAL_BENCHMARKS:
            raise DataError(
                f"unknown relational benchmark {short_repr(self.name)}; benchmarks are: "
                f"{', '.join(RELATIONAL_BENCHMARKS)}"
                f"{did_you_mean(self.name, RELATIONAL_BENCHMARKS) if isinstance(self.name, str) else ''}"
            )
        _whole(self.instances, "instances", 1, MAX_INSTANCES)
        object.__setattr__(self, "degree", _number(self.degree, "degree", 0, MAX_LINKS))
        _seed(self.seed)
        _distribution(self.distribution)
        object.__setattr__(self, "concentration", _concentration(self.concentration))
        _max_degree(self.max_degree)
        _bins_setting(self.bins)

    @property
    def text(self) -> str:
        """The canonical spec string (defaults left out), e.g. ``relational:bipartite,instances=200,degree=3,seed=0``."""
        default = RelationalSpec()
        parts = [self.name, f"instances={self.instances}", f"degree={_format_number(self.degree)}", f"seed={self.seed}"]
        if self.distribution != default.distribution:
            parts.append(f"distribution={self.distribution}")
        if self.concentration != default.concentration:
            parts.append(f"concentration={_format_number(self.concentration)}")
        if self.max_degree is not None:
            parts.append(f"max_degree={self.max_degree}")
        if self.bins is not None:
            parts.append(f"bins={self.bins}")
        return RELATIONAL_PREFIX + ",".join(parts)

    @property
    def label(self) -> str:
        """A file-name-safe label, e.g. ``relational-bipartite-instances200-degree3-seed0``."""
        return "relational-" + self.text[len(RELATIONAL_PREFIX):].replace("=", "").replace(",", "-")

    def fingerprint(self) -> dict:
        """Everything that determines the benchmark (for result digests)."""
        return {"generator": GENERATOR_VERSION, **asdict(self)}


def is_relational_spec(text) -> bool:
    """True when ``text`` is a string naming a relational benchmark (``relational:...``)."""
    return isinstance(text, str) and text.startswith(RELATIONAL_PREFIX)


_KEYS = ("instances", "degree", "seed", "distribution", "concentration", "max_degree", "bins")


def parse_relational_spec(text: str) -> RelationalSpec:
    """Read a spec such as ``relational:bipartite,instances=200,degree=3,seed=0``.

    The first item is the benchmark's name (one of
    :data:`RELATIONAL_BENCHMARKS`); then keys (all optional, any order):
    ``instances``, ``degree``, ``seed``, ``distribution``,
    ``concentration``, ``max_degree``, ``bins``; defaults are those of
    :class:`RelationalSpec`.

    Raises
    ------
    DataError
        Not a ``relational:`` spec, no or an unknown benchmark name, an
        unknown or repeated key, a value that is not a number or is out of
        range, an unknown distribution.

    Examples
    --------
    >>> parse_relational_spec("relational:peer,seed=2,instances=50,degree=1.5").text
    'relational:peer,instances=50,degree=1.5,seed=2'
    """
    if not is_relational_spec(text):
        raise DataError(
            f"not a relational benchmark spec: {short_repr(text)} "
            f"(expected '{RELATIONAL_PREFIX}NAME,instances=N,degree=D,seed=S')"
        )
    parts = [p.strip() for p in text[len(RELATIONAL_PREFIX):].split(",")]
    if not parts[0] or "=" in parts[0]:
        raise DataError(
            f"relational benchmark spec {short_repr(text)} must start with a benchmark name, one of: "
            f"{', '.join(RELATIONAL_BENCHMARKS)} (e.g. '{RELATIONAL_PREFIX}bipartite,instances=200')"
        )
    values: dict = {"name": parts[0]}
    for part in filter(None, parts[1:]):
        key, sep, raw = part.partition("=")
        key, raw = key.strip(), raw.strip()
        if not sep or not raw:
            raise DataError(f"relational benchmark: expected key=value, got {short_repr(part)} (keys: {', '.join(_KEYS)})")
        if key not in _KEYS:
            raise DataError(
                f"relational benchmark: unknown key '{shorten(key, 40)}'{did_you_mean(key, _KEYS)}; "
                f"keys are: {', '.join(_KEYS)}"
            )
        if key in values:
            raise DataError(f"relational benchmark: key '{key}' is given twice")
        if key == "distribution":
            values[key] = raw
            continue
        if len(raw) > 40:  # also keeps int() away from its limit on digits
            raise DataError(f"relational benchmark: '{key}' is {len(raw):,} characters long, got {short_repr(raw, 40)}")
        try:
            if key in ("degree", "concentration"):
                values[key] = float(raw)
            else:
                values[key] = int(raw)
        except ValueError:
            kind = "a number" if key in ("degree", "concentration") else "a whole number"
            raise DataError(f"relational benchmark: '{key}' must be {kind}, got {short_repr(raw, 40)}") from None
    return RelationalSpec(**values)


def relational_benchmark(spec: RelationalSpec | str = "bipartite", **settings) -> tuple[Template, Skeleton]:
    """The template and a random skeleton of a relational benchmark.

    Parameters
    ----------
    spec : RelationalSpec or str
        A benchmark name (``"bipartite"``, ``"peer"``, ``"chain"``) with
        the settings as keyword arguments, a ``relational:...`` spec string
        or a :class:`RelationalSpec`.
    **settings
        ``instances``, ``degree``, ``seed``, ``distribution``,
        ``concentration``, ``max_degree``, ``bins`` (with a name only).

    Returns
    -------
    (Template, Skeleton)
        Ground them with :func:`~intervgnn.relational.ground`.

    Raises
    ------
    DataError
        An unknown benchmark, setting or value, settings given beside a spec
        string or object, or a skeleton that cannot be made (a degree above
        the most possible, too many instances or links).

    Examples
    --------
    >>> template, skeleton = relational_benchmark("bipartite", instances=10, degree=2, seed=0)
    >>> sorted(skeleton.instances), len(skeleton.links["pollinates"])
    (['hive', 'orchard'], 20)
    """
    if isinstance(spec, RelationalSpec) or is_relational_spec(spec):
        if settings:
            raise DataError("relational benchmark: give a spec string or object, or a name with settings, not both")
        if not isinstance(spec, RelationalSpec):
            spec = parse_relational_spec(spec)
    else:
        unknown = [k for k in settings if k not in _KEYS]
        if unknown:
            raise DataError(
                f"relational benchmark: unknown setting '{shorten(unknown[0], 40)}'{did_you_mean(unknown[0], _KEYS)}; "
                f"settings are: {', '.join(_KEYS)}"
            )
        spec = RelationalSpec(spec, **settings)
    n, common = spec.instances, dict(degree=spec.degree, distribution=spec.distribution, seed=spec.seed,
                                     max_degree=spec.max_degree)
    if spec.name == "bipartite":
        return bipartite_template(spec.seed, spec.concentration, spec.bins), bipartite_skeleton(n, n, **common)
    if spec.name == "peer":
        return peer_template(spec.seed, spec.concentration, spec.bins), peer_skeleton(n, **common)
    return chain_template(spec.seed, spec.concentration, spec.bins), chain_skeleton(n, n, n, **common)
