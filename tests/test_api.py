"""Explicit exports: every name in __all__ exists and star-import works."""

from __future__ import annotations

import importlib

import pytest

PACKAGES = ["intervgnn", "intervgnn.bn", "intervgnn.nn", "intervgnn.models", "intervgnn.estimators", "intervgnn.eval"]


@pytest.mark.parametrize("mod", PACKAGES)
def test_all_names_exist(mod):
    m = importlib.import_module(mod)
    assert m.__all__, mod
    for name in m.__all__:
        assert hasattr(m, name), f"{mod}.{name}"


def test_star_import():
    ns: dict = {}
    exec("from intervgnn import *", ns)
    import intervgnn

    for name in intervgnn.__all__:
        assert name in ns
