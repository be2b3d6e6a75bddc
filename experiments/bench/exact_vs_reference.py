"""Exact engine and sampler against pgmpy, measured in one process.

For each of alarm, insurance and child: 50 seeded (X, Y) pairs with Y a
descendant of X; every value of X is asked. Our engine answers each pair
with one contraction (``query_each``) and, separately, value by value
(``query``); pgmpy answers value by value with ``CausalInference.query``.
"Cold" times include building the elimination plan (a fresh network per
pair); "warm" times reuse the cached plan. The answers are compared too.

Then ancestral sampling on alarm: rows per second for ours and pgmpy's
``BayesianModelSampling.forward_sample`` on the same row count, their ratio,
and the peak memory (tracemalloc) of each.

Run: python experiments/bench/exact_vs_reference.py [--pairs 50] [--rows 1000000]
"""

from __future__ import annotations

import argparse
import statistics
import time
import tracemalloc
import warnings

import numpy as np

import intervgnn as ig
from intervgnn.bn.catalog import catalog_path

warnings.simplefilter("ignore")


def pairs_for(net, n, seed):
    rng = np.random.default_rng(seed)
    g = net.graph
    pairs = [(x, y) for x in g.nodes for y in g.descendants(x)]
    pick = rng.choice(len(pairs), size=min(n, len(pairs)), replace=False)
    return [pairs[i] for i in pick]


def bench_queries(name, n_pairs):
    from pgmpy.inference import CausalInference
    from pgmpy.readwrite import BIFReader

    model = BIFReader(catalog_path(name)).get_model()
    for cpd in model.get_cpds():
        cpd.normalize(inplace=True)
    ci = CausalInference(model)
    text = open(catalog_path(name)).read()
    warm_net = ig.load_network(name)
    ratios_cold, ratios_warm, ratios_value = [], [], []
    max_diff = 0.0
    for x, y in pairs_for(warm_net, n_pairs, seed=0):
        states = warm_net.states[x]
        t0 = time.perf_counter()
        refs = [ci.query([y], do={x: s}, show_progress=False) for s in states]
        t_ref = time.perf_counter() - t0

        cold_net = ig.parse_bif(text)  # fresh plan cache
        t0 = time.perf_counter()
        cold = cold_net.query_each(y, x)
        t_cold = time.perf_counter() - t0

        t0 = time.perf_counter()
        for _ in range(5):
            warm = warm_net.query_each(y, x)
        t_warm = (time.perf_counter() - t0) / 5

        t0 = time.perf_counter()
        for _ in range(5):
            per_value = [warm_net.query(y, do={x: s}) for s in states]
        t_value = (time.perf_counter() - t0) / 5

        for s, ref, pv in zip(states, refs, per_value):
            arr = np.array([ref.get_value(**{y: st}) for st in warm_net.states[y]])
            arr = arr / arr.sum()
            max_diff = max(max_diff, float(np.abs(cold[s].probs - arr).max()), float(np.abs(pv.probs - arr).max()))
            max_diff = max(max_diff, float(np.abs(warm[s].probs - arr).max()))
        ratios_cold.append(t_ref / t_cold)
        ratios_warm.append(t_ref / t_warm)
        ratios_value.append(t_ref / t_value)
    return {
        "network": name,
        "pairs": len(ratios_cold),
        "median_speedup_cold": statistics.median(ratios_cold),
        "median_speedup_warm": statistics.median(ratios_warm),
        "median_speedup_per_value": statistics.median(ratios_value),
        "max_abs_diff": max_diff,
    }


def timed_peak(fn):
    tracemalloc.start()
    t0 = time.perf_counter()
    out = fn()
    dt = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return out, dt, peak / 2**20


def bench_sampling(rows, ref_rows):
    from pgmpy.readwrite import BIFReader
    from pgmpy.sampling import BayesianModelSampling

    net = ig.load_network("alarm")
    net.sample(10, seed=0)  # build the sampler's tables once
    times = []
    for rep in range(3):
        t0 = time.perf_counter()
        net.sample(rows, seed=rep)
        times.append(time.perf_counter() - t0)
    ours_rate = rows / statistics.median(times)
    _, t_ours_small, peak_ours = timed_peak(lambda: net.sample(ref_rows, seed=9))
    model = BIFReader(catalog_path("alarm")).get_model()
    sampler = BayesianModelSampling(model)
    _, t_ref, peak_ref = timed_peak(lambda: sampler.forward_sample(size=ref_rows, show_progress=False, seed=0))
    _, _, peak_ours_big = timed_peak(lambda: net.sample(rows, seed=10))
    return {
        "rows": rows,
        "ours_rows_per_s": ours_rate,
        "ref_rows": ref_rows,
        "ours_rows_per_s_at_ref_rows": ref_rows / t_ours_small,
        "ref_rows_per_s": ref_rows / t_ref,
        "speedup": t_ref / t_ours_small,
        "peak_mb_ours_at_ref_rows": peak_ours,
        "peak_mb_ref": peak_ref,
        "peak_mb_ours_at_rows": peak_ours_big,
    }


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--pairs", type=int, default=50)
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--ref-rows", type=int, default=100_000)
    ap.add_argument("--networks", nargs="+", default=["alarm", "insurance", "child"])
    args = ap.parse_args()

    print(f"Exact do-queries, {args.pairs} (X, Y) pairs per network, every value of X; speed-up = pgmpy time / ours")
    print(f"{'network':<10} {'pairs':>5} {'cold sweep':>11} {'warm sweep':>11} {'per value':>10} {'max |diff|':>11}")
    for name in args.networks:
        r = bench_queries(name, args.pairs)
        print(
            f"{r['network']:<10} {r['pairs']:>5} {r['median_speedup_cold']:>10.1f}x {r['median_speedup_warm']:>10.1f}x "
            f"{r['median_speedup_per_value']:>9.1f}x {r['max_abs_diff']:>11.2e}"
        )
    s = bench_sampling(args.rows, args.ref_rows)
    print()
    print("Ancestral sampling on alarm")
    print(f"  ours: {s['ours_rows_per_s']:,.0f} rows/s at {s['rows']:,} rows (median of 3), peak {s['peak_mb_ours_at_rows']:.0f} MiB")
    print(
        f"  at {s['ref_rows']:,} rows: ours {s['ours_rows_per_s_at_ref_rows']:,.0f} rows/s, peak {s['peak_mb_ours_at_ref_rows']:.0f} MiB; "
        f"pgmpy {s['ref_rows_per_s']:,.0f} rows/s, peak {s['peak_mb_ref']:.0f} MiB; speed-up {s['speedup']:.1f}x"
    )


if __name__ == "__main__":
    main()
