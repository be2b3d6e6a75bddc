"""Coverage and width of the estimators' intervals against the exact answers, and what they cost.

For each network, row count and seed: rows drawn from the network, each
estimator fitted, and every do-query of a seeded query set (``--queries``
patterns, every treatment state) answered with a central interval at
``--level``. An interval *covers* when the exact probability lies within it;
coverage is the share of covered probabilities (every state of every
query), overall and on the confounded queries (naive and causal answers
differ by more than 0.02 TV). Printed per estimator, network and row count:
coverage, its standard error, the share of the misses that are
probabilities exactly 0 or 1 in the network (a posterior never reaches
them), confounded coverage and how many probabilities a seed it rests on
("conf. n": a coverage of 0.667 on 3 of them is two of three), mean width, how far a missed probability lies
outside its interval (the median distance to the nearer bound: a miss by
0.0003 is not a miss by 0.05), and the query pattern missed on
most seeds where that is a quarter of them or more; then the
overall figures, and
the time of an interval answer against a point answer (plug-in on alarm at
10,000 rows) and of the neural bootstrap on alarm at 10,000 rows.

The standard error treats each seed as one cluster (the standard deviation
of the per-seed coverages over the square root of the number of seeds):
the probabilities of one seed are far from independent, since many queries
read the same CPT rows and miss together when one row's estimate is off.
On a small network three seeds pin coverage down to about +-0.05; use
``--seeds`` with more of them to tell a real shortfall from noise.

The plug-in's intervals come from the Dirichlet posterior of its CPT rows,
the neural estimator's from the posterior its shrunk CPTs are the mean of
(Dirichlet rows centred on the decoder, a mixture over strengths), both
``--draws`` sets (default 200); ``--timing`` also times the bootstrap of 50
neural refits (what the estimators without a posterior use).

Run: python experiments/bench/interval_coverage.py [--networks ...] [--rows 1000 10000] [--seeds 0 1 2]
     [--estimators plugin neural] [--out coverage.json]
"""

from __future__ import annotations

import argparse
import json
import os
import time

import numpy as np

import intervgnn as ig
from intervgnn.estimators import NeuralEstimator, PluginEstimator
from intervgnn.estimators.base import Estimator
from intervgnn.eval.queries import make_query_set

SHIPPED = ["cancer", "earthquake", "survey", "sachs", "child", "insurance", "alarm"]


def covered(dist, exact) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per probability: inside the interval, the interval's width, and how far outside it the exact value lies (0 inside)."""
    iv = dist.interval
    tol = 1e-12
    p = np.asarray(exact.probs, dtype=np.float64)
    inside = (p >= iv.lower - tol) & (p <= iv.upper + tol)
    off = np.where(inside, 0.0, np.maximum(iv.lower - p, p - iv.upper))
    return inside.reshape(-1), (iv.upper - iv.lower).reshape(-1), off.reshape(-1)


def add_world_arguments(ap: argparse.ArgumentParser) -> None:
    """The arguments that fix what is scored: networks, rows, seeds, queries, estimators, level and draws.

    coverage_spread.py takes the same ones, so that its calibrated figures are of the world scored here.
    """
    ap.add_argument("--networks", nargs="+", default=SHIPPED)
    ap.add_argument("--rows", nargs="+", type=int, default=[1000, 10_000])
    ap.add_argument("--seeds", nargs="+", type=int, default=[0, 1, 2])
    ap.add_argument("--queries", type=int, default=20, help="do-query patterns per network")
    ap.add_argument("--estimators", nargs="+", default=["plugin", "neural"], choices=["plugin", "neural"])
    ap.add_argument("--level", type=float, default=0.95)
    ap.add_argument("--draws", type=int, default=200, help="posterior draws")


def fit_estimator(name: str, rows, graph, seed: int):
    """The estimator ``name`` ("plugin" or "neural") fitted to ``rows`` as this bench fits it (the neural one seeded)."""
    return (PluginEstimator() if name == "plugin" else NeuralEstimator(seed=seed)).fit(rows, graph)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    add_world_arguments(ap)
    ap.add_argument("--timing", action="store_true", help="also time interval against point answers on alarm")
    ap.add_argument("--out", default=None)
    args = ap.parse_args()
    records = []
    print(f"coverage of nominal {args.level:.0%} intervals (share of exact probabilities inside), seeds {args.seeds}")
    print(f"{'estimator':<8} {'network':<22} {'rows':>7} {'queries':>7} {'coverage':>9} {'se':>6} {'at 0/1':>7} {'conf. cov':>9} "
          f"{'conf. n':>7} {'width':>7} {'miss by':>8} {'s':>6}")
    for spec in args.networks:
        net = ig.load_network(spec)
        name = os.path.basename(spec) if os.path.exists(spec) else spec  # a BIF file: its name, not its path
        queries = make_query_set(net, n=args.queries, kinds=("do",), seed=0)
        for n in args.rows:
            for est_name in args.estimators:
                hits, conf_hits, widths, offs, t0 = [], [], [], [], time.perf_counter()
                edge_misses = 0  # misses of probabilities exactly 0 or 1 in the network
                per_seed, missed = [], {}  # missed: seeds on which a query pattern missed somewhere
                per_seed_conf = []  # per seed: (covered, probabilities) of the confounded subset
                for seed in args.seeds:
                    first, first_conf = len(hits), len(conf_hits)
                    rows = net.sample(n, seed=seed)
                    est = fit_estimator(est_name, rows, net.graph, seed)
                    for q in queries:
                        d = est.query_interval(q.target, do=q.do_dict, given=q.given_dict, level=args.level,
                                               draws=args.draws, seed=seed)
                        c, w, off = covered(d, q.exact)
                        p = np.asarray(q.exact.probs).reshape(-1)
                        edge_misses += int(((p == 0.0) | (p == 1.0))[~c].sum())
                        text = f"{'/'.join(q.target)} | do({', '.join(f'{v}={s}' for v, s in q.do_dict.items())})"
                        missed[text] = missed.get(text, 0) + int(not c.all())
                        hits.append(c)
                        widths.append(w)
                        offs.append(off[~c])
                        if q.confounded:
                            conf_hits.append(c)
                    per_seed.append(float(np.concatenate(hits[first:]).mean()))
                    mine = conf_hits[first_conf:]
                    per_seed_conf.append([int(sum(c.sum() for c in mine)), int(sum(c.size for c in mine))])
                se = float(np.std(per_seed, ddof=1) / np.sqrt(len(per_seed))) if len(per_seed) > 1 else float("nan")
                hits = np.concatenate(hits)
                cov = float(hits.mean())
                misses = int((~hits).sum())
                edge = edge_misses / misses if misses else 0.0
                conf = float(np.concatenate(conf_hits).mean()) if conf_hits else float("nan")
                conf_n = sum(c.size for c in conf_hits) // len(args.seeds)  # confounded probabilities a seed
                width = float(np.concatenate(widths).mean())
                offs = np.concatenate(offs)
                miss_by = float(np.median(offs)) if offs.size else float("nan")  # NaN: nothing missed
                seconds = time.perf_counter() - t0
                records.append({"estimator": est_name, "network": name, "rows": n, "queries": len(queries),
                                "probabilities": int(hits.size), "coverage": cov, "coverage_se": se,
                                "seeds": len(per_seed), "misses_at_0_or_1": edge, "confounded_coverage": conf,
                                "confounded_probabilities": conf_n,
                                "width": width, "miss_by_median": miss_by, "seconds": seconds,
                                "seed_list": list(args.seeds), "per_seed_coverage": per_seed,
                                "per_seed_confounded": per_seed_conf})
                print(f"{est_name:<8} {name:<22} {n:>7,} {len(queries):>7} {cov:>9.3f} {se:>6.3f} {edge:>7.2f} {conf:>9.3f} {conf_n:>7} {width:>7.4f} "
                      f"{miss_by:>8.4f} {seconds:>6.1f}", flush=True)
                worst = max(missed, key=missed.get) if missed else None
                if worst is not None and missed[worst] * 4 >= len(args.seeds):  # a pattern missing on a quarter of the seeds or more
                    print(f"{'':<8} most missed: {worst}, on {missed[worst]} of {len(args.seeds)} seeds")
    print()
    for est_name in args.estimators:
        mine = [r for r in records if r["estimator"] == est_name]
        covs = [r["coverage"] for r in mine]
        confs = [r["confounded_coverage"] for r in mine if r["confounded_coverage"] == r["confounded_coverage"]]
        conf_text = f"{min(confs):.3f} to {max(confs):.3f}" if confs else "(no confounded queries)"
        print(f"{est_name}: coverage per network and rows from {min(covs):.3f} to {max(covs):.3f} (goal 0.92 to "
              f"0.98); confounded from {conf_text} (goal 0.90 to 0.99)")
    if len(args.estimators) == 2:
        for n in args.rows:
            pw = np.mean([r["width"] for r in records if r["estimator"] == "plugin" and r["rows"] == n])
            nw = np.mean([r["width"] for r in records if r["estimator"] == "neural" and r["rows"] == n])
            print(f"mean width at {n:,} rows: neural / plug-in = {nw / pw:.2f}")
    if args.timing:
        net = ig.load_network("alarm")
        rows = net.sample(10_000, seed=0)
        est = PluginEstimator().fit(rows, net.graph)
        q = make_query_set(net, n=5, kinds=("do",), seed=0)
        for kind, fn in (("point", lambda x: est.query(x.target, do=x.do_dict)),
                         ("interval", lambda x: est.query_interval(x.target, do=x.do_dict))):
            t0 = time.perf_counter()
            fn(q[0])  # the first interval draws every CPT set (kept for the next ones)
            first = time.perf_counter() - t0
            t0 = time.perf_counter()
            for _ in range(20):
                for x in q:
                    fn(x)
            if kind == "point":
                point = time.perf_counter() - t0
            else:
                interval = time.perf_counter() - t0
        print(f"plug-in on alarm, 10,000 rows: interval answer / point answer = {interval / point:.1f} "
              f"({interval / (20 * len(q)) * 1000:.2f} ms against {point / (20 * len(q)) * 1000:.3f} ms; goal < 20); "
              f"the first interval answer, which draws the 200 CPT sets: {first * 1000:.1f} ms")
        neural = NeuralEstimator(seed=0).fit(rows, net.graph)
        t0 = time.perf_counter()
        neural.query_interval(q[0].target, do=q[0].do_dict)
        print(f"neural posterior interval on alarm at 10,000 rows: {(time.perf_counter() - t0) * 1000:.1f} ms")
        t0 = time.perf_counter()
        Estimator._interval_samples(neural, [(q[0].target, q[0].do_dict, None)], 0.95, 50, 0)  # the bootstrap
        print(f"neural bootstrap of 50 refits on alarm at 10,000 rows: {time.perf_counter() - t0:.1f} s (goal < 600)")
    if args.out:
        with open(args.out, "w") as fh:
            json.dump(records, fh, indent=1)
        print(f"wrote {args.out}")


if __name__ == "__main__":
    main()
