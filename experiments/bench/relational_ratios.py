"""Goals of the relational sweeps, checked from their summary.csv (written by ``intervgnn run``).

Printed, per benchmark (template and skeleton size; means over the seeds):

- neural / plug-in mean error on unit and population queries (goal: at most
  1.1; with ``--bins``, the many-bins sweep: at most 0.8 where the aggregate
  has many bins relative to the data, at most 1.1 elsewhere);
- with ``--bins``, how many bins the data have: instances per free CPT
  parameter of the sparsest aggregating mechanism (its entity type's
  instances over rows x (states - 1)). "Many bins relative to the data" is
  read as fewer than ``--sparse`` (default 20) instances per parameter
  (every bin counted, also those no instance can reach, such as counts
  above the largest degree); the cells of configs/relational-bins.yaml lie
  at 0.4 to 10 and at 90.9 and above, so any line from 11 to 90 splits them
  the same way. The line was drawn after the sweep had been seen, in that
  gap: it reads "many bins relative to the data" as rows holding a few
  instances each, not as a tuned threshold;
- the unlinked ablation on spill-over queries over the better of the two
  relational estimators (plug-in, neural) there (goal: clearly worse, here
  at least 1.5 times the error);
- transfer: the neural estimator's mean error on the unseen skeletons over
  its mean error on its own skeleton, unit and population queries pooled
  (goal: at most 1.2).

Run: python experiments/bench/relational_ratios.py experiments/results/relational/summary.csv [--bins]
"""

from __future__ import annotations

import argparse
import csv
import math
from collections import defaultdict

from intervgnn.relational import parse_relational_spec, relational_benchmark


def instances_per_parameter(benchmark: str) -> float:
    """Instances per free CPT parameter of the sparsest aggregating mechanism (sizes as for seed 0)."""
    template, skeleton = relational_benchmark(parse_relational_spec("relational:" + benchmark))
    out = math.inf
    for (entity, _), m in template.mechanisms.items():
        if m.aggregates:
            k = m.cpt.shape[-1]
            out = min(out, len(skeleton.instances[entity]) / (m.cpt.size // k * (k - 1)))
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("summary")
    ap.add_argument("--bins", action="store_true", help="the many-bins sweep: neural / plug-in goal 0.8 where sparse")
    ap.add_argument("--sparse", type=float, default=20.0,
                    help="with --bins: fewer instances per CPT parameter than this is 'many bins' (default 20)")
    args = ap.parse_args()
    err = defaultdict(dict)
    with open(args.summary, newline="") as fh:
        for row in csv.DictReader(fh):
            err[(row["benchmark"], row["kind"])][row["estimator"]] = float(row["mean_error"])
    benchmarks = list(dict.fromkeys(b for b, _ in err))
    print(f"from {args.summary}: mean error, means over seeds")
    print(f"{'benchmark':<56} {'unit n/p':>9} {'pop n/p':>8} {'spill u/best':>12} {'transfer':>9}"
          + (f" {'inst/param':>10} {'goal':>5}" if args.bins else ""))
    fails = []
    for b in benchmarks:
        goal, extra = 1.1, ""
        if args.bins:
            per = instances_per_parameter(b)
            goal = 0.8 if per < args.sparse else 1.1
            extra = f" {per:>10.1f} {goal:>5}"
        unit = err[(b, "unit")]["neural"] / err[(b, "unit")]["plugin"]
        pop = err[(b, "population")]["neural"] / err[(b, "population")]["plugin"]
        spill = err[(b, "spill-over")]["unlinked"] / min(err[(b, "spill-over")]["plugin"],
                                                         err[(b, "spill-over")]["neural"])
        own = err[(b, "unit")]["neural"] + err[(b, "population")]["neural"]
        if (b, "transfer unit") in err:
            new = err[(b, "transfer unit")]["neural"] + err[(b, "transfer population")]["neural"]
            transfer = new / own
        else:  # a sweep without transfer skeletons
            transfer = float("nan")
        print(f"{b:<56} {unit:>9.2f} {pop:>8.2f} {spill:>12.2f} {transfer:>9.2f}{extra}")
        for what, value, ok in (("unit", unit, unit <= goal), ("population", pop, pop <= goal),
                                ("spill-over ablation", spill, spill >= 1.5),
                                ("transfer", transfer, not transfer > 1.2)):
            if not ok:
                fails.append(f"{b} {what}: {value:.3f} (goal {'>= 1.5' if 'spill' in what else '<= ' + str(goal if what in ('unit', 'population') else 1.2)})")
    print()
    rule = (f"<= 0.8 where fewer than {args.sparse:g} instances per parameter, else <= 1.1" if args.bins
            else "<= 1.1")
    print(f"goal neural / plug-in {rule} on unit and population queries, unlinked / best relational >= 1.5 on spill-over, "
          f"transfer <= 1.2: {'met' if not fails else 'not met in ' + str(len(fails)) + ' cells'}")
    for f in fails:
        print(f"  not met: {f}")


if __name__ == "__main__":
    main()
