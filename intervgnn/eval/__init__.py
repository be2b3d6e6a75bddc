"""Evaluation: query sets with exact answers, and distances."""

from .metrics import KL_FLOOR, METRICS, hellinger, jensen_shannon, kl_divergence, total_variation
from .queries import CONFOUNDED_TV, QUERY_KINDS, EvalQuery, make_query_set

__all__ = [
    "total_variation",
    "kl_divergence",
    "jensen_shannon",
    "hellinger",
    "KL_FLOOR",
    "METRICS",
    "EvalQuery",
    "make_query_set",
    "QUERY_KINDS",
    "CONFOUNDED_TV",
]
