"""The README's Python examples run as written (common practice, no source)."""

from __future__ import annotations

import os
import re

import pytest

README = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "README.md")


def python_blocks():
    text = open(README, encoding="utf-8").read()
    return re.findall(r"```python\n(.*?)```", text, flags=re.S)


def test_readme_has_examples():
    assert len(python_blocks()) >= 1


@pytest.mark.parametrize("index", range(len(python_blocks())))
def test_readme_example_runs(index, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    exec(compile(python_blocks()[index], f"README block {index}", "exec"), {"__name__": "__readme__"})
