"""The package's one YAML loader, for graph files and experiment configs.

:func:`load_yaml` reads one document with PyYAML's safe loader (no Python
objects, only mappings, lists and scalars) and, on top of it, refuses:

* a key given twice in one mapping (YAML requires unique keys; PyYAML would
  keep the last one silently). A key brought in by a ``<<`` merge may still
  be overridden, as the merge means;
* aliases (``*name``) that stand for more than
  :data:`MAX_ALIAS_EXPANSION` values in all: a few hundred bytes of nested
  aliases can otherwise stand for billions of values. Anchors and aliases
  of ordinary size (a settings block reused a few times) are fine;
* nesting deeper than :data:`MAX_DEPTH` levels;
* a value its type cannot hold, such as the date ``2024-13-01`` or a whole
  number of more than 4,300 digits.

With ``names=True`` (graph files, which hold only names) every scalar is
read as text except an empty value or ``null`` / ``~``: ``yes``, ``on``,
``01`` and ``1.0`` are the names ``"yes"``, ``"on"``, ``"01"`` and
``"1.0"``, not ``True``, ``1`` and ``1.0``. Without it (configs, which need
numbers) YAML's usual types are kept.

Every refusal is a :class:`yaml.YAMLError` whose ``problem`` says what was
wrong and whose ``problem_mark`` gives the line, so a caller reports it the
way it reports a syntax error; ``problem`` texts are cut to 200 characters.
"""

from __future__ import annotations

import os

import yaml

from .errors import short_repr, shorten

__all__ = ["load_yaml", "read_yaml_file", "yaml_problem", "YAMLRefused", "MAX_ALIAS_EXPANSION", "MAX_DEPTH"]

#: the most values (scalars, lists and mappings) that all aliases of a document may stand for together
MAX_ALIAS_EXPANSION = 100_000
#: the deepest nesting of lists and mappings accepted
MAX_DEPTH = 100
_MERGE = "tag:yaml.org,2002:merge"


class YAMLRefused(yaml.MarkedYAMLError):
    """A document that is valid YAML syntax but refused by :func:`load_yaml` (see the module notes)."""

    def __init__(self, problem: str, mark=None):
        super().__init__(problem=problem, problem_mark=mark)


class _TypedLoader(yaml.SafeLoader):
    """Safe loader with bounded aliases and nesting, unique keys and plain errors for bad values."""

    def __init__(self, stream):
        super().__init__(stream)
        self._sizes: dict[int, int] = {}  # id(node) -> values it stands for, aliases expanded
        self._expanded = 0
        self._depth = 0

    # composing: nodes from events ----------------------------------------
    def compose_node(self, parent, index):
        if self.check_event(yaml.AliasEvent):
            event = self.peek_event()
            node = self.anchors.get(event.anchor)
            if node is not None:  # an undefined alias is reported by PyYAML
                size = self._sizes.get(id(node))
                if size is None:
                    raise YAMLRefused(
                        f"alias '*{shorten(event.anchor, 40)}' stands for a node that contains it", event.start_mark
                    )
                self._expanded += size
                if self._expanded > MAX_ALIAS_EXPANSION:
                    raise YAMLRefused(
                        f"aliases stand for more than {MAX_ALIAS_EXPANSION:,} values in all; "
                        "write the repeated parts out instead",
                        event.start_mark,
                    )
            return super().compose_node(parent, index)
        self._depth += 1
        try:
            if self._depth > MAX_DEPTH:
                raise YAMLRefused(f"lists and mappings nested more than {MAX_DEPTH} deep", self.peek_event().start_mark)
            node = super().compose_node(parent, index)
        finally:
            self._depth -= 1
        if isinstance(node, yaml.SequenceNode):
            size = 1 + sum(self._sizes[id(c)] for c in node.value)
        elif isinstance(node, yaml.MappingNode):
            size = 1 + sum(self._sizes[id(k)] + self._sizes[id(v)] for k, v in node.value)
        else:
            size = 1
        self._sizes[id(node)] = size
        return node

    # constructing: Python values from nodes -------------------------------
    def construct_object(self, node, deep=False):
        try:
            return super().construct_object(node, deep=deep)
        except (ValueError, OverflowError) as exc:
            shown = short_repr(node.value, 60) if isinstance(node, yaml.ScalarNode) else "here"
            raise YAMLRefused(f"cannot read the value {shown} ({shorten(exc, 100)})", node.start_mark) from None

    def construct_mapping(self, node, deep=False):
        if isinstance(node, yaml.MappingNode):
            first_line: dict = {}
            for key_node, _ in node.value:
                if key_node.tag == _MERGE:
                    continue
                key = self.construct_object(key_node, deep=True)
                try:
                    hash(key)
                except TypeError:
                    continue  # PyYAML reports the unhashable key
                if key in first_line:
                    raise YAMLRefused(
                        f"key {short_repr(key, 60)} appears twice in one mapping, first on line {first_line[key]}; keep one",
                        key_node.start_mark,
                    )
                first_line[key] = key_node.start_mark.line + 1
        return super().construct_mapping(node, deep=deep)


class _NamesLoader(_TypedLoader):
    """As :class:`_TypedLoader`, but plain scalars are text (null and ``<<`` merges apart)."""


_NamesLoader.yaml_implicit_resolvers = {
    first: [(tag, rx) for tag, rx in resolvers if tag in ("tag:yaml.org,2002:null", _MERGE)]
    for first, resolvers in yaml.SafeLoader.yaml_implicit_resolvers.items()
}


def load_yaml(stream, names: bool = False):
    """Read one YAML document (text or an open text file) safely.

    Parameters
    ----------
    stream : str or text file
        The document.
    names : bool, default False
        Read plain scalars as text (graph files); see the module notes.

    Returns
    -------
    object
        The document: mappings, lists, and scalars (``None`` for an empty
        document).

    Raises
    ------
    yaml.YAMLError
        Syntax errors as PyYAML reports them, and :class:`YAMLRefused` for a
        repeated key, aliases standing for too many values, nesting too deep
        or a value its type cannot hold; ``problem_mark`` carries the line.

    Examples
    --------
    >>> load_yaml("edges: [[yes, 01]]", names=True)
    {'edges': [['yes', '01']]}
    >>> load_yaml("rows: [1000, 01]")
    {'rows': [1000, 1]}
    """
    loader = (_NamesLoader if names else _TypedLoader)(stream)
    try:
        return loader.get_single_data()
    except yaml.MarkedYAMLError as exc:
        # PyYAML quotes the text it stumbled on (an alias name, a tag), which may be long
        if isinstance(exc.problem, str):
            exc.problem = shorten(exc.problem, 200)
        if isinstance(exc.context, str):
            exc.context = shorten(exc.context, 200)
        raise
    except RecursionError:
        raise YAMLRefused(f"lists and mappings nested too deeply (more than {MAX_DEPTH} levels are refused)") from None
    finally:
        loader.dispose()


def yaml_problem(source: str, exc: yaml.YAMLError) -> str:
    """The message for a file :func:`load_yaml` could not read: ``"<source>, line N: <what>"``.

    A refusal of ours (aliases, depth, a repeated key) says what it is; a
    syntax error of the parser is reported as "not valid YAML (...)".
    """
    mark = getattr(exc, "problem_mark", None)
    where = f", line {mark.line + 1}" if mark is not None else ""
    if isinstance(exc, YAMLRefused):
        return f"{source}{where}: {exc.problem}"
    return f"{source}{where}: not valid YAML ({getattr(exc, 'problem', None) or exc})"


def read_yaml_file(path, error: type[Exception], names: bool = False):
    """The document of a YAML file, read with :func:`load_yaml`; any problem raised as ``error`` naming the file.

    A missing or unreadable file, text that is not UTF-8, and everything
    :func:`load_yaml` refuses (with its line) become ``error(message)``.
    """
    source = os.fspath(path)
    try:
        with open(source, encoding="utf-8") as fh:
            return load_yaml(fh, names=names)
    except FileNotFoundError:
        raise error(f"{source}: no such file") from None
    except yaml.YAMLError as exc:
        raise error(yaml_problem(source, exc)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise error(f"{source}: cannot read the file ({exc})") from None
