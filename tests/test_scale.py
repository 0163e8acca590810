"""Guards of the big-model paths that are not timed: the compact case form
and the batched model building give the same arrays as the long form and
the per-member loop, and the sparsity pattern is built once per model."""
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import tomli_w
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal

import cablefe
from cablefe.assembly import Assembler, _unique_inverse
from cablefe.io.case import parse_case
from cablefe.io import units
from cablefe.io.results_io import dumps_readable, write_json
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


def test_batched_members_match_the_member_loop(spec_factory, verify):
    """Straight members (batched) between divided ones (looped) keep member
    order, element numbering and interior nodes, and their properties follow
    the axial law N = EA (L - L0) / L0."""
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
    # source: the axial law N = EA (L - L0) / L0 solved for the unstressed
    # length of a member given its pretension T: L0 = L / (1 + T / EA)
    verify.check("bar of 4 m with a pretension of 10 kN (EA = 2e8 N), and one without: unstressed length "
                 "L / (1 + T/EA)", "N = EA (L - L0)/L0 solved for L0 (hand calculation)",
                 bar.props["unstressed_length"][[0, 4]], [4.0 / (1.0 + 1.0e4 / EA), 4.0], rtol=1e-15, unit="m")
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


# -- results.json text: orjson for the numbers, the json module's rules kept --

_json_leaf = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True), st.integers(-2**63, 2**63 - 1), st.booleans(),
    st.none(), st.text(alphabet="ab{}[]\",: null\\\n\u00e9", max_size=8))
_json_value = st.recursive(
    _json_leaf,
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(st.text(alphabet="xy{}\"", max_size=4), inner, max_size=4)),
    max_leaves=30)


def _same(a, b) -> bool:
    """Equality where NaN equals NaN and 0.0 differs from -0.0 (exact round trip)."""
    if isinstance(a, float) and isinstance(b, float):
        return (math.isnan(a) and math.isnan(b)) or (a == b and math.copysign(1, a) == math.copysign(1, b))
    if isinstance(a, dict) and isinstance(b, dict):
        return list(a) == list(b) and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    return type(a) is type(b) and a == b


@settings(max_examples=200, deadline=None)
@given(data=st.dictionaries(st.text(max_size=3), _json_value, max_size=5),
       table=st.lists(st.dictionaries(st.sampled_from(["position", "tension", "slack", "id"]),
                                      _json_value, max_size=4), max_size=6))
def test_results_text_is_what_the_json_module_reads_back(data, table):
    # source: the Python json module (reference reader), RFC 8259 plus its
    # NaN/Infinity extension; a table of tables exercises the batched path
    data = dict(data, entries={f"E{k}": entry for k, entry in enumerate(table)})
    text = dumps_readable(data)
    assert _same(json.loads(text), data)
    ref = json.loads(json.dumps(data, allow_nan=True))
    assert _same(json.loads(text), ref)


def test_each_node_and_member_on_one_line():
    model = build_model(parse_case(_net(True)))
    data = cablefe.solve(model, names=["snow"]).as_dict()
    lines = dumps_readable(data).splitlines()
    res = data["results"]["snow"]
    for table in ("nodes", "members"):
        for key, entry in res[table].items():
            line = next(l for l in lines if l.lstrip().startswith(json.dumps(key) + ":"))
            assert json.loads(line.split(":", 1)[1].rstrip(",")) == entry


# -- units read without pint agree with pint ---------------------------------

_FAST_TEXTS = sorted(units.FAST_UNITS) + [
    "kN/m^3", "mm^2", "mm**4", "kN*m", "N/m", "kg/m**3", "1/K", "kN/m/m", "MPa*mm^2", "m^-2", "cm^3/km",
    "t/m^3", "kN * m", "GPa/MPa"]


@pytest.mark.parametrize("text", [t for t in _FAST_TEXTS if t != "1"])
def test_fast_units_match_pint(text, verify):
    # source: pint (Grecco et al., pint unit definitions, default_en.txt) as the reference library
    fast = units._fast_unit_info(text)
    assert fast is not None
    q = units.registry().parse_expression(text)
    # pint multiplies prefix factors in floating point: a few roundings of 1.1e-16
    verify.check(f'unit "{text}" read without pint: factor to SI base units', "pint (Grecco et al., pint "
                 "unit definitions, default_en.txt)", fast[0], q.to_base_units().magnitude,
                 rtol=4 * np.finfo(float).eps, atol=0)
    assert fast[1] == units._dimension_key(q.dimensionality)


@pytest.mark.parametrize("text", ["ft", "kip", "kN m", "(kN)/m", "N/m**", "m^2^2", "mm2", "deg", "degC",
                                  "kN//m", "*m", "m*"])
def test_other_unit_text_goes_to_pint(text):
    assert units._fast_unit_info(text) is None


@pytest.mark.parametrize("length, loads_pint", [("mm", False), ("ft", True)])
def test_pint_is_loaded_only_for_other_units(tmp_path, length, loads_pint):
    case = _net(True)
    case["units"] = {"length": length, "force": "kN"}
    path = tmp_path / "net.toml"
    path.write_text(tomli_w.dumps(case))
    code = ("import sys; from cablefe.io.case import read_case; read_case(sys.argv[1]); "
            "print('pint' in sys.modules)")
    done = subprocess.run([sys.executable, "-c", code, str(path)], capture_output=True, text=True,
                          check=True, cwd=Path(cablefe.__file__).parent.parent)
    assert done.stdout.strip() == str(loads_pint)


@pytest.mark.parametrize("case", ["net", "heavy_cable.toml", "hanger_deck.toml", "stiffened_footbridge.toml"])
def test_results_file_is_the_text_of_the_results_dict(tmp_path, case):
    """write_json lays out node and member tables from whole arrays (beams:
    from the dict); the file must be exactly the dict's readable text."""
    root = Path(cablefe.__file__).parent.parent
    model = (build_model(parse_case(_net(True))) if case == "net"
             else cablefe.load_model(root / "cases" / case))
    results = cablefe.solve(model)
    write_json(results, tmp_path / "results.json")
    assert (tmp_path / "results.json").read_text(encoding="utf-8") == dumps_readable(results.as_dict())
