"""[beam_reference]: the stress-free geometry of beams in a shaped case."""
import copy
import tomli
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

import cablefe
from cablefe.assembly import Assembler, initial_state
from cablefe.errors import CaseError
from cablefe.io.case import parse_case
from cablefe.io.case_writer import shaped_case_dict, write_shape_outputs
from cablefe.model import build_model
from cablefe.results import beam_section_forces
from cablefe.solvers.formfind import find_shape, permanent_factors, shaped_case
from cablefe.solvers.static import solve_combination

CASES = Path(__file__).resolve().parent.parent / "cases"

# a clamped beam A-B along x with a cable B-C (C is touched by no beam)
SMALL = """
[units]
length = "mm"
force = "N"
[materials.steel]
E = "200 GPa"
[sections.b]
material = "steel"
area = "1000 mm^2"
Iy = "2e6 mm^4"
Iz = "3e6 mm^4"
J = "1e6 mm^4"
[nodes]
A = [0, 0, 0]
B = [2000, 0, 0]
C = [3000, 0, 0]
[supports]
A = "all"
B = "all"
C = "all"
[[members]]
id = "G"
type = "beam"
nodes = ["A", "B"]
section = "b"
[[members]]
id = "K"
type = "cable"
nodes = ["B", "C"]
section = "b"
[[loads]]
case = "deck"
members = ["G"]
per_length = [0, 0, -3.0]
"""


def small(reference=None):
    data = tomli.loads(SMALL)
    if reference is not None:
        data["beam_reference"] = reference
    return data


# ---------------------------------------------------------------------------
# the shaped suspension bridge with a beam deck stays put
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def shaped_suspension(tmp_path_factory):
    spec = cablefe.read_case(CASES / "generated-suspension.toml")
    found = find_shape(spec)
    out = tmp_path_factory.mktemp("beamref") / "shaped.toml"
    write_shape_outputs(out, found.spec, found.cutting)
    return spec, found, cablefe.read_case(out)


def test_shaped_beam_deck_reloads_in_equilibrium_with_the_found_bending(shaped_suspension):
    spec, found, again = shaped_suspension
    assert again.beam_reference, "the shaped case carries the beams' stress-free geometry"
    factors = permanent_factors(again.shape)
    model = build_model(again)
    res = solve_combination(model, "permanent", factors)
    assert res.converged
    deck = [k for k, n in enumerate(model.node_ids) if n.startswith("D")]
    span = float(np.ptp(model.coordinates[deck, 0]))
    moved = float(np.max(np.linalg.norm(res.state.positions - model.coordinates, axis=1)))
    # source: definition of equilibrium -- the shaped case is the found equilibrium of the same
    # structure (same stress-free beams, same unstressed lengths, same loads), so solving it
    # again must leave it where it is; 1e-6 of the span is the acceptance limit of a shaped case
    assert moved < 1e-6 * span

    # the found state itself: the input's stress-free beams (geometry of [nodes]) with the
    # found unstressed lengths, solved from the input geometry
    original = build_model(shaped_case(spec, build_model(spec), None, found.member_length0))
    ref = solve_combination(original, "found", factors)
    assert ref.converged
    assert_allclose(res.state.positions, ref.state.positions, rtol=0, atol=1e-9 * span)
    M_found = beam_section_forces(original, ref)
    M_again = beam_section_forces(model, res)
    moments = np.r_[4:6, 10:12]
    scale = np.abs(M_found[:, moments]).max()
    assert scale > 0.0, "the deck bends under the permanent load"
    # both solves converge to a relative residual well below 1e-8 on the same equilibrium;
    # 1e-6 of the largest moment covers the moments that are near zero (hinged ends)
    assert_allclose(M_again[:, moments], M_found[:, moments], rtol=1e-6, atol=1e-6 * scale)


def test_shaped_beam_deck_keeps_the_written_rotations(shaped_suspension):
    _, _, again = shaped_suspension
    model = build_model(again)
    res = solve_combination(model, "permanent", permanent_factors(again.shape))
    from cablefe.elements.beam import logm_so3
    turning = np.flatnonzero(model.dof[:, 3] >= 0)
    total = logm_so3(res.state.rotations[turning])
    written = np.array([again.beam_reference[model.node_ids[n]].rotation for n in turning])
    # source: definition of equilibrium (as above): the total rotations are the written ones
    assert_allclose(total, written, rtol=0, atol=1e-9)


# ---------------------------------------------------------------------------
# the model takes frames, lengths, loads and starting rotations from the table
# ---------------------------------------------------------------------------

def test_reference_rotation_gives_the_slope_deflection_moments(verify):
    theta = 1e-5
    spec = parse_case(small({"B": {"position": [2000, 0, 0], "rotation": [0, 0, theta]}}))
    model = build_model(spec)
    ev = Assembler(model, free=np.zeros(0, dtype=np.int64)).evaluate(initial_state(model), model.zero_loads(),
                                                                    0.0, want_tangent=False)
    EI, L = 2.0e11 * 3e-6, 2.0
    # source: slope-deflection equations (Maney 1915; e.g. Hibbeler, Structural Analysis,
    # ch. 11, from memory): M_near = 2EI/L (2 theta_near + theta_far); the end shear follows
    # from moment equilibrium of the beam, (M_i + M_j) / L, and at j opposes the +y side
    A, B = model.node_index["A"], model.node_index["B"]
    # the corotational kernel differs from the linear relations by O(theta) relative
    source = ("slope-deflection equations, Maney 1915 (e.g. Hibbeler, Structural Analysis, ch. 11; "
              "from memory)")
    verify.check("clamped-clamped beam (L = 2 m, EI = 6e5 N m^2), reference rotation 1e-5 rad at B: "
                 "near-end moment 4EI theta/L", source,
                 ev.internal[model.dof[B, 5]], 4 * EI * theta / L, rtol=1e-4, unit="N m")
    verify.check("same beam: far-end moment 2EI theta/L", source,
                 ev.internal[model.dof[A, 5]], 2 * EI * theta / L, rtol=1e-4, unit="N m")
    verify.check("same beam: end shear at B, -(M_i + M_j)/L = -6EI theta/L^2", source,
                 ev.internal[model.dof[B, 1]], -6 * EI * theta / L**2, rtol=1e-4, unit="N")


def test_reference_length_and_member_loads_come_from_the_reference_positions(verify):
    # [nodes] puts B 2 mm further than its stress-free position, 1 mm up
    spec = parse_case(small({"B": {"position": [1998, 0, -1]}}))
    model = build_model(spec)
    L = np.hypot(1.998, 0.001)
    assert_allclose(model.families["beam"].props["length"], [L], rtol=1e-15)
    ev = Assembler(model, free=np.zeros(0, dtype=np.int64)).evaluate(initial_state(model), model.zero_loads(),
                                                                    0.0, want_tangent=False)
    l = np.hypot(2.0, 0.0)
    B = model.node_index["B"]
    # source: Hooke's law for a straight member, N = EA (l - L) / L (small end rotations, so
    # the bending part is tiny: the chord turns by 1e-3/2 rad)
    N = 2.0e11 * 1e-3 * (l - L) / L
    verify.check("beam with a stress-free length 1 mm shorter than its chord (EA = 2e8 N): end force",
                 "Hooke's law for a straight member, N = EA (l - L)/L (hand calculation)",
                 np.hypot(*ev.internal[model.dof[B, [0, 2]]]), N, rtol=1e-3, unit="N")
    # the uniform deck load acts on the stress-free length: total 3 N/mm over L
    # source: statics, resultant of a uniform load = intensity x length
    loads = model.load_cases["deck"].nodal
    verify.check("uniform load 3 N/mm on a beam of stress-free length L: total nodal load",
                 "statics: resultant of a uniform load = intensity x length (hand calculation)",
                 loads[model.dof[:, 2][model.dof[:, 2] >= 0]].sum(), -3000.0 * L, rtol=1e-13, unit="N")
    # starting rotations: identity where the table gives none
    assert_allclose(initial_state(model).rotations, np.broadcast_to(np.eye(3), (3, 3, 3)), atol=0)


# ---------------------------------------------------------------------------
# reader errors and the round trip
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("reference, key, words", [
    ({"Q": {"position": [0, 0, 0]}}, "beam_reference.Q", "no node"),
    ({"C": {"position": [3000, 0, 0]}}, "beam_reference.C", "no beam"),
    ({"B": {"position": [2000, 0]}}, "beam_reference.B.position", "3 numbers"),
    ({"B": {"position": [2000, 0, 0], "rotation": [0, 0, 0, 1]}}, "beam_reference.B.rotation", "3 numbers"),
    ({"B": {"rotation": [0, 0, 0]}}, "beam_reference.B.position", "position"),
    ({"B": {"position": [2000, 0, 0], "turn": [0, 0, 0]}}, "beam_reference.B.turn", "unknown key"),
    ({"B": [2000, 0, 0]}, "beam_reference.B", "expected a table"),
    ({"B": {"position": [2000, 0, "1 kN"]}}, "beam_reference.B.position[2]", "length"),
])
def test_reader_names_the_bad_beam_reference_entry(reference, key, words):
    with pytest.raises(CaseError) as info:
        parse_case(small(reference))
    assert info.value.key == key and words in str(info.value)


def test_spec_built_in_code_is_checked_by_the_model():
    from dataclasses import replace
    from cablefe.spec import BeamReference
    spec = parse_case(small())
    bad = replace(spec, beam_reference={"C": BeamReference("C", (3.0, 0.0, 0.0))})
    with pytest.raises(CaseError) as info:
        build_model(bad)
    assert info.value.key == "beam_reference.C"


def test_beam_reference_round_trips_in_the_file_units(tmp_path):
    data = small({"A": {"position": [0.5, 1e-3, -2.0], "rotation": [1e-3, -2e-4, 0.3]},
                  "B": {"position": ["1.999 m", 0, 0]}})
    spec = parse_case(copy.deepcopy(data), source="memory")
    written = shaped_case_dict(spec)
    assert written["beam_reference"]["A"] == {"position": [0.5, 1e-3, -2.0], "rotation": [1e-3, -2e-4, 0.3]}
    import tomli_w
    path = tmp_path / "again.toml"
    path.write_text(tomli_w.dumps(written))
    again = cablefe.read_case(path)
    assert list(again.beam_reference) == ["A", "B"]
    for name, ref in spec.beam_reference.items():
        # mm -> m -> mm -> m: one rounding each way
        assert_allclose(again.beam_reference[name].position, ref.position, rtol=1e-15, atol=1e-18)
        assert again.beam_reference[name].rotation == ref.rotation
    assert again.beam_reference["B"].rotation == (0.0, 0.0, 0.0)
    # a spec without the table writes none, even when the input had one
    from dataclasses import replace
    assert "beam_reference" not in shaped_case_dict(replace(spec, beam_reference={}))
