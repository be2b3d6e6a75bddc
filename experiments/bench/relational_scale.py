"""Fit and answer on relational skeletons of 10^4, 10^5 and 10^6 instances (2 cores, one torch thread).

For each size: the bipartite benchmark template (hives pollinate orchards,
half the instances of each type, mean in-degree 2, at most 7), a random
skeleton, one draw of every attribute (drawn without the ground network,
:func:`intervgnn.relational.sampling.sample_data`), then the neural
relational estimator's fit (counting the instance families, training, the
shrunk CPTs) and the plug-in's fit, and a unit query and a spill-over query
answered by grounding only what they need. Printed: seconds of each part,
the counted family configurations, peak memory of the process so far, and
the neural fit's seconds per instance at each size against the smallest
(near 1 or below: linear or better).

Run: python experiments/bench/relational_scale.py [--sizes 10000 100000 1000000]
"""

from __future__ import annotations

import argparse
import platform
import resource
import time

import numpy as np
import torch

from intervgnn.relational import (
    RelationalPluginEstimator,
    SpilloverQuery,
    UnitQuery,
    exact_answer,
    relational_benchmark,
)
from intervgnn.relational.neural import RelationalNeuralEstimator
from intervgnn.relational.sampling import sample_data


def peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # kilobytes on Linux


def timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", nargs="+", type=int, default=[10_000, 100_000, 1_000_000])
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()
    print(f"# python {platform.python_version()}, torch {torch.__version__}, one torch thread")
    print(f"{'instances':>10} {'links':>9} {'skeleton s':>10} {'draw s':>7} {'neural fit s':>12} {'families':>9} "
          f"{'plug-in s':>9} {'unit q s':>8} {'spill q s':>9} {'unit TV':>8} {'peak MB':>8}")
    per_instance = {}
    for n in args.sizes:
        (template, skeleton), sk_s = timed(lambda: relational_benchmark(
            "bipartite", instances=n // 2, degree=2, seed=args.seed, max_degree=7))
        data, draw_s = timed(lambda: sample_data(template, skeleton, seed=args.seed + 1))
        est, fit_s = timed(lambda: RelationalNeuralEstimator(seed=args.seed).fit(data, template))
        _, plug_s = timed(lambda: RelationalPluginEstimator().fit(data, template))
        unit = UnitQuery("orchard_17__Yield", do={"hive_4__Treated": "yes"})
        answer, unit_s = timed(lambda: est.query(unit))
        spill = SpilloverQuery("orchard_17__Yield", "hive", "Treated", "yes", "no", "high")
        _, spill_s = timed(lambda: est.query(spill))
        truth = exact_answer(template, skeleton, unit)
        tv = 0.5 * float(np.abs(answer.probs - truth.probs).sum())
        families = sum(f.num_configs for f in est.families_.values())
        links = sum(len(v) for v in skeleton.links.values())
        per_instance[n] = fit_s / n
        print(f"{n:>10,} {links:>9,} {sk_s:>10.1f} {draw_s:>7.1f} {fit_s:>12.1f} {families:>9,} {plug_s:>9.1f} "
              f"{unit_s:>8.2f} {spill_s:>9.2f} {tv:>8.4f} {peak_mb():>8.0f}", flush=True)
    small = min(per_instance)
    for n in sorted(per_instance):
        print(f"neural fit seconds per instance at {n:,} / at {small:,}: {per_instance[n] / per_instance[small]:.2f}")


if __name__ == "__main__":
    main()
