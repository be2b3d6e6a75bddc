"""Ancestral sampling against exact marginals (common practice, no source:
a sample frequency lies within 4 binomial standard deviations of its
probability except with chance < 1e-4 per check)."""

from __future__ import annotations

import numpy as np
import pytest

from .conftest import SHIPPED, our_network

N = 20_000


def _check_marginals(table, net, do=None):
    for j, v in enumerate(net.variables):
        if do and v in do:
            continue
        exact = net.query(v, do=do).probs
        freq = np.bincount(table.codes[:, j], minlength=len(exact)) / table.n_rows
        sd = np.sqrt(exact * (1 - exact) / table.n_rows)
        assert np.all(np.abs(freq - exact) <= 4 * sd + 1e-12), (v, freq, exact)


@pytest.mark.parametrize("name", SHIPPED)
def test_observational_marginals_within_4_sd(name):
    net = our_network(name)
    table = net.sample(N, seed=11)
    assert table.n_rows == N and table.is_observational
    _check_marginals(table, net)


@pytest.mark.parametrize("name", ["sachs", "child", "alarm", "greenhouse"])
def test_interventional_marginals_within_4_sd(name):
    net = our_network(name)
    g = net.graph
    x = next(v for v in g.topological_order() if len(g.descendants(v)) >= 2)
    do = {x: net.states[x][-1]}
    table = net.sample(N, do=do, seed=12)
    j = g.index(x)
    assert np.all(table.codes[:, j] == len(net.states[x]) - 1)
    assert table.intervened[:, j].all() and table.intervened.sum() == N
    assert table.regimes() == [(x,)]
    _check_marginals(table, net, do=do)


def test_same_seed_same_rows():
    net = our_network("alarm")
    a, b = net.sample(5000, seed=3), net.sample(5000, seed=3)
    assert a == b
    assert not np.array_equal(a.codes, net.sample(5000, seed=4).codes)


def test_more_than_one_block_of_rows():
    net = our_network("cancer")
    t = net.sample(200_000, seed=0)
    _check_marginals(t, net)


def test_bad_row_count():
    from intervgnn import QueryError

    net = our_network("cancer")
    with pytest.raises(QueryError, match="number of rows must be a non-negative integer, got -1"):
        net.sample(-1)
    assert net.sample(0).n_rows == 0
