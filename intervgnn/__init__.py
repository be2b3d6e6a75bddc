"""intervgnn: interventional graph neural networks for causal inference on discrete data."""

from __future__ import annotations

from .bn import (
    CausalNetwork,
    format_bif,
    list_networks,
    load_network,
    network_info,
    parse_bif,
    read_bif,
    write_bif,
)
from .distribution import Distribution
from .errors import (
    BIFParseError,
    DataError,
    GraphError,
    IntervgnnError,
    LayerInputError,
    NetworkError,
    QueryError,
    UnknownNetworkError,
    UnknownVariableError,
    ZeroEvidenceError,
)
from .graph import CausalGraph
from .table import Table

__version__ = "0.1.0"

__all__ = [
    "__version__",
    "CausalGraph",
    "CausalNetwork",
    "Distribution",
    "Table",
    "load_network",
    "list_networks",
    "network_info",
    "read_bif",
    "parse_bif",
    "write_bif",
    "format_bif",
    "IntervgnnError",
    "GraphError",
    "UnknownVariableError",
    "NetworkError",
    "UnknownNetworkError",
    "BIFParseError",
    "DataError",
    "QueryError",
    "ZeroEvidenceError",
    "LayerInputError",
]
