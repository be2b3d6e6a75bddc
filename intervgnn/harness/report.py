"""One page with the tables and plots of a sweep: report.md and report.html."""

from __future__ import annotations

import html
import os

from .._io import atomic_open
from ..texts import CAUTION
from .config import ExperimentConfig

__all__ = ["write_report"]


def _md_table_to_html(lines: list[str]) -> str:
    rows = [ln.strip().strip("|").split("|") for ln in lines if not set(ln.strip()) <= set("|-: ")]
    out = ["<table>"]
    for i, cells in enumerate(rows):
        tag = "th" if i == 0 else "td"
        out.append("<tr>" + "".join(f"<{tag}>{_inline(c.strip())}</{tag}>" for c in cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def _inline(text: str) -> str:
    text = html.escape(text)
    if text.startswith("**") and text.endswith("**"):
        return f"<b>{text[2:-2]}</b>"
    return text


def _markdown_to_html(md: str) -> str:
    out, table = [], []
    for line in md.splitlines():
        if line.startswith("|"):
            table.append(line)
            continue
        if table:
            out.append(_md_table_to_html(table))
            table = []
        if line.startswith("!["):
            alt, src = line[2:].split("](", 1)
            out.append(f'<p><img src="{html.escape(src.rstrip(")"))}" alt="{html.escape(alt)}" style="max-width:100%"></p>')
        elif line.startswith("#"):
            level = len(line) - len(line.lstrip("#"))
            out.append(f"<h{level}>{html.escape(line[level:].strip())}</h{level}>")
        elif line.strip():
            out.append(f"<p>{html.escape(line)}</p>")
    if table:
        out.append(_md_table_to_html(table))
    return "\n".join(out)


def write_report(cfg: ExperimentConfig, summary: list[dict], images: list[str]) -> dict[str, str]:
    from . import summary as summary_mod

    nets = ", ".join(n.label + (f" (hidden: {', '.join(n.hidden)})" if n.hidden else "") for n in cfg.networks)
    md = [
        f"# Report: {cfg.name}",
        "",
        f"Networks: {nets}. Rows: {', '.join(map(str, cfg.rows))}. Seeds: {', '.join(map(str, cfg.seeds))}. "
        f"Queries: {cfg.query_count} patterns of kinds {', '.join(cfg.query_kinds)}, each asked for every treatment state. "
        f"Estimators: {', '.join(e.label for e in cfg.estimators)}.",
        "",
        "Errors are distances to the exact answer of the network; a query is confounded when the exact "
        "P(Y | X=x) and P(Y | do(X=x)) differ by more than 0.02 in total variation.",
        "",
    ]
    for m in cfg.metrics:
        md.append(f"## {m}")
        md.append("")
        md.append(summary_mod.markdown_tables(cfg, summary, m))
    md.append("## Plots")
    md.append("")
    for img in images:
        rel = os.path.relpath(img, cfg.output)
        md.append(f"![{os.path.basename(img)}]({rel})")
        md.append("")
    md.append(CAUTION)
    text = "\n".join(md) + "\n"
    md_path = os.path.join(cfg.output, "report.md")
    html_path = os.path.join(cfg.output, "report.html")
    with atomic_open(md_path, "w") as fh:
        fh.write(text)
    page = (
        "<!DOCTYPE html><html><head><meta charset='utf-8'><title>"
        + html.escape(cfg.name)
        + "</title><style>body{font-family:sans-serif;max-width:1100px;margin:2em auto}"
        "table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;padding:3px 8px;font-size:13px}"
        "</style></head><body>\n" + _markdown_to_html(text) + "\n</body></html>\n"
    )
    with atomic_open(html_path, "w") as fh:
        fh.write(page)
    return {"report_md": md_path, "report_html": html_path}
