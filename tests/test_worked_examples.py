"""Published worked examples, reproduced with their printed numbers.

Both sources are quoted from memory of the books; the numbers are the ones
printed there.
"""

from __future__ import annotations

import pytest

from intervgnn import CausalGraph, CausalNetwork

from .conftest import our_network


def _aima_burglary():
    # Russell & Norvig, Artificial Intelligence: A Modern Approach, 3rd ed.
    # (2010), Fig. 14.2: P(b) = 0.001, P(e) = 0.002; P(a | b, e) = 0.95,
    # P(a | b, not e) = 0.94, P(a | not b, e) = 0.29, P(a | not b, not e) =
    # 0.001; P(j | a) = 0.90, P(j | not a) = 0.05; P(m | a) = 0.70,
    # P(m | not a) = 0.01. The shipped 'earthquake' network has this graph and
    # these CPTs except for the priors (0.01 and 0.02), so it is reused with
    # the book's priors put back.
    shipped = our_network("earthquake")
    cpts = shipped.cpts
    cpts["Burglary"] = [0.001, 0.999]
    cpts["Earthquake"] = [0.002, 0.998]
    return CausalNetwork(shipped.graph, shipped.states, cpts)


def test_burglary_alarm_posterior():
    # Same book, Sec. 14.4.1: P(Burglary | JohnCalls=true, MaryCalls=true)
    # = <0.284, 0.716>.
    net = _aima_burglary()
    post = net.query("Burglary", given={"JohnCalls": "True", "MaryCalls": "True"})
    assert post["True"] == pytest.approx(0.284, abs=5e-4)
    assert post["False"] == pytest.approx(0.716, abs=5e-4)


def test_burglary_alarm_joint_entry():
    # Same book, Sec. 14.2.1: P(j, m, a, not b, not e)
    # = 0.90 x 0.70 x 0.001 x 0.999 x 0.998 = 0.000628.
    net = _aima_burglary()
    joint = net.query(["JohnCalls", "MaryCalls", "Alarm", "Burglary", "Earthquake"])
    p = joint["True", "True", "True", "False", "False"]
    assert p == pytest.approx(0.90 * 0.70 * 0.001 * 0.999 * 0.998, rel=1e-12)
    assert round(p, 6) == 0.000628


def _kidney_network(small, p_a_small, p_a_large, rec):
    g = CausalGraph([("Size", "Treatment"), ("Size", "Recovery"), ("Treatment", "Recovery")])
    states = {"Size": ["small", "large"], "Treatment": ["A", "B"], "Recovery": ["yes", "no"]}
    cpts = {
        "Size": [small, 1 - small],
        "Treatment": [[p_a_small, 1 - p_a_small], [p_a_large, 1 - p_a_large]],
        # axes: Size, Treatment, Recovery
        "Recovery": [[[r, 1 - r] for r in rec[0]], [[r, 1 - r] for r in rec[1]]],
    }
    return CausalNetwork(g, states, cpts)


def test_kidney_stones_adjustment_primer_numbers():
    # Pearl, Glymour & Jewell, Causal Inference in Statistics: A Primer (2016),
    # Table 1.1 and Sec. 3.2 (adjustment formula): with recovery rates 93% /
    # 73% (treatment A, small / large stones), 87% / 69% (B), and 51% small
    # stones, P(recovery | do(A)) = 0.832 and P(recovery | do(B)) = 0.7818.
    net = _kidney_network(0.51, 87 / 357, 263 / 343, [[0.93, 0.87], [0.73, 0.69]])
    assert net.query("Recovery", do={"Treatment": "A"})["yes"] == pytest.approx(0.832, abs=1e-12)
    assert net.query("Recovery", do={"Treatment": "B"})["yes"] == pytest.approx(0.7818, abs=1e-12)


def test_kidney_stones_counts_simpson_reversal():
    # Same table, from the counts: A 81/87 small, 192/263 large, 273/350 overall;
    # B 234/270 small, 55/80 large, 289/350 overall. Naively B looks better
    # (83% vs 78%); under intervention A is better.
    net = _kidney_network(357 / 700, 87 / 357, 263 / 343, [[81 / 87, 234 / 270], [192 / 263, 55 / 80]])
    assert net.query("Recovery", given={"Treatment": "A"})["yes"] == pytest.approx(273 / 350, abs=1e-12)
    assert net.query("Recovery", given={"Treatment": "B"})["yes"] == pytest.approx(289 / 350, abs=1e-12)
    do_a = (81 / 87) * (357 / 700) + (192 / 263) * (343 / 700)
    do_b = (234 / 270) * (357 / 700) + (55 / 80) * (343 / 700)
    each = net.query_each("Recovery", "Treatment")
    assert each["A"]["yes"] == pytest.approx(do_a, abs=1e-12)
    assert each["B"]["yes"] == pytest.approx(do_b, abs=1e-12)
    assert each["A"]["yes"] > each["B"]["yes"]
