"""Seeded query sets: determinism, kinds, exact answers and the confounded flag."""

from __future__ import annotations

import numpy as np
import pytest

from intervgnn import QueryError
from intervgnn.eval import CONFOUNDED_TV, make_query_set, total_variation

from .conftest import our_network


def test_same_seed_same_set():
    net = our_network("child")
    a = make_query_set(net, 20, kinds=("do", "conditional", "joint", "null"), seed=5)
    b = make_query_set(net, 20, kinds=("do", "conditional", "joint", "null"), seed=5)
    assert [q.qid for q in a] == [q.qid for q in b] and a == b
    c = make_query_set(net, 20, kinds=("do", "conditional", "joint", "null"), seed=6)
    assert [(q.target, q.do, q.given) for q in a] != [(q.target, q.do, q.given) for q in c]


def test_kinds_and_answers():
    net = our_network("alarm")
    qs = make_query_set(net, 40, kinds=("do", "conditional", "joint", "null"), seed=1)
    g = net.graph
    kinds = {q.kind for q in qs}
    assert kinds == {"do", "conditional", "joint", "null"}
    for q in qs:
        (y,) = q.target
        xs = list(q.do_dict)
        if q.kind in ("do", "conditional"):
            assert len(xs) == 1 and y in g.descendants(xs[0])
        if q.kind == "conditional":
            assert len(q.given) == 1 and not set(q.given_dict) & {y, xs[0]}
        if q.kind == "joint":
            assert len(xs) == 2 and any(y in g.descendants(x) for x in xs)
        if q.kind == "null":
            assert y not in g.descendants(xs[0])
            # P(Y | do(X)) = P(Y) when Y is not a descendant of X (common practice, no source)
            np.testing.assert_allclose(q.exact.probs, net.query(y).probs, atol=1e-12)
        np.testing.assert_allclose(q.exact.probs, net.query(y, do=q.do_dict, given=q.given_dict).probs)
        gap = total_variation(q.naive, q.exact) if q.naive is not None else 1.0
        assert q.confounded == (gap > CONFOUNDED_TV)


def test_every_treatment_state_is_asked():
    net = our_network("sachs")
    qs = make_query_set(net, 10, seed=0)
    by_pattern = {}
    for q in qs:
        by_pattern.setdefault(q.qid.split(":")[0], set()).add(q.do_dict[next(iter(q.do_dict))])
    for (pattern, states), q in zip(by_pattern.items(), qs):
        assert len(states) == 3  # sachs variables have three states
    assert len(by_pattern) == 10


def test_unknown_kind():
    with pytest.raises(QueryError, match="unknown query kind 'maybe'; kinds are: do, conditional, joint, null"):
        make_query_set(our_network("cancer"), 5, kinds=("maybe",))
