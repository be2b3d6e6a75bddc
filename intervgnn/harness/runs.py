"""One run of the grid: sample rows, fit an estimator, answer the query set, score it."""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import json
import time
from dataclasses import asdict, dataclass

import numpy as np

from ..bn import load_network
from ..errors import ConfigError, UnsupportedQuery, ZeroEvidenceError, did_you_mean, shorten
from ..eval.queries import EvalQuery, make_query_set
from ..table import Table
from .config import EstimatorSpec, ExperimentConfig, NetworkSpec
from .registry import make_estimator

__all__ = ["RunSpec", "plan_runs", "check_networks", "prepared_network", "training_rows", "execute_run", "FORMAT"]

#: version of the per-run result files
FORMAT = "intervgnn-run-1"


@dataclass(frozen=True)
class RunSpec:
    """One cell of the grid (network x rows x seed x estimator)."""

    network: NetworkSpec
    rows: int
    seed: int
    estimator: EstimatorSpec

    @property
    def key(self) -> str:
        """File-name-safe identifier of the run."""
        return f"{self.network.label}__{self.rows}__seed{self.seed}__{self.estimator.label}"


def plan_runs(cfg: ExperimentConfig) -> list[RunSpec]:
    """Every run of the grid, in a fixed order (network, rows, seed, estimator)."""
    return [
        RunSpec(net, rows, seed, est)
        for net in cfg.networks
        for rows in cfg.rows
        for seed in cfg.seeds
        for est in cfg.estimators
    ]


def run_digest(spec: RunSpec, cfg: ExperimentConfig) -> str:
    """Hash of everything that determines a run's result (to skip only truly finished runs on resume)."""
    from .. import __version__

    doc = {
        "format": FORMAT,
        "version": __version__,
        "network": asdict(spec.network),
        "network_text": _network_fingerprint(spec.network.source),
        "rows": spec.rows,
        "seed": spec.seed,
        "estimator": {"kind": spec.estimator.kind, "settings": spec.estimator.settings},
        "queries": [cfg.query_count, list(cfg.query_kinds), cfg.query_seed],
        "experiments": [list(cfg.experiment_targets), cfg.experiment_count, cfg.rows_per_target],
        **({"intervals": [cfg.interval_level, cfg.interval_draws]} if cfg.interval_level is not None else {}),
    }
    return hashlib.sha256(json.dumps(doc, sort_keys=True, default=str).encode()).hexdigest()[:16]


@functools.lru_cache(maxsize=None)
def _network_fingerprint(source: str) -> str:
    from ..bn.catalog import CATALOG, catalog_path
    from ..bn.synthetic import is_random_spec, parse_random_spec

    if is_random_spec(source):  # a random network is fixed by its settings and the generator's version
        text = json.dumps(parse_random_spec(source).fingerprint(), sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()[:16]
    path = catalog_path(source) if source in CATALOG else source
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest()[:16]


@dataclass(frozen=True)
class Prepared:
    """A network ready for runs: the ground truth, the observed graph, the query set."""

    net: object
    observed: tuple[str, ...]
    graph: object
    queries: tuple[EvalQuery, ...]
    experiment_targets: tuple[str, ...]


@functools.lru_cache(maxsize=16)
def prepared_network(spec: NetworkSpec, count: int, kinds: tuple[str, ...], qseed: int,
                     ex_targets: tuple[str, ...], ex_count: int) -> Prepared:
    """Load a network once per process and draw its query set."""
    net = load_network(spec.source)
    hidden = set(spec.hidden)
    for h in spec.hidden:
        if h not in net.graph:
            raise ConfigError(
                f"network '{spec.label}': hidden variable '{h}' is not in the network{did_you_mean(h, net.variables)}"
            )
    observed = tuple(v for v in net.variables if v not in hidden)
    if not observed:
        raise ConfigError(f"network '{spec.label}': 'hidden' lists every variable; leave some observed")
    if hidden:
        graph = net.graph.project_out(sorted(hidden))
    else:
        graph = net.graph
    queries = tuple(make_query_set(net, count, kinds=kinds, seed=qseed, observed=observed))
    if not queries:
        # every run would answer nothing and the summary would be empty
        raise ConfigError(
            f"network '{spec.label}': no query of the kinds {', '.join(kinds)} can be drawn from its "
            f"{len(observed)} observed variable(s); hide fewer variables or choose other kinds"
        )
    if hidden:
        from ..identify import identify

        queries = tuple(
            dataclasses.replace(q, identifiable=identify(graph, list(q.target), list(q.do_dict), list(q.given_dict)).identifiable)
            for q in queries
        )
    # the config's targets apply to every network that observes them (check_networks
    # refuses a target that no network observes)
    targets = tuple(t for t in ex_targets if t in observed)
    if ex_targets and not targets:
        raise ConfigError(
            f"network '{spec.label}': none of the experiment targets ({', '.join(ex_targets)}) is an observed "
            "variable of this network"
        )
    if ex_count and not ex_targets:
        rng = np.random.default_rng(qseed)
        cands = [v for v in observed if net.graph.descendants(v)]
        if not cands:
            raise ConfigError(
                f"network '{spec.label}': experiments.count: no observed variable has a descendant to experiment on"
            )
        pick = rng.choice(len(cands), size=min(ex_count, len(cands)), replace=False)
        targets = tuple(cands[i] for i in sorted(pick))
    return Prepared(net, observed, graph, queries, targets)


def check_networks(cfg: ExperimentConfig) -> None:
    """Config problems that only the networks reveal, raised before any run starts.

    Raises
    ------
    ConfigError
        A hidden variable the network lacks, an experiment target that no
        network observes, or a network observing none of the targets; a
        network with every variable hidden or no query to draw; more rows
        than one sampling call may draw from a network.
    BIFParseError
        A network file that cannot be read.
    """
    from ..bn.sampling import MAX_SAMPLE_CELLS

    observed: dict[str, None] = {}  # ordered and linear to search
    for net in cfg.networks:
        prep = prepared_network(
            net, cfg.query_count, cfg.query_kinds, cfg.query_seed, cfg.experiment_targets, cfg.experiment_count
        )
        observed.update(dict.fromkeys(prep.observed))
        for i, est in enumerate(cfg.estimators):  # back-door pairs name variables every network must observe
            for j, pair in enumerate(est.settings.get("pairs") or ()):
                for v in pair:
                    if v not in prep.observed:
                        raise ConfigError(
                            f"estimators[{i}].{est.kind}.pairs[{j}]: '{shorten(v)}' is not an observed variable of "
                            f"network '{net.label}'{did_you_mean(v, prep.observed)}"
                        )
        # each sampling call of a run draws at most MAX_SAMPLE_CELLS rows x variables
        n_vars = len(prep.net.variables)
        for key, n in (("rows", max(cfg.rows)), ("experiments.rows_per_target", cfg.rows_per_target)):
            if n * n_vars > MAX_SAMPLE_CELLS:
                raise ConfigError(
                    f"{key}: {n:,} rows of network '{net.label}' ({n_vars} variables) are more than a run may "
                    f"draw ({MAX_SAMPLE_CELLS:,} values); at most {MAX_SAMPLE_CELLS // n_vars:,} rows for this network"
                )
    for t in cfg.experiment_targets:
        if t not in observed:
            raise ConfigError(
                f"experiments.targets: '{t}' is not an observed variable of any network{did_you_mean(t, observed)}"
            )


def training_rows(prep: Prepared, rows: int, seed: int, rows_per_target: int) -> Table:
    """Observational rows, plus experimental rows (treatment state uniform per row) when configured."""
    net = prep.net
    parts = [net.sample(rows, seed=seed)]
    if prep.experiment_targets and rows_per_target:
        rng = np.random.default_rng([seed, 7919])
        for x in prep.experiment_targets:
            states = net.states[x]
            counts = np.bincount(rng.integers(len(states), size=rows_per_target), minlength=len(states))
            for s, c in zip(states, counts):
                if c:
                    parts.append(net.sample(int(c), do={x: s}, seed=int(rng.integers(2**31))))
    table = Table.concat(parts) if len(parts) > 1 else parts[0]
    if len(prep.observed) != len(net.variables):
        table = table.select(prep.observed)
    return table


def execute_run(spec: RunSpec, cfg: ExperimentConfig) -> dict:
    """Fit one estimator on one set of rows and answer every query; returns the run record (estimates, not scores)."""
    import torch

    threads = torch.get_num_threads()
    torch.set_num_threads(1)  # one thread per run: the same numbers on every executor
    try:
        prep = prepared_network(
            spec.network, cfg.query_count, cfg.query_kinds, cfg.query_seed, cfg.experiment_targets, cfg.experiment_count
        )
        table = training_rows(prep, spec.rows, spec.seed, cfg.rows_per_target)
        est = make_estimator(spec.estimator.kind, spec.estimator.settings, spec.seed)
        if spec.estimator.kind == "backdoor" and est.pairs is None:
            # it trains one classifier per (treatment, target) pair in fit: train those the query set asks
            est.set_params(pairs=sorted({(q.do[0][0], q.target[0]) for q in prep.queries
                                         if len(q.target) == 1 and len(q.do) == 1 and not q.given}))
        t0 = time.perf_counter()
        est.fit(table, prep.graph)
        fit_s = time.perf_counter() - t0
        records = []
        t0 = time.perf_counter()
        for q in prep.queries:
            rec = {"qid": q.qid, "status": "ok", "estimate": None}
            try:
                dist = est.query(list(q.target), do=q.do_dict, given=q.given_dict)
            except UnsupportedQuery as exc:
                rec["status"] = "unsupported"
                rec["message"] = str(exc)
            except ZeroEvidenceError as exc:
                rec["status"] = "zero_evidence"
                rec["message"] = str(exc)
            else:
                # the estimate is kept, not its scores: metrics are computed when summarising,
                # so a metric added to the config later needs no rerun
                rec["estimate"] = dist.probs.ravel().tolist()
                if cfg.interval_level is not None:
                    try:
                        iv = est.query_interval(list(q.target), do=q.do_dict, given=q.given_dict,
                                                level=cfg.interval_level, draws=cfg.interval_draws, seed=spec.seed)
                    except (UnsupportedQuery, ZeroEvidenceError) as exc:  # e.g. not identifiable: no data-driven interval
                        rec["interval"] = str(exc)[:300]
                    else:
                        if iv.interval.method == "experimental posterior":
                            # the answer came from the experimental rows, not from the estimator scored here
                            rec["interval"] = iv.description[:300]
                        else:
                            rec["lower"] = iv.interval.lower.ravel().tolist()
                            rec["upper"] = iv.interval.upper.ravel().tolist()
            records.append(rec)
        query_s = time.perf_counter() - t0
    finally:
        torch.set_num_threads(threads)
    return {
        "format": FORMAT,
        "key": spec.key,
        "digest": run_digest(spec, cfg),
        "network": spec.network.label,
        "rows": spec.rows,
        "training_rows": table.n_rows,
        "seed": spec.seed,
        "estimator": spec.estimator.label,
        "estimator_kind": spec.estimator.kind,
        "fit_seconds": fit_s,
        "query_seconds": query_s,
        "queries": records,
    }
