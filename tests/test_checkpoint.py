"""Saved neural models: every field of model.json and every byte of weights.pt is checked on load."""

from __future__ import annotations

import copy
import hashlib
import json
import os
import re
import shutil

import numpy as np
import pytest

import intervgnn as ig
from intervgnn.cli import main
from intervgnn.errors import CheckpointError
from intervgnn.estimators import NeuralEstimator
from intervgnn.estimators import neural

QUERIES = [
    dict(target="Cancer", do={"Smoker": "True"}),
    dict(target="Cancer", do={"Smoker": "False"}),
    dict(target=["Xray", "Dyspnoea"], do={"Pollution": "high"}, given={"Smoker": "True"}),
]


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    """A tiny fitted model, saved once; tests work on copies."""
    net = ig.load_network("cancer")
    est = NeuralEstimator(seed=0, steps=2).fit(net.sample(300, seed=0), net.graph)
    path = tmp_path_factory.mktemp("saved") / "model"
    est.save(path)
    return net, est, path


@pytest.fixture
def model(saved, tmp_path):
    """A fresh copy of the saved model folder."""
    path = tmp_path / "model"
    shutil.copytree(saved[2], path)
    return path


def read_meta(path):
    return json.loads((path / "model.json").read_text())


def write_meta(path, meta):
    # rewritten in place and cut after writing: a truncating open (or a rename over the file) can wait for the
    # disk on some file systems, which the many rewrites below would feel
    with open(path / "model.json", "r+", encoding="utf-8") as fh:
        fh.write(json.dumps(meta, indent=2))
        fh.truncate()


def rehash(meta):
    """The description hash as documented in NeuralEstimator.save: SHA-256 of canonical JSON of the other fields."""
    canonical = json.dumps({k: v for k, v in meta.items() if k != "sha256"}, sort_keys=True, separators=(",", ":"))
    meta["sha256"] = hashlib.sha256(canonical.encode("ascii")).hexdigest()
    return meta


def tamper(path, change, *, resign=False):
    """Apply ``change`` to the parsed model.json (in place) and write it back, optionally with a matching hash."""
    meta = read_meta(path)
    change(meta)
    write_meta(path, rehash(meta) if resign else meta)


# ------------------------------------------------------------------ round trip
def test_round_trip_gives_the_same_answers(saved, tmp_path):
    net, est, _ = saved
    path = tmp_path / "again"
    est.save(path)
    meta = read_meta(path)
    assert meta["format"] == neural.CHECKPOINT_FORMAT == "intervgnn-neural-3"
    assert meta["sha256"] == rehash(copy.deepcopy(meta))["sha256"]
    assert meta["weights_sha256"] == hashlib.sha256((path / "weights.pt").read_bytes()).hexdigest()
    back = NeuralEstimator.load(path, graph=net.graph, table=net.sample(5, seed=1))
    assert back.get_params() == {**est.get_params(), "progress": False}
    for q in QUERIES:
        np.testing.assert_allclose(back.query(**q).probs, est.query(**q).probs, atol=1e-12)


def test_round_trip_with_a_hidden_common_cause(tmp_path):
    graph = ig.CausalGraph([("X", "Y"), ("Y", "Z")], bidirected=[("X", "Y")])
    rng = np.random.default_rng(0)
    table = ig.Table(rng.integers(0, 2, size=(200, 3)), ["X", "Y", "Z"],
                     {"X": ("a", "b"), "Y": ("c", "d"), "Z": ("e", "f")})
    est = NeuralEstimator(seed=0, steps=2, latent_steps=2, latent_restarts=1, unidentified="answer").fit(table, graph)
    est.save(tmp_path / "m")
    assert read_meta(tmp_path / "m")["models"] == ["fold0", "fold1", "all"]
    back = NeuralEstimator.load(tmp_path / "m", graph=graph)
    q = dict(target="Z", do={"X": "a"})
    np.testing.assert_allclose(back.query(**q).probs, est.query(**q).probs, atol=1e-12)
    tamper(tmp_path / "m", lambda m: m.__setitem__("models", ["fold0", "fold1"]), resign=True)
    with pytest.raises(CheckpointError, match=r"models must be the 3 models the graph and settings call for, got \["):
        NeuralEstimator.load(tmp_path / "m")


def test_whitespace_and_key_order_of_model_json_do_not_matter(model, saved):
    meta = read_meta(model)
    (model / "model.json").write_text(json.dumps(dict(reversed(list(meta.items())))))
    back = NeuralEstimator.load(model)
    np.testing.assert_allclose(back.query(**QUERIES[0]).probs, saved[1].query(**QUERIES[0]).probs, atol=1e-12)


def test_numpy_settings_are_saved_as_plain_numbers(saved, tmp_path):
    net = saved[0]
    est = NeuralEstimator(seed=np.int64(0), steps=np.int64(2)).fit(net.sample(300, seed=0), net.graph)
    est.save(tmp_path / "m")
    assert read_meta(tmp_path / "m")["settings"]["seed"] == 0
    back = NeuralEstimator.load(tmp_path / "m")
    np.testing.assert_allclose(back.query(**QUERIES[0]).probs, est.query(**QUERIES[0]).probs, atol=1e-12)


def test_a_model_that_could_not_be_loaded_is_not_saved(tmp_path):
    graph = ig.CausalGraph([("A", "B")])
    table = ig.Table(np.array([[0, 1], [1, 0], [1, 1]]), ["A", "B"], {"A": ("", "on"), "B": ("x", "y")})
    est = NeuralEstimator(seed=0, steps=2).fit(table, graph)
    with pytest.raises(CheckpointError, match=r"states of 'A' must be non-empty strings, got ''"):
        est.save(tmp_path / "m")
    assert not os.path.exists(tmp_path / "m" / "weights.pt")


# ----------------------------------------------------- every field is covered
def _changes(value):
    """Different values for one JSON value (a leaf or a list)."""
    if isinstance(value, bool):
        return [not value, int(value)]
    if isinstance(value, int):
        return [value + 1, -value - 1, float(value), str(value)]
    if isinstance(value, float):
        return [value * 2 + 1, str(value)]
    if isinstance(value, str):
        return [value + "x", value[:-1] or "y", [value]]
    if value is None:
        return [1, "none"]
    if isinstance(value, list):
        out = [value[:-1] if value else ["x"], value + [copy.deepcopy(value[-1]) if value else "x"], "list"]
        if value[::-1] != value:
            out.append(value[::-1])
        return out
    return []


def _edits(node, path=()):
    """Every (path, new value) that changes one leaf or list of ``node``, or adds or drops one key of a mapping."""
    if isinstance(node, dict):
        yield path + ("+extra",), None
        for key, value in node.items():
            yield path + (key,), "<drop>"
            yield from _edits(value, path + (key,))
        return
    for new in _changes(node):
        yield path, new
    if isinstance(node, list):
        for i, value in enumerate(node):
            yield from _edits(value, path + (i,))


def _apply(meta, path, new):
    meta = copy.deepcopy(meta)
    if path[-1] == "+extra":
        parent = meta
        for key in path[:-1]:
            parent = parent[key]
        parent["extra"] = 1
        return meta
    if not path:
        return new
    parent = meta
    for key in path[:-1]:
        parent = parent[key]
    if new == "<drop>":
        del parent[path[-1]]
    else:
        parent[path[-1]] = new
    return meta


def test_changing_any_field_of_model_json_is_refused(model):
    meta = read_meta(model)
    edits = list(_edits(meta))
    assert len(edits) > 150  # every setting, node, edge, state and hash
    accepted = []
    for path, new in edits:
        changed = _apply(meta, path, new)
        assert json.dumps(changed) != json.dumps(meta)  # (1 == True == 1.0 in Python, not in the file)
        write_meta(model, changed)
        try:
            NeuralEstimator.load(model)
        except CheckpointError:
            continue
        except Exception as exc:  # a foreign exception is a defect too
            accepted.append((path, new, type(exc).__name__))
        else:
            accepted.append((path, new, "loaded"))
    assert accepted == []
    write_meta(model, meta)
    NeuralEstimator.load(model)


@pytest.mark.parametrize("where", [0, 1, 100, "quarter", "half", -20, -1])
def test_one_flipped_byte_of_the_weights_is_refused(model, where):
    w = model / "weights.pt"
    blob = bytearray(w.read_bytes())
    i = {"quarter": len(blob) // 4, "half": len(blob) // 2}.get(where, where)
    blob[i] ^= 0x01
    w.write_bytes(bytes(blob))
    message = r"weights.pt: the weights file was changed after saving \(hash mismatch\)"
    with pytest.raises(CheckpointError, match=message):
        NeuralEstimator.load(model)


# ---------------------------------------------- changes that look like a model
CHANGED = "the model description was changed after saving \\(hash mismatch\\); refusing it"


def _rename_node(meta, old, new):
    meta["nodes"] = [new if v == old else v for v in meta["nodes"]]
    meta["edges"] = [[new if v == old else v for v in e] for e in meta["edges"]]
    meta["states"] = {new if v == old else v: s for v, s in meta["states"].items()}


@pytest.mark.parametrize("change", [
    lambda m: m["states"]["Smoker"].reverse(),  # do(Smoker=True) would be answered with the False value
    lambda m: m["edges"].remove(["Cancer", "Xray"]),
    lambda m: m["edges"].__setitem__(2, ["Xray", "Cancer"]),
    lambda m: m["edges"].append(["Pollution", "Smoker"]),
    lambda m: _rename_node(m, "Xray", "XRay"),
    lambda m: m["states"].__setitem__("Xray", ["pos", "neg"]),
    lambda m: m["settings"].__setitem__("prior_counts", 1.0),
    lambda m: m.__setitem__("rows", 30000),
    lambda m: m.__setitem__("weights_sha256", "0" * 64),
], ids=["swapped states", "edge removed", "edge reversed", "edge added", "node renamed", "states renamed",
        "setting changed", "rows changed", "weights hash replaced"])
def test_a_consistent_looking_change_is_refused_by_the_hash(model, change):
    tamper(model, change)
    with pytest.raises(CheckpointError, match=CHANGED):
        NeuralEstimator.load(model)


def test_states_given_as_a_string_are_refused(model):
    tamper(model, lambda m: m["states"].__setitem__("Smoker", "TF"))
    with pytest.raises(CheckpointError, match=r"states of 'Smoker' must be a non-empty list of names, got 'TF'"):
        NeuralEstimator.load(model)


@pytest.mark.parametrize("change, message", [
    (lambda m: m["states"].__setitem__("Smoker", ["T", "T"]), r"states of 'Smoker' lists 'T' twice"),
    (lambda m: m["states"].__setitem__("Smoker", []), r"states of 'Smoker' must be a non-empty list of names"),
    (lambda m: m["states"].__setitem__("Smoker", ["T", 1]), r"states of 'Smoker' must be non-empty strings, got 1"),
    (lambda m: m["states"].pop("Xray"), r"states must list exactly the graph's variables; 'Xray' has no states"),
    (lambda m: m["nodes"].append("Smoker"), r"nodes lists 'Smoker' twice"),
    (lambda m: m["edges"].append(["Cancer", "Lungs"]), r"the recorded graph is not valid \(edge 'Cancer' -> 'Lungs'"),
    (lambda m: m["edges"].append(["Xray", "Pollution"]), r"the recorded graph is not valid \(the graph has a cycle"),
    (lambda m: m["edges"].append("PC"), r"edges must be pairs of names, got 'PC'"),
    (lambda m: m.__setitem__("nodes", "PSCXD"), r"nodes must be a list of names, got 'PSCXD'"),
    (lambda m: m.__setitem__("models", ["fold0"]), r"models must be the 2 models the graph and settings call for"),
    (lambda m: m.__setitem__("rows", 0), r"rows must be a positive whole number, got 0"),
    (lambda m: m.__setitem__("rows", True), r"rows must be a positive whole number, got True"),
    (lambda m: m.__setitem__("estimator", "plugin"), r"estimator must be 'neural', got 'plugin'"),
    (lambda m: m.pop("states"), r"malformed model description \(no field 'states'\)"),
    (lambda m: m.__setitem__("comment", "hi"), r"malformed model description \(unknown field 'comment'\)"),
    (lambda m: m.__setitem__("settings", [1]), r"settings must be a mapping of setting names to values"),
    (lambda m: m["settings"].pop("dim"), r"the model description lacks the setting 'dim'"),
])
def test_malformed_fields_are_named_even_with_a_matching_hash(model, change, message):
    # resigned: the field checks stand on their own, not only behind the hash
    tamper(model, change, resign=True)
    with pytest.raises(CheckpointError, match=message):
        NeuralEstimator.load(model)


def test_a_malformed_hash_is_named(model):
    tamper(model, lambda m: m.__setitem__("sha256", "abc"))
    with pytest.raises(CheckpointError, match=r"sha256 must be 64 hexadecimal digits, got 'abc'"):
        NeuralEstimator.load(model)


@pytest.mark.parametrize("key, value, message", [
    ("dim", "abc", r"unusable settings \(dim must be a positive integer, got 'abc'\)"),
    ("seed", "abc", r"unusable settings \(seed must be .*'abc'"),
    ("max_table_rows", "x", r"unusable settings \(max_table_rows must be a positive integer, got 'x'\)"),
    ("z_samples", -1, r"unusable settings \(z_samples must be a positive integer, got -1\)"),
    ("mode", "fastest", r"unusable settings \(mode must be one of auto, exact, monte_carlo; got 'fastest'\)"),
    ("dim", 16.0, r"unusable settings \(dim must be a positive integer, got 16.0\)"),
    ("cut", "yes", r"unusable settings \(cut must be true or false, got 'yes'\)"),
    ("progress", 0, r"unusable settings \(progress must be true or false, got 0\)"),
    ("device", 0, r"unusable settings \(device must be a string, got 0\)"),
    ("lr", 1e999, r"unusable settings \(lr must be a number, got inf\)"),
    ("epochs", 3, r"unknown setting 'epochs' in the model description"),
])
def test_bad_settings_are_refused(model, key, value, message):
    tamper(model, lambda m: m["settings"].__setitem__(key, value))
    with pytest.raises(CheckpointError, match=message):
        NeuralEstimator.load(model)


def test_a_long_bad_value_is_quoted_cut_short(model):
    tamper(model, lambda m: m["settings"].__setitem__("mode", "m" * 10_000))
    with pytest.raises(CheckpointError) as info:
        NeuralEstimator.load(model)
    assert len(str(info.value)) < 400 and "..." in str(info.value)


# ---------------------------------------------------------- versions, formats
def test_a_model_from_a_newer_package_is_refused(model):
    tamper(model, lambda m: m.__setitem__("package_version", "99.0.0"))
    message = f"saved by intervgnn 99.0.0, newer than this {re.escape(ig.__version__)}; upgrade intervgnn"
    with pytest.raises(CheckpointError, match=message):
        NeuralEstimator.load(model)


def test_a_newer_bug_fix_release_is_read(model):
    major, minor, patch = (int(x) for x in re.match(r"(\d+)\.(\d+)\.(\d+)", ig.__version__).groups())
    tamper(model, lambda m: m.__setitem__("package_version", f"{major}.{minor}.{patch + 1}"), resign=True)
    NeuralEstimator.load(model)
    tamper(model, lambda m: m.__setitem__("package_version", f"{major}.{minor + 1}.0"), resign=True)
    with pytest.raises(CheckpointError, match="newer than this"):
        NeuralEstimator.load(model)


@pytest.mark.parametrize("version", ["abc", 2, None, "1.2.3" + "x" * 100])
def test_a_malformed_package_version_is_refused(model, version):
    tamper(model, lambda m: m.__setitem__("package_version", version))
    with pytest.raises(CheckpointError, match=r"package_version must be a version such as '\d+\.\d+\.\d+'"):
        NeuralEstimator.load(model)


@pytest.mark.parametrize("fmt, message", [
    ("intervgnn-neural-2", r"saved in format 'intervgnn-neural-2' by an earlier version of intervgnn; this version "
                           r"reads 'intervgnn-neural-3'. Fit the model again."),
    ("intervgnn-neural-4", r"saved in format 'intervgnn-neural-4' by a newer version of intervgnn; .* Upgrade"),
    ("intervgnn-neural-x", r"unknown format 'intervgnn-neural-x'"),
    ("something-else", r"not an intervgnn neural model description"),
    (3, r"not an intervgnn neural model description"),
])
def test_other_formats_are_refused(model, fmt, message):
    tamper(model, lambda m: m.__setitem__("format", fmt))
    with pytest.raises(CheckpointError, match=message):
        NeuralEstimator.load(model)


# --------------------------------------------------------------- damaged files
def test_a_weights_folder_is_refused(model):
    os.remove(model / "weights.pt")
    os.mkdir(model / "weights.pt")
    with pytest.raises(CheckpointError, match=r"weights.pt: cannot read the weights \(Is a directory\)"):
        NeuralEstimator.load(model)


def test_a_deeply_nested_model_json_is_refused(model):
    (model / "model.json").write_text("[" * 100_000 + "]" * 100_000)
    with pytest.raises(CheckpointError, match=r"cannot read the model description \(JSON nested too deeply\)"):
        NeuralEstimator.load(model)


@pytest.mark.parametrize("content, message", [
    (b"\xff\xfe{}", r"cannot read the model description \('utf-8' codec can't decode"),
    (b"{not json", r"cannot read the model description \(Expecting property name"),
    (b"[1, 2]", r"not an intervgnn neural model description"),
])
def test_an_unreadable_model_json_is_refused(model, content, message):
    (model / "model.json").write_bytes(content)
    with pytest.raises(CheckpointError, match=message):
        NeuralEstimator.load(model)


def test_an_oversized_model_json_is_refused(model, monkeypatch):
    monkeypatch.setattr(neural, "MAX_META_BYTES", 100)
    with pytest.raises(CheckpointError, match=r"the model description is larger than 0 MiB; not a saved model"):
        NeuralEstimator.load(model)


def test_a_model_json_folder_is_refused(model):
    os.remove(model / "model.json")
    os.mkdir(model / "model.json")
    with pytest.raises(CheckpointError, match=r"model.json: cannot read the model description \(Is a directory\)"):
        NeuralEstimator.load(model)


# ------------------------------------------------------------------ command line
def _estimate(model, capsys, do="Smoker=True"):
    code = main(["estimate", "--model", str(model), "--target", "Cancer", "--do", do, "--json"])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, out, err


def test_cli_answers_from_an_intact_model(model, saved, capsys):
    code, out, _ = _estimate(model, capsys)
    assert code == 0
    probs = json.loads(out)["estimate"]
    assert probs  # the answer is printed
    code_false, out_false, _ = _estimate(model, capsys, do="Smoker=False")
    assert code_false == 0 and out_false != out


@pytest.mark.parametrize("damage, message", [
    (lambda p: tamper(p, lambda m: m["states"]["Smoker"].reverse()), CHANGED),
    (lambda p: tamper(p, lambda m: m.__setitem__("package_version", "99.0.0")), "saved by intervgnn 99.0.0, newer"),
    (lambda p: tamper(p, lambda m: m["settings"].__setitem__("dim", "abc")), "dim must be a positive integer"),
    (lambda p: (os.remove(p / "weights.pt"), os.mkdir(p / "weights.pt")), "cannot read the weights"),
    (lambda p: (p / "model.json").write_text("[" * 100_000), "JSON nested too deeply"),
], ids=["swapped states", "newer version", "bad setting", "weights folder", "deep nesting"])
def test_cli_refuses_a_damaged_model_with_exit_2(model, capsys, damage, message):
    damage(model)
    code, out, err = _estimate(model, capsys)
    assert code == 2 and out == ""
    assert err.startswith("intervgnn: error: ") and re.search(message, err)
