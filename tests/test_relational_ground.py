"""Relational causal models: schema, template, skeleton, grounding, files."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import intervgnn as ig
from intervgnn import DataError, GraphError, NetworkError
from intervgnn.relational import (
    Aggregate,
    Mechanism,
    Schema,
    Skeleton,
    Template,
    format_template,
    ground,
    node_name,
    read_skeleton,
    read_template,
    split_node_name,
    write_template,
)

TOL = 1e-9


def _rows(rng, n_rows, k):
    return rng.dirichlet(np.ones(k), size=n_rows)


def _co_op():
    """An invented fruit co-operative: hives pollinate orchards."""
    schema = Schema(
        {
            "hive": {"Treated": ["no", "yes"], "Strength": ["weak", "strong"]},
            "orchard": {"Soil": ["poor", "rich"], "Yield": ["low", "mid", "high"]},
        },
        {"pollinates": ("hive", "orchard")},
    )
    rng = np.random.default_rng(7)
    treated_share = Aggregate("pollinates", "Treated", "yes", "share", [0, 0.5, 1], direction="against")
    strong_share = Aggregate("pollinates", "Strength", "strong", "share", [0, 0.5, 1], direction="against")
    template = Template(
        schema,
        [
            Mechanism("hive", "Treated", [0.6, 0.4]),
            Mechanism("hive", "Strength", [[0.7, 0.3], [0.2, 0.8]], parents=["Treated"]),
            Mechanism("orchard", "Soil", [0.45, 0.55]),
            # axes (Soil, treated share bin, strong share bin, Yield): 2 x 3 x 3 rows of 3
            Mechanism(
                "orchard", "Yield", _rows(rng, 18, 3).reshape(2, 3, 3, 3), parents=["Soil"],
                aggregates=[treated_share, strong_share],
            ),
        ],
    )
    skeleton = Skeleton(
        schema,
        {"hive": ["1", "2", "3"], "orchard": ["1", "2", "3", "4"]},
        {"pollinates": [("1", "1"), ("2", "1"), ("1", "2"), ("3", "2"), ("3", "3")]},
    )
    return schema, template, skeleton


def _ref_array(factor, variable, states):
    """A pgmpy factor's values in our state order."""
    arr = np.asarray(factor.values, dtype=float)
    order = [factor.state_names[variable].index(s) for s in states[variable]]
    arr = arr[order]
    return arr / arr.sum()


def _pgmpy_model(net):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from pgmpy.readwrite import BIFReader

        return BIFReader(string=ig.format_bif(net)).get_model()


def _mutilated(model, do):
    from pgmpy.factors.discrete import TabularCPD

    md = model.do(list(do))
    for x, state in do.items():
        names = model.get_cpds(x).state_names[x]
        md.remove_cpds(*[c for c in md.get_cpds() if c.variable == x])
        md.add_cpds(TabularCPD(x, len(names), [[1.0 if s == state else 0.0] for s in names], state_names={x: names}))
    return md


def test_ground_structure_and_names():
    schema, template, skeleton = _co_op()
    net = ground(template, skeleton)
    assert len(net.variables) == 3 * 2 + 4 * 2
    assert net.graph.parents("orchard_1__Yield") == (
        "orchard_1__Soil", "hive_1__Treated", "hive_2__Treated", "hive_1__Strength", "hive_2__Strength",
    )
    assert net.graph.parents("orchard_4__Yield") == ("orchard_4__Soil",)
    assert net.graph.parents("hive_2__Strength") == ("hive_2__Treated",)
    assert node_name("hive", "4", "Treated") == "hive_4__Treated"
    for v in net.variables:
        assert node_name(*split_node_name(v, schema)) == v
    assert split_node_name("hive_a_b___Strength", schema) == ("hive", "a_b_", "Strength")
    with pytest.raises(GraphError, match="'barn_1__X' is not a ground variable"):
        split_node_name("barn_1__X", schema)


def test_hand_computed_ground_row():
    _, template, skeleton = _co_op()
    net = ground(template, skeleton)
    mech = template.mechanism("orchard", "Yield").cpt
    cpt = net.cpt("orchard_1__Yield")  # axes: Soil, h1 Treated, h2 Treated, h1 Strength, h2 Strength, Yield
    # Computed by hand from the template in this test: orchard 1 is pollinated by hives 1 and 2.
    # Soil=rich, hive 1 treated, hive 2 not: share treated = 1/2 -> bin "[0, 0.5]" (index 1);
    # both strong: share strong = 2/2 -> bin "(0.5, 1]" (index 2).
    np.testing.assert_array_equal(cpt[1, 1, 0, 1, 1], mech[1, 1, 2])
    # Soil=poor, neither treated (share 0 -> index 1), one strong (1/2 -> index 1)
    np.testing.assert_array_equal(cpt[0, 0, 0, 0, 1], mech[0, 1, 1])
    # no linked hive: the "no related" bin (index 0) of both aggregates
    np.testing.assert_array_equal(net.cpt("orchard_4__Yield"), mech[:, 0, 0])


def test_do_queries_match_pgmpy():
    _, template, skeleton = _co_op()
    net = ground(template, skeleton)
    model = _pgmpy_model(net)
    from pgmpy.inference import CausalInference, VariableElimination

    st = net.states
    cases = [
        ("orchard_2__Yield", {"hive_1__Treated": "yes"}, {}),
        ("orchard_1__Yield", {"hive_2__Treated": "no", "hive_1__Strength": "strong"}, {}),
        ("orchard_2__Yield", {"hive_3__Treated": "yes"}, {"orchard_1__Yield": "high"}),
        ("hive_1__Treated", {"orchard_1__Soil": "rich"}, {"orchard_2__Yield": "low"}),
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for y, do, given in cases:
            ours = net.query(y, do=do, given=given).probs
            # reference: pgmpy exact inference (variable elimination on its own mutilated model)
            ref = _ref_array(VariableElimination(_mutilated(model, do)).query([y], evidence=given or None,
                                                                               show_progress=False), y, st)
            np.testing.assert_allclose(ours, ref, atol=TOL, rtol=0, err_msg=f"{y} | do({do}), {given}")
        # reference: pgmpy exact inference (its causal-inference do-query)
        ref = _ref_array(CausalInference(model).query(["orchard_2__Yield"], do={"hive_1__Treated": "yes"},
                                                      show_progress=False), "orchard_2__Yield", st)
    np.testing.assert_allclose(net.query("orchard_2__Yield", do={"hive_1__Treated": "yes"}).probs, ref, atol=TOL, rtol=0)


def test_sample_is_the_ground_networks_sampler():
    _, template, skeleton = _co_op()
    net = ground(template, skeleton)
    a, b = net.sample(50, seed=3), net.sample(50, seed=3)
    assert a.variables == net.variables and a.codes.shape == (50, len(net.variables))
    np.testing.assert_array_equal(a.codes, b.codes)
    c = net.sample(20, do={"hive_1__Treated": "yes"}, seed=1)
    assert (c.codes[:, net.graph.index("hive_1__Treated")] == 1).all()


def _peers(links):
    schema = Schema({"person": {"Mood": ["calm", "upset"]}}, {"influences": ("person", "person")})
    template = Template(schema, [Mechanism(
        "person", "Mood", [[0.9, 0.1], [0.6, 0.4], [0.2, 0.8]],
        aggregates=[Aggregate("influences", "Mood", "upset", "share", [0, 0.5, 1], direction="against")],
    )])
    return template, Skeleton(schema, {"person": ["a", "b", "c"]}, {"influences": links})


def test_skeleton_cycle_is_refused_naming_it():
    template, chain = _peers([("a", "b"), ("b", "c")])
    assert ground(template, chain).graph.parents("person_c__Mood") == ("person_b__Mood",)
    template, loop = _peers([("a", "b"), ("b", "c"), ("c", "a")])
    with pytest.raises(GraphError, match=r"links make the ground network cyclic: (person_[abc]__Mood -> ){3}person_[abc]__Mood"):
        ground(template, loop)


def test_template_cycle_within_an_instance_is_refused():
    schema = Schema({"hive": {"A": ["0", "1"], "B": ["0", "1"]}})
    with pytest.raises(GraphError, match="template of entity type 'hive' has a cycle among the attributes of one instance: "):
        Template(schema, [Mechanism("hive", "A", [[0.5, 0.5]] * 2, parents=["B"]),
                          Mechanism("hive", "B", [[0.5, 0.5]] * 2, parents=["A"])])


def test_template_errors():
    schema, template, _ = _co_op()
    m = template.mechanism("orchard", "Yield")
    with pytest.raises(NetworkError, match=r"mechanism of 'orchard.Yield': the CPT has shape \(3, 3\), expected \(2, 3, 3, 3\)"):
        Template(schema, [*[x for k, x in template.mechanisms.items() if k != ("orchard", "Yield")],
                          Mechanism("orchard", "Yield", np.full((3, 3), 1 / 3), parents=["Soil"], aggregates=m.aggregates)])
    bad = np.array(m.cpt)
    bad[1, 2, 0] = [0.5, 0.5, 0.5]
    with pytest.raises(NetworkError, match=r"row \(Soil=rich, share\(pollinates against: Treated=yes\)=\(0.5, 1\], .*sum to 1.5"):
        Template(schema, [*[x for k, x in template.mechanisms.items() if k != ("orchard", "Yield")],
                          Mechanism("orchard", "Yield", bad, parents=["Soil"], aggregates=m.aggregates)])
    with pytest.raises(GraphError, match="no mechanism is given for 'orchard.Soil'"):
        Template(schema, [x for k, x in template.mechanisms.items() if k != ("orchard", "Soil")])
    with pytest.raises(GraphError, match=r"aggregate along 'pollinates' \(hive -> orchard\) needs 'orchard' as the relationship's source"):
        Mechanism("orchard", "Soil", [0.5, 0.5], aggregates=[Aggregate("pollinates", "Treated", "yes", "count", [0])])._validate(schema)
    with pytest.raises(GraphError, match="share edges must run from 0 to 1"):
        Aggregate("pollinates", "Treated", "yes", "share", [0, 0.5])
    with pytest.raises(GraphError, match="kind must be 'share' or 'count'"):
        Aggregate("pollinates", "Treated", "yes", "mean", [0, 1])
    with pytest.raises(GraphError, match="'hive' and 'hive_a' would give clashing ground names"):
        Schema({"hive": {"A": ["x"]}, "hive_a": {"A": ["x"]}})


def test_bins():
    share = Aggregate("r", "A", "x", "share", [0, 0.5, 1])
    assert share.bins == ("no related", "[0, 0.5]", "(0.5, 1]")
    assert share.bin_of_counts(0).tolist() == [0]
    assert share.bin_of_counts(4).tolist() == [1, 1, 1, 2, 2]  # shares 0, 1/4, 1/2 | 3/4, 1
    count = Aggregate("r", "A", "x", "count", [0, 1, 3])
    assert count.bins == ("0", "1-2", "3+")
    assert count.bin_of_counts(5).tolist() == [0, 1, 1, 2, 2, 2]


def test_skeleton_errors():
    schema, _, _ = _co_op()
    with pytest.raises(DataError, match="entity type 'orchard' has no instances"):
        Skeleton(schema, {"hive": ["1"], "orchard": []})
    with pytest.raises(DataError, match="entity type 'hive' lists instance id '1' twice"):
        Skeleton(schema, {"hive": ["1", "1"], "orchard": ["1"]})
    with pytest.raises(DataError, match="the link's target '9' is not an instance of 'orchard'"):
        Skeleton(schema, {"hive": ["1"], "orchard": ["1"]}, {"pollinates": [("1", "9")]})


def _write_folder(folder, links_text):
    folder.mkdir()
    (folder / "hive.csv").write_text("id\n1\n2\n3\n")
    (folder / "orchard.csv").write_text("id\n1\n2\n3\n4\n")
    (folder / "pollinates.csv").write_text(links_text)
    return folder


def test_read_skeleton_from_csv(tmp_path):
    schema, template, skeleton = _co_op()
    folder = _write_folder(tmp_path / "ok", "source,target\n1,1\n2,1\n1,2\n3,2\n3,3\n")
    read = read_skeleton(folder, schema)
    assert read.instances == skeleton.instances and read.links == skeleton.links
    bad = _write_folder(tmp_path / "bad", "source,target\n1,1\n2,1\n3,9\n")
    with pytest.raises(DataError, match=r"pollinates\.csv, line 4, column 'target': '9' is not an instance of 'orchard'"):
        read_skeleton(bad, schema)
    empty = tmp_path / "empty"
    _write_folder(empty, "source,target\n")
    (empty / "orchard.csv").write_text("id\n")
    with pytest.raises(DataError, match=r"orchard\.csv: entity type 'orchard' has no instances"):
        read_skeleton(empty, schema)


def test_yaml_round_trip(tmp_path):
    _, template, skeleton = _co_op()
    path = tmp_path / "co-op.yaml"
    write_template(template, path)
    again = read_template(path)
    assert format_template(again) == format_template(template)
    a, b = ground(template, skeleton), ground(again, skeleton)
    assert ig.format_bif(a) == ig.format_bif(b)
    for v in a.variables:
        np.testing.assert_array_equal(a.cpt(v), b.cpt(v))


def test_yaml_errors(tmp_path):
    path = tmp_path / "t.yaml"
    path.write_text("relational: 1\nentities:\n  hive: {A: [x, y]}\n  hive: {B: [x]}\n")
    with pytest.raises(GraphError, match=r"t\.yaml, line 4: key 'hive' appears twice"):
        read_template(path)
    path.write_text("relational: 1\nentities:\n  hive: {A: [x, y]}\nmechanisms:\n  hive:\n    A: {cpt: [[0.5, half]]}\n")
    with pytest.raises(NetworkError, match=r"t\.yaml: the mechanism of 'hive.A', cpt: 'half' is not a number"):
        read_template(path)
    path.write_text("relational: 1\nentities:\n  hive: {A: [x, y]}\nmechanisms:\n  hive:\n    A: {cpt: [[0.5, 0.5]], parent: [A]}\n")
    with pytest.raises(GraphError, match=r"unknown key 'parent' in the mechanism of 'hive.A'.*did you mean 'parents'"):
        read_template(path)


def test_ground_cpt_size_is_bounded_before_building():
    schema, template, _ = _co_op()
    hives = [str(i) for i in range(30)]
    skeleton = Skeleton(schema, {"hive": hives, "orchard": ["1"]}, {"pollinates": [(h, "1") for h in hives]})
    with pytest.raises(NetworkError, match=r"ground CPT of 'orchard_1__Yield' would have [\d,]+ entries \(61 parents\)"):
        ground(template, skeleton)


def test_documented_yaml_example_reads():
    import textwrap

    import intervgnn.relational.files as files
    from intervgnn._yaml import load_yaml
    from intervgnn.relational import parse_template

    doc = files.__doc__
    text = textwrap.dedent("    " + doc[doc.index("relational: 1") : doc.index("``parents``")])
    template = parse_template(load_yaml(text, names=True), "example")
    assert template.mechanism("orchard", "Yield").cpt.shape == (2, 3, 2)


def test_related_instance_that_is_also_an_own_parent_is_one_parent():
    schema = Schema({"person": {"Job": ["no", "yes"], "Mood": ["calm", "upset"]}}, {"knows": ("person", "person")})
    template = Template(schema, [
        Mechanism("person", "Job", [0.5, 0.5]),
        Mechanism("person", "Mood", [[[0.9, 0.1], [0.5, 0.5]], [[0.3, 0.7], [0.2, 0.8]]], parents=["Job"],
                  aggregates=[Aggregate("knows", "Job", "yes", "count", [0, 1])]),
    ])
    net = ground(template, Skeleton(schema, {"person": ["a", "b"]}, {"knows": [("a", "a"), ("a", "b")]}))
    assert net.graph.parents("person_a__Mood") == ("person_a__Job", "person_b__Job")
    # by hand: own Job=yes and b's Job=no gives a count of 1 (a knows itself) -> bin "1+" -> row (yes, 1+)
    np.testing.assert_array_equal(net.cpt("person_a__Mood")[1, 0], [0.2, 0.8])
