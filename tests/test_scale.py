"""Guards of the big-model paths that are not timed: the compact case form
and the batched model building give the same arrays as the long form and
the per-member loop, and the sparsity pattern is built once per model."""
import json

import numpy as np
from numpy.testing import assert_allclose, assert_array_equal

import cablefe
from cablefe.assembly import Assembler, _unique_inverse
from cablefe.io.case import parse_case
from cablefe.io.results_io import dumps_readable
from cablefe.model import build_model

N = 10


def _net(compact: bool) -> dict:
    """A 10 x 10 saddle net z = c x y, boundary pinned, as parsed TOML."""
    t = np.arange(N) - (N - 1) / 2.0
    x, y = np.meshgrid(t, t, indexing="ij")
    xyz = np.stack([x.ravel(), y.ravel(), 0.05 * (x * y).ravel()], axis=1)
    idx = np.arange(N * N).reshape(N, N)
    pairs = np.concatenate([np.stack([idx[:-1].ravel(), idx[1:].ravel()], 1),
                            np.stack([idx[:, :-1].ravel(), idx[:, 1:].ravel()], 1)])
    ids = [f"N{k}" for k in range(N * N)]
    mids = [f"M{k}" for k in range(len(pairs))]
    edge = np.zeros((N, N), bool)
    edge[0], edge[-1], edge[:, 0], edge[:, -1] = True, True, True, True
    case = {
        "units": {"length": "m", "force": "kN"},
        "materials": {"strand": {"E": "150 GPa"}},
        "sections": {"net": {"material": "strand", "area": "150 mm^2", "breaking_load": "220 kN"}},
        "supports": {ids[k]: "pin" for k in np.flatnonzero(edge.ravel())},
        "loads": [{"case": "snow", "members": ["M*"], "per_length": [0.0, 0.0, -0.5]},
                  {"case": "point", "node": "N55", "force": [0.0, 0.0, -2.0]}],
        "combinations": [{"name": "both", "factors": {"snow": 1.0, "point": 1.0}},
                         {"name": "snow", "factors": {"snow": 1.0}}],
    }
    if compact:
        case["node_table"] = {"ids": ids, "x": xyz[:, 0].tolist(), "y": xyz[:, 1].tolist(),
                              "z": xyz[:, 2].tolist()}
        case["member_table"] = [{"type": "bar", "section": "net", "tension_only": True, "pretension": 20.0,
                                 "ids": mids, "i": [ids[a] for a in pairs[:, 0]],
                                 "j": [ids[b] for b in pairs[:, 1]]}]
    else:
        case["nodes"] = {n: p for n, p in zip(ids, xyz.tolist())}
        case["members"] = [{"id": m, "type": "bar", "section": "net", "tension_only": True,
                            "pretension": 20.0, "nodes": [ids[a], ids[b]]}
                           for m, (a, b) in zip(mids, pairs)]
    return case


def test_compact_form_gives_the_same_model_as_the_long_form():
    long, short = build_model(parse_case(_net(False))), build_model(parse_case(_net(True)))
    assert long.node_ids == short.node_ids
    assert_array_equal(long.coordinates, short.coordinates)
    assert_array_equal(long.dof, short.dof)
    assert_array_equal(long.restrained, short.restrained)
    for f in long.families:
        a, b = long.families[f], short.families[f]
        assert_array_equal(a.nodes, b.nodes)
        assert_array_equal(a.member, b.member)
        for name in a.props:
            assert_array_equal(a.props[name], b.props[name])
    assert [(m.id, m.first, m.count, m.node_ids) for m in long.members] == \
        [(m.id, m.first, m.count, m.node_ids) for m in short.members]
    for case in long.load_cases:
        assert_array_equal(long.load_cases[case].nodal, short.load_cases[case].nodal)


def test_batched_members_match_the_member_loop(spec_factory):
    """Straight members (batched) between divided ones (looped) keep member
    order, element numbering and interior nodes, and their properties follow
    the definitions of the interface page."""
    from cablefe.spec import Member
    nodes = {"A": (0.0, 0.0, 0.0), "B": (4.0, 0.0, 0.0), "C": (4.0, 3.0, 0.0), "D": (0.0, 3.0, 1.0)}
    members = [Member("M0", "bar", ("A", "B"), "s", pretension=1.0e4),
               Member("M1", "bar", ("B", "C"), "s", divide=3),
               Member("M2", "bar", ("C", "D"), "s", length0=4.0, tension_only=True),
               Member("M3", "cable", ("D", "A"), "s", divide=2),
               Member("M4", "cable", ("A", "C"), "s")]
    model = build_model(spec_factory(nodes, members, {"A": "pin", "C": "pin"}))
    bar, cable = model.families["bar"], model.families["cable"]
    assert_array_equal(bar.member, [0, 1, 1, 1, 2])
    assert_array_equal(cable.member, [3, 3, 4])
    assert [(m.family, m.first, m.count) for m in model.members] == \
        [("bar", 0, 1), ("bar", 1, 3), ("bar", 4, 1), ("cable", 0, 2), ("cable", 2, 1)]
    EA = 2.0e11 * 1.0e-3
    # source: interface page (v1), member types: length0 = L / (1 + T / EA)
    assert_allclose(bar.props["unstressed_length"][[0, 4]], [4.0 / (1.0 + 1.0e4 / EA), 4.0], rtol=1e-15)
    assert_allclose(cable.props["unstressed_length"][2], 5.0, rtol=1e-15)
    assert_array_equal(bar.props["tension_only"], [False, False, False, False, True])
    assert_array_equal(cable.props["tension_only"], [True, True, True])
    assert model.members[1].node_ids == ("B", "M1.1", "M1.2", "C")
    assert_array_equal(bar.nodes[0], [model.node_index["A"], model.node_index["B"]])


def test_sort_based_unique_matches_numpy():
    keys = np.random.default_rng(3).integers(0, 500, 5000).astype(np.int64)
    unique, inverse = _unique_inverse(keys)
    ref_unique, ref_inverse = np.unique(keys, return_inverse=True)
    assert_array_equal(unique, ref_unique)
    assert_array_equal(inverse, ref_inverse.ravel())


def test_pattern_built_once_for_all_combinations():
    model = build_model(parse_case(_net(True)))
    before = Assembler.patterns_built
    results = cablefe.solve(model)
    assert results.all_converged
    assert Assembler.patterns_built - before == 1


def test_results_text_reads_back():
    model = build_model(parse_case(_net(True)))
    data = cablefe.solve(model, names=["snow"]).as_dict()
    data["results"]["snow"]["nan"] = float("nan")
    back = json.loads(dumps_readable(data))
    assert np.isnan(back["results"]["snow"].pop("nan"))
    data["results"]["snow"].pop("nan")
    assert back == data
