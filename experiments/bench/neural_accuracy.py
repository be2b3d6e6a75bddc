"""Neural estimator against the plug-in yardstick on benchmark networks.

For each network: 50 seeded do-query patterns (target a descendant of the
treatment), each asked for every treatment state; "confounded" queries are
those where the exact P(Y | X=x) and P(Y | do(X=x)) differ by more than 0.02
in total variation. Training rows are observational samples with seeds
0, 1, 2. Printed per network and row count (means over seeds): mean TV to
the exact answer for the plug-in and the neural estimator and their ratio,
the same on the confounded subset, the ablation (no interventional cut) on
the confounded subset, training seconds and the seconds for 100 do-queries.

--mixed adds 500 experimental rows on each of four seeded variables (the
treatment drawn uniformly per row) to 10,000 observational rows and reports
the neural / plug-in ratio next to the one from the observational rows alone.

With observational rows only, the regime-blind ablation trains exactly like
the real model (no row has an intervened variable), so it reuses the trained
weights and differs only in how do(X=x) is answered; with mixed rows it is
trained on its own.

Run: python experiments/bench/neural_accuracy.py [--networks ...] [--rows 1000 10000]
     [--seeds 0 1 2] [--mixed] [--mixed-only] [--mixed-seeds 0 1 ... 9] [--jobs 2]
     [--out experiments/results/neural_accuracy.json]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import time

import numpy as np
import torch

import intervgnn as ig
from intervgnn.estimators import NeuralEstimator, PluginEstimator
from intervgnn.eval import make_query_set, total_variation


def tv_scores(est, queries, given_is_do=False):
    out = []
    for q in queries:
        out.append(total_variation(est.query(q.target, do=q.do_dict, given=q.given_dict).probs, q.exact.probs))
    return np.array(out)


def query_seconds(est, queries, count=100):
    t0 = time.perf_counter()
    for i in range(count):
        q = queries[i % len(queries)]
        est.query(q.target, do=q.do_dict)
    return time.perf_counter() - t0


def ablation_from(est):
    """The same trained models and counts answering do(X=x) as if X=x had been observed."""
    abl = NeuralEstimator(**{**est.get_params(), "cut": False})
    abl.graph_, abl.states_, abl.models_, abl.cells_, abl.n_rows_ = (
        est.graph_, est.states_, est.models_, est.cells_, est.n_rows_)
    abl.train_results_ = est.train_results_
    abl._prepare_answers()
    return abl


def experimental_rows(net, variables, per_variable, seed):
    rng = np.random.default_rng(seed)
    parts = []
    for i, x in enumerate(variables):
        states = net.states[x]
        counts = np.bincount(rng.integers(len(states), size=per_variable), minlength=len(states))
        for s, c in zip(states, counts):
            if c:
                parts.append(net.sample(int(c), do={x: s}, seed=int(rng.integers(2**31))))
    return ig.Table.concat(parts)


def run_one(net, queries, rows, seed, ablation=True):
    conf = np.array([q.confounded for q in queries])
    plug = PluginEstimator().fit(rows, net.graph)
    p = tv_scores(plug, queries)
    t0 = time.perf_counter()
    neural = NeuralEstimator(seed=seed, threads=torch.get_num_threads()).fit(rows, net.graph)
    train_s = time.perf_counter() - t0
    n = tv_scores(neural, queries)
    rec = {
        "plugin": float(p.mean()),
        "neural": float(n.mean()),
        "plugin_conf": float(p[conf].mean()) if conf.any() else None,
        "neural_conf": float(n[conf].mean()) if conf.any() else None,
        "train_s": train_s,
        "query_s_100": query_seconds(neural, queries),
        "steps": {k: r.steps for k, r in neural.train_results_.items()},
        "neural_share": float(np.mean(list(neural.neural_share_.values()))),
        "mode": neural.answer_mode_,
    }
    if ablation:
        if rows.is_observational:
            abl = ablation_from(neural)
        else:
            abl = NeuralEstimator(seed=seed, cut=False, threads=torch.get_num_threads()).fit(rows, net.graph)
        a = tv_scores(abl, queries)
        rec["ablation_conf"] = float(a[conf].mean()) if conf.any() else None
    return rec


def mean(xs):
    xs = [x for x in xs if x is not None]
    return statistics.fmean(xs) if xs else float("nan")


def mixed_targets(net):
    """The four seeded variables that get experimental rows."""
    rng = np.random.default_rng(0)
    cands = [v for v in net.variables if net.graph.descendants(v)]
    return [cands[i] for i in rng.choice(len(cands), size=min(4, len(cands)), replace=False)]


def _mixed_job(job):
    """One fit for the mixed comparison: (network, seed, 'obs' or 'mixed') -> record."""
    name, seed, kind, n_queries, threads = job
    torch.set_num_threads(threads)
    net = ig.load_network(name)
    queries = make_query_set(net, n_queries, kinds=("do",), seed=0)
    rows = net.sample(10_000, seed=seed)
    if kind == "mixed":
        rows = ig.Table.concat([rows, experimental_rows(net, mixed_targets(net), 500, seed=100 + seed)])
    rec = run_one(net, queries, rows, seed, ablation=False)
    rec.update({"network": name, "rows": rows.n_rows, "seed": seed, "mixed": kind == "mixed"})
    if kind == "mixed":
        rec["experimental_on"] = mixed_targets(net)
    return rec


def paired_summary(name, recs):
    """Per-seed ratios with and without the experimental rows, and their paired difference."""
    by = {(r["seed"], bool(r.get("mixed"))): r for r in recs if r["network"] == name}
    seeds = sorted({s for s, _ in by if (s, True) in by and (s, False) in by})
    ro = np.array([by[s, False]["neural"] / by[s, False]["plugin"] for s in seeds])
    rm = np.array([by[s, True]["neural"] / by[s, True]["plugin"] for s in seeds])
    d = rm - ro
    se = float(d.std(ddof=1) / np.sqrt(len(d))) if len(d) > 1 else float("nan")
    return {
        "network": name, "seeds": seeds, "ratio_obs": float(ro.mean()), "ratio_mixed": float(rm.mean()),
        "diff": float(d.mean()), "diff_se": se, "mixed_better_seeds": int((d <= 0).sum()),
        "plugin_mixed": mean(by[s, True]["plugin"] for s in seeds), "neural_mixed": mean(by[s, True]["neural"] for s in seeds),
        "neural_obs": mean(by[s, False]["neural"] for s in seeds),
    }


def run_mixed(args, results):
    """10,000 observational rows against the same rows + 4 x 500 experimental rows, paired by seed."""
    seeds = args.mixed_seeds or args.seeds
    jobs = []
    for name in args.networks:
        for seed in seeds:
            have_obs = any(r["network"] == name and r["rows"] == 10_000 and r["seed"] == seed and not r.get("mixed")
                           for r in results["runs"])
            kinds = ["mixed"] if have_obs else ["obs", "mixed"]
            jobs += [(name, seed, k, args.queries, 1 if args.jobs > 1 else args.threads) for k in kinds]
    if args.jobs > 1:
        import multiprocessing as mp

        with mp.get_context("spawn").Pool(args.jobs) as pool:
            recs = pool.map(_mixed_job, jobs, chunksize=1)
    else:
        recs = [_mixed_job(j) for j in jobs]
    results["runs"] += recs
    runs = [r for r in results["runs"] if r["rows"] >= 10_000]
    print(f"mixed rows (10,000 obs + 4 x 500 exp), seeds {seeds}: neural/plugin ratio per seed, paired")
    print(f"{'network':<10} {'obs':>6} {'mixed':>6} {'diff':>7} {'+-se':>6} {'mixed<=obs':>10} | "
          f"{'plugin':>7} {'neural':>7} (mixed; neural obs alone)  experimental rows on")
    results["mixed_summary"] = []
    for name in args.networks:
        s = paired_summary(name, runs)
        results["mixed_summary"].append(s)
        print(
            f"{name:<10} {s['ratio_obs']:>6.3f} {s['ratio_mixed']:>6.3f} {s['diff']:>+7.3f} {s['diff_se']:>6.3f} "
            f"{s['mixed_better_seeds']:>4}/{len(s['seeds']):<5} | {s['plugin_mixed']:>7.4f} {s['neural_mixed']:>7.4f} "
            f"({s['neural_obs']:.4f})  {', '.join(mixed_targets(ig.load_network(name)))}",
            flush=True,
        )
    d = np.array([x["diff"] for x in results["mixed_summary"]])
    print(f"all networks: mean paired difference {d.mean():+.3f}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--networks", nargs="+", default=["sachs", "child", "insurance", "alarm"])
    ap.add_argument("--rows", nargs="+", type=int, default=[1000, 10000])
    ap.add_argument("--seeds", nargs="+", type=int, default=[0, 1, 2])
    ap.add_argument("--queries", type=int, default=50)
    ap.add_argument("--mixed", action="store_true", help="also run observational + experimental rows")
    ap.add_argument("--mixed-only", action="store_true", help="run only the mixed comparison (implies --mixed)")
    ap.add_argument("--mixed-seeds", nargs="+", type=int, default=None, help="seeds of the mixed comparison (default: --seeds)")
    ap.add_argument("--jobs", type=int, default=1, help="parallel fits in the mixed comparison (one thread each)")
    ap.add_argument("--threads", type=int, default=1, help="torch threads (the estimator's default: one)")
    ap.add_argument("--out", default=None, help="write all figures as JSON here")
    args = ap.parse_args()
    torch.set_num_threads(args.threads)

    results = {"settings": vars(args), "runs": []}
    header = (
        f"{'network':<10} {'rows':>6} {'plugin':>7} {'neural':>7} {'ratio':>6} | {'plug c':>7} {'neur c':>7} "
        f"{'ratio c':>7} {'ablat c':>7} | {'train s':>7} {'100 q s':>7}"
    )
    if not args.mixed_only:
        print("mean TV to the exact answer (c: confounded subset), means over seeds", args.seeds)
        print(header)
    for name in [] if args.mixed_only else args.networks:
        net = ig.load_network(name)
        queries = make_query_set(net, args.queries, kinds=("do",), seed=0)
        n_conf = sum(q.confounded for q in queries)
        for n in args.rows:
            recs = []
            for seed in args.seeds:
                rec = run_one(net, queries, net.sample(n, seed=seed), seed)
                rec.update({"network": name, "rows": n, "seed": seed, "queries": len(queries), "confounded": n_conf})
                results["runs"].append(rec)
                recs.append(rec)
            pm, nm = mean(r["plugin"] for r in recs), mean(r["neural"] for r in recs)
            pc, nc = mean(r["plugin_conf"] for r in recs), mean(r["neural_conf"] for r in recs)
            ac = mean(r.get("ablation_conf") for r in recs)
            print(
                f"{name:<10} {n:>6} {pm:>7.4f} {nm:>7.4f} {nm / pm:>6.2f} | {pc:>7.4f} {nc:>7.4f} {nc / pc:>7.2f} "
                f"{ac:>7.4f} | {mean(r['train_s'] for r in recs):>7.1f} {mean(r['query_s_100'] for r in recs):>7.2f}",
                flush=True,
            )
    if args.mixed or args.mixed_only:
        run_mixed(args, results)
    if args.out:
        os.makedirs(os.path.dirname(os.path.abspath(args.out)), exist_ok=True)
        with open(args.out, "w") as fh:
            json.dump(results, fh, indent=2)
        print(f"wrote {args.out}")


if __name__ == "__main__":
    main()
