"""Neural estimator fit time against the number of rows, and against the plug-in's.

The neural estimator trains on the distinct family configurations of the
rows (their sufficient statistics), so after one vectorised counting pass
its cost should hardly depend on the number of rows. Printed, all measured in
this one run, with the settings' defaults (one torch thread):

- per network and row count: median fit seconds over ``--repeats`` fits
  (rows drawn once per row count, seed 0, not timed), the distinct family
  configurations trained on, and the plug-in's median fit seconds;
- per network: neural fit time at 100,000 rows / at 1,000 rows (goal: at most 2);
- neural fit / plug-in fit at 10,000 rows on alarm (goal: at most 50);
- wall seconds of ``intervgnn estimate --estimator neural`` on a CSV of 700
  rows of a three-variable random network (process start and imports
  included), and of the same with ``--estimator plugin``.

Run: python experiments/bench/neural_speed.py [--networks alarm insurance]
     [--rows 1000 10000 100000 1000000] [--repeats 3]
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time

import torch

import intervgnn as ig
from intervgnn.estimators import NeuralEstimator, PluginEstimator


def median_seconds(fit, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fit()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--networks", nargs="+", default=["alarm", "insurance"])
    ap.add_argument("--rows", nargs="+", type=int, default=[1000, 10_000, 100_000, 1_000_000])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--plugin-repeats", type=int, default=15)
    args = ap.parse_args()
    print(f"# python {platform.python_version()}, torch {torch.__version__}, {torch.get_num_threads()} torch threads "
          f"available; fits use the default of one")
    print(f"{'network':<10} {'rows':>9} {'cells':>6} {'neural s':>9} {'plug-in s':>10} {'neural/plug-in':>15}")
    seconds: dict[tuple[str, int], tuple[float, float]] = {}
    for name in args.networks:
        net = ig.load_network(name)
        NeuralEstimator(seed=0, steps=2).fit(net.sample(500, seed=0), net.graph)  # warm-up (imports, kernels)
        for n in args.rows:
            rows = net.sample(n, seed=0)
            neural_s, est = median_seconds(lambda: NeuralEstimator(seed=0).fit(rows, net.graph), args.repeats)
            plug_s, _ = median_seconds(lambda: PluginEstimator().fit(rows, net.graph), args.plugin_repeats)
            seconds[(name, n)] = (neural_s, plug_s)
            print(f"{name:<10} {n:>9,} {est.cells_.num_cells:>6} {neural_s:>9.3f} {plug_s:>10.4f} "
                  f"{neural_s / plug_s:>15.1f}", flush=True)
    print()
    for name in args.networks:
        if (name, 100_000) in seconds and (name, 1000) in seconds:
            ratio = seconds[(name, 100_000)][0] / seconds[(name, 1000)][0]
            print(f"{name}: neural fit at 100,000 rows / at 1,000 rows = {ratio:.2f} (goal <= 2)")
    if ("alarm", 10_000) in seconds:
        neural_s, plug_s = seconds[("alarm", 10_000)]
        print(f"alarm: neural fit / plug-in fit at 10,000 rows = {neural_s / plug_s:.1f} (goal <= 50; "
              f"{neural_s:.3f} s against {plug_s:.4f} s)")
    small_csv_command()


def small_csv_command():
    """``intervgnn estimate`` on a 700-row CSV of three variables, timed as a user would see it."""
    net = ig.load_network("random:nodes=3,seed=4")
    with tempfile.TemporaryDirectory() as tmp:
        csv = os.path.join(tmp, "rows.csv")
        graph = os.path.join(tmp, "graph.yaml")
        net.sample(700, seed=0).to_csv(csv)
        with open(graph, "w") as fh:
            fh.write("edges:\n" + "".join(f"  - [{a}, {b}]\n" for a, b in net.graph.edges))
        x, y = "V1", "V3"  # V1 -> V2 -> V3 and V1 -> V3
        exe = os.path.join(os.path.dirname(sys.executable), "intervgnn")
        for estimator in ("neural", "plugin"):
            cmd = [exe, "estimate", "--data", csv, "--graph", graph, "--estimator", estimator, "--quiet",
                   "--target", y, "--do", f"{x}={net.states[x][0]}"]
            t0 = time.perf_counter()
            subprocess.run(cmd, check=True, capture_output=True)
            print(f"intervgnn estimate --estimator {estimator} on 700 rows of 3 variables: "
                  f"{time.perf_counter() - t0:.1f} s wall (process start and imports included)")


if __name__ == "__main__":
    main()
