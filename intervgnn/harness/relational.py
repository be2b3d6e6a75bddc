"""Relational sweeps: relational estimators scored against exact answers, from a YAML config.

Shape of a config (``intervgnn run`` reads it like the single-table ones)::

    name: relational
    output: runs/relational
    relational:
      benchmarks:                      # relational benchmark specs (see intervgnn.relational.benchmarks)
        - relational:bipartite,instances=200,degree=2,max_degree=7
        - relational:chain,instances=200,degree=2,max_degree=7
      seeds: [0, 1, 2]                 # each seed draws the template, skeleton, data and queries
      draws: 1                         # independent draws of the skeleton's attributes (the data)
      estimators: [plugin, neural, unlinked]   # or {neural: {steps: 100}}
      queries: {units: 20, spillover: 5, share: 0.5, seed: 0}
      transfer:                        # unseen skeletons, each a change to the spec
        - {scale: 0.5}                 # half the instances (or instances: 100)
        - {scale: 2}
        - {distribution: heavy-tailed}
    workers: 2

Each benchmark's seed replaces the spec's own. Per (benchmark, seed) one
run: the data are one or more draws of the true template on the skeleton
(:func:`~intervgnn.relational.sampling.sample_data`); every estimator is
fitted on them and asked ``units`` unit queries (the outcome of one
instance, one linked treatment unit set), population queries under three
policies (every treatment unit treated, none, a seeded ``share``) and
``spillover`` spill-over queries; each transfer skeleton gets new unit and
population queries, answered without refitting. The outcome and treatment
come from the benchmark (orchard ``Yield`` and hive ``Treated``; keeper
``Practice`` and ``Training``; grove ``Vigour`` and nursery ``Stock``).
Errors are total variation to the exact answers of the true template
(spill-over: the mean absolute error of its three contrasts). One JSON per
run in ``runs/`` (``--resume`` keeps finished ones); ``summary.csv`` and
``summary.md`` hold, per benchmark, kind (unit, population, spill-over,
transfer unit, transfer population) and estimator, the mean over seeds of
the mean error over queries, the queries, and the ratio to the plug-in.
"""

from __future__ import annotations

import csv
import json
import os
import time
from collections.abc import Mapping
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field, replace

import numpy as np

from .._io import atomic_open, make_folder
from ..errors import ConfigError, IntervgnnError, did_you_mean, short_repr
from .config import _check_keys

__all__ = ["RelationalConfig", "parse_relational_config", "run_relational", "RELATIONAL_ESTIMATORS", "draw_queries"]

TOP_KEYS = ("name", "output", "relational", "workers")
SWEEP_KEYS = ("benchmarks", "seeds", "draws", "estimators", "queries", "transfer")
QUERY_KEYS = ("units", "spillover", "share", "seed")
TRANSFER_KEYS = ("scale", "instances", "degree", "distribution", "max_degree")
RELATIONAL_ESTIMATORS = ("plugin", "neural", "unlinked")
KINDS = ("unit", "population", "spill-over", "transfer unit", "transfer population")
#: per benchmark: (outcome entity, attribute, state compared), (treatment entity, attribute, treated, untreated)
ROLES = {
    "bipartite": (("orchard", "Yield", "high"), ("hive", "Treated", "yes", "no")),
    "peer": (("keeper", "Practice", "new"), ("keeper", "Training", "some", "none")),
    "chain": (("grove", "Vigour", "high"), ("nursery", "Stock", "good", "poor")),
}
_MAX_LIST = 100
_FORMAT = 1


@dataclass(frozen=True)
class RelationalConfig:
    """A validated relational sweep (see the module notes)."""

    name: str
    output: str
    benchmarks: tuple
    seeds: tuple
    draws: int = 1
    estimators: tuple = (("plugin", {}), ("neural", {}), ("unlinked", {}))
    units: int = 20
    spillover: int = 5
    share: float = 0.5
    query_seed: int = 0
    transfer: tuple = ()
    workers: int = 1
    source: str = field(default="<config>", compare=False)


def _where(source: str, path: str) -> str:
    return f"{source}: {path}"


def _whole(value, path: str, lo: int, hi: int, source: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or not lo <= value <= hi:
        raise ConfigError(f"{_where(source, path)} must be a whole number from {lo:,} to {hi:,}, got {short_repr(value)}")
    return value


def _keys(d: Mapping, allowed, path: str, source: str) -> None:
    _check_keys(_where(source, path), d, allowed)


def _list(value, path: str, source: str) -> list:
    if not isinstance(value, list) or not value:
        raise ConfigError(f"{_where(source, path)} must be a non-empty list, got {short_repr(value)}")
    if len(value) > _MAX_LIST:
        raise ConfigError(f"{_where(source, path)} has {len(value):,} entries, more than {_MAX_LIST}")
    return value


def parse_relational_config(doc, source: str = "<config>") -> RelationalConfig:
    """Validate the document of a relational config (see the module notes).

    Raises
    ------
    ConfigError
        Any problem, naming the key path: an unknown key, a spec that is
        not a relational benchmark, a bad seed, count or share, an unknown
        estimator or setting, a bad transfer change.
    """
    from ..relational.benchmarks import parse_relational_spec

    if not isinstance(doc, Mapping):
        raise ConfigError(f"{source}: a config must be a mapping of keys, got {short_repr(doc)}")
    _keys(doc, TOP_KEYS, "the config", source)
    sweep = doc.get("relational")
    if not isinstance(sweep, Mapping):
        raise ConfigError(f"{_where(source, 'relational')} must be a mapping, got {short_repr(sweep)}")
    _keys(sweep, SWEEP_KEYS, "relational", source)
    name = doc.get("name", "relational")
    if not isinstance(name, str) or not name or len(name) > 100:
        raise ConfigError(f"{_where(source, 'name')} must be a text of 1 to 100 characters, got {short_repr(name)}")
    output = doc.get("output", os.path.join("runs", name))
    if not isinstance(output, str) or not output:
        raise ConfigError(f"{_where(source, 'output')} must be a folder path, got {short_repr(output)}")
    benchmarks = []
    for k, spec in enumerate(_list(sweep.get("benchmarks"), "relational.benchmarks", source)):
        try:
            parsed = parse_relational_spec(spec) if isinstance(spec, str) else None
        except IntervgnnError as exc:
            raise ConfigError(f"{_where(source, f'relational.benchmarks[{k}]')}: {exc}") from None
        if parsed is None:
            raise ConfigError(f"{_where(source, f'relational.benchmarks[{k}]')} must be a spec such as "
                              f"'relational:bipartite,instances=200', got {short_repr(spec)}")
        if any(part.strip().startswith("seed") for part in spec.split(",")[1:]):
            raise ConfigError(f"{_where(source, f'relational.benchmarks[{k}]')}: leave seed= out of the spec; "
                              "relational.seeds sets each run's seed")
        benchmarks.append(parsed.text)
    if len({label(b) for b in benchmarks}) != len(benchmarks):
        raise ConfigError(f"{_where(source, 'relational.benchmarks')} lists one benchmark twice")
    seeds = [_whole(s, f"relational.seeds[{k}]", 0, 2**62, source)
             for k, s in enumerate(_list(sweep.get("seeds", [0]), "relational.seeds", source))]
    if len(set(seeds)) != len(seeds):
        raise ConfigError(f"{_where(source, 'relational.seeds')} lists one seed twice")
    draws = _whole(sweep.get("draws", 1), "relational.draws", 1, 100_000, source)
    estimators = []
    for k, item in enumerate(_list(sweep.get("estimators", list(RELATIONAL_ESTIMATORS)), "relational.estimators", source)):
        path = f"relational.estimators[{k}]"
        settings = {}
        if isinstance(item, Mapping) and len(item) == 1:
            item, settings = next(iter(item.items()))
            if settings is None:
                settings = {}
            if not isinstance(settings, Mapping):
                raise ConfigError(f"{_where(source, path)}: settings must be a mapping, got {short_repr(settings)}")
        if not isinstance(item, str) or item not in RELATIONAL_ESTIMATORS:
            raise ConfigError(f"{_where(source, path)}: unknown relational estimator {short_repr(item)}"
                              f"{did_you_mean(str(item), RELATIONAL_ESTIMATORS)}; estimators are: "
                              f"{', '.join(RELATIONAL_ESTIMATORS)}")
        try:
            make_estimator(item, dict(settings))._check_settings()
        except TypeError as exc:
            raise ConfigError(f"{_where(source, path)}.{item}: {exc}") from None
        except IntervgnnError as exc:
            raise ConfigError(f"{_where(source, path)}.{item}: {exc}") from None
        estimators.append((item, dict(settings)))
    if len({e for e, _ in estimators}) != len(estimators):
        raise ConfigError(f"{_where(source, 'relational.estimators')} lists one estimator twice")
    queries = sweep.get("queries", {}) or {}
    if not isinstance(queries, Mapping):
        raise ConfigError(f"{_where(source, 'relational.queries')} must be a mapping, got {short_repr(queries)}")
    _keys(queries, QUERY_KEYS, "relational.queries", source)
    units = _whole(queries.get("units", 20), "relational.queries.units", 0, 1000, source)
    spill = _whole(queries.get("spillover", 5), "relational.queries.spillover", 0, 1000, source)
    share = queries.get("share", 0.5)
    if isinstance(share, bool) or not isinstance(share, (int, float)) or not 0 < share < 1:
        raise ConfigError(f"{_where(source, 'relational.queries.share')} must be a number between 0 and 1, "
                          f"got {short_repr(share)}")
    qseed = _whole(queries.get("seed", 0), "relational.queries.seed", 0, 2**63 - 1, source)
    transfer = []
    for k, change in enumerate(sweep.get("transfer", []) or []):
        path = f"relational.transfer[{k}]"
        if not isinstance(change, Mapping) or not change:
            raise ConfigError(f"{_where(source, path)} must be a mapping such as {{instances: 400}}, got "
                              f"{short_repr(change)}")
        _keys(change, TRANSFER_KEYS, path, source)
        if "scale" in change:
            scale = change["scale"]
            if "instances" in change:
                raise ConfigError(f"{_where(source, path)}: give scale or instances, not both")
            if isinstance(scale, bool) or not isinstance(scale, (int, float)) or not 0 < scale <= 100:
                raise ConfigError(f"{_where(source, path)}.scale must be a number above 0 and at most 100, "
                                  f"got {short_repr(scale)}")
        for spec in benchmarks:  # every change must make a valid spec of every benchmark
            try:
                _changed(parse_relational_spec(spec), change)
            except (IntervgnnError, TypeError) as exc:
                raise ConfigError(f"{_where(source, path)}: {exc}") from None
        transfer.append(dict(change))
    if len(transfer) > 10:
        raise ConfigError(f"{_where(source, 'relational.transfer')} has {len(transfer)} skeletons, more than 10")
    workers = _whole(doc.get("workers", 1), "workers", 1, 256, source)
    for spec in benchmarks:
        if parse_relational_spec(spec).name not in ROLES:  # pragma: no cover - every benchmark has roles
            raise ConfigError(f"{source}: no outcome and treatment known for {spec}")
    return RelationalConfig(
        name=name, output=output, benchmarks=tuple(benchmarks), seeds=tuple(seeds), draws=draws,
        estimators=tuple(estimators), units=units, spillover=spill, share=float(share), query_seed=qseed,
        transfer=tuple(transfer), workers=workers, source=source,
    )


def _changed(spec, change: Mapping, seed: int | None = None):
    """``spec`` with a transfer change applied (``scale`` multiplies the instances)."""
    change = dict(change)
    scale = change.pop("scale", None)
    if scale is not None:
        change["instances"] = max(1, int(round(spec.instances * float(scale))))
    if seed is not None:
        change["seed"] = seed
    return replace(spec, **change)


def label(spec: str) -> str:
    """A benchmark spec without its seed (each run sets its own), e.g. ``bipartite,instances=200,degree=2``."""
    body = spec.split(":", 1)[1]
    return ",".join(p for p in body.split(",") if not p.startswith("seed="))


def make_estimator(name: str, settings: dict):
    from ..relational import RelationalPluginEstimator, UnlinkedPluginEstimator
    from ..relational.neural import RelationalNeuralEstimator

    cls = {"plugin": RelationalPluginEstimator, "neural": RelationalNeuralEstimator,
           "unlinked": UnlinkedPluginEstimator}[name]
    return cls(**settings)


# ---------------------------------------------------------------- queries


def draw_queries(name: str, skeleton, rng: np.random.Generator, units: int, spill: int, share: float):
    """Unit, population and spill-over queries for a benchmark's outcome and treatment, drawn with ``rng``."""
    from ..relational import Policy, PopulationQuery, SpilloverQuery, UnitQuery
    from ..relational.estimate import _linked

    (oe, oa, ostate), (te, ta, on, off) = ROLES[name]
    outcomes = skeleton.instances[oe]
    unit_qs = []
    if units:
        for i in rng.permutation(len(outcomes)):
            o = outcomes[int(i)]
            linked = [h for h in _linked(skeleton, oe, o, te) if h != o]
            if te == oe and not linked:  # one type: a linked instance, or else the instance itself
                linked = [o]
            if not linked:
                continue
            h = linked[int(rng.integers(len(linked)))]
            unit_qs.append(UnitQuery((oe, o, oa), do={(te, h, ta): on if rng.random() < 0.5 else off}))
            if len(unit_qs) == units:
                break
    pop_qs = [
        PopulationQuery(oe, oa, Policy(te, ta, on)),
        PopulationQuery(oe, oa, Policy(te, ta, off)),
        PopulationQuery(oe, oa, Policy(te, ta, on, share=share, seed=int(rng.integers(2**31)))),
    ]
    spill_qs = [SpilloverQuery((oe, outcomes[int(i)], oa), te, ta, on, off, ostate)
                for i in rng.permutation(len(outcomes))[:spill]]
    return unit_qs, pop_qs, spill_qs


def _tv(a, b) -> float:
    return 0.5 * float(np.abs(np.asarray(a.probs) - np.asarray(b.probs)).sum())


def _spill_error(a, b) -> float:
    return float(np.mean([abs(a.own - b.own), abs(a.neighbours - b.neighbours), abs(a.both - b.both)]))


# ---------------------------------------------------------------- runs


def run_key(cfg: RelationalConfig, spec: str, seed: int) -> dict:
    """Everything that determines one run's result (its file is reused by --resume only if this matches)."""
    return {"format": _FORMAT, "benchmark": spec, "seed": seed, "draws": cfg.draws,
            "estimators": [[e, s] for e, s in cfg.estimators], "units": cfg.units, "spillover": cfg.spillover,
            "share": cfg.share, "query_seed": cfg.query_seed, "transfer": list(cfg.transfer)}


def run_file(cfg: RelationalConfig, spec: str, seed: int) -> str:
    name = label(spec).replace("=", "").replace(",", "-")
    return os.path.join(cfg.output, "runs", f"{name}__seed{seed}.json")


def _whole_network(template, skeleton):
    """The ground network, or None where it is too large (each query then grounds what it needs)."""
    from ..errors import NetworkError
    from ..relational import ground

    try:
        return ground(template, skeleton)
    except NetworkError:
        return None


def run_one(cfg: RelationalConfig, spec: str, seed: int) -> dict:
    """One (benchmark, seed) run: fit every estimator, answer every query, score against the exact answers."""
    from ..relational import exact_answer, parse_relational_spec, relational_benchmark
    from ..relational.sampling import sample_data

    t0 = time.perf_counter()
    base = replace(parse_relational_spec(spec), seed=seed)
    template, skeleton = relational_benchmark(base)
    data = sample_data(template, skeleton, draws=cfg.draws, seed=seed + 7919)
    rng = np.random.default_rng([cfg.query_seed, seed])
    unit_qs, pop_qs, spill_qs = draw_queries(base.name, skeleton, rng, cfg.units, cfg.spillover, cfg.share)
    truth_net = _whole_network(template, skeleton)
    truth = {
        "unit": [exact_answer(template, skeleton, q, truth_net) for q in unit_qs],
        "population": [exact_answer(template, skeleton, q, truth_net) for q in pop_qs],
        "spill-over": [exact_answer(template, skeleton, q, truth_net) for q in spill_qs],
    }
    others = []
    for k, change in enumerate(cfg.transfer):
        other_spec = _changed(base, change, seed=seed + 1000 * (k + 1))
        _, other = relational_benchmark(other_spec)
        net = _whole_network(template, other)
        uq, pq, _ = draw_queries(base.name, other, np.random.default_rng([cfg.query_seed, seed, k + 1]),
                                 cfg.units, 0, cfg.share)
        others.append((other, uq, pq, [exact_answer(template, other, q, net) for q in uq],
                       [exact_answer(template, other, q, net) for q in pq]))
    errors: dict[str, dict[str, list[float]]] = {}
    fit_seconds = {}
    for name, settings in cfg.estimators:
        s0 = time.perf_counter()
        est = make_estimator(name, {**({"seed": seed} if name == "neural" else {}), **settings}).fit(data, template)
        fit_seconds[name] = time.perf_counter() - s0
        e = {
            "unit": [_tv(est.query(q), t) for q, t in zip(unit_qs, truth["unit"])],
            "population": [_tv(est.query(q), t) for q, t in zip(pop_qs, truth["population"])],
            "spill-over": [_spill_error(est.query(q), t) for q, t in zip(spill_qs, truth["spill-over"])],
            "transfer unit": [], "transfer population": [],
        }
        for other, uq, pq, tu, tp in others:
            e["transfer unit"] += [_tv(est.query(q, skeleton=other), t) for q, t in zip(uq, tu)]
            e["transfer population"] += [_tv(est.query(q, skeleton=other), t) for q, t in zip(pq, tp)]
        errors[name] = e
    return {**run_key(cfg, spec, seed), "errors": errors, "fit_seconds": fit_seconds,
            "seconds": time.perf_counter() - t0}


def _load(path: str, key: dict):
    try:
        with open(path, encoding="utf-8") as fh:
            record = json.load(fh)
    except (OSError, ValueError):
        return None
    if not isinstance(record, dict) or any(record.get(k) != v for k, v in json.loads(json.dumps(key)).items()):
        return None
    return record


def run_relational(cfg: RelationalConfig, workers: int | None = None, resume: bool = False, log=print) -> list[dict]:
    """Run every (benchmark, seed) of ``cfg`` (in ``workers`` processes), one JSON each; return the records."""
    make_folder(os.path.join(cfg.output, "runs"))
    todo, records = [], {}
    for spec in cfg.benchmarks:
        for seed in cfg.seeds:
            path = run_file(cfg, spec, seed)
            old = _load(path, run_key(cfg, spec, seed)) if resume else None
            if old is not None:
                records[(spec, seed)] = old
            else:
                todo.append((spec, seed))
    log(f"{len(todo)} relational run(s) to do, {len(records)} kept")
    workers = workers or cfg.workers

    def save(spec, seed, record):
        with atomic_open(run_file(cfg, spec, seed)) as fh:
            json.dump(record, fh, indent=1)
        records[(spec, seed)] = record
        log(f"done {label(spec)} seed {seed} ({record['seconds']:.1f} s)")

    if workers > 1 and len(todo) > 1:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            futures = {pool.submit(run_one, cfg, spec, seed): (spec, seed) for spec, seed in todo}
            for fut in as_completed(futures):
                spec, seed = futures[fut]
                save(spec, seed, fut.result())
    else:
        for spec, seed in todo:
            save(spec, seed, run_one(cfg, spec, seed))
    return [records[(spec, seed)] for spec in cfg.benchmarks for seed in cfg.seeds]


def summarise_relational(cfg: RelationalConfig, records: list[dict]) -> list[dict]:
    """Per benchmark, kind and estimator: mean over seeds of the mean error over queries, and the ratio to the plug-in."""
    rows = []
    names = [e for e, _ in cfg.estimators]
    for spec in cfg.benchmarks:
        mine = [r for r in records if r["benchmark"] == spec]
        for kind in KINDS:
            means = {}
            for name in names:
                per_seed = [float(np.mean(r["errors"][name][kind])) for r in mine if r["errors"][name][kind]]
                if per_seed:
                    means[name] = (float(np.mean(per_seed)), sum(len(r["errors"][name][kind]) for r in mine))
            for name, (mean, n) in means.items():
                ratio = mean / means["plugin"][0] if "plugin" in means and means["plugin"][0] > 0 else float("nan")
                rows.append({"benchmark": label(spec), "kind": kind, "estimator": name, "mean_error": mean,
                             "queries": n, "seeds": len(mine), "ratio_to_plugin": ratio})
    return rows


def write_relational(cfg: RelationalConfig, rows: list[dict]) -> dict[str, str]:
    """``summary.csv`` and ``summary.md`` in the output folder; returns their paths."""
    csv_path = os.path.join(cfg.output, "summary.csv")
    md_path = os.path.join(cfg.output, "summary.md")
    with atomic_open(csv_path, newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]) if rows else ["benchmark"])
        w.writeheader()
        for r in rows:
            w.writerow({k: (f"{v:.6g}" if isinstance(v, float) else v) for k, v in r.items()})
    with atomic_open(md_path) as fh:
        fh.write(markdown_relational(cfg, rows) + "\n")
    return {"summary.csv": csv_path, "summary.md": md_path}


def markdown_relational(cfg: RelationalConfig, rows: list[dict]) -> str:
    names = [e for e, _ in cfg.estimators]
    lines = [f"# {cfg.name}: relational summary", "",
             "Mean error to the exact answers (TV; spill-over: mean absolute error of its three contrasts), "
             f"mean over seeds {list(cfg.seeds)}; in brackets the ratio to the plug-in.", "",
             "| benchmark | kind | " + " | ".join(names) + " |", "|---|---|" + "---:|" * len(names)]
    for spec in cfg.benchmarks:
        for kind in KINDS:
            got = {r["estimator"]: r for r in rows if r["benchmark"] == label(spec) and r["kind"] == kind}
            if not got:
                continue
            cells = []
            for name in names:
                r = got.get(name)
                if r is None:
                    cells.append("-")
                elif name == "plugin" or r["ratio_to_plugin"] != r["ratio_to_plugin"]:
                    cells.append(f"{r['mean_error']:.4f}")
                else:
                    cells.append(f"{r['mean_error']:.4f} ({r['ratio_to_plugin']:.2f})")
            lines.append(f"| {label(spec)} | {kind} | " + " | ".join(cells) + " |")
    return "\n".join(lines)
