"""Relational causal models: one template of mechanisms, grounded on many related instances.

A :class:`Schema` names entity types (with discrete attributes) and
relationship types; a :class:`Template` gives each attribute a mechanism
whose parents are attributes of the same instance and binned counts or
shares of related instances (:class:`Aggregate`); a :class:`Skeleton` lists
the instances and links. :func:`ground` turns a template and a skeleton into
an ordinary :class:`~intervgnn.CausalNetwork` (one variable per instance
attribute, named by :func:`node_name`), which samples, answers do-queries
exactly and writes BIF like any other network.

Examples
--------
>>> schema = Schema({"hive": {"Treated": ["no", "yes"]}, "orchard": {"Yield": ["low", "high"]}},
...                 {"pollinates": ("hive", "orchard")})
>>> template = Template(schema, [
...     Mechanism("hive", "Treated", [0.5, 0.5]),
...     Mechanism("orchard", "Yield", [[0.5, 0.5], [0.8, 0.2], [0.3, 0.7]], aggregates=[
...         Aggregate("pollinates", "Treated", "yes", "share", [0, 0.5, 1], direction="against")]),
... ])
>>> skeleton = Skeleton(schema, {"hive": ["1", "2"], "orchard": ["1"]},
...                     {"pollinates": [("1", "1"), ("2", "1")]})
>>> net = ground(template, skeleton)
>>> net.graph.parents("orchard_1__Yield")
('hive_1__Treated', 'hive_2__Treated')
>>> round(net.query("orchard_1__Yield", do={"hive_1__Treated": "yes"})["high"], 4)
0.45
"""

from __future__ import annotations

from .data import RelationalData
from .benchmarks import (
    RELATIONAL_BENCHMARKS,
    RelationalSpec,
    bipartite_skeleton,
    bipartite_template,
    chain_skeleton,
    chain_template,
    is_relational_spec,
    parse_relational_spec,
    peer_skeleton,
    peer_template,
    relational_benchmark,
)
from .estimate import (
    MAX_POPULATION_INSTANCES,
    Policy,
    PopulationQuery,
    RelationalPluginEstimator,
    SpilloverEffects,
    SpilloverQuery,
    UnitQuery,
    UnlinkedPluginEstimator,
    exact_answer,
)
from .files import format_template, parse_template, read_template, write_template
from .neural import RelationalNeuralEstimator
from .sampling import sample_data
from .grounding import MAX_GROUND_VARIABLES, ground
from .model import Aggregate, Mechanism, Relationship, Schema, Template, node_name, split_node_name
from .skeleton import MAX_INSTANCES, MAX_LINKS, Skeleton, read_skeleton

__all__ = [
    "Schema",
    "Relationship",
    "Aggregate",
    "Mechanism",
    "Template",
    "Skeleton",
    "ground",
    "node_name",
    "split_node_name",
    "read_skeleton",
    "RelationalData",
    "read_template",
    "parse_template",
    "format_template",
    "write_template",
    "MAX_GROUND_VARIABLES",
    "MAX_INSTANCES",
    "MAX_LINKS",
    "bipartite_template",
    "peer_template",
    "chain_template",
    "bipartite_skeleton",
    "peer_skeleton",
    "chain_skeleton",
    "relational_benchmark",
    "RelationalSpec",
    "parse_relational_spec",
    "is_relational_spec",
    "RELATIONAL_BENCHMARKS",
    "UnitQuery",
    "Policy",
    "PopulationQuery",
    "SpilloverQuery",
    "SpilloverEffects",
    "exact_answer",
    "RelationalPluginEstimator",
    "UnlinkedPluginEstimator",
    "RelationalNeuralEstimator",
    "sample_data",
    "MAX_POPULATION_INSTANCES",
]
