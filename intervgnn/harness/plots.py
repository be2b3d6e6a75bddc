"""PNG plots of a sweep (matplotlib, no screen needed)."""

from __future__ import annotations

import os

import numpy as np

from .._io import atomic_open
from .config import ExperimentConfig, NetworkSpec
from .runs import prepared_network

__all__ = ["error_vs_rows", "confounded_bars", "coverage_vs_rows"]


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _save(plt, fig, path: str) -> str:
    """Write the figure atomically (its format from the file name) and close it."""
    fig.tight_layout()
    try:
        with atomic_open(path, "wb") as fh:
            fig.savefig(fh, dpi=110, format=os.path.splitext(path)[1][1:].lower() or "png")
    finally:
        plt.close(fig)
    return path


def error_vs_rows(cfg: ExperimentConfig, summary: list[dict], network: str, path: str, metric: str | None = None) -> str | None:
    """Mean error against training rows, one line per estimator (solid: all queries, dashed: confounded); log-log where all values are positive."""
    metric = metric or ("tv" if "tv" in cfg.metrics else cfg.metrics[0])
    rows = [r for r in summary if r["network"] == network and r["metric"] == metric]
    if not rows:
        return None
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(8.4, 4.4))
    colors = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    for i, est in enumerate(e.label for e in cfg.estimators):
        for subset, style in (("all", "-"), ("confounded", "--")):
            pts = sorted((r["rows"], r["mean"], r["ci_low"], r["ci_high"]) for r in rows if r["estimator"] == est and r["subset"] == subset)
            if not pts:
                continue
            x, m, lo, hi = (np.array(v, dtype=float) for v in zip(*pts))
            ax.errorbar(x, m, yerr=[m - lo, hi - m], fmt=style + "o", color=colors[i % len(colors)], capsize=3,
                        markersize=4, label=f"{est} ({subset})")
    ax.set_xscale("log")
    # errors span orders of magnitude (naive ~0.1, counting at many rows ~0.001)
    if all(r["ci_low"] > 0 for r in rows):
        ax.set_yscale("log")
    ax.set_xlabel("training rows")
    ax.set_ylabel(f"mean {metric.upper()} to the exact answer")
    ax.set_title(f"{network}: error against rows (95% bootstrap intervals)")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=7, loc="center left", bbox_to_anchor=(1.01, 0.5))
    return _save(plt, fig, path)


def coverage_vs_rows(cfg: ExperimentConfig, summary: list[dict], path: str) -> str | None:
    """Coverage of the answers' intervals against training rows, one line per estimator (means over networks), the nominal level marked."""
    rows = [r for r in summary if r["metric"] == "coverage" and r["subset"] in ("all", "confounded")]
    if not rows or cfg.interval_level is None:
        return None
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(8.4, 4.4))
    colors = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    for i, est in enumerate(e.label for e in cfg.estimators):
        for subset, style in (("all", "-"), ("confounded", "--")):
            by_rows: dict[int, list[float]] = {}
            for r in rows:
                if r["estimator"] == est and r["subset"] == subset:
                    by_rows.setdefault(r["rows"], []).append(r["mean"])
            if not by_rows:
                continue
            x = sorted(by_rows)
            ax.plot(x, [float(np.mean(by_rows[n])) for n in x], style + "o", color=colors[i % len(colors)],
                    markersize=4, label=f"{est} ({subset})")
    ax.axhline(cfg.interval_level, color="black", linewidth=1, linestyle=":", label=f"nominal {cfg.interval_level:.0%}")
    ax.set_xscale("log")
    ax.set_ylim(min(0.5, ax.get_ylim()[0]), 1.01)
    ax.set_xlabel("training rows")
    ax.set_ylabel("share of exact probabilities inside the interval")
    ax.set_title(f"coverage of {cfg.interval_level:.0%} intervals against rows (mean over networks)")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=7, loc="center left", bbox_to_anchor=(1.01, 0.5))
    return _save(plt, fig, path)


def confounded_bars(cfg: ExperimentConfig, records: list[dict], net: NetworkSpec, path: str, top: int = 4) -> str | None:
    """Estimated against exact probability for the most confounded queries (largest rows, first seed)."""
    prep = prepared_network(net, cfg.query_count, cfg.query_kinds, cfg.query_seed, cfg.experiment_targets, cfg.experiment_count)
    queries = sorted((q for q in prep.queries if q.confounded), key=lambda q: -q.naive_gap)[:top]
    if not queries:
        return None
    n_max, seed = max(cfg.rows), cfg.seeds[0]
    ests = [e.label for e in cfg.estimators]
    by_est = {r["estimator"]: {q["qid"]: q for q in r["queries"]} for r in records
              if r["network"] == net.label and r["rows"] == n_max and r["seed"] == seed}
    plt = _pyplot()
    fig, axes = plt.subplots(1, len(queries), figsize=(max(5.0, 3.2 * len(queries)), 3.8), squeeze=False)
    colors = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    for ax, q in zip(axes[0], queries):
        exact = q.exact.probs.ravel()
        naive = q.naive.probs.ravel() if q.naive is not None else exact
        k = int(np.argmax(np.abs(naive - exact)))
        labels = ["exact"] + ests
        heights = [exact[k]]
        for e in ests:
            r = by_est.get(e, {}).get(q.qid)
            heights.append(np.asarray(r["estimate"])[k] if r and r["estimate"] is not None else np.nan)
        ax.bar(range(len(labels)), heights, color=["black"] + [colors[i % len(colors)] for i in range(len(ests))])
        for i, h in enumerate(heights):
            if np.isnan(h):
                ax.text(i, 0.01, "not\nanswered", ha="center", va="bottom", fontsize=6, rotation=90)
        ax.set_xticks(range(len(labels)))
        ax.set_xticklabels(labels, rotation=45, ha="right", fontsize=7)
        state = q.exact.states[0][k] if len(q.target) == 1 else str(k)
        ax.set_title(f"{q.describe()}\n= {state}", fontsize=7)
        ax.axhline(exact[k], color="black", lw=0.8, ls=":")
    axes[0][0].set_ylabel("probability")
    fig.suptitle(f"{net.label}: most confounded queries, {n_max} rows, seed {seed}", fontsize=9)
    return _save(plt, fig, path)
