"""Seeded random discrete causal networks: benchmarks nobody tuned for.

A random network is drawn from a handful of settings and a seed: a DAG with
bounded in-degree over variables named ``V01, V02, ...`` (their causal order
is a random permutation, so names say nothing about it), 2 to 5 states per
variable, and CPT rows drawn from a symmetric Dirichlet of a given
concentration, with a share of near-deterministic rows (one state taking
95% to 99.5% of the mass), as in many expert-built networks.

The same settings and seed give the same network on every machine (numpy's
``default_rng``). Configs and the command line name one with a spec such as
``random:nodes=30,seed=4`` (see :func:`parse_random_spec`).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from ..errors import UnknownNetworkError
from ..graph import CausalGraph
from .network import CausalNetwork

__all__ = ["RandomSpec", "random_network", "parse_random_spec", "is_random_spec", "RANDOM_PREFIX"]

#: prefix of a random-network spec in configs and on the command line
RANDOM_PREFIX = "random:"
#: bump when the drawing procedure changes (a spec then names another network)
GENERATOR_VERSION = 1
_MAX_NODES = 1000
#: largest CPT (entries) a spec may allow
_MAX_CPT = 10**6


@dataclass(frozen=True)
class RandomSpec:
    """Settings of a random network.

    Attributes
    ----------
    nodes : int
        Number of variables (2 to 1000).
    seed : int
        Seed of the draw (a non-negative whole number).
    parents : int
        Largest number of parents of a variable (0 to 6); each variable
        draws its number of parents uniformly between 0 and this bound
        (fewer when fewer variables precede it).
    min_states, max_states : int
        Each variable draws its number of states uniformly in this range
        (2 to 10).
    concentration : float
        Concentration of the symmetric Dirichlet each CPT row is drawn from
        (small: peaked rows; 1: uniform over the simplex; large: flat rows).
    deterministic : float
        Share of CPT rows drawn near-deterministic (0 to 1).
    """

    nodes: int = 20
    seed: int = 0
    parents: int = 3
    min_states: int = 2
    max_states: int = 5
    concentration: float = 1.0
    deterministic: float = 0.1

    def __post_init__(self):
        def whole(name, lo, hi):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not lo <= value <= hi:
                raise UnknownNetworkError(f"random network: {name} must be a whole number from {lo} to {hi}, got {value!r}")

        whole("nodes", 2, _MAX_NODES)
        whole("seed", 0, 2**63 - 1)
        whole("parents", 0, 6)
        whole("min_states", 2, 10)
        whole("max_states", 2, 10)
        if self.min_states > self.max_states:
            raise UnknownNetworkError(
                f"random network: states range {self.min_states}-{self.max_states} is empty (low above high)"
            )
        c = self.concentration
        if isinstance(c, bool) or not isinstance(c, (int, float)) or not (0.01 <= c <= 1000):
            raise UnknownNetworkError(f"random network: concentration must be a number from 0.01 to 1000, got {c!r}")
        d = self.deterministic
        if isinstance(d, bool) or not isinstance(d, (int, float)) or not (0.0 <= d <= 1.0):
            raise UnknownNetworkError(f"random network: deterministic must be a share from 0 to 1, got {d!r}")
        largest = self.max_states ** (self.parents + 1)
        if largest > _MAX_CPT:
            raise UnknownNetworkError(
                f"random network: a CPT could hold {self.max_states}^{self.parents + 1} = {largest} entries "
                f"(at most {_MAX_CPT}); lower parents or states"
            )

    @property
    def text(self) -> str:
        """The canonical spec string (defaults left out), e.g. ``random:nodes=30,seed=4``."""
        default = RandomSpec()
        parts = [f"nodes={self.nodes}", f"seed={self.seed}"]
        if self.parents != default.parents:
            parts.append(f"parents={self.parents}")
        if (self.min_states, self.max_states) != (default.min_states, default.max_states):
            parts.append(f"states={self.min_states}-{self.max_states}")
        if self.concentration != default.concentration:
            parts.append(f"concentration={float(self.concentration)!r}")
        if self.deterministic != default.deterministic:
            parts.append(f"deterministic={float(self.deterministic)!r}")
        return RANDOM_PREFIX + ",".join(parts)

    @property
    def label(self) -> str:
        """A file-name-safe label, e.g. ``random-nodes30-seed4``."""
        body = self.text[len(RANDOM_PREFIX):]
        return "random-" + body.replace("=", "").replace(",", "-")

    def fingerprint(self) -> dict:
        """Everything that determines the network (for result digests)."""
        return {"generator": GENERATOR_VERSION, **asdict(self)}


def is_random_spec(text) -> bool:
    """True when ``text`` is a string naming a random network (``random:...``)."""
    return isinstance(text, str) and text.startswith(RANDOM_PREFIX)


_KEYS = ("nodes", "seed", "parents", "states", "concentration", "deterministic")


def parse_random_spec(text: str) -> RandomSpec:
    """Read a spec such as ``random:nodes=30,seed=4,parents=2,states=2-4``.

    Keys (all optional, any order): ``nodes``, ``seed``, ``parents``,
    ``states`` (``LOW-HIGH`` or one number), ``concentration``,
    ``deterministic``; defaults are those of :class:`RandomSpec`.

    Raises
    ------
    UnknownNetworkError
        Not a ``random:`` spec, an unknown or repeated key, a value that is
        not a number, or one out of range.

    Examples
    --------
    >>> parse_random_spec("random:nodes=30,seed=4").text
    'random:nodes=30,seed=4'
    >>> parse_random_spec("random:seed=1,states=3").max_states
    3
    """
    if not is_random_spec(text):
        raise UnknownNetworkError(f"not a random-network spec: {text!r} (expected '{RANDOM_PREFIX}nodes=N,seed=S')")
    body = text[len(RANDOM_PREFIX):].strip()
    values: dict = {}
    for part in filter(None, (p.strip() for p in body.split(","))):
        key, sep, raw = part.partition("=")
        key, raw = key.strip(), raw.strip()
        if not sep or not raw:
            raise UnknownNetworkError(f"random network: expected key=value, got {part!r} (keys: {', '.join(_KEYS)})")
        if key not in _KEYS:
            from ..errors import did_you_mean

            raise UnknownNetworkError(
                f"random network: unknown key '{key}'{did_you_mean(key, _KEYS)}; keys are: {', '.join(_KEYS)}"
            )
        if key in values or (key == "states" and "min_states" in values):
            raise UnknownNetworkError(f"random network: key '{key}' is given twice")
        try:
            if key == "states":
                lo, dash, hi = raw.partition("-")
                values["min_states"] = int(lo)
                values["max_states"] = int(hi) if dash else int(lo)
            elif key in ("concentration", "deterministic"):
                values[key] = float(raw)
                if not np.isfinite(values[key]):
                    raise ValueError
            else:
                values[key] = int(raw)
        except ValueError:
            raise UnknownNetworkError(f"random network: '{key}' must be a number, got {raw[:40]!r}") from None
    return RandomSpec(**values)


def random_network(spec: RandomSpec | str | None = None, **settings) -> CausalNetwork:
    """Draw a random discrete causal network.

    Parameters
    ----------
    spec : RandomSpec or str, optional
        Settings as an object or a ``random:...`` string; or give them as
        keyword arguments (``nodes=30, seed=4``), see :class:`RandomSpec`.

    Returns
    -------
    CausalNetwork
        Named by its canonical spec string.

    Raises
    ------
    UnknownNetworkError
        Bad settings (see :func:`parse_random_spec`).

    Examples
    --------
    >>> net = random_network(nodes=12, seed=3)
    >>> net.name, len(net.variables)
    ('random:nodes=12,seed=3', 12)
    >>> random_network("random:nodes=12,seed=3").cpt("V01").tolist() == net.cpt("V01").tolist()
    True
    """
    if isinstance(spec, str):
        if settings:
            raise UnknownNetworkError("random network: give a spec string or keyword settings, not both")
        spec = parse_random_spec(spec)
    elif spec is None:
        spec = RandomSpec(**settings)
    elif settings:
        raise UnknownNetworkError("random network: give a RandomSpec or keyword settings, not both")
    rng = np.random.default_rng(spec.seed)
    n = spec.nodes
    width = len(str(n))
    names = [f"V{i + 1:0{width}d}" for i in range(n)]
    order = [names[i] for i in rng.permutation(n)]
    cards = {v: int(rng.integers(spec.min_states, spec.max_states + 1)) for v in names}
    parents: dict[str, list[str]] = {}
    for pos, v in enumerate(order):
        k = int(rng.integers(0, min(spec.parents, pos) + 1))
        pick = sorted(rng.choice(pos, size=k, replace=False).tolist()) if k else []
        parents[v] = [order[i] for i in pick]
    edges = [(p, v) for v in order for p in parents[v]]
    graph = CausalGraph(edges, nodes=names)
    cpts = {}
    for v in names:
        pa = graph.parents(v)
        k = cards[v]
        rows = int(np.prod([cards[p] for p in pa])) if pa else 1
        table = rng.dirichlet(np.full(k, float(spec.concentration)), size=rows)
        peaked = rng.random(rows) < spec.deterministic
        for r in np.flatnonzero(peaked):
            rest = rng.uniform(0.005, 0.05)  # the mass left to the other states
            top = rng.integers(k)
            row = np.zeros(k)
            row[np.arange(k) != top] = rng.dirichlet(np.ones(k - 1)) * rest
            row[top] = 1.0 - rest
            table[r] = row
        # a Dirichlet draw with a small concentration may round entries to zero; keep every state possible
        table = np.maximum(table, 1e-9)
        table /= table.sum(axis=1, keepdims=True)
        cpts[v] = table.reshape([cards[p] for p in pa] + [k])
    states = {v: tuple(f"s{j}" for j in range(cards[v])) for v in names}
    return CausalNetwork(graph, states, cpts, name=spec.text, properties={"generator": f"intervgnn random networks v{GENERATOR_VERSION}"})
