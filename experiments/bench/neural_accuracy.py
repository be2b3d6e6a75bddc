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
     [--seeds 0 1 2] [--mixed] [--out experiments/results/neural_accuracy.json]
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
    """The same trained weights answering do(X=x) as if X=x had been observed."""
    abl = NeuralEstimator(**{**est.get_params(), "cut": False})
    abl.graph_, abl.states_, abl.model_, abl.train_result_ = est.graph_, est.states_, est.model_, est.train_result_
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
    neural = NeuralEstimator(seed=seed).fit(rows, net.graph)
    train_s = time.perf_counter() - t0
    n = tv_scores(neural, queries)
    rec = {
        "plugin": float(p.mean()),
        "neural": float(n.mean()),
        "plugin_conf": float(p[conf].mean()) if conf.any() else None,
        "neural_conf": float(n[conf].mean()) if conf.any() else None,
        "train_s": train_s,
        "query_s_100": query_seconds(neural, queries),
        "epochs": len(neural.train_result_.history),
        "mode": neural.answer_mode_,
    }
    if ablation:
        if rows.is_observational:
            abl = ablation_from(neural)
        else:
            abl = NeuralEstimator(seed=seed, cut=False).fit(rows, net.graph)
        a = tv_scores(abl, queries)
        rec["ablation_conf"] = float(a[conf].mean()) if conf.any() else None
    return rec


def mean(xs):
    xs = [x for x in xs if x is not None]
    return statistics.fmean(xs) if xs else float("nan")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--networks", nargs="+", default=["sachs", "child", "insurance", "alarm"])
    ap.add_argument("--rows", nargs="+", type=int, default=[1000, 10000])
    ap.add_argument("--seeds", nargs="+", type=int, default=[0, 1, 2])
    ap.add_argument("--queries", type=int, default=50)
    ap.add_argument("--mixed", action="store_true", help="also run observational + experimental rows")
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--out", default=None, help="write all figures as JSON here")
    args = ap.parse_args()
    torch.set_num_threads(args.threads)

    results = {"settings": vars(args), "runs": []}
    header = (
        f"{'network':<10} {'rows':>6} {'plugin':>7} {'neural':>7} {'ratio':>6} | {'plug c':>7} {'neur c':>7} "
        f"{'ratio c':>7} {'ablat c':>7} | {'train s':>7} {'100 q s':>7}"
    )
    print("mean TV to the exact answer (c: confounded subset), means over seeds", args.seeds)
    print(header)
    for name in args.networks:
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
        if args.mixed:
            recs_obs, recs_mix = [], []
            rng = np.random.default_rng(0)
            cands = [v for v in net.variables if net.graph.descendants(v)]
            targets = [cands[i] for i in rng.choice(len(cands), size=min(4, len(cands)), replace=False)]
            for seed in args.seeds:
                obs = net.sample(10_000, seed=seed)
                exp = experimental_rows(net, targets, 500, seed=100 + seed)
                mixed = ig.Table.concat([obs, exp])
                r_obs = next(
                    (r for r in results["runs"] if r["network"] == name and r["rows"] == 10_000 and r["seed"] == seed
                     and not r.get("mixed")),
                    None,
                ) or run_one(net, queries, obs, seed, ablation=False)
                r_mix = run_one(net, queries, mixed, seed, ablation=False)
                r_mix.update({"network": name, "rows": mixed.n_rows, "seed": seed, "mixed": True, "experimental_on": targets})
                results["runs"].append(r_mix)
                recs_obs.append(r_obs)
                recs_mix.append(r_mix)
            ro = mean(r["neural"] / r["plugin"] for r in recs_obs)
            rm = mean(r["neural"] / r["plugin"] for r in recs_mix)
            print(
                f"{name:<10} mixed (10,000 obs + 4 x 500 exp on {', '.join(targets)}): neural/plugin ratio "
                f"{rm:.2f} (observational alone {ro:.2f}); mean TV plugin {mean(r['plugin'] for r in recs_mix):.4f} "
                f"neural {mean(r['neural'] for r in recs_mix):.4f}",
                flush=True,
            )
    if args.out:
        os.makedirs(os.path.dirname(os.path.abspath(args.out)), exist_ok=True)
        with open(args.out, "w") as fh:
            json.dump(results, fh, indent=2)
        print(f"wrote {args.out}")


if __name__ == "__main__":
    main()
