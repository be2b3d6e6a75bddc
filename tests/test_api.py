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


def test_identify_is_the_function_after_the_subpackage_is_imported():
    # a subpackage import must not replace the top-level function of the same name
    import intervgnn as ig
    import intervgnn.identify  # noqa: F401
    from intervgnn.estimators import EstimandEstimator  # noqa: F401

    assert callable(ig.identify)
    assert ig.identify(ig.CausalGraph([("X", "Y")]), "Y", "X").identifiable
