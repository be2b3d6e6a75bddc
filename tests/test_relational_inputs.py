"""Relational models: inputs found wrong in review give the package's own errors, and copies stay consistent."""

from __future__ import annotations

import dataclasses

import pytest

from intervgnn import DataError, GraphError
from intervgnn.relational import Aggregate, Mechanism, RelationalData, Schema, Skeleton, Template, ground
from intervgnn.relational.files import parse_template

from .test_relational_ground import _co_op


def test_schemas_whose_attributes_come_in_another_order_differ():
    # data and ground tables lay out their columns in the schema's attribute order (common practice, no source)
    a = Schema({"h": {"X": ["a", "b"], "Y": ["c", "d"]}})
    b = Schema({"h": {"Y": ["c", "d"], "X": ["a", "b"]}})
    assert a != b and a == Schema({"h": {"X": ["a", "b"], "Y": ["c", "d"]}})
    template = Template(a, [Mechanism("h", "X", [0.9, 0.1]), Mechanism("h", "Y", [0.2, 0.8])])
    skeleton = Skeleton(b, {"h": ["1", "2"]}, {})
    rows = ground(template, Skeleton(a, {"h": ["1", "2"]}, {})).sample(50, seed=0)
    with pytest.raises(DataError):
        RelationalData.from_ground_rows(template, skeleton, rows)


def test_a_copied_aggregate_bins_with_its_own_edges():
    a = Aggregate("r", "X", "b", "count", [0, 1, 3])
    first = a.bin_of_counts(4).tolist()
    b = dataclasses.replace(a, edges=[0, 2, 4])
    assert b.bin_of_counts(4).tolist() == Aggregate("r", "X", "b", "count", [0, 2, 4]).bin_of_counts(4).tolist()
    assert a.bin_of_counts(4).tolist() == first


def test_bad_constructor_arguments_are_clear_errors():
    schema, template, skeleton = _co_op()
    with pytest.raises(GraphError, match=r"^mechanisms must be a list of Mechanism objects, got NoneType$"):
        Template(schema, None)
    with pytest.raises(GraphError, match=r"^relationships must map each name to its \(source, target\) entity types, got list$"):
        Schema({"a": {"X": ["p", "q"]}}, relationships=[("r", ("a", "a"))])
    data = RelationalData.from_ground_rows(template, skeleton, ground(template, skeleton).sample(3, seed=0))
    with pytest.raises(DataError, match=r"^unknown attribute \['x'\]\.'y' of the schema$"):
        data.labels(["x"], "y")
    with pytest.raises(DataError, match=r"^draw must be a whole number from 0 to 2, got -1$"):
        data.draw(-1)


def test_a_template_file_with_text_for_an_edge_is_a_template_error():
    doc = {
        "relational": 1,
        "entities": {"hive": {"Treated": ["no", "yes"]}, "orchard": {"Yield": ["low", "high"]}},
        "relationships": {"pollinates": {"source": "hive", "target": "orchard"}},
        "mechanisms": {
            "hive": {"Treated": {"cpt": [["0.5", "0.5"]]}},
            "orchard": {"Yield": {
                "aggregates": [{"relationship": "pollinates", "direction": "against", "attribute": "Treated",
                                "state": "yes", "kind": "share", "edges": ["0", "half", "1"]}],
                "cpt": [["0.5", "0.5"]] * 3,
            }},
        },
    }
    with pytest.raises(GraphError, match=r"edges: 'half' is not a number$"):
        parse_template(doc, "t.yaml")
