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
    ExactTooLarge,
    QueryError,
    UnknownNetworkError,
    UnknownVariableError,
    ZeroEvidenceError,
    UnsupportedQuery,
    NotFittedError,
    CheckpointError,
    ConfigError,
    NotIdentified,
    WriteError,
    RunError,
)
from .graph import CausalGraph
from .identify import identify  # the function (it shadows the subpackage's name on purpose)
from .table import Table
from .userdata import GraphSpec, from_dataframe, load_graph, read_csv

__version__ = "0.3.4"

__all__ = [
    "__version__",
    "CausalGraph",
    "CausalNetwork",
    "Distribution",
    "Table",
    "GraphSpec",
    "from_dataframe",
    "load_graph",
    "read_csv",
    "PluginEstimator",
    "NeuralEstimator",
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
    "ExactTooLarge",
    "UnknownNetworkError",
    "BIFParseError",
    "DataError",
    "QueryError",
    "ZeroEvidenceError",
    "LayerInputError",
    "UnsupportedQuery",
    "NotFittedError",
    "CheckpointError",
    "ConfigError",
    "NotIdentified",
    "WriteError",
    "RunError",
    "identify",
]

# The estimators pull in torch and PyG; load them on first use so that the
# exact engine and the command line start quickly.
_LAZY = {
    "PluginEstimator": "intervgnn.estimators",
    "NeuralEstimator": "intervgnn.estimators",
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'intervgnn' has no attribute '{name}'")
