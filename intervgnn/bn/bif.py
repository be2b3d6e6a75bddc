"""Reading and writing networks in the Bayesian Interchange Format (BIF).

The reader accepts the BIF dialect used by the classic benchmark
repositories::

    network name { property key = value; }
    variable X { type discrete [ 2 ] { a, b }; property ...; }
    probability ( X | P1, P2 ) {
      (p1, p2) 0.1, 0.9;      // one row per parent configuration
      default 0.5, 0.5;       // rows not listed
      table 0.1, 0.9, ...;    // or the whole table at once
    }

with ``//`` and ``/* */`` comments, quoted names, optional commas and any
whitespace (a leading byte-order mark is skipped). ``property`` lines of the
network and variable blocks are kept in ``CausalNetwork.properties`` and
``CausalNetwork.variable_properties``; those inside a probability block are
accepted and dropped. In the ``table`` form of a variable with parents,
values are read with the variable's own state varying slowest and the last
parent fastest (the order pgmpy's reader uses). The writer emits the unambiguous
per-row form for variables with parents and ``table`` for roots, with
floats written by ``repr`` so that read -> write -> read gives the same
numbers exactly.

Every problem is reported as :class:`~intervgnn.errors.BIFParseError`
naming the file and line.
"""

from __future__ import annotations

import gzip
import itertools
import math
import os
import re
import zlib

import networkx as nx
import numpy as np

from .._io import atomic_open
from ..errors import BIFParseError, GraphError, NetworkError, shorten
from ..graph import CausalGraph
from .network import _ROW_TOL, MAX_CPT_ENTRIES, MAX_NETWORK_ENTRIES, CausalNetwork

__all__ = ["read_bif", "parse_bif", "write_bif", "format_bif"]

_PUNCT = set("{}()[];,|")
_WORD_OK = re.compile(r"^[A-Za-z0-9_.+\-]+$")
_KEYWORDS = {"network", "variable", "probability", "property", "type", "discrete", "table", "default"}


class _Scanner:
    """Character-level scanner that tracks line numbers."""

    def __init__(self, text: str, source: str):
        self.text = text
        self.source = source
        self.pos = 0
        self.line = 1
        self.n = len(text)

    def error(self, message: str, line: int | None = None) -> BIFParseError:
        return BIFParseError(message, self.source, self.line if line is None else line)

    def _skip(self) -> None:
        t, n = self.text, self.n
        while self.pos < n:
            c = t[self.pos]
            if c == "\n":
                self.line += 1
                self.pos += 1
            elif c.isspace():
                self.pos += 1
            elif t.startswith("//", self.pos):
                end = t.find("\n", self.pos)
                self.pos = n if end < 0 else end
            elif t.startswith("/*", self.pos):
                end = t.find("*/", self.pos + 2)
                if end < 0:
                    raise self.error("unterminated /* comment")
                self.line += t.count("\n", self.pos, end)
                self.pos = end + 2
            else:
                return

    def peek(self) -> tuple[str, str] | None:
        """Next token as (kind, text) without consuming it; None at end.

        Whitespace and comments before it are consumed, so that ``line`` is
        the token's line afterwards.
        """
        self._skip()
        save = (self.pos, self.line)
        tok = self.next()
        self.pos, self.line = save
        return tok

    def next(self) -> tuple[str, str] | None:
        self._skip()
        if self.pos >= self.n:
            return None
        t = self.text
        c = t[self.pos]
        if c in _PUNCT:
            self.pos += 1
            return ("punct", c)
        if c == '"':
            start_line = self.line
            out = []
            i = self.pos + 1
            while i < self.n:
                ch = t[i]
                if ch == "\\" and i + 1 < self.n:
                    out.append(t[i + 1])
                    i += 2
                    continue
                if ch == '"':
                    self.pos = i + 1
                    return ("qword", "".join(out))
                if ch == "\n":
                    self.line += 1
                out.append(ch)
                i += 1
            raise self.error("unterminated quoted name", start_line)
        start = self.pos
        i = start
        while i < self.n:
            ch = t[i]
            if ch.isspace() or ch in _PUNCT or ch == '"' or t.startswith("//", i) or t.startswith("/*", i):
                break
            i += 1
        self.pos = i
        return ("word", t[start:i])

    def raw_until_semicolon(self) -> str:
        """Raw text up to the next ``;`` outside double quotes (consumed)."""
        t = self.text
        i = self.pos
        quoted = False
        start_line = self.line
        while i < self.n:
            ch = t[i]
            if ch == '"':
                quoted = not quoted
            elif ch == ";" and not quoted:
                raw = t[self.pos : i]
                self.line += raw.count("\n")
                self.pos = i + 1
                return raw.strip()
            i += 1
        raise self.error("property is missing its closing ';'", start_line)

    # helpers ------------------------------------------------------------
    def expect(self, text: str) -> None:
        tok = self.next()
        if tok is None:
            raise self.error(f"expected '{text}' but the file ended")
        if tok[1] != text or (tok[0] == "punct") != (text in _PUNCT):
            raise self.error(f"expected '{text}', found '{shorten(tok[1])}'")

    def word(self, what: str) -> str:
        tok = self.next()
        if tok is None:
            raise self.error(f"expected {what} but the file ended")
        if tok[0] == "punct":
            raise self.error(f"expected {what}, found '{shorten(tok[1])}'")
        return tok[1]

    def accept(self, text: str) -> bool:
        tok = self.peek()
        if tok is not None and tok[1] == text and (tok[0] == "punct") == (text in _PUNCT):
            self.next()
            return True
        return False


def _parse_property(raw: str) -> tuple[str, str]:
    if "=" in raw:
        k, v = raw.split("=", 1)
        return k.strip(), v.strip()
    return raw.strip(), ""


def _numbers(sc: _Scanner, what: str) -> list[float]:
    """Numbers separated by optional commas, up to and including ';'."""
    vals: list[float] = []
    while True:
        tok = sc.next()
        if tok is None:
            raise sc.error(f"{what}: the file ended before ';'")
        kind, text = tok
        if kind == "punct":
            if text == ";":
                return vals
            if text == ",":
                continue
            raise sc.error(f"{what}: expected a number, found '{shorten(text)}'")
        try:
            vals.append(float(text))
        except ValueError:
            raise sc.error(f"{what}: '{shorten(text)}' is not a number") from None


def parse_bif(text: str, source: str = "<string>") -> CausalNetwork:
    """Parse BIF text into a :class:`CausalNetwork`.

    Parameters
    ----------
    text : str
        The BIF document.
    source : str
        Name used in error messages (a file path).

    Raises
    ------
    BIFParseError
        Any syntax error, unknown variable or state, wrong number of values,
        missing row, invalid CPT or cyclic graph, with file and line.
    """
    if text.startswith("\ufeff"):
        text = text[1:]  # byte-order mark left by some editors
    sc = _Scanner(text, source)
    name = "network"
    net_props: dict[str, str] = {}
    var_order: list[str] = []
    var_line: dict[str, int] = {}
    states: dict[str, tuple[str, ...]] = {}
    var_props: dict[str, dict[str, str]] = {}
    blocks: dict[str, tuple[int, list[str], list]] = {}  # var -> (line, parents, entries)
    seen_network = False

    while True:
        tok = sc.next()
        if tok is None:
            break
        kind, word = tok
        line = sc.line
        if kind != "word":
            raise sc.error(f"expected 'network', 'variable' or 'probability', found '{shorten(word)}'")
        if word == "network":
            if seen_network:
                raise sc.error("a second 'network' block")
            seen_network = True
            nt = sc.peek()
            if nt is not None and nt[0] != "punct":
                name = sc.next()[1]  # type: ignore[index]
            sc.expect("{")
            while not sc.accept("}"):
                kw = sc.word("'property' or '}'")
                if kw != "property":
                    raise sc.error(f"expected 'property' or '}}' in the network block, found '{shorten(kw)}'")
                k, v = _parse_property(sc.raw_until_semicolon())
                net_props[k] = v
        elif word == "variable":
            vname = sc.word("a variable name")
            if vname == "":
                raise sc.error("a variable name is empty")
            if vname in states or vname in var_line:
                raise sc.error(f"variable '{shorten(vname)}' is declared twice")
            var_line[vname] = line
            sc.expect("{")
            props: dict[str, str] = {}
            got_type = False
            while not sc.accept("}"):
                kw = sc.word("'type', 'property' or '}'")
                if kw == "property":
                    k, v = _parse_property(sc.raw_until_semicolon())
                    props[k] = v
                elif kw == "type":
                    tline = sc.line
                    kind_word = sc.word("'discrete'")
                    if kind_word != "discrete":
                        raise sc.error(f"variable '{shorten(vname)}': only 'discrete' variables are supported, found '{shorten(kind_word)}'")
                    sc.expect("[")
                    count_text = sc.word("the number of states")
                    if not (count_text.isascii() and count_text.isdigit()):
                        raise sc.error(f"variable '{shorten(vname)}': '{shorten(count_text)}' is not a number of states")
                    sc.expect("]")
                    sc.expect("{")
                    names: list[str] = []
                    while not sc.accept("}"):
                        if sc.accept(","):
                            continue
                        names.append(sc.word("a state name"))
                    sc.expect(";")
                    # a count of thousands of digits cannot match, and int() would refuse it
                    if len(count_text) > 18 or int(count_text) != len(names):
                        raise sc.error(
                            f"variable '{shorten(vname)}' declares {shorten(count_text, 40)} states but lists {len(names)}", tline
                        )
                    if not names:
                        raise sc.error(f"variable '{shorten(vname)}' has no states", tline)
                    if len(set(names)) != len(names):
                        dup = next(s for s in names if names.count(s) > 1)
                        raise sc.error(f"variable '{shorten(vname)}' lists state '{shorten(dup)}' twice", tline)
                    got_type = True
                    states[vname] = tuple(names)
                else:
                    raise sc.error(f"expected 'type', 'property' or '}}' in variable '{shorten(vname)}', found '{shorten(kw)}'")
            if not got_type:
                raise sc.error(f"variable '{shorten(vname)}' has no 'type discrete' line", line)
            var_order.append(vname)
            if props:
                var_props[vname] = props
        elif word == "probability":
            sc.expect("(")
            child = sc.word("a variable name")
            parents: list[str] = []
            if sc.accept("|"):
                while not sc.accept(")"):
                    if sc.accept(","):
                        continue
                    parents.append(sc.word("a parent name"))
            else:
                sc.expect(")")
            if child in blocks:
                raise sc.error(f"a second probability block for '{shorten(child)}'", line)
            sc.expect("{")
            entries: list = []
            while not sc.accept("}"):
                tok2 = sc.peek()
                if tok2 is None:
                    raise sc.error(f"probability block of '{shorten(child)}' is not closed")
                eline = sc.line
                if tok2 == ("punct", "("):
                    sc.next()
                    cfg: list[str] = []
                    while not sc.accept(")"):
                        if sc.accept(","):
                            continue
                        cfg.append(sc.word("a parent state"))
                    entries.append(("row", eline, cfg, _numbers(sc, f"row of '{shorten(child)}'")))
                elif tok2[0] == "word" and tok2[1] in ("table", "default"):
                    sc.next()
                    entries.append((tok2[1], eline, None, _numbers(sc, f"{tok2[1]} of '{shorten(child)}'")))
                elif tok2[0] == "word" and tok2[1] == "property":
                    sc.next()
                    sc.raw_until_semicolon()
                else:
                    raise sc.error(f"unexpected '{shorten(tok2[1])}' in the probability block of '{shorten(child)}'")
            blocks[child] = (line, parents, entries)
        else:
            raise sc.error(f"expected 'network', 'variable' or 'probability', found '{shorten(word)}'")

    if not var_order:
        raise BIFParseError("no variables declared", source, sc.line)
    # semantic checks -------------------------------------------------------
    for child, (line, parents, _) in blocks.items():
        if child not in states:
            raise BIFParseError(f"probability block for undeclared variable '{shorten(child)}'", source, line)
        for p in parents:
            if p not in states:
                raise BIFParseError(f"'{shorten(child)}' has undeclared parent '{shorten(p)}'", source, line)
            if p == child:
                raise BIFParseError(f"'{shorten(child)}' is listed as its own parent", source, line)
        if len(set(parents)) != len(parents):
            dup = next(p for p in parents if parents.count(p) > 1)
            raise BIFParseError(f"'{shorten(child)}' lists parent '{shorten(dup)}' twice", source, line)
    for v in var_order:
        if v not in blocks:
            raise BIFParseError(f"variable '{v}' has no probability block", source, var_line[v])
    edges = [(p, c) for c in var_order for p in blocks[c][1]]
    try:
        graph = CausalGraph(edges, nodes=var_order)
    except GraphError as exc:
        # names are non-empty, declared and not repeated, so this is a cycle:
        # point at the probability block of a variable on it
        try:
            on_cycle = nx.find_cycle(nx.DiGraph(edges))[0][1]
            line = blocks[on_cycle][0]
        except nx.NetworkXNoCycle:
            line = None
        raise BIFParseError(str(exc), source, line) from None

    # sizes are checked before any table is built (Python integers: no overflow)
    total = 0
    for child in var_order:
        line, parents, _ = blocks[child]
        size = math.prod(len(states[p]) for p in parents) * len(states[child])
        if size > MAX_CPT_ENTRIES:
            raise BIFParseError(
                f"the CPT of '{shorten(child)}' would have {size:,} entries (states of its {len(parents)} parents times its own), "
                f"more than the limit of {MAX_CPT_ENTRIES:,}",
                source,
                line,
            )
        total += size
    if total > MAX_NETWORK_ENTRIES:
        raise BIFParseError(
            f"the CPTs would have {total:,} entries in all, more than the limit of {MAX_NETWORK_ENTRIES:,}", source, None
        )
    cpts = {}
    row_lines: dict[str, np.ndarray] = {}
    for child in var_order:
        line, parents, entries = blocks[child]
        k = len(states[child])
        pcards = [len(states[p]) for p in parents]
        n_rows = math.prod(pcards)
        table = np.zeros((n_rows, k))
        filled = np.zeros(n_rows, dtype=bool)
        by_row = np.zeros(n_rows, dtype=bool)  # given by a "(states) values;" row (a table may be overridden by rows)
        table_line = None
        row_line = np.full(n_rows, line)
        default = None
        lookups = [{s: i for i, s in enumerate(states[p])} for p in parents]
        strides = np.cumprod([1] + pcards[::-1])[:-1][::-1] if parents else []
        for kind, eline, cfg, vals in entries:
            if kind == "table":
                if len(vals) != n_rows * k:
                    raise BIFParseError(
                        f"table of '{shorten(child)}' has {len(vals)} values, expected {n_rows * k}", source, eline
                    )
                if table_line is not None or by_row.any() or default is not None:
                    earlier = [table_line] if table_line is not None else []
                    earlier += [int(row_line[by_row].min())] if by_row.any() else []
                    earlier += [default[1]] if default is not None else []
                    first = min(earlier)
                    raise BIFParseError(
                        f"'{shorten(child)}' has a table after earlier entries (line {first}); a table must come first",
                        source,
                        eline,
                    )
                table_line = eline
                table[:] = np.array(vals).reshape(k, n_rows).T
                filled[:] = True
                row_line[:] = eline
            elif kind == "default":
                if len(vals) != k:
                    raise BIFParseError(f"default row of '{shorten(child)}' has {len(vals)} values, expected {k}", source, eline)
                if default is not None:
                    raise BIFParseError(f"'{shorten(child)}' has a second default row (the first is on line {default[1]})", source, eline)
                default = (vals, eline)
            else:
                if len(cfg) != len(parents):
                    raise BIFParseError(
                        f"row of '{shorten(child)}' names {len(cfg)} parent states, expected {len(parents)}", source, eline
                    )
                if len(vals) != k:
                    raise BIFParseError(f"row of '{shorten(child)}' has {len(vals)} values, expected {k}", source, eline)
                r = 0
                for p, look, s, stv in zip(parents, lookups, cfg, strides):
                    if s not in look:
                        raise BIFParseError(
                            f"row of '{shorten(child)}': unknown state '{shorten(s)}' for parent '{shorten(p)}'; states are: "
                            + shorten(", ".join(sorted(states[p])), 200),
                            source,
                            eline,
                        )
                    r += look[s] * int(stv)
                if by_row[r]:
                    cfg_txt = ", ".join(f"{p}={s}" for p, s in zip(parents, cfg)) or "no parents"
                    raise BIFParseError(
                        f"'{shorten(child)}' has two rows for ({cfg_txt}); the first is on line {int(row_line[r])}", source, eline
                    )
                table[r] = vals
                filled[r] = by_row[r] = True
                row_line[r] = eline
        missing = np.flatnonzero(~filled)
        if missing.size:
            if default is not None:
                table[missing] = default[0]
                row_line[missing] = default[1]
            else:
                codes = np.unravel_index(int(missing[0]), pcards) if parents else ()
                cfg_txt = ", ".join(f"{p}={states[p][int(c)]}" for p, c in zip(parents, codes))
                raise BIFParseError(f"'{shorten(child)}' has no row for ({cfg_txt})", source, line)
        cpts[child] = table.reshape(pcards + [k])
        row_lines[child] = row_line
    try:
        return CausalNetwork(graph, states, cpts, name=name, properties=net_props, variable_properties=var_props)
    except NetworkError as exc:
        # the message starts "CPT of '<variable>', row ..."; report the line
        # that supplied the first row breaking the rules the network checks
        bad = next((v for v in var_order if str(exc).startswith(f"CPT of '{v}'")), None)
        line = None
        if bad is not None:
            rows = cpts[bad].reshape(-1, len(states[bad]))
            wrong = (
                ~np.isfinite(rows).all(axis=1)
                | (rows < 0).any(axis=1)
                | (np.abs(rows.sum(axis=1) - 1.0) > _ROW_TOL)
            )
            hits = np.flatnonzero(wrong)
            line = int(row_lines[bad][hits[0]]) if hits.size else blocks[bad][0]
        raise BIFParseError(str(exc), source, line) from None


def read_bif(path: str | os.PathLike) -> CausalNetwork:
    """Read a BIF file (plain or ``.gz``) into a :class:`CausalNetwork`.

    Raises
    ------
    BIFParseError
        The file is missing, unreadable, not UTF-8, or not valid BIF; the
        message carries the file and line.
    """
    path = os.fspath(path)
    try:
        if path.endswith(".gz"):
            with gzip.open(path, "rb") as fh:
                data = fh.read()
        else:
            with open(path, "rb") as fh:
                data = fh.read()
    except FileNotFoundError:
        raise BIFParseError("no such file", path, None) from None
    except (OSError, EOFError, zlib.error) as exc:
        raise BIFParseError(f"cannot read the file ({exc.__class__.__name__}: {exc})", path, None) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise BIFParseError(f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x})", path, line) from None
    # read as text files are: universal newlines
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    net = parse_bif(text, source=path)
    if net.name in ("network", "unknown"):
        base = os.path.basename(path)
        net.name = base.split(".")[0] or "network"
    return net


def _q(name: str) -> str:
    if _WORD_OK.match(name) and name not in _KEYWORDS:
        return name
    return '"' + name.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _num(x: float) -> str:
    return repr(float(x))


def format_bif(net: CausalNetwork) -> str:
    """The network as BIF text (see the module notes for the layout)."""
    lines = [f"network {_q(net.name)} {{"]
    for k, v in net.properties.items():
        lines.append(f"  property {k} = {v};" if v != "" else f"  property {k};")
    lines.append("}")
    st = net.states
    for v in net.variables:
        lines.append(f"variable {_q(v)} {{")
        lines.append(f"  type discrete [ {len(st[v])} ] {{ " + ", ".join(_q(s) for s in st[v]) + " };")
        for k, val in net.variable_properties.get(v, {}).items():
            lines.append(f"  property {k} = {val};" if val != "" else f"  property {k};")
        lines.append("}")
    for v in net.variables:
        pa = net.graph.parents(v)
        cpt = net.cpt(v)
        if pa:
            lines.append(f"probability ( {_q(v)} | " + ", ".join(_q(p) for p in pa) + " ) {")
            rows = cpt.reshape(-1, cpt.shape[-1])
            for cfg, row in zip(itertools.product(*[st[p] for p in pa]), rows):
                lines.append("  (" + ", ".join(_q(s) for s in cfg) + ") " + ", ".join(_num(x) for x in row) + ";")
        else:
            lines.append(f"probability ( {_q(v)} ) {{")
            lines.append("  table " + ", ".join(_num(x) for x in cpt) + ";")
        lines.append("}")
    return "\n".join(lines) + "\n"


def write_bif(net: CausalNetwork, path: str | os.PathLike) -> None:
    """Write the network to ``path`` as BIF, atomically (temporary file, then rename).

    A path ending in ``.gz`` is written gzip-compressed, as :func:`read_bif`
    expects.
    """
    path = os.fspath(path)
    text = format_bif(net)
    with atomic_open(path, "w", compress=path.endswith(".gz")) as fh:
        fh.write(text)
