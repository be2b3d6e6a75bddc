"""What each part of the neural estimator contributes: the decoder alone, the counts alone, and both.

For each network and row count (rows drawn with seeds 0, 1, 2; the query set
of ``configs/benchmark.yaml``), printed as mean TV to the exact answers:

- ``decoder``: the CPTs tabulated from the trained VGAEs alone (the mean of
  the cross-fitted models' conditionals, z integrated over the prior), with
  no counts: a neural network's answer as such;
- ``counts``: the plug-in estimator (smoothed counts, leave-one-out alpha);
- ``neural``: the neural estimator, the counts shrunk towards the decoder
  with weights chosen by cross-fitted held-out likelihood;

and the mean posterior weight the neural prior got against the counts. The
decoder alone shares strength across parent configurations but cannot fit
every row of every CPT as the rows grow; counts alone share nothing; the
mixture should be at least as good as the better of the two.

Run: python experiments/bench/neural_parts.py [--networks cancer sachs alarm] [--rows 1000 10000 100000]
"""

from __future__ import annotations

import argparse

import numpy as np

import intervgnn as ig
from intervgnn.bn.network import CausalNetwork
from intervgnn.estimators import NeuralEstimator, PluginEstimator
from intervgnn.eval import make_query_set, total_variation
from intervgnn.models import conditionals


def decoder_network(est: NeuralEstimator) -> CausalNetwork:
    """The CPTs of the cross-fitted decoders alone (mean of the fold models), no counts."""
    graph = est.graph_
    parents = est._parents()
    cards = est.cells_.cards
    cpts = {}
    for i, v in enumerate(graph.nodes):
        n_cfg = est.cells_.configs(i)
        probs = np.mean([
            conditionals(m, parents, np.full(n_cfg, i), np.arange(n_cfg), est.z_samples, 0)[:, : cards[i]]
            for key, m in est.models_.items() if key.startswith("fold")
        ], axis=0)
        cpts[v] = (probs / probs.sum(axis=1, keepdims=True)).reshape([cards[p] for p in parents[i]] + [cards[i]])
    return CausalNetwork(graph, est.states_, cpts, name="decoder alone")


def mean_tv(answer, queries):
    return float(np.mean([total_variation(answer(q), q.exact.probs) for q in queries]))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--networks", nargs="+", default=["cancer", "sachs", "alarm"])
    ap.add_argument("--rows", nargs="+", type=int, default=[1000, 10_000, 100_000])
    ap.add_argument("--seeds", nargs="+", type=int, default=[0, 1, 2])
    args = ap.parse_args()
    print("mean TV to the exact answers, means over seeds", args.seeds)
    print(f"{'network':<10} {'rows':>8} {'decoder':>8} {'counts':>8} {'neural':>8} {'neural share':>13}")
    for name in args.networks:
        net = ig.load_network(name)
        queries = make_query_set(net, 50, kinds=("do", "conditional", "joint", "null"), seed=0)
        for n in args.rows:
            dec, cnt, neu, share = [], [], [], []
            for seed in args.seeds:
                rows = net.sample(n, seed=seed)
                est = NeuralEstimator(seed=seed).fit(rows, net.graph)
                plug = PluginEstimator().fit(rows, net.graph)
                alone = decoder_network(est)
                dec.append(mean_tv(lambda q: alone.query(list(q.target), do=q.do_dict, given=q.given_dict).probs, queries))
                cnt.append(mean_tv(lambda q: plug.query(list(q.target), do=q.do_dict, given=q.given_dict).probs, queries))
                neu.append(mean_tv(lambda q: est.query(list(q.target), do=q.do_dict, given=q.given_dict).probs, queries))
                share.append(float(np.mean(list(est.neural_share_.values()))))
            print(f"{name:<10} {n:>8,} {np.mean(dec):>8.4f} {np.mean(cnt):>8.4f} {np.mean(neu):>8.4f} "
                  f"{np.mean(share):>13.2f}", flush=True)


if __name__ == "__main__":
    main()
