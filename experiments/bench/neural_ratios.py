"""Neural / plug-in error ratios from a sweep's summary, cell by cell, with the goals checked.

Reads the ``summary.csv`` that ``intervgnn run`` writes (per network, row
count and estimator: the mean over queries of the per-query error averaged
over seeds) and prints, for each (network, rows) cell, the plug-in's and the
neural estimator's mean error and their ratio (below 1: the neural estimator
is closer to the exact answers), on all queries and on the confounded ones.
Then the averages over cells: overall, per row count, and the worst cell.

Goals (``--goals benchmark``, the shipped networks): every cell at most 1.10,
the average over cells at most 1.0, the average at 1,000 rows at most 0.95.
``--goals random`` (random networks): the average at each row count at most
1.10 and no network above 1.25.

Run: python experiments/bench/neural_ratios.py experiments/results/benchmark/summary.csv
     [--metric tv] [--goals benchmark|random] [--neural neural] [--plugin plugin]
"""

from __future__ import annotations

import argparse
import csv
import statistics
from collections import defaultdict


def load(path, metric, subset):
    out = {}
    with open(path, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            if row["metric"] == metric and row["subset"] == subset:
                out[(row["network"], int(row["rows"]), row["estimator"])] = float(row["mean"])
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("summary")
    ap.add_argument("--metric", default="tv")
    ap.add_argument("--neural", default="neural", help="label of the neural estimator in the summary")
    ap.add_argument("--plugin", default="plugin", help="label of the plug-in estimator in the summary")
    ap.add_argument("--goals", choices=["benchmark", "random", "none"], default="benchmark")
    args = ap.parse_args()
    every = load(args.summary, args.metric, "all")
    confounded = load(args.summary, args.metric, "confounded")
    cells = sorted({(net, rows) for net, rows, est in every if est == args.neural and (net, rows, args.plugin) in every},
                   key=lambda c: (c[1], c[0]))
    print(f"{args.metric} from {args.summary}: mean over queries (per query averaged over seeds)")
    print(f"{'network':<24} {'rows':>8} {'plug-in':>8} {'neural':>8} {'ratio':>6} {'plug-in c.':>10} {'neural c.':>10} {'ratio c.':>8}")
    ratios = {}
    for net, rows in cells:
        p, n = every[(net, rows, args.plugin)], every[(net, rows, args.neural)]
        ratios[(net, rows)] = n / p
        pc, nc = confounded.get((net, rows, args.plugin)), confounded.get((net, rows, args.neural))
        conf = f"{pc:>10.4f} {nc:>10.4f} {nc / pc:>8.2f}" if pc and nc is not None else f"{'-':>10} {'-':>10} {'-':>8}"
        print(f"{net:<24} {rows:>8,} {p:>8.4f} {n:>8.4f} {n / p:>6.2f} {conf}")
    if not ratios:
        print("no cell has both estimators")
        return
    by_rows = defaultdict(list)
    for (net, rows), r in ratios.items():
        by_rows[rows].append(r)
    print()
    worst = max(ratios, key=ratios.get)
    print(f"average ratio over {len(ratios)} cells: {statistics.fmean(ratios.values()):.3f}; "
          f"worst cell {worst[0]} at {worst[1]:,} rows: {ratios[worst]:.3f}")
    for rows, rs in sorted(by_rows.items()):
        print(f"  {rows:>9,} rows: average {statistics.fmean(rs):.3f}, best {min(rs):.3f}, worst {max(rs):.3f}, "
              f"cells above 1.10: {sum(r > 1.10 for r in rs)} of {len(rs)}")
    if args.goals == "benchmark":
        checks = [
            ("every cell <= 1.10", max(ratios.values()) <= 1.10),
            ("average over cells <= 1.0", statistics.fmean(ratios.values()) <= 1.0),
            ("average at 1,000 rows <= 0.95", 1000 in by_rows and statistics.fmean(by_rows[1000]) <= 0.95),
        ]
    elif args.goals == "random":
        checks = [(f"average at {rows:,} rows <= 1.10", statistics.fmean(rs) <= 1.10) for rows, rs in sorted(by_rows.items())]
        checks.append(("no network above 1.25", max(ratios.values()) <= 1.25))
    else:
        checks = []
    for text, ok in checks:
        print(f"goal {text}: {'met' if ok else 'NOT MET'}")


if __name__ == "__main__":
    main()
