"""The interventional VGAE, its ELBO (row-wise and on sufficient statistics), training and query answering."""

from .answer import conditionals, monte_carlo, table_rows_needed, tabulate_cpts
from .shrinkage import Mixture, mixture_rows, mixture_weights
from .stats import FamilyCells, count_cells
from .training import TrainResult, train_vgae
from .vgae import FamilyBatch, InterventionalVGAE, elbo_terms, family_elbo

__all__ = [
    "InterventionalVGAE",
    "elbo_terms",
    "family_elbo",
    "FamilyBatch",
    "FamilyCells",
    "count_cells",
    "train_vgae",
    "TrainResult",
    "conditionals",
    "tabulate_cpts",
    "monte_carlo",
    "table_rows_needed",
    "Mixture",
    "mixture_weights",
    "mixture_rows",
]
