"""Experiment configs: YAML (read by :func:`intervgnn._yaml.load_yaml`: bounded aliases and depth, no repeated keys), validated with plain errors.

Shape of a config::

    name: quickstart                 # optional label
    output: runs/quickstart          # folder for all results
    networks:                        # catalog names, random specs, BIF paths, or mappings
      - sachs
      - random:nodes=30,seed=4       # a seeded random network (see intervgnn.bn.random_network)
      - {network: alarm, hidden: [LVFAILURE]}
    rows: [1000, 10000]              # observational rows per run
    experiments:                     # optional experimental rows
      targets: [Mek, PKC]            # or count: 2 (seeded choice)
      rows_per_target: 500
    seeds: [0, 1, 2]
    queries: {count: 50, kinds: [do, conditional, joint, null], seed: 0}
    estimators:                      # names, or {name: {settings}}
      - naive
      - plugin
      - backdoor: {classifier: logistic}
      - neural: {steps: 200}
      - neural_ablation
    metrics: [tv, kl, jsd, hellinger, effect]
    executor: local                  # or ray
    workers: 2
    bootstrap: 1000                  # resamples for the confidence intervals (0: none, else >= 100)
    intervals: {level: 0.95, draws: 200}   # optional: an interval on every answer; metrics coverage, width

A value that would make every run fail, or that would do nothing, is
refused when the config is read, with the key path: each estimator checks
its own settings (``estimators[1].neural.lr must be above 0, got -1``). So
is a size beyond what can be meant: more than :data:`MAX_LIST` (1,000)
entries in ``rows``, ``seeds``, ``networks`` or ``estimators``; more than
:data:`MAX_ROWS` (10^8) rows per run or per experiment target; more than
1,000 query patterns, 10,000 bootstrap resamples or 100,000 runs in the
grid; a seed outside 0 to 2^63 - 1; a label of more than 100 characters.
A name, kind or metric listed twice is refused too. Before any run starts
the networks are checked (:func:`intervgnn.harness.runs.check_networks`):
hidden and target variables exist, something is left observed, a query can
be drawn, and no run would draw more rows than one sampling call may.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, field

import yaml

from .._yaml import load_yaml, yaml_problem
from ..errors import ConfigError, did_you_mean, short_repr
from ..eval.queries import QUERY_KINDS

__all__ = ["ExperimentConfig", "NetworkSpec", "EstimatorSpec", "load_config", "parse_config", "METRIC_NAMES"]

TOP_KEYS = (
    "name", "output", "networks", "rows", "experiments", "seeds", "queries",
    "estimators", "metrics", "executor", "workers", "bootstrap", "intervals",
)
INTERVAL_KEYS = ("level", "draws")
#: metrics computed from the answers' intervals (they need an ``intervals`` setting)
INTERVAL_METRICS = ("coverage", "width")
NETWORK_KEYS = ("network", "hidden", "label")
QUERY_KEYS = ("count", "kinds", "seed")
EXPERIMENT_KEYS = ("targets", "count", "rows_per_target")
METRIC_NAMES = ("tv", "kl", "jsd", "hellinger", "effect", "coverage", "width")
EXECUTORS = ("local", "ray")
#: fewer resamples give percentile intervals too coarse to read
MIN_BOOTSTRAP = 100
#: each resample holds one index per query; more would cost gigabytes and change no digit worth reading
MAX_BOOTSTRAP = 10_000
#: the most entries of ``rows``, ``seeds``, ``networks`` and ``estimators``: a longer list cannot be meant
MAX_LIST = 1_000
#: the most names in a network's ``hidden`` or in ``experiments.targets``
MAX_NAMES = 10_000
#: the most rows of one run, observational (``rows``) or per experiment target (``rows_per_target``)
MAX_ROWS = 10**8
#: the most runs in a grid (networks x rows x seeds x estimators)
MAX_RUNS = 100_000
#: the most query patterns per network (``queries.count``)
MAX_QUERY_COUNT = 1_000
#: the largest seed (``seeds``, ``queries.seed``): a 64-bit signed whole number
MAX_SEED = 2**63 - 1
#: the longest network or estimator label (labels name the run files)
MAX_LABEL = 100
_LABEL = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*")


def _type_name(value) -> str:
    return {list: "a list", dict: "a mapping", str: "text", int: "a whole number", float: "a number", bool: "true/false"}.get(
        type(value), type(value).__name__
    )


def _check_keys(where: str, doc: Mapping, allowed) -> None:
    for key in doc:
        if key not in allowed:
            raise ConfigError(
                f"{where}: unknown key {short_repr(key)}{did_you_mean(key, allowed)}; keys are: {', '.join(allowed)}"
            )


def _check_length(where: str, value: list, most: int) -> None:
    if len(value) > most:
        raise ConfigError(f"{where}: {len(value):,} entries; at most {most:,} are allowed")


def _whole(where: str, value, minimum: int, maximum: int) -> int:
    """``value`` if it is a whole number in [minimum, maximum], else a ConfigError naming ``where``."""
    if isinstance(value, bool) or not isinstance(value, int):
        raise ConfigError(f"{where}: expected a whole number, got {short_repr(value)}")
    if not minimum <= value <= maximum:
        raise ConfigError(f"{where}: expected a whole number from {minimum:,} to {maximum:,}, got {short_repr(value)}")
    return value


def _int_list(where: str, value, minimum: int = 0, maximum: int | None = None) -> list[int]:
    if isinstance(value, int) and not isinstance(value, bool):
        value = [value]
    if not isinstance(value, list):
        raise ConfigError(f"{where}: expected a whole number or a list of them, got {_type_name(value)}")
    _check_length(where, value, MAX_LIST)
    out, seen = [], set()
    for v in value:
        if isinstance(v, bool) or not isinstance(v, int):
            raise ConfigError(f"{where}: expected whole numbers, got {short_repr(v)}")
        if v < minimum:
            raise ConfigError(f"{where}: {short_repr(v)} is below the minimum of {minimum}")
        if maximum is not None and v > maximum:
            raise ConfigError(f"{where}: {short_repr(v)} is above the maximum of {maximum:,}")
        if v in seen:
            raise ConfigError(f"{where}: {v} is listed twice")
        seen.add(v)
        out.append(v)
    return out


def _name_list(where: str, value, most: int = MAX_NAMES) -> list[str]:
    """A list of distinct variable names (hidden, experiment targets), checked in one pass."""
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise ConfigError(f"{where}: expected a list of variable names")
    _check_length(where, value, most)
    seen = set()
    for v in value:
        if v in seen:
            raise ConfigError(f"{where}: {short_repr(v)} is listed twice")
        seen.add(v)
    return value


def _distinct(where: str, values: list, what: str) -> None:
    seen = set()
    for v in values:
        if v in seen:
            raise ConfigError(f"{where}: {what} {short_repr(v)} is listed twice")
        seen.add(v)


def _check_label(where: str, label) -> None:
    # labels name the run files (network__rows__seedN__estimator.json)
    if not isinstance(label, str) or not _LABEL.fullmatch(label) or "__" in label:
        raise ConfigError(
            f"{where}: label {short_repr(label)} cannot name a run file; use letters, digits, '.', '-' and single '_' "
            "(set 'label')"
        )
    # two labels, a row count and a seed must fit a file name (255 bytes on common file systems)
    if len(label) > MAX_LABEL:
        raise ConfigError(f"{where}: label {short_repr(label)} is {len(label)} characters long; at most {MAX_LABEL} (set 'label')")


@dataclass(frozen=True)
class NetworkSpec:
    """A network of the grid: where it comes from and which of its variables are hidden."""

    source: str
    label: str
    hidden: tuple[str, ...] = ()


@dataclass(frozen=True)
class EstimatorSpec:
    """An estimator of the grid: registry name, label in the results, settings."""

    kind: str
    label: str
    settings: dict = field(default_factory=dict)


@dataclass(frozen=True)
class ExperimentConfig:
    name: str
    output: str
    networks: tuple[NetworkSpec, ...]
    rows: tuple[int, ...]
    seeds: tuple[int, ...]
    estimators: tuple[EstimatorSpec, ...]
    query_count: int = 50
    query_kinds: tuple[str, ...] = ("do",)
    query_seed: int = 0
    experiment_targets: tuple[str, ...] = ()
    experiment_count: int = 0
    rows_per_target: int = 0
    metrics: tuple[str, ...] = ("tv",)
    executor: str = "local"
    workers: int = 1
    bootstrap: int = 1000
    interval_level: float | None = None
    interval_draws: int | None = None
    source: str = "<config>"

    @property
    def grid_size(self) -> int:
        return len(self.networks) * len(self.rows) * len(self.seeds) * len(self.estimators)


def _parse_network(where: str, item) -> NetworkSpec:
    from ..bn.catalog import CATALOG
    from ..bn.synthetic import is_random_spec, parse_random_spec
    from ..errors import UnknownNetworkError

    if isinstance(item, str):
        item = {"network": item}
    if not isinstance(item, Mapping):
        raise ConfigError(f"{where}: expected a network name or a mapping, got {_type_name(item)}")
    _check_keys(where, item, NETWORK_KEYS)
    src = item.get("network")
    if not isinstance(src, str) or not src:
        raise ConfigError(f"{where}: 'network' must name a shipped network, a random network or a BIF file")
    random_label = None
    if is_random_spec(src):
        try:
            spec = parse_random_spec(src)
        except UnknownNetworkError as exc:
            raise ConfigError(f"{where}: {exc}") from None
        src, random_label = spec.text, spec.label
    elif src not in CATALOG and not os.path.exists(src):
        raise ConfigError(
            f"{where}: unknown network {short_repr(src)}{did_you_mean(src, CATALOG)}; shipped networks are: "
            f"{', '.join(CATALOG)} (or a random network such as random:nodes=30,seed=4, or the path of a BIF file)"
        )
    hidden = _name_list(f"{where}.hidden", item.get("hidden", []))
    # a label given as 0 or "" is refused below, not replaced by the default
    label = item.get("label")
    if label is None:
        label = random_label or (src if src in CATALOG else os.path.splitext(os.path.basename(src))[0])
    if isinstance(label, (int, float)) and not isinstance(label, bool):
        label = str(label)
    if hidden and "label" not in item:
        label = f"{label}-hidden"
    _check_label(where, label)
    return NetworkSpec(src, label, tuple(hidden))


def _parse_estimator(where: str, item) -> EstimatorSpec:
    from .registry import ESTIMATORS, check_settings

    if isinstance(item, str):
        kind, settings = item, {}
    elif isinstance(item, Mapping) and len(item) == 1:
        kind, settings = next(iter(item.items()))
        settings = {} if settings is None else settings
    else:
        raise ConfigError(f"{where}: expected an estimator name or a one-key mapping name: {{settings}}")
    if kind not in ESTIMATORS:
        raise ConfigError(
            f"{where}: unknown estimator {short_repr(kind)}{did_you_mean(kind, ESTIMATORS)}; estimators are: {', '.join(ESTIMATORS)}"
        )
    if not isinstance(settings, Mapping):
        raise ConfigError(f"{where}.{kind}: settings must be a mapping, got {_type_name(settings)}")
    settings = dict(settings)
    label = settings.pop("label", kind)
    if not isinstance(label, str) or not label:
        raise ConfigError(f"{where}.{kind}.label: expected text")
    _check_label(f"{where}.{kind}", label)
    check_settings(f"{where}.{kind}", kind, settings)
    return EstimatorSpec(kind, label, settings)


def parse_config(doc, source: str = "<config>") -> ExperimentConfig:
    """Validate a parsed config document.

    Raises
    ------
    ConfigError
        Unknown key (with the nearest valid one), wrong type, unknown
        network, estimator, metric, query kind or executor, or an empty grid.
    """
    if not isinstance(doc, Mapping):
        raise ConfigError(f"{source}: expected a mapping of settings at the top")
    _check_keys(source, doc, TOP_KEYS)
    for key in ("networks", "rows", "seeds", "estimators"):
        if key not in doc:
            raise ConfigError(f"{source}: missing key '{key}'")
    name = doc.get("name")
    if name is None:
        name = os.path.splitext(os.path.basename(source))[0]
    elif isinstance(name, bool) or not isinstance(name, (str, int, float)) or not str(name).strip():
        raise ConfigError(f"{source}: 'name' must be text, got {short_repr(name)}")
    output = doc.get("output")
    if output is None:
        output = os.path.join("runs", str(name))
    if not isinstance(output, str):
        raise ConfigError(f"{source}: 'output' must be a folder path, got {_type_name(output)}")
    if not output.strip():
        raise ConfigError(f"{source}: 'output' must be a folder path, got empty text (leave it out for runs/<name>)")
    if not isinstance(doc["networks"], list):
        raise ConfigError(f"{source}: 'networks' must be a list, got {_type_name(doc['networks'])}")
    # lengths first: a list too long to be meant is refused before any entry is read
    _check_length("networks", doc["networks"], MAX_LIST)
    networks = tuple(_parse_network(f"networks[{i}]", n) for i, n in enumerate(doc["networks"]))
    seen: set = set()
    for net in networks:
        if net.label in seen:
            raise ConfigError(f"networks: label '{net.label}' is used twice; give each a distinct 'label'")
        seen.add(net.label)
    rows = tuple(_int_list("rows", doc["rows"], minimum=1, maximum=MAX_ROWS))
    seeds = tuple(_int_list("seeds", doc["seeds"], minimum=0, maximum=MAX_SEED))
    if not isinstance(doc["estimators"], list):
        raise ConfigError(f"{source}: 'estimators' must be a list, got {_type_name(doc['estimators'])}")
    _check_length("estimators", doc["estimators"], MAX_LIST)
    estimators = tuple(_parse_estimator(f"estimators[{i}]", e) for i, e in enumerate(doc["estimators"]))
    seen = set()
    for est in estimators:
        if est.label in seen:
            raise ConfigError(f"estimators: label '{est.label}' is used twice; give one a distinct 'label' setting")
        seen.add(est.label)
    q = doc.get("queries", {}) or {}
    if not isinstance(q, Mapping):
        raise ConfigError(f"queries: expected a mapping, got {_type_name(q)}")
    _check_keys("queries", q, QUERY_KEYS)
    count = q.get("count", 50)
    _whole("queries.count", count, 1, MAX_QUERY_COUNT)
    kinds = q.get("kinds", ["do"])
    if isinstance(kinds, str):
        kinds = [kinds]
    if not isinstance(kinds, list) or not kinds:
        raise ConfigError("queries.kinds: expected a non-empty list")
    # YAML reads a bare `null` as nothing; in this list it can only mean the null-query kind
    kinds = ["null" if k is None else k for k in kinds]
    for k in kinds:
        if not isinstance(k, str) or k not in QUERY_KINDS:
            raise ConfigError(
                f"queries.kinds: unknown query kind {short_repr(k)}{did_you_mean(k, QUERY_KINDS)}; "
                f"kinds are: {', '.join(QUERY_KINDS)}"
            )
    # a kind listed twice would get two shares of the count and fill only one
    _distinct("queries.kinds", kinds, "kind")
    qseed = q.get("seed", 0)
    if isinstance(qseed, bool) or not isinstance(qseed, int):
        raise ConfigError(f"queries.seed: expected a whole number, got {short_repr(qseed)}")
    _whole("queries.seed", qseed, 0, MAX_SEED)
    ex = doc.get("experiments") or {}
    if not isinstance(ex, Mapping):
        raise ConfigError(f"experiments: expected a mapping, got {_type_name(ex)}")
    _check_keys("experiments", ex, EXPERIMENT_KEYS)
    targets = _name_list("experiments.targets", ex.get("targets", []))
    ex_count = ex.get("count", 0)
    if isinstance(ex_count, bool) or not isinstance(ex_count, int) or ex_count < 0:
        raise ConfigError(f"experiments.count: expected a whole number, got {short_repr(ex_count)}")
    if targets and ex_count:
        # with targets the count was never used
        raise ConfigError("experiments: give 'targets' (variable names) or 'count' (a seeded choice), not both")
    per = ex.get("rows_per_target", 0)
    if isinstance(per, bool) or not isinstance(per, int) or per < 0:
        raise ConfigError(f"experiments.rows_per_target: expected a whole number, got {short_repr(per)}")
    if per > MAX_ROWS:
        raise ConfigError(f"experiments.rows_per_target: {short_repr(per)} is above the maximum of {MAX_ROWS:,}")
    if ex and per == 0:
        raise ConfigError("experiments.rows_per_target: give the number of experimental rows per target")
    if ex and not targets and ex_count == 0:
        raise ConfigError("experiments: give 'targets' (variable names) or 'count' (a seeded choice)")
    metrics = doc.get("metrics", ["tv"])
    if isinstance(metrics, str):
        metrics = [metrics]
    if not isinstance(metrics, list) or not metrics:
        raise ConfigError("metrics: expected a non-empty list")
    for m in metrics:
        if not isinstance(m, str) or m not in METRIC_NAMES:
            raise ConfigError(
                f"metrics: unknown metric {short_repr(m)}{did_you_mean(m, METRIC_NAMES)}; metrics are: {', '.join(METRIC_NAMES)}"
            )
    _distinct("metrics", metrics, "metric")
    executor = doc.get("executor", "local")
    if not isinstance(executor, str) or executor not in EXECUTORS:
        raise ConfigError(
            f"executor: unknown executor {short_repr(executor)}{did_you_mean(executor, EXECUTORS)}; executors are: local, ray"
        )
    workers = doc.get("workers", 1)
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise ConfigError(f"workers: expected a whole number of at least 1, got {short_repr(workers)}")
    boot = doc.get("bootstrap", 1000)
    if isinstance(boot, bool) or not isinstance(boot, int) or not (boot == 0 or boot >= MIN_BOOTSTRAP):
        raise ConfigError(f"bootstrap: expected 0 (no interval) or a whole number of at least {MIN_BOOTSTRAP}, got {short_repr(boot)}")
    if boot > MAX_BOOTSTRAP:
        raise ConfigError(f"bootstrap: {short_repr(boot)} resamples; at most {MAX_BOOTSTRAP:,} are allowed")
    level = draws = None
    if "intervals" in doc:
        iv = doc.get("intervals") or {}
        if not isinstance(iv, Mapping):
            raise ConfigError(f"intervals: expected a mapping such as {{level: 0.95}}, got {_type_name(iv)}")
        _check_keys("intervals", iv, INTERVAL_KEYS)
        level = iv.get("level", 0.95)
        if isinstance(level, bool) or not isinstance(level, (int, float)) or not 0 < level < 1:
            raise ConfigError(f"intervals.level: expected a number between 0 and 1, got {short_repr(level)}")
        draws = iv.get("draws")
        if draws is not None:
            _whole("intervals.draws", draws, 20, 100_000)
        level = float(level)
    for m in metrics:
        if m in INTERVAL_METRICS and level is None:
            raise ConfigError(f"metrics: '{m}' scores the answers' intervals; add an 'intervals' setting "
                              "(e.g. intervals: {level: 0.95})")
    cfg = ExperimentConfig(
        name=str(name), output=output, networks=networks, rows=rows, seeds=seeds, estimators=estimators,
        query_count=count, query_kinds=tuple(kinds), query_seed=qseed, experiment_targets=tuple(targets),
        experiment_count=ex_count, rows_per_target=per, metrics=tuple(metrics), executor=executor,
        workers=workers, bootstrap=boot, interval_level=level, interval_draws=draws, source=source,
    )
    if cfg.grid_size == 0:
        empty = [k for k, v in (("networks", networks), ("rows", rows), ("seeds", seeds), ("estimators", estimators)) if not v]
        raise ConfigError(f"{source}: the grid is empty: no {', no '.join(empty)}")
    if cfg.grid_size > MAX_RUNS:
        raise ConfigError(
            f"{source}: the grid has {cfg.grid_size:,} runs (networks x rows x seeds x estimators); "
            f"at most {MAX_RUNS:,} are allowed"
        )
    return cfg


def load_config(path: str | os.PathLike):
    """Read and validate a config file (an :class:`ExperimentConfig`, or a
    :class:`~intervgnn.harness.relational.RelationalConfig` for a document
    with a ``relational`` key).

    Raises
    ------
    ConfigError
        Missing or unreadable file, text that is not UTF-8, YAML syntax
        error (with line), or any problem
        :func:`parse_config` reports.
    """
    source = os.fspath(path)
    try:
        with open(source, "rb") as fh:
            data = fh.read()
    except FileNotFoundError:
        raise ConfigError(f"{source}: no such file") from None
    except IsADirectoryError:
        raise ConfigError(f"{source}: is a folder, not a config file") from None
    except OSError as exc:
        raise ConfigError(f"{source}: cannot read the file ({exc.strerror or exc})") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise ConfigError(f"{source}, line {line}: not UTF-8 text (byte 0x{data[exc.start]:02x})") from None
    try:
        doc = load_yaml(text)
    except yaml.YAMLError as exc:
        raise ConfigError(yaml_problem(source, exc)) from None
    if isinstance(doc, Mapping) and "relational" in doc:  # a relational sweep (intervgnn.harness.relational)
        from .relational import parse_relational_config

        return parse_relational_config(doc, source)
    return parse_config(doc, source)
