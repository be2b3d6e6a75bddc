"""The interventional VGAE, its ELBO, training and query answering."""

from .answer import monte_carlo, table_rows_needed, tabulate_cpts
from .training import TrainResult, train_vgae
from .vgae import InterventionalVGAE, elbo_terms

__all__ = [
    "InterventionalVGAE",
    "elbo_terms",
    "train_vgae",
    "TrainResult",
    "tabulate_cpts",
    "monte_carlo",
    "table_rows_needed",
]
