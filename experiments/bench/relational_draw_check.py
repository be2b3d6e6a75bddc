"""Is a bad relational answer the model's fault or the draw's? A correctly specified model on the same rows.

On the many-bins peer world at 200 keepers, seed 2 (configs/relational-bins.yaml),
the neural estimator's population answer with every keeper untrained is far
from the truth while the plug-in's is close. The true ``keeper.Practice``
mechanism is logistic in the keeper's ``Training`` and the share of advising
keepers on the new practice (benchmarks draw smooth rows that way). This
script fits that logistic regression (scikit-learn, nearly unpenalised) to
the same rows and prints its P(Practice=new) next to the truth, the plug-in's
and the neural estimator's rows for untrained keepers: where the correctly
specified model lands where the neural one does, the draw misleads any model
that shares strength across bins.

Run: python experiments/bench/relational_draw_check.py
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from sklearn.linear_model import LogisticRegression

from intervgnn.relational import RelationalPluginEstimator, parse_relational_spec, relational_benchmark
from intervgnn.relational.neural import RelationalNeuralEstimator, count_families
from intervgnn.relational.sampling import sample_data

SPEC = "relational:peer,instances=200,degree=1.5,max_degree=7,bins=10"
SEED = 2


def main():
    template, skeleton = relational_benchmark(replace(parse_relational_spec(SPEC), seed=SEED))
    data = sample_data(template, skeleton, draws=1, seed=SEED + 7919)  # as the harness draws it
    key = ("keeper", "Practice")
    fam = count_families(data, template, {"keeper": np.zeros(len(skeleton.instances["keeper"]), np.int64)}, 1)[key]
    d, h = fam.degree[:, 0], fam.hits[:, 0]
    share = np.where(d > 0, h / np.maximum(d, 1), 0.0)
    x = np.stack([fam.own, share, d == 0], axis=1).astype(float)
    fit = LogisticRegression(C=100.0).fit(np.repeat(x, 2, axis=0), np.tile([0, 1], len(x)),
                                          sample_weight=fam.count.reshape(-1))
    g = template.mechanism(*key).aggregates[0]
    mids = (np.asarray(g.edges[:-1]) + np.asarray(g.edges[1:])) / 2
    grid = np.array([[0, 0, 1]] + [[0, m, 0] for m in mids])
    plug = RelationalPluginEstimator().fit(data, template)
    neural = RelationalNeuralEstimator(seed=SEED).fit(data, template)
    print(f"{SPEC}, seed {SEED}: P(Practice=new) for untrained keepers, by bin of the advisers' share on the new practice")
    print(f"{'':<22}" + " ".join(f"{b:>6}" for b in ["none"] + [f"{m:.2f}" for m in mids]))
    rows = {
        "instances in the data": plug.counts_[key][0].sum(-1),
        "truth": template.mechanism(*key).cpt[0, :, 1],
        "logistic regression": fit.predict_proba(grid)[:, 1],
        "neural": neural.template_.mechanism(*key).cpt[0, :, 1],
        "plug-in": plug.template_.mechanism(*key).cpt[0, :, 1],
    }
    for name, values in rows.items():
        fmt = "{:>6.0f}" if name.startswith("instances") else "{:>6.3f}"
        print(f"{name:<22}" + " ".join(fmt.format(v) for v in values))


if __name__ == "__main__":
    main()
