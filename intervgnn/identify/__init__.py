"""Identification: can a query be answered from observational data, and by which estimand?"""

from .algorithm import Hedge, d_separated, id_estimand, idc_estimand, simplify
from .api import (
    Identification,
    backdoor_formula,
    find_backdoor_set,
    find_frontdoor_set,
    frontdoor_formula,
    identify,
)
from .expression import Expr, Factor, Prob, Product, Quotient, Sum, evaluate

__all__ = [
    "identify",
    "Identification",
    "Hedge",
    "find_backdoor_set",
    "find_frontdoor_set",
    "backdoor_formula",
    "frontdoor_formula",
    "id_estimand",
    "idc_estimand",
    "d_separated",
    "simplify",
    "Expr",
    "Prob",
    "Product",
    "Sum",
    "Quotient",
    "Factor",
    "evaluate",
]
