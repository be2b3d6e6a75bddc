"""From run records to queries.csv, summary.csv, summary.md, plots and a report."""

from __future__ import annotations

import csv
import io
import os
from collections import defaultdict

import numpy as np

from .._io import atomic_open, make_folder
from ..eval.metrics import METRICS
from .config import ExperimentConfig
from .runs import prepared_network

__all__ = ["write_outputs", "summarise", "SUMMARY_COLUMNS", "bootstrap_interval"]

SUMMARY_COLUMNS = ["network", "rows", "estimator", "subset", "metric", "mean", "median", "p90", "ci_low", "ci_high", "n_queries"]
QUERY_COLUMNS = ["network", "rows", "seed", "estimator", "qid", "kind", "confounded", "identifiable", "query", "metric", "value", "status"]


def bootstrap_interval(values: np.ndarray, resamples: int, seed: int = 0, level: float = 0.95) -> tuple[float, float]:
    """Percentile bootstrap interval of the mean over queries (seeded, so reruns agree)."""
    if values.size == 0:
        return float("nan"), float("nan")
    if resamples <= 0 or values.size == 1:
        m = float(values.mean())
        return m, m
    rng = np.random.default_rng(seed)
    idx = rng.integers(values.size, size=(resamples, values.size))
    means = values[idx].mean(axis=1)
    lo, hi = np.quantile(means, [(1 - level) / 2, 1 - (1 - level) / 2])
    return float(lo), float(hi)


def _effect_errors(queries, estimates) -> dict[str, float]:
    """Error of contrasts against the first treatment state of each pattern, for single treatments.

    For a pattern asked at states x0 (the reference) and x, the contrast is
    P(Y | do(x)) - P(Y | do(x0)); its error is half the L1 distance between
    the estimated and the exact contrast vectors.
    """
    groups: dict[str, list] = defaultdict(list)
    for q in queries:
        if len(q.do) == 1:
            groups[q.qid.split(":")[0]].append(q)
    out = {}
    for members in groups.values():
        ref = members[0]
        if ref.qid not in estimates:
            continue
        for q in members[1:]:
            if q.qid not in estimates:
                continue
            est = np.asarray(estimates[q.qid]) - np.asarray(estimates[ref.qid])
            exact = q.exact.probs.ravel() - ref.exact.probs.ravel()
            out[q.qid] = float(0.5 * np.abs(est - exact).sum())
    return out


def _subsets(q) -> list[str]:
    out = ["all"]
    if q.confounded:
        out.append("confounded")
    ident = getattr(q, "identifiable", None)
    if ident is True:
        out.append("identifiable")
    elif ident is False:
        out.append("not identifiable")
    return out


def summarise(cfg: ExperimentConfig, records: list[dict]):
    """Per-query rows and summary rows (lists of dicts) from the run records."""
    query_rows = []
    # (network, rows, estimator, metric) -> qid -> list of values over seeds
    values: dict[tuple, dict[str, list[float]]] = defaultdict(lambda: defaultdict(list))
    qinfo: dict[str, dict] = {}
    for rec in records:
        net_spec = next(n for n in cfg.networks if n.label == rec["network"])
        prep = prepared_network(
            net_spec, cfg.query_count, cfg.query_kinds, cfg.query_seed, cfg.experiment_targets, cfg.experiment_count
        )
        qinfo[rec["network"]] = {q.qid: q for q in prep.queries}
        estimates = {r["qid"]: r["estimate"] for r in rec["queries"] if r["estimate"] is not None}
        effects = _effect_errors(prep.queries, estimates) if "effect" in cfg.metrics else {}
        by_id = {q.qid: q for q in prep.queries}
        for r in rec["queries"]:
            q = by_id[r["qid"]]
            metrics = {}
            if r["estimate"] is not None:
                estimate = np.asarray(r["estimate"], dtype=np.float64)
                metrics = {m: METRICS[m](q.exact, estimate) for m in cfg.metrics if m in METRICS}
            if r["qid"] in effects:
                metrics["effect"] = effects[r["qid"]]
            if "lower" in r:  # the answer's interval: the share of exact probabilities inside, and its width
                lo, hi = np.asarray(r["lower"]), np.asarray(r["upper"])
                exact = q.exact.probs.ravel()
                metrics["coverage"] = float(((exact >= lo - 1e-12) & (exact <= hi + 1e-12)).mean())
                metrics["width"] = float((hi - lo).mean())
            for m in cfg.metrics:
                value = metrics.get(m)
                if m in ("effect", "coverage", "width") and value is None and r["status"] == "ok":
                    continue  # no contrast (reference state or joint treatment), or no interval (not identifiable)
                query_rows.append({
                    "network": rec["network"], "rows": rec["rows"], "seed": rec["seed"], "estimator": rec["estimator"],
                    "qid": q.qid, "kind": q.kind, "confounded": int(q.confounded),
                    "identifiable": "" if getattr(q, "identifiable", None) is None else int(q.identifiable),
                    "query": q.describe(), "metric": m, "value": "" if value is None else f"{value:.10g}",
                    "status": r["status"],
                })
                if value is not None:
                    values[(rec["network"], rec["rows"], rec["estimator"], m)][q.qid].append(value)
    summary = []
    est_order = [e.label for e in cfg.estimators]
    net_order = [n.label for n in cfg.networks]
    keys = sorted(values, key=lambda k: (net_order.index(k[0]), k[1], est_order.index(k[2]), cfg.metrics.index(k[3])))
    for key in keys:
        network, rows, estimator, metric = key
        per_query = values[key]
        for subset in ("all", "confounded", "identifiable", "not identifiable"):
            vals = np.array([np.mean(v) for qid, v in per_query.items() if subset in _subsets(qinfo[network][qid])])
            if subset != "all" and vals.size == 0:
                continue
            lo, hi = bootstrap_interval(vals, cfg.bootstrap)
            summary.append({
                "network": network, "rows": rows, "estimator": estimator, "subset": subset, "metric": metric,
                "mean": float(vals.mean()) if vals.size else float("nan"),
                "median": float(np.median(vals)) if vals.size else float("nan"),
                "p90": float(np.quantile(vals, 0.9)) if vals.size else float("nan"),
                "ci_low": lo, "ci_high": hi, "n_queries": int(vals.size),
            })
    return query_rows, summary


def _csv_text(rows: list[dict], columns: list[str]) -> str:
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: (f"{v:.6g}" if isinstance(v, float) else v) for k, v in r.items()})
    return buf.getvalue()


def markdown_tables(cfg: ExperimentConfig, summary: list[dict], metric: str = "tv") -> str:
    """Mean (95% interval) per network and rows (lines) and estimator (columns), one table per subset."""
    ests = [e.label for e in cfg.estimators]
    out = []
    for subset in ("all", "confounded", "identifiable", "not identifiable"):
        rows = [r for r in summary if r["metric"] == metric and r["subset"] == subset]
        if not rows:
            continue
        # an error is best when smallest; coverage is best near the nominal level, a width only with it
        marks = metric not in ("coverage", "width")
        what = {"coverage": f"share of exact probabilities inside the {cfg.interval_level or 0.95:.0%} interval",
                "width": "mean width of the intervals"}.get(metric, "mean over queries")
        out.append(
            f"#### {metric.upper()}, {subset} queries ({what}, 95% bootstrap interval; n = queries; "
            "[k] = the estimator answered only k of them"
            + ("; bold = best among those that answered all)\n" if marks else ")\n")
        )
        out.append("| network | rows | n | " + " | ".join(ests) + " |")
        out.append("|---|---:|---:|" + "---:|" * len(ests))
        cells: dict[tuple, dict] = defaultdict(dict)
        ns: dict[tuple, int] = {}
        for r in rows:
            cells[(r["network"], r["rows"])][r["estimator"]] = r
            ns[(r["network"], r["rows"])] = max(ns.get((r["network"], r["rows"]), 0), r["n_queries"])
        for (network, nrows), byest in cells.items():
            # the best is marked among estimators that answered every query of the row
            vals = [byest[e]["mean"] for e in ests if e in byest and byest[e]["n_queries"] == ns[(network, nrows)]]
            best = min(vals) if vals and marks else None
            line = []
            for e in ests:
                r = byest.get(e)
                if r is None:
                    line.append("unsupported")
                    continue
                text = f"{r['mean']:.4f} ({r['ci_low']:.4f}-{r['ci_high']:.4f})"
                if r["n_queries"] < ns[(network, nrows)]:
                    text += f" [{r['n_queries']}]"
                line.append(f"**{text}**" if r["mean"] == best else text)
            out.append(f"| {network} | {nrows} | {ns[(network, nrows)]} | " + " | ".join(line) + " |")
        out.append("")
    return "\n".join(out)


def write_outputs(cfg: ExperimentConfig, records: list[dict], summarised: tuple | None = None) -> dict[str, str]:
    """Write queries.csv, summary.csv, summary.md, the plots and report.md / report.html; return their paths.

    ``summarised`` is what :func:`summarise` returned for these records, if
    the caller has it already.
    """
    from .plots import confounded_bars, coverage_vs_rows, error_vs_rows
    from .report import write_report

    make_folder(cfg.output)
    query_rows, summary = summarised if summarised is not None else summarise(cfg, records)
    paths = {
        "queries": os.path.join(cfg.output, "queries.csv"),
        "summary": os.path.join(cfg.output, "summary.csv"),
        "summary_md": os.path.join(cfg.output, "summary.md"),
    }
    with atomic_open(paths["queries"], "w", newline="") as fh:
        fh.write(_csv_text(query_rows, QUERY_COLUMNS))
    with atomic_open(paths["summary"], "w", newline="") as fh:
        fh.write(_csv_text(summary, SUMMARY_COLUMNS))
    md = [f"# {cfg.name}: summary\n"]
    for m in cfg.metrics:
        md.append(f"### Metric: {m}\n")
        md.append(markdown_tables(cfg, summary, m))
    with atomic_open(paths["summary_md"], "w") as fh:
        fh.write("\n".join(md))
    plot_dir = os.path.join(cfg.output, "plots")
    make_folder(plot_dir)
    images = []
    if "coverage" in cfg.metrics:
        images.append(coverage_vs_rows(cfg, summary, os.path.join(plot_dir, "coverage_vs_rows.png")))
    for net in cfg.networks:
        images.append(error_vs_rows(cfg, summary, net.label, os.path.join(plot_dir, f"error_vs_rows_{net.label}.png")))
        bars = confounded_bars(cfg, records, net, os.path.join(plot_dir, f"confounded_{net.label}.png"))
        if bars:
            images.append(bars)
    paths.update(write_report(cfg, summary, [i for i in images if i]))
    return paths
