"""Why the neural estimator falls behind counting at 100,000 rows: training settings compared.

Uses the harness's own rows and query set for one cell of
``configs/benchmark.yaml`` (default: cancer, 100,000 rows, seed 0), fits the
neural estimator with several training settings and prints, for each, the
mean TV to the exact answer (all queries and the confounded subset), the
fit seconds, the epochs run and the epoch the held-out ELBO chose; the
plug-in is the yardstick on the same rows. One torch thread, so the numbers
equal the harness's.

Run: python experiments/bench/neural_large_rows.py [--network cancer] [--rows 100000] [--seed 0]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import torch

from intervgnn.estimators import NeuralEstimator, PluginEstimator
from intervgnn.eval import total_variation
from intervgnn.harness import load_config
from intervgnn.harness.runs import prepared_network, training_rows

VARIANTS = {
    "defaults (lr 1e-2, held-out early stopping, patience 30)": {},
    "patience 100": {"patience": 100},
    "lr 3e-3, 60 epochs, no held-out split": {"lr": 3e-3, "epochs": 60, "val_fraction": 0.0},
}


def scores(est, queries):
    tv = np.array([total_variation(q.exact, est.query(list(q.target), do=q.do_dict, given=q.given_dict)) for q in queries])
    conf = np.array([q.confounded for q in queries])
    return tv.mean(), (tv[conf].mean() if conf.any() else float("nan"))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--network", default="cancer")
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()
    torch.set_num_threads(1)
    cfg = load_config("configs/benchmark.yaml")
    spec = next(n for n in cfg.networks if n.label == args.network)
    prep = prepared_network(spec, cfg.query_count, cfg.query_kinds, cfg.query_seed, (), 0)
    rows = training_rows(prep, args.rows, args.seed, 0)
    print(f"{args.network}, {args.rows} rows, seed {args.seed}: {len(prep.queries)} queries "
          f"({sum(q.confounded for q in prep.queries)} confounded)")
    plugin = PluginEstimator().fit(rows, prep.graph)
    p_all, p_conf = scores(plugin, prep.queries)
    print(f"{'plug-in':<66} TV {p_all:.4f} / confounded {p_conf:.4f}")
    for name, settings in VARIANTS.items():
        t0 = time.perf_counter()
        est = NeuralEstimator(seed=args.seed, **settings).fit(rows, prep.graph)
        fit_s = time.perf_counter() - t0
        tr = est.train_result_
        selected = [h for h in tr.history if h["phase"] == "select"]
        n_all, n_conf = scores(est, prep.queries)
        print(f"{'neural, ' + name:<66} TV {n_all:.4f} / confounded {n_conf:.4f}  ratio {n_all / p_all:.2f}  "
              f"fit {fit_s:.0f} s, {len(selected)} epochs, best epoch {tr.best_epoch}", flush=True)


if __name__ == "__main__":
    main()
