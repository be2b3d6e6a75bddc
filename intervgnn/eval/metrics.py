"""Distances between a distribution and its exact value."""

from __future__ import annotations

import numpy as np

__all__ = ["total_variation", "kl_divergence", "jensen_shannon", "hellinger", "KL_FLOOR", "METRICS"]

#: estimated probabilities are floored at this value before the KL divergence
#: is computed (then renormalised), so that an estimate of 0 for a possible
#: state gives a large but finite divergence
KL_FLOOR = 1e-6


def _arrays(p, q):
    p = np.asarray(getattr(p, "probs", p), dtype=np.float64).ravel()
    q = np.asarray(getattr(q, "probs", q), dtype=np.float64).ravel()
    if p.shape != q.shape:
        raise ValueError(f"distributions have different sizes: {p.size} and {q.size}")
    return p, q


def total_variation(p, q) -> float:
    """Total variation distance ``0.5 * sum |p - q|`` (in [0, 1])."""
    p, q = _arrays(p, q)
    return float(0.5 * np.abs(p - q).sum())


def kl_divergence(exact, estimate, floor: float = KL_FLOOR) -> float:
    """KL(exact || estimate) in nats, with the estimate floored at ``floor`` and renormalised."""
    p, q = _arrays(exact, estimate)
    q = np.maximum(q, floor)
    q = q / q.sum()
    mask = p > 0
    return float(np.sum(p[mask] * (np.log(p[mask]) - np.log(q[mask]))))


def jensen_shannon(p, q) -> float:
    """Jensen-Shannon divergence in nats (in [0, log 2])."""
    p, q = _arrays(p, q)
    m = 0.5 * (p + q)

    def kl(a):
        mask = a > 0
        return float(np.sum(a[mask] * (np.log(a[mask]) - np.log(m[mask]))))

    return 0.5 * kl(p) + 0.5 * kl(q)


def hellinger(p, q) -> float:
    """Hellinger distance ``sqrt(0.5 * sum (sqrt p - sqrt q)^2)`` (in [0, 1])."""
    p, q = _arrays(p, q)
    return float(np.sqrt(0.5 * np.sum((np.sqrt(p) - np.sqrt(q)) ** 2)))


METRICS = {
    "tv": total_variation,
    "kl": kl_divergence,
    "jsd": jensen_shannon,
    "hellinger": hellinger,
}
