"""Shared fixtures: reference models from pgmpy, loaded once per session."""

from __future__ import annotations

import functools
import os
import warnings

import pytest

import intervgnn as ig
from intervgnn.bn.catalog import catalog_path

BENCHMARK_NETWORKS = ["cancer", "earthquake", "survey", "sachs", "child", "insurance", "alarm"]
SHIPPED = ig.list_networks()
#: random networks checked like the shipped ones (pgmpy reads them from the BIF text we write)
RANDOM = ["random:nodes=14,seed=1", "random:nodes=24,seed=2,states=2-3,deterministic=0.3", "random:nodes=30,seed=3,parents=4"]


@functools.lru_cache(maxsize=None)
def pgmpy_model(name: str):
    """pgmpy's own reading of a shipped BIF file, or of a random network written as BIF (the reference library)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from pgmpy.readwrite import BIFReader

        if name.startswith("random:"):
            model = BIFReader(string=ig.format_bif(ig.load_network(name))).get_model()
        else:
            model = BIFReader(catalog_path(name)).get_model()
    # Some shipped rows sum to one only within 1e-7 (sachs); intervgnn rescales
    # such rows, so the reference gets the same rescaling (pgmpy's own normalize).
    for cpd in model.get_cpds():
        cpd.normalize(inplace=True)
    return model


@functools.lru_cache(maxsize=None)
def our_network(name: str):
    return ig.load_network(name)


@pytest.fixture
def tmp_csv(tmp_path):
    return os.path.join(tmp_path, "rows.csv")
