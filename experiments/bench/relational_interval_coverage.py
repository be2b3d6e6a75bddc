"""Coverage and width of the relational estimators' posterior intervals against the exact answers.

For each benchmark world and seed, as ``intervgnn run configs/relational.yaml``
draws them (template and skeleton of the seed, one observed draw of the
skeleton, the same 20 unit and 3 population queries): the tied plug-in and
the neural relational estimator are fitted, and every query is answered with
a central interval at ``--level`` from ``--draws`` CPT sets drawn from the
posterior the fitted CPTs are the mean of. An interval covers when the exact
probability lies inside; printed per estimator, world and query kind:
coverage (share of exact probabilities inside), its standard error with
seeds as clusters, mean width, and seconds (the fits counted with the unit
queries).

Run: python experiments/bench/relational_interval_coverage.py [--worlds ...] [--seeds 0 1 2] [--draws 100]
"""

from __future__ import annotations

import argparse
import time
from dataclasses import replace

import numpy as np

from intervgnn.harness.relational import _whole_network, draw_queries
from intervgnn.relational import exact_answer, parse_relational_spec, relational_benchmark
from intervgnn.relational.estimate import RelationalPluginEstimator
from intervgnn.relational.neural import RelationalNeuralEstimator
from intervgnn.relational.sampling import sample_data

WORLDS = [
    "relational:bipartite,instances=200,degree=2,max_degree=7",
    "relational:peer,instances=200,degree=1.5,max_degree=7",
    "relational:chain,instances=200,degree=2,max_degree=7",
]


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--worlds", nargs="+", default=WORLDS)
    ap.add_argument("--seeds", nargs="+", type=int, default=[0, 1, 2])
    ap.add_argument("--level", type=float, default=0.95)
    ap.add_argument("--draws", type=int, default=100)
    args = ap.parse_args()
    print(f"coverage of nominal {args.level:.0%} relational intervals, {args.draws} posterior draws, seeds {args.seeds}")
    print(f"{'estimator':<9} {'world':<50} {'kind':<11} {'coverage':>9} {'se':>6} {'width':>7} {'s':>6}")
    overall = {}
    for spec in args.worlds:
        cells = {}
        for seed in args.seeds:
            base = replace(parse_relational_spec(spec), seed=seed)
            template, skeleton = relational_benchmark(base)
            data = sample_data(template, skeleton, draws=1, seed=seed + 7919)  # as the harness draws it
            unit_qs, pop_qs, _ = draw_queries(base.name, skeleton, np.random.default_rng([0, seed]), 20, 0, 0.5)
            net = _whole_network(template, skeleton)
            truth = {"unit": [exact_answer(template, skeleton, q, net).probs for q in unit_qs],
                     "population": [exact_answer(template, skeleton, q, net).probs for q in pop_qs]}
            for name, est in (("plugin", RelationalPluginEstimator()), ("neural", RelationalNeuralEstimator(seed=seed))):
                t0 = time.perf_counter()
                est.fit(data, template)
                for kind, qs in (("unit", unit_qs), ("population", pop_qs)):
                    hits, widths = [], []
                    for q, exact in zip(qs, truth[kind]):
                        iv = est.query_interval(q, level=args.level, draws=args.draws, seed=seed).interval
                        hits.append((iv.lower - 1e-12 <= exact) & (exact <= iv.upper + 1e-12))
                        widths.append(iv.upper - iv.lower)
                    cell = cells.setdefault((name, kind), {"per_seed": [], "hits": [], "widths": [], "s": 0.0})
                    h = np.concatenate(hits)
                    cell["per_seed"].append(float(h.mean()))
                    cell["hits"].append(h)
                    cell["widths"].append(np.concatenate(widths))
                    cell["s"] += time.perf_counter() - t0
                    t0 = time.perf_counter()
        for (name, kind), cell in sorted(cells.items(), key=lambda kv: (kv[0][0] != "plugin", kv[0][1])):
            cov = float(np.concatenate(cell["hits"]).mean())
            ps = cell["per_seed"]
            se = float(np.std(ps, ddof=1) / np.sqrt(len(ps))) if len(ps) > 1 else float("nan")
            width = float(np.concatenate(cell["widths"]).mean())
            overall.setdefault(name, []).append(cov)
            label = spec.removeprefix("relational:")
            print(f"{name:<9} {label:<50} {kind:<11} {cov:>9.3f} {se:>6.3f} {width:>7.4f} {cell['s']:>6.1f}", flush=True)
    print()
    for name, covs in overall.items():
        print(f"{name}: coverage per world and kind from {min(covs):.3f} to {max(covs):.3f} (nominal {args.level:.2f})")


if __name__ == "__main__":
    main()
