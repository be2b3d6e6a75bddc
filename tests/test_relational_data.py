"""Relational data: from ground samples, to and from CSV folders, SQLite and HeteroData."""

from __future__ import annotations

import sqlite3

import numpy as np
import pytest
import torch

from intervgnn import DataError, Table
from intervgnn.relational import RelationalData, Skeleton, ground
from .test_relational_ground import _co_op


def _sampled(n=5, seed=3):
    schema, template, skeleton = _co_op()
    table = ground(template, skeleton).sample(n, seed=seed)
    return schema, template, skeleton, table


def _one(seed=3):
    schema, template, skeleton, table = _sampled(1, seed)
    return schema, RelationalData.from_ground_rows(template, skeleton, table)


def test_from_ground_rows_and_back():
    schema, template, skeleton, table = _sampled()
    data = RelationalData.from_ground_rows(template, skeleton, table)
    assert data.num_draws == 5 and data.values["hive"].shape == (5, 3, 2) and data.values["orchard"].shape == (5, 4, 2)
    # draw 2, orchard "3", attribute Yield (index 1) is the column orchard_3__Yield of row 2
    assert data.values["orchard"][2, 2, 1] == table.column("orchard_3__Yield")[2]
    assert data.to_ground_table() == table
    assert RelationalData.from_ground_rows(schema, skeleton, table) == data
    assert data.draw(2).to_ground_table() == table.take([2])
    assert data.labels("hive", "Treated", draw=1) == [
        ["no", "yes"][c] for c in table.codes[1, [table.variables.index(f"hive_{i}__Treated") for i in "123"]]
    ]


def test_from_ground_rows_errors():
    schema, template, skeleton, table = _sampled()
    with pytest.raises(DataError, match=r"the table has no column 'hive_1__Strength'"):
        RelationalData.from_ground_rows(template, skeleton, table.select([v for v in table.variables if v != "hive_1__Strength"]))
    small = Skeleton(schema, {"hive": ["1", "2"], "orchard": ["1", "2", "3", "4"]}, {"pollinates": [("1", "1")]})
    with pytest.raises(DataError, match=r"column 'hive_3__Treated' is not a ground variable of this skeleton"):
        RelationalData.from_ground_rows(template, small, table)
    done = ground(template, skeleton).sample(3, do={"hive_2__Treated": "yes"}, seed=1)
    with pytest.raises(DataError, match=r"row 1, column 'hive_2__Treated': set by an intervention"):
        RelationalData.from_ground_rows(template, skeleton, done)
    other = Table(table.codes, table.variables, {**table.states, "hive_1__Treated": ("no", "maybe")})
    with pytest.raises(DataError, match=r"row \d+, column 'hive_1__Treated': unknown state 'maybe'"):
        RelationalData.from_ground_rows(template, skeleton, other.take(np.flatnonzero(other.column("hive_1__Treated") == 1)))


def test_constructor_validation():
    schema, template, skeleton = _co_op()
    good = {"hive": np.zeros((3, 2), dtype=int), "orchard": np.zeros((4, 2), dtype=int)}
    assert RelationalData(skeleton, good).num_draws == 1
    with pytest.raises(DataError, match=r"values of 'orchard' have shape \(4, 3\), expected \[4, 2\]"):
        RelationalData(skeleton, {**good, "orchard": np.zeros((4, 3), dtype=int)})
    bad = np.zeros((4, 2), dtype=int)
    bad[2, 1] = 3
    with pytest.raises(DataError, match=r"values of 'orchard', draw 1, instance '3', attribute 'Yield': code 3 is not a state; "
                                        r"'orchard.Yield' has 3 states \(low, mid, high\)"):
        RelationalData(skeleton, {**good, "orchard": bad})
    with pytest.raises(DataError, match=r"values of 'hive' must be integer codes into the states, got dtype float64"):
        RelationalData(skeleton, {**good, "hive": np.zeros((3, 2))})
    with pytest.raises(DataError, match=r"no values are given for entity type 'orchard'"):
        RelationalData(skeleton, {"hive": good["hive"]})
    with pytest.raises(DataError, match=r"values given for unknown entity type 'hives'.*did you mean 'hive'"):
        RelationalData(skeleton, {**good, "hives": good["hive"]})
    with pytest.raises(DataError, match=r"values of 'orchard' have 2 draws, those of the other types 1"):
        RelationalData(skeleton, {**good, "orchard": np.zeros((2, 4, 2), dtype=int)})
    with pytest.raises(DataError, match=r"a CSV folder holds one draw and this data has 5; pick one with \.draw\(k\)"):
        RelationalData.from_ground_rows(template, *_sampled()[2:]).to_csv_folder("unused")


def test_csv_folder_round_trip(tmp_path):
    schema, data = _one()
    data.to_csv_folder(tmp_path / "world")
    assert (tmp_path / "world" / "pollinates.csv").read_text().splitlines()[:2] == ["source,target", "1,1"]
    again = RelationalData.from_csv_folder(tmp_path / "world", schema)
    assert again == data and again.skeleton.links == data.skeleton.links


def _folder(tmp_path, hive="id,Treated,Strength\n1,no,weak\n2,yes,strong\n3,no,weak\n",
            orchard="id,Soil,Yield\n1,poor,low\n2,rich,high\n3,rich,mid\n4,poor,low\n",
            links="source,target\n1,1\n2,1\n"):
    folder = tmp_path / "f"
    folder.mkdir(exist_ok=True)
    for name, text in (("hive", hive), ("orchard", orchard), ("pollinates", links)):
        if text is None:
            (folder / f"{name}.csv").unlink(missing_ok=True)
        else:
            (folder / f"{name}.csv").write_text(text)
    return folder


def test_csv_folder_errors(tmp_path):
    schema, _, _ = _co_op()
    data = RelationalData.from_csv_folder(_folder(tmp_path), schema)
    assert data.labels("orchard", "Yield") == ["low", "high", "mid", "low"]
    with pytest.raises(DataError, match=r"orchard\.csv, line 4, column 'Yield': 'medium' is not a state of 'orchard\.Yield'; "
                                        r"states are: low, mid, high"):
        RelationalData.from_csv_folder(_folder(tmp_path, orchard="id,Soil,Yield\n1,poor,low\n2,rich,high\n3,rich,medium\n"), schema)
    with pytest.raises(DataError, match=r"hive\.csv, line 1: expected one column 'Strength'"):
        RelationalData.from_csv_folder(_folder(tmp_path, hive="id,Treated\n1,no\n2,yes\n3,no\n"), schema)
    with pytest.raises(DataError, match=r"pollinates\.csv, line 3, column 'target': '7' is not an instance of 'orchard'"):
        RelationalData.from_csv_folder(_folder(tmp_path, links="source,target\n1,1\n2,7\n"), schema)
    with pytest.raises(DataError, match=r"orchard\.csv: entity type 'orchard' has no instances"):
        RelationalData.from_csv_folder(_folder(tmp_path, orchard="id,Soil,Yield\n"), schema)
    with pytest.raises(DataError, match=r"pollinates\.csv: no such file"):
        RelationalData.from_csv_folder(_folder(tmp_path, links=None), schema)


def test_sqlite_round_trip(tmp_path):
    schema, data = _one(seed=5)
    path = tmp_path / "world.sqlite"
    data.to_sqlite(path)
    data.to_sqlite(path)  # replaces the file
    again = RelationalData.from_sqlite(path, schema)
    assert again == data


def _db(tmp_path, schema, edit):
    path = tmp_path / "w.sqlite"
    _one()[1].to_sqlite(path)
    con = sqlite3.connect(path)
    with con:
        con.execute(edit)
    con.close()
    return path


def test_sqlite_errors(tmp_path):
    schema, _, _ = _co_op()
    cases = [
        ("UPDATE orchard SET Yield = 'medium' WHERE id = '2'",
         r"w\.sqlite, table 'orchard', row 2, column 'Yield': 'medium' is not a state of 'orchard\.Yield'"),
        ("INSERT INTO pollinates VALUES ('1', '9')",
         r"w\.sqlite, table 'pollinates', row 6, column 'target': '9' is not an instance of 'orchard'"),
        ("DROP TABLE pollinates", r"w\.sqlite: no table 'pollinates'; expected tables: hive, orchard, pollinates"),
        ("DELETE FROM hive", r"w\.sqlite, table 'hive': entity type 'hive' has no instances"),
        ("ALTER TABLE hive DROP COLUMN Strength", r"w\.sqlite, table 'hive': no column 'Strength'"),
        ("UPDATE hive SET Treated = NULL WHERE id = '3'", r"table 'hive', row 3, column 'Treated': the value is empty \(NULL\)"),
        ("UPDATE hive SET id = '1' WHERE id = '2'", r"table 'hive', row 2, column 'id': instance id '1' is repeated \(first on row 1\)"),
        ("INSERT INTO pollinates VALUES ('1', '1')", r"table 'pollinates', row 6: the link 1 -> 1 is repeated \(first on row 1\)"),
    ]
    for edit, message in cases:
        with pytest.raises(DataError, match=message):
            RelationalData.from_sqlite(_db(tmp_path, schema, edit), schema)
    (tmp_path / "text.sqlite").write_text("not a database\n" * 100)
    with pytest.raises(DataError, match=r"text\.sqlite: cannot read the database"):
        RelationalData.from_sqlite(tmp_path / "text.sqlite", schema)
    with pytest.raises(DataError, match=r"missing\.sqlite: no such file"):
        RelationalData.from_sqlite(tmp_path / "missing.sqlite", schema)


def test_hetero_data_round_trip():
    schema, data = _one(seed=11)
    hetero = data.to_hetero_data()
    assert hetero["hive"].x.dtype == torch.long and tuple(hetero["hive"].x.shape) == (3, 2)
    assert hetero["orchard"].node_id == ["1", "2", "3", "4"] and hetero["orchard"].attributes == ["Soil", "Yield"]
    ei = hetero["hive", "pollinates", "orchard"].edge_index
    assert ei.tolist() == [[0, 1, 0, 2, 2], [0, 0, 1, 1, 2]]
    assert RelationalData.from_hetero_data(schema, hetero) == data
    np.testing.assert_array_equal(hetero["orchard"].x.numpy(), data.values["orchard"][0])


def test_hetero_data_errors():
    schema, data = _one()
    h = data.to_hetero_data()
    h["hive", "pollinates", "orchard"].edge_index = torch.tensor([[0, 5], [0, 1]])
    with pytest.raises(DataError, match=r"edge type \('hive', 'pollinates', 'orchard'\), edge 1, row 0 \(source\): index 5 is not a node of 'hive'"):
        RelationalData.from_hetero_data(schema, h)
    h = data.to_hetero_data()
    h["hive"].x = h["hive"].x.float()
    with pytest.raises(DataError, match=r"node type 'hive': 'x' must be an integer tensor of shape \[instances, 2\]"):
        RelationalData.from_hetero_data(schema, h)
    h = data.to_hetero_data()
    h["orchard"].x = h["orchard"].x[:, :1]
    with pytest.raises(DataError, match=r"values of 'orchard' have shape \(4, 1\), expected \[4, 2\]"):
        RelationalData.from_hetero_data(schema, h)
    h = data.to_hetero_data()
    h["orchard"].x[1, 1] = 7
    with pytest.raises(DataError, match=r"values of 'orchard', draw 1, instance '2', attribute 'Yield': code 7 is not a state"):
        RelationalData.from_hetero_data(schema, h)
    h = data.to_hetero_data()
    del h["hive", "pollinates", "orchard"]
    with pytest.raises(DataError, match=r"edge type \('hive', 'pollinates', 'orchard'\) has no 'edge_index'"):
        RelationalData.from_hetero_data(schema, h)
    h = data.to_hetero_data()
    h["farm"].x = torch.zeros(1, 1, dtype=torch.long)
    with pytest.raises(DataError, match=r"node type 'farm' is not an entity type of the schema"):
        RelationalData.from_hetero_data(schema, h)
    with pytest.raises(DataError, match=r"expected a torch_geometric HeteroData, got dict"):
        RelationalData.from_hetero_data(schema, {})
