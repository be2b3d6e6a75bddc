"""Interventional message passing for PyTorch Geometric."""

from .conv import InterventionalConv
from .functional import drop_parent_edges
from .transforms import Intervene
from .wrapper import Interventional

__all__ = ["InterventionalConv", "Interventional", "drop_parent_edges", "Intervene"]
