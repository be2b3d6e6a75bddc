"""Distances against scipy (reference library) and textbook identities."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.distance import jensenshannon
from scipy.stats import entropy

from intervgnn.eval import KL_FLOOR, hellinger, jensen_shannon, kl_divergence, total_variation

rng = np.random.default_rng(0)
PAIRS = [(rng.dirichlet(np.ones(k)), rng.dirichlet(np.ones(k))) for k in (2, 3, 5, 8)]


@pytest.mark.parametrize("p,q", PAIRS)
def test_against_scipy(p, q):
    # scipy.stats.entropy(p, q) is KL(p || q) in nats; jensenshannon returns the square root of JSD
    assert kl_divergence(p, q) == pytest.approx(entropy(p, q), rel=1e-10)
    assert jensen_shannon(p, q) == pytest.approx(jensenshannon(p, q) ** 2, rel=1e-9)


@pytest.mark.parametrize("p,q", PAIRS)
def test_identities(p, q):
    # common practice, no source: TV = 0.5 L1; Hellinger^2 = 1 - Bhattacharyya coefficient;
    # H^2 <= TV <= sqrt(2) H
    assert total_variation(p, q) == pytest.approx(0.5 * np.abs(p - q).sum())
    h = hellinger(p, q)
    assert h**2 == pytest.approx(1 - np.sqrt(p * q).sum())
    assert h**2 - 1e-12 <= total_variation(p, q) <= np.sqrt(2) * h + 1e-12
    assert total_variation(p, p) == 0 and hellinger(p, p) == pytest.approx(0, abs=1e-12)


def test_kl_floor_keeps_it_finite():
    p, q = np.array([0.5, 0.5]), np.array([1.0, 0.0])
    expected = 0.5 * np.log(0.5 / (1 / (1 + KL_FLOOR))) + 0.5 * np.log(0.5 / (KL_FLOOR / (1 + KL_FLOOR)))
    assert kl_divergence(p, q) == pytest.approx(expected)
    assert np.isfinite(kl_divergence(p, q))


def test_size_mismatch():
    with pytest.raises(ValueError, match="different sizes"):
        total_variation([0.5, 0.5], [1.0, 0.0, 0.0])
