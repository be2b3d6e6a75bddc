"""The README's Python examples run as written, and print what the README shows after them (common practice, no source)."""

from __future__ import annotations

import os
import re

import pytest

README = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "README.md")


def python_blocks():
    text = open(README, encoding="utf-8").read()
    return re.findall(r"```python\n(.*?)```", text, flags=re.S)


def shown_outputs():
    """Per Python block, the plain block right after it (what it prints, or the start of it), or None."""
    text = open(README, encoding="utf-8").read()
    return [m.group(2) for m in re.finditer(r"```python\n(.*?)```\n\n(?:```\n(.*?)```)?", text, flags=re.S)]


def test_readme_has_examples():
    assert len(python_blocks()) >= 1 and len(shown_outputs()) == len(python_blocks())
    assert sum(out is not None for out in shown_outputs()) >= 2


@pytest.mark.parametrize("index", range(len(python_blocks())))
def test_readme_example_runs(index, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    exec(compile(python_blocks()[index], f"README block {index}", "exec"), {"__name__": "__readme__"})
    shown = shown_outputs()[index]
    if shown is not None:
        printed = [line.rstrip() for line in capsys.readouterr().out.splitlines()]
        expected = [line.rstrip() for line in shown.splitlines()]
        assert printed[: len(expected)] == expected
