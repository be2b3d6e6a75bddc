"""Goals of the relational sweeps, checked from their summary.csv (written by ``intervgnn run``).

Printed, per benchmark (template and skeleton size; means over the seeds):

- neural / plug-in mean error on unit and population queries (goal: at most
  1.1; with ``--bins``, the many-bins sweep: at most 0.8);
- the unlinked ablation / plug-in on spill-over queries (goal: clearly above
  1, here at least 1.5);
- transfer: the neural estimator's mean error on the unseen skeletons over
  its mean error on its own skeleton, unit and population queries pooled
  (goal: at most 1.2).

Run: python experiments/bench/relational_ratios.py experiments/results/relational/summary.csv [--bins]
"""

from __future__ import annotations

import argparse
import csv
from collections import defaultdict


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("summary")
    ap.add_argument("--bins", action="store_true", help="the many-bins sweep: neural / plug-in goal 0.8")
    args = ap.parse_args()
    err = defaultdict(dict)
    with open(args.summary, newline="") as fh:
        for row in csv.DictReader(fh):
            err[(row["benchmark"], row["kind"])][row["estimator"]] = float(row["mean_error"])
    goal = 0.8 if args.bins else 1.1
    benchmarks = list(dict.fromkeys(b for b, _ in err))
    print(f"from {args.summary}: mean error, means over seeds")
    print(f"{'benchmark':<48} {'unit n/p':>9} {'pop n/p':>8} {'spill u/p':>10} {'transfer':>9}")
    fails = []
    for b in benchmarks:
        unit = err[(b, "unit")]["neural"] / err[(b, "unit")]["plugin"]
        pop = err[(b, "population")]["neural"] / err[(b, "population")]["plugin"]
        spill = err[(b, "spill-over")]["unlinked"] / err[(b, "spill-over")]["plugin"]
        own = err[(b, "unit")]["neural"] + err[(b, "population")]["neural"]
        if (b, "transfer unit") in err:
            new = err[(b, "transfer unit")]["neural"] + err[(b, "transfer population")]["neural"]
            transfer = new / own
        else:  # a sweep without transfer skeletons
            transfer = float("nan")
        print(f"{b:<48} {unit:>9.2f} {pop:>8.2f} {spill:>10.2f} {transfer:>9.2f}")
        for what, value, ok in (("unit", unit, unit <= goal), ("population", pop, pop <= goal),
                                ("spill-over ablation", spill, spill >= 1.5),
                                ("transfer", transfer, not transfer > 1.2)):
            if not ok:
                fails.append(f"{b} {what}: {value:.2f}")
    print()
    print(f"goal neural / plug-in <= {goal} on unit and population queries, unlinked / plug-in >= 1.5 on spill-over, "
          f"transfer <= 1.2: {'met' if not fails else 'not met in ' + str(len(fails)) + ' cells'}")
    for f in fails:
        print(f"  not met: {f}")


if __name__ == "__main__":
    main()
