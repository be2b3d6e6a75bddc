"""Discrete causal Bayesian networks: the ground truth of every evaluation."""

from __future__ import annotations

import os

from ..errors import UnknownNetworkError
from .bif import format_bif, parse_bif, read_bif, write_bif
from .catalog import CATALOG, NetworkInfo, catalog_path
from .exact import ExactEngine
from .network import CausalNetwork
from .sampling import AncestralSampler
from .synthetic import RandomSpec, is_random_spec, parse_random_spec, random_network

__all__ = [
    "CausalNetwork",
    "ExactEngine",
    "AncestralSampler",
    "NetworkInfo",
    "read_bif",
    "parse_bif",
    "write_bif",
    "format_bif",
    "load_network",
    "list_networks",
    "network_info",
    "random_network",
    "RandomSpec",
    "parse_random_spec",
]


def list_networks() -> list[str]:
    """Names of the shipped networks, smallest first.

    Examples
    --------
    >>> list_networks()[:3]
    ['cancer', 'earthquake', 'survey']
    """
    return list(CATALOG)


def network_info(name: str) -> NetworkInfo:
    """Catalog entry (domain, description, original publication) of a shipped network."""
    catalog_path(name)
    return CATALOG[name]


def load_network(name: str | os.PathLike) -> CausalNetwork:
    """Load a shipped network by name, a random network by spec, or any BIF file by path.

    Parameters
    ----------
    name : str or path
        A name from :func:`list_networks`, a random-network spec such as
        ``"random:nodes=30,seed=4"`` (see :func:`random_network`), or the
        path of a ``.bif`` / ``.bif.gz`` file.

    Raises
    ------
    UnknownNetworkError
        If ``name`` is neither a shipped network, nor a valid random spec,
        nor an existing file.
    BIFParseError
        If the file is not valid BIF.

    Examples
    --------
    >>> load_network("random:nodes=12,seed=3").name
    'random:nodes=12,seed=3'
    """
    key = os.fspath(name)
    if is_random_spec(key):
        return random_network(key)
    if key in CATALOG:
        net = read_bif(catalog_path(key))
        net.name = key
        return net
    if os.path.exists(key):
        return read_bif(key)
    raise UnknownNetworkError(
        f"unknown network '{key}': not a shipped network ({', '.join(sorted(CATALOG))}), not a random-network "
        "spec (random:nodes=N,seed=S) and no such file"
    )
