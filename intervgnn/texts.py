"""Texts shown to users by more than one part of the package (the command line and the sweep report).

This module imports nothing from the package, so any layer may use it.
"""

from __future__ import annotations

__all__ = ["CAUTION"]

#: printed after every answer of the command line and at the end of every report
CAUTION = (
    "Caution: an estimate is only as good as the causal diagram and the data behind it. "
    "It does not replace experiments, local rules or licensed professional judgement."
)
