"""Estimators of interventional distributions: one contract, several methods."""

from ..errors import UnsupportedQuery
from .backdoor import BackdoorEstimator
from .base import Estimator
from .estimand import EstimandEstimator
from .naive import NaiveEstimator
from .neural import NeuralEstimator
from .plugin import PluginEstimator

__all__ = [
    "Estimator",
    "NaiveEstimator",
    "PluginEstimator",
    "BackdoorEstimator",
    "EstimandEstimator",
    "NeuralEstimator",
    "UnsupportedQuery",
]
