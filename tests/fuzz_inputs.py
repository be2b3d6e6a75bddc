"""Damaged inputs for the readers (BIF text, graph files, CSV rows, experiment configs).

Shared by the fuzz test (a small budget, in the suite) and
``experiments/bench/fuzz_readers.py`` (10,000+ inputs per reader, counted).
Each input starts from a valid document and is damaged by a few edits
(insert, delete or replace a stretch) with tokens that tend to break
readers: brackets, YAML anchors and aliases, huge and odd numbers, NUL
bytes, keywords of the formats. Or it is arbitrary text. Each reader must
either accept the input or raise the package's own error
(:class:`intervgnn.errors.IntervgnnError`); anything else is a defect.
"""

from __future__ import annotations

import os
import tempfile
import time

from hypothesis import strategies as st

from intervgnn.bn import parse_bif
from intervgnn.errors import IntervgnnError
from intervgnn.harness.config import load_config
from intervgnn.userdata import load_graph, read_csv

BIF = """network tiny {
}
variable Rain {
  type discrete [ 2 ] { no, yes };
}
variable Sprinkler {
  type discrete [ 2 ] { off, on };
}
variable Wet {
  type discrete [ 3 ] { dry, damp, soaked };
  property weight = 1 ;
}
probability ( Rain ) {
  table 0.8, 0.2;
}
probability ( Sprinkler | Rain ) {
  (no) 0.6, 0.4;
  (yes) 0.99, 0.01;
}
probability ( Wet | Rain, Sprinkler ) {
  default 0.2, 0.3, 0.5;
  (no, off) 0.9, 0.08, 0.02;
}
"""

GRAPH = """edges:
  - [Rain, Sprinkler]
  - [Rain, Wet]
  - [Sprinkler, Wet]
states:
  Rain: [no, yes]
  Wet: [dry, damp, soaked]
confounded:
  - [Rain, Wet]
"""

# the graph every CSV input is read against (no file: read_csv takes the text's spec)
CSV_GRAPH = """edges:
  - [Rain, Sprinkler]
  - [Rain, Wet]
  - [Sprinkler, Wet]
states:
  Wet: [dry, damp, soaked]
"""

CSV = """Rain,Sprinkler,Wet
no,off,dry
yes,off,soaked
no,on,damp
no,off,dry
yes,on,soaked
"""

CONFIG = """name: fuzz
output: runs/fuzz
networks:
  - cancer
  - {network: survey, hidden: [T]}
  - random:nodes=6,seed=1
rows: [200, 400]
seeds: [0, 1]
queries:
  count: 5
  kinds: [do, conditional, joint, null]
  seed: 0
estimators:
  - naive
  - plugin
  - neural: {label: quick, steps: 5}
metrics: [tv, kl]
executor: local
workers: 1
bootstrap: 100
"""

SEEDS = {"bif": BIF, "graph": GRAPH, "csv": CSV, "config": CONFIG}

TOKENS = [
    "{", "}", "(", ")", "[", "]", ";", ",", ":", "|", "-", "\n", "  ", "\t", "'", '"', "#", "\x00", "\r",
    "&a ", "*a", "&a [*a, *a, *a]", "<<: *a", "!!str ", "!!python/object:os.system ", "? ", "%YAML 1.1\n",
    "yes", "no", "True", "~", "null", "01", "0x1F", ".nan", ".inf", "-1", "0", "1e12", "1e308",
    "9" * 40, "9" * 400, "-" + "9" * 30, "0.0000000001", "nan", "inf",
    "variable", "probability", "table", "default", "type discrete", "network", "property",
    "edges", "states", "confounded", "regime", "networks", "rows", "seeds", "estimators", "queries",
    "hidden", "metrics", "workers", "count", "kinds", "neural", "plugin", "steps", "lr",
    "[" * 60, "]" * 60, "{" * 40, "Rain", "Wet", "é", "\u202e", " " * 30,
]


NUMBERS = ["0", "1", "2", "3", "-2", "1.5", "1e3", "9" * 50, "9" * 5000, "0x10", "nan", "", "2 2"]


@st.composite
def wide_bif(draw) -> str:
    """A BIF whose child has many parents (a CPT of up to 2**30 entries) and odd state counts."""
    parents = draw(st.integers(0, 30))
    count = draw(st.sampled_from(NUMBERS))
    lines = [f"variable P{i} {{ type discrete [ 2 ] {{ a, b }}; }}" for i in range(parents)]
    lines.append(f"variable C {{ type discrete [ {count} ] {{ x, y }}; }}")
    for i in range(parents):
        lines.append(f"probability ( P{i} ) {{ table 0.5, 0.5; }}")
    given = (" | " + ", ".join(f"P{i}" for i in range(parents))) if parents else ""
    body = draw(st.sampled_from(["default 0.5, 0.5;", "table 0.5, 0.5;", "(a) 0.5, 0.5;", ""]))
    lines.append(f"probability ( C{given} ) {{ {body} }}")
    return "\n".join(lines) + "\n"


@st.composite
def nested_yaml(draw, reader: str) -> str:
    """An alias chain ("billion laughs": each level repeats the one below) or deep brackets, in a key."""
    key = draw(st.sampled_from(["edges", "states", "confounded", "rows", "networks", "name", "queries"]))
    if draw(st.booleans()):
        depth, fan = draw(st.integers(1, 12)), draw(st.integers(2, 10))
        lines = ["a0: &a0 [Rain, Wet]"]
        for i in range(1, depth + 1):
            lines.append(f"a{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * fan) + "]")
        lines.append(f"{key}: *a{depth}")
        text = "\n".join(lines) + "\n"
    else:
        n = draw(st.sampled_from([10, 100, 400, 600, 1000, 5000]))
        opener = draw(st.sampled_from(["[", "{a: ", "- "]))
        text = f"{key}: " + opener * n + "\n"
    return (SEEDS[reader] + text) if draw(st.booleans()) else text


@st.composite
def damaged(draw, reader: str) -> str:
    """A document for ``reader``: the valid seed with a few edits, arbitrary text (one in ten) or,
    one in ten, a pathological shape (huge CPTs for BIF, alias chains and deep nesting for YAML)."""
    kind = draw(st.integers(0, 9))
    if kind == 0:
        return draw(st.text(max_size=300))
    if kind == 1 and reader == "bif":
        return draw(wide_bif())
    if kind == 1 and reader in ("graph", "config"):
        return draw(nested_yaml(reader))
    text = SEEDS[reader]
    for _ in range(draw(st.integers(1, 4))):
        at = draw(st.integers(0, len(text)))
        op = draw(st.sampled_from(["insert", "delete", "replace", "repeat"]))
        if op == "insert":
            text = text[:at] + draw(st.sampled_from(TOKENS)) + text[at:]
        elif op == "delete":
            text = text[:at] + text[at + draw(st.integers(1, 20)):]
        elif op == "replace":
            text = text[:at] + draw(st.sampled_from(TOKENS)) + text[at + draw(st.integers(1, 10)):]
        else:  # a stretch copied many times (long lines, repeated keys, many rows)
            stretch = text[at:at + draw(st.integers(1, 40))]
            text = text[:at] + stretch * draw(st.integers(2, 200)) + text[at:]
    return text


def run_reader(reader: str, text: str, folder: str) -> str:
    """Read ``text`` with ``reader``; return ``"accepted"`` or ``"refused"`` (a package error).

    Any other exception propagates: that is what the fuzzing looks for.
    """
    try:
        if reader == "bif":
            parse_bif(text, source="<fuzz>")
        else:
            path = os.path.join(folder, {"graph": "graph.yaml", "csv": "rows.csv", "config": "config.yaml"}[reader])
            with open(path, "w", encoding="utf-8", errors="surrogatepass", newline="") as fh:
                fh.write(text)
            if reader == "graph":
                load_graph(path)
            elif reader == "csv":
                spec = os.path.join(folder, "csv-graph.yaml")
                if not os.path.exists(spec):
                    with open(spec, "w", encoding="utf-8") as fh:
                        fh.write(CSV_GRAPH)
                read_csv(path, spec)
            else:
                load_config(path)
    except IntervgnnError:
        return "refused"
    return "accepted"


def timed(reader: str, text: str, folder: str) -> tuple[str, float]:
    t0 = time.perf_counter()
    outcome = run_reader(reader, text, folder)
    return outcome, time.perf_counter() - t0


def scratch() -> tempfile.TemporaryDirectory:
    return tempfile.TemporaryDirectory(prefix="intervgnn-fuzz-")
