"""Design checks and catalogue sizing, against hand statics and handbook formulas."""
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

import cablefe
from cablefe.design.checks import run_checks
from cablefe.design.sizing import _analyse, apply_sections, select, size_members
from cablefe.errors import CaseError
from cablefe.io.case import parse_case

TWO_HANGERS = {
    "title": "two hangers",
    "materials": {"strand": {"E": "160 GPa"}},
    "sections": {"h": {"material": "strand", "area": "200 mm^2", "breaking_load": "200 kN"}},
    "nodes": {"T1": [0, 0, 10], "B1": [0, 0, 0], "T2": [5, 0, 10], "B2": [5, 0, 0]},
    "supports": {"T1": "all", "T2": "all", "B1": "x y", "B2": "x y"},
    "members": [{"id": "H1", "type": "bar", "tension_only": True, "nodes": ["T1", "B1"], "section": "h"},
                {"id": "H2", "type": "bar", "tension_only": True, "nodes": ["T2", "B2"], "section": "h"}],
    "loads": [{"case": "g1", "node": "B1", "force": [0, 0, -30]}, {"case": "g2", "node": "B2", "force": [0, 0, -20]},
              {"case": "q1", "node": "B1", "force": [0, 0, -10]}, {"case": "q2", "node": "B2", "force": [0, 0, 18]}],
    "combinations": [{"name": "permanent", "factors": {"g1": 1.0, "g2": 1.0}},
                     {"name": "live", "factors": {"g1": 1.0, "g2": 1.0, "q1": 1.0, "q2": 1.0}}],
    "design": {"cable_factor": 2.5, "min_tension": 0.2},
}


def _solve(data):
    spec = parse_case(data)
    return cablefe.solve(cablefe.build_model(spec))


def test_hanger_utilization_and_slack_margin_by_hand(verify):
    # Each hanger carries the load hung from it (statics: no weight, vertical
    # hanger): live T1 = 30 + 10 = 40 kN, T2 = 20 - 18 = 2 kN; permanent 30 and 20 kN.
    # Cable check u = cable_factor * T_max / breaking load (common practice
    # for the form of the check; the factor is the user's).
    results = _solve(TWO_HANGERS)
    out = run_checks(results.model.spec.design, results)
    by = {(c.item, c.check, c.result): c for c in out.checks}
    # the hangers' tensions come out of Newton to its 1e-8 residual: 1e-9 is far above round-off
    verify.check("two hangers: cable utilization cable_factor x T_max / breaking load (T = hung load)",
                 "common practice (form of the check); statics of a vertical hanger",
                 [by["H1", "cable", "live"].utilization, by["H2", "cable", "permanent"].utilization],
                 [2.5 * 40 / 200, 2.5 * 20 / 200], rtol=1e-9)
    # slack margin: u = min_tension * T_perm / T_min = 0.2 * 20 / 2 = 2 (fails)
    verify.check("two hangers: slack margin min_tension x T_permanent / T_min",
                 "common practice (form of the check); statics of a vertical hanger",
                 [by["H2", "slack", "live"].utilization, by["H1", "slack", "live"].utilization],
                 [0.2 * 20 / 2, 0.2 * 30 / 40], rtol=1e-9)
    assert out.governing["H2"].check == "slack" and out.governing["H1"].check == "cable"
    assert out.permanent == "permanent"
    assert set(out.placeholders) == {"deflection_limit", "yield_factor"}   # the two not set


def test_slack_member_is_reported_and_infinitely_used():
    data = {**TWO_HANGERS, "supports": {**TWO_HANGERS["supports"], "B2": "x y z"}}
    data["loads"] = TWO_HANGERS["loads"][:3] + [{"case": "q2", "node": "T2", "displacement": [0, 0, -0.5]}]
    data["supports"]["T2"] = "all"
    results = _solve(data)
    out = run_checks(results.model.spec.design, results)
    assert out.slack["live"] == ("H2",)
    worst = out.governing["H2"]
    assert worst.check == "slack" and worst.utilization == np.inf


BEAM = {"material": "steel", "area": "6000 mm^2", "Iy": "8e7 mm^4", "Iz": "2e7 mm^4", "J": "1e6 mm^4",
        "Wy": "5e5 mm^3", "Wz": "2e5 mm^3"}


def test_cantilever_stress_against_n_over_a_plus_m_over_w(verify):
    # Cantilever with a tip force P: the root section carries N = Px and the
    # moment of P about the root, M = r x P with r the deformed tip position
    # (equilibrium of the free body, exact for any deflection; the root's
    # section axes stay the global ones at a fixed end).  Extreme fibre
    # stress sigma = |N|/A + |My|/Wy + |Mz|/Wz.  Source: Young & Budynas 2002,
    # Roark's Formulas for Stress and Strain, 7th ed., ch. 8 (sigma = M/W,
    # with direct stress added for combined loading).
    l, P = 4.0, np.array([20e3, 2e3, -8e3])
    data = {"materials": {"steel": {"E": "210 GPa", "fy": "355 MPa"}}, "sections": {"b": BEAM},
            "nodes": {"A": [0, 0, 0], "B": [l, 0, 0]}, "supports": {"A": "all"},
            "members": [{"id": "C", "type": "beam", "nodes": ["A", "B"], "section": "b", "divide": 4}],
            "loads": [{"case": "tip", "node": "B", "force": list(P / 1e3)}],
            "design": {"yield_factor": 1.0}}
    results = _solve(data)
    out = run_checks(results.model.spec.design, results)
    c = out.governing["C"]
    r = np.array([l, 0, 0]) + results.node_displacement("tip", "B")
    M = np.cross(r, P)
    sigma = abs(P[0]) / 6000e-6 + abs(M[1]) / 5e-4 + abs(M[2]) / 2e-4
    # first-order value, to show the check is not trivially met: 1.07e8 Pa
    assert_allclose(sigma, P[0] / 6000e-6 + 8e3 * l / 5e-4 + 2e3 * l / 2e-4, rtol=0.02)
    # the corotational beam gives section forces in each element's chord axes,
    # which turn by the element's rotations (a few 1e-3 rad here) from the
    # fixed end's axes: 1e-3 covers that projection, while the second-order
    # (P-delta) part of the moments that this check must see is 1.3e-2
    verify.check("cantilever, tip force in x, y, z: root stress |N|/A + |My|/Wy + |Mz|/Wz",
                 "Young & Budynas 2002, Roark's Formulas for Stress and Strain, 7th ed., ch. 8 (sigma = M/W) "
                 "with direct stress N/A; moments by statics of the deformed free body",
                 c.demand, sigma, rtol=1e-3, unit="Pa")
    verify.check("same cantilever: stress utilization sigma / fy (fy = 355 MPa, yield factor 1)",
                 "Young & Budynas 2002, Roark's Formulas for Stress and Strain, 7th ed., ch. 8; "
                 "utilization = demand / capacity (common practice)", c.utilization, sigma / 355e6, rtol=1e-3)
    assert c.check == "stress"


def test_uplift_on_two_span_girder_with_one_span_loaded(verify):
    # Two equal spans L, uniform w on the first only: by the three-moment
    # equation M_B = -w L^2 / 16, so R_A = 7wL/16, R_B = 10wL/16 and the far
    # end pulls down, R_C = -wL/16 (Clapeyron's theorem of three moments, e.g.
    # Timoshenko & Young 1965, Theory of Structures, §2.? (from memory)).
    L, w = 10.0, 12.0
    data = {"materials": {"steel": {"E": "210 GPa", "fy": "355 MPa"}},
            "sections": {"g": {**BEAM, "Iy": "8e9 mm^4", "area": "60000 mm^2"}},
            "nodes": {"A": [0, 0, 0], "B": [L, 0, 0], "C": [2 * L, 0, 0]},
            "supports": {"A": "x y z rx", "B": "y z", "C": "y z"},
            "members": [{"id": "S1", "type": "beam", "nodes": ["A", "B"], "section": "g", "divide": 4},
                        {"id": "S2", "type": "beam", "nodes": ["B", "C"], "section": "g", "divide": 4}],
            "loads": [{"case": "patch", "members": ["S1"], "per_length": [0, 0, -w]}],
            "design": {}}
    results = _solve(data)
    out = run_checks(results.model.spec.design, results)
    assert list(out.uplift["patch"]) == ["C"]
    R = results.reactions("patch")
    # a stiff girder (deflection ~1e-4 of the span): geometric nonlinearity
    # moves the reactions by far less than 1e-4
    verify.check("two-span girder, first span loaded: reactions 7wL/16, 10wL/16, -wL/16 (uplift)",
                 "Clapeyron's three-moment equation, M_B = -wL^2/16 (Timoshenko & Young 1965, "
                 "Theory of Structures; from memory)",
                 [R["A"][2], R["B"][2], out.uplift["patch"]["C"]], np.array([7, 10, -1]) * w * L / 16 * 1e3,
                 rtol=1e-4, unit="N")


SIZED = {
    "materials": {"strand": {"E": "160 GPa", "unit_weight": "78.5 kN/m^3"},
                  "steel": {"E": "210 GPa", "unit_weight": "78.5 kN/m^3"}},
    "sections": {"h": {"material": "strand", "area": "100 mm^2", "breaking_load": "150 kN"},
                 "g": {**BEAM, "material": "steel"}},
    "catalogues": {"strands": {"material": "strand", "sections": [
        {"name": f"S{a}", "area": f"{a} mm^2", "breaking_load": f"{1.5 * a} kN", "weight": f"{a * 7.85e-5} kN/m"}
        for a in (20, 30, 45, 60, 80, 110, 150, 200)]}},
    "nodes": {"T0": [0, 0, 6], "T1": [10, 0, 6], "T2": [20, 0, 6], "D0": [0, 0, 0], "D1": [10, 0, 0], "D2": [20, 0, 0]},
    "supports": {"T0": "all", "T1": "all", "T2": "all", "D0": "x y rx rz", "D1": "y rx rz", "D2": "y rx rz"},
    "members": [{"id": f"H{k}", "type": "bar", "tension_only": True, "nodes": [f"T{k}", f"D{k}"], "section": "h",
                 "pretension": 5.0} for k in range(3)]
    + [{"id": "G1", "type": "beam", "nodes": ["D0", "D1"], "section": "g", "divide": 2},
       {"id": "G2", "type": "beam", "nodes": ["D1", "D2"], "section": "g", "divide": 2}],
    "loads": [{"case": "dead", "self_weight": True}, {"case": "q", "members": ["G*"], "per_length": [0, 0, -4]}],
    "combinations": [{"name": "full", "factors": {"dead": 1.0, "q": 1.0}}],
    "design": {"members": ["H*"], "size": [{"members": "H*", "catalogue": "strands"}]},
}


def test_sizing_matches_brute_force_over_the_catalogue(verify):
    # The middle hanger's share of the deck load depends on the hanger
    # stiffness against the girder's: sizing must land where re-analysing
    # every catalogue section by brute force says the smallest passing one is.
    spec = parse_case(SIZED)
    results = cablefe.solve(cablefe.build_model(spec))
    run = size_members(spec, results)
    assert run.settled
    chosen = run.spec.members[1].section
    names = [s.name for s in spec.catalogues["strands"].sections]
    passing = []
    for k in range(len(names)):
        s, r, _ = _analyse(apply_sections(spec, [k]), results.names)
        u = run_checks(s.design, r)
        passing.append(all(c.utilization <= 1 for c in u.checks if c.check == "cable"))
    brute = names[passing.index(True)]
    verify.check("sizing of three hangers under a continuous girder: chosen catalogue index",
                 "brute force: every catalogue section re-analysed, the smallest passing one",
                 names.index(chosen), passing.index(True))
    assert chosen == brute
    k = names.index(chosen)
    assert k > 0 and not passing[k - 1]       # the next smaller fails when re-analysed
    choice, ok = select(run.spec, run.results)
    assert names[choice[0]] == chosen and ok[0]


def test_sized_case_reads_back_with_the_chosen_section(tmp_path):
    from cablefe.design.sizing import write_sized_case
    spec = parse_case(SIZED)
    run = size_members(spec, cablefe.solve(cablefe.build_model(spec)))
    path = write_sized_case(tmp_path / "sized.toml", run.spec, "x.toml", cablefe.CAUTION)
    back = cablefe.read_case(path)
    assert {m.section for m in back.members if m.id.startswith("H")} == {run.spec.members[0].section}
    assert_allclose(back.sections[run.spec.members[0].section].area, run.spec.sections[run.spec.members[0].section].area)


@pytest.mark.parametrize("change, key", [
    ({"design": {"cable_facter": 2}}, "design.cable_facter"),
    ({"design": {"results": ["nope"]}}, "design.results[0]"),
    ({"design": {"cable_factor": 0.5}}, "design.cable_factor"),
    ({"design": {"size": [{"members": "H*", "catalogue": "missing"}]}}, "design.size[0].catalogue"),
    ({"design": {"size": [{"members": "Z*", "catalogue": "strands"}]}}, "design.size[0].members"),
    ({"catalogues": {"strands": {"material": "nothing", "sections": []}}}, "catalogues.strands.material"),
])
def test_design_input_errors_name_their_key(change, key):
    data = {**SIZED, **change}
    with pytest.raises(CaseError) as err:
        parse_case(data, source=None)
    assert err.value.key == key


def test_csv_catalogue_beside_the_case_is_read_with_header_units(tmp_path):
    (tmp_path / "cat.csv").write_text("name,material,area [mm^2],breaking_load [kN]\nA,strand,100,150\nB,strand,50,75\n")
    data = {**SIZED, "catalogues": {}, "design": {"size": [{"members": "H*", "catalogue": "cat"}]}}
    spec = parse_case(data, source=str(tmp_path / "case.toml"))
    cat = spec.catalogues["cat"]
    assert [s.name for s in cat.sections] == ["B", "A"]       # smallest first
    assert_allclose([cat.sections[1].area, cat.sections[1].breaking_load], [100e-6, 150e3])
    assert spec.raw["catalogues"]["cat"]["sections"][0]["area"] == "100 mm^2"   # inlined for rewriting
    (tmp_path / "cat.csv").write_text("name,material,areas [mm^2]\nA,strand,100\n")
    with pytest.raises(CaseError) as err:
        parse_case(data, source=str(tmp_path / "case.toml"))
    assert err.value.key == "design.size[0].catalogue" and "areas" in err.value.message


def test_plots_draw_no_magnified_round_off_and_face_the_sway():
    from cablefe.report.plots import choose_view, magnification
    model = cablefe.build_model(parse_case(TWO_HANGERS))
    c = model.coordinates
    # round-off-sized movement (1e-13 m on a 10 m model) is not magnified
    scale, biggest = magnification(model, c + 1e-13)
    assert scale == 0.0 and biggest > 0
    # a 10 mm movement on a 10 m model is drawn at 5 % of the size with a round factor: 0.5 / 0.01 = 50
    moved = c.copy()
    moved[:, 2] -= 0.01
    assert magnification(model, moved)[0] == 50.0
    # taller than wide: a mast, seen in the vertical plane of its largest sway
    sway = np.zeros_like(c)
    sway[:, 1] = 0.2
    assert choose_view(model, sway)[:2] == ((1, 2), "mast")


def test_sizing_says_when_the_choice_oscillates(monkeypatch):
    # A selection that comes back to an earlier choice (stiffness moving load
    # back and forth between groups) must stop, take the larger section of
    # the cycle and say so, not loop until the iteration limit.
    from cablefe.design import sizing
    spec = parse_case(SIZED)
    results = cablefe.solve(cablefe.build_model(spec))
    picks = iter([[0], [1], [2], [1], [2], [1], [2]])
    monkeypatch.setattr(sizing, "select", lambda s, r: (next(picks), [True]))
    monkeypatch.setattr(sizing, "_analyse", lambda s, names, *a: (s, results, None))
    run = sizing.size_members(spec, results)
    assert not run.settled
    assert "oscillates" in run.history["message"]
    assert [h["H*"] for h in run.history["history"]] == ["S20", "S30", "S45", "S45"]


def test_study_envelope_is_checked_like_a_result(verify):
    # envelope values (case units, kN) enter the same definitions:
    # cable u = 2.5 * 60 / 200; slack u = 0.2 * T_perm / T_min = 0.2 * 30 / 1.5
    results = _solve(TWO_HANGERS)
    env = {"name": "crowd", "kind": "patch", "base": "permanent",
           "members": {"H1": {"max_tension": 60.0, "min_tension": 1.5, "slack": False}}}
    out = run_checks(results.model.spec.design, results, {"crowd": env})
    by = {(c.item, c.check, c.result): c for c in out.checks}
    verify.check("study envelope: cable utilization and slack margin from envelope tensions",
                 "common practice (form of the checks); permanent tension by statics of a vertical hanger",
                 [by["H1", "cable", "crowd"].utilization, by["H1", "slack", "crowd"].utilization],
                 [2.5 * 60 / 200, 0.2 * 30 / 1.5], rtol=1e-9)
    assert ("H2", "cable", "crowd") not in by          # not in the envelope: nothing invented
    assert "crowd" in out.results


def test_sizing_says_when_no_section_makes_a_slack_margin_pass(verify):
    # H2's live tension is a tenth of its permanent one (2 of 20 kN): with
    # min_tension = 0.2 its slack margin u = 0.2 x 20 / 2 = 2 whatever its
    # section (statically determinate hangers: statics alone gives the
    # tensions).  Sizing must say that no catalogue section passes it, keep
    # the size strength asks for, and mark the group as failing.
    from cablefe.design.sizing import with_final_checks
    data = {**TWO_HANGERS, "catalogues": SIZED["catalogues"],
            "design": {**TWO_HANGERS["design"], "size": [{"members": "H*", "catalogue": "strands"}]}}
    spec = parse_case(data)
    run = size_members(spec, cablefe.solve(cablefe.build_model(spec)))
    assert run.settled and run.history["final"]["H*"]["passes"]     # strength alone passes
    # strength: 2.5 x 40 kN = 100 kN of breaking load: S60 has 90 kN, S80 has 120 kN
    # (statically determinate: the tension does not depend on the section); the
    # slack margin does not push the group to the largest section
    assert run.history["final"]["H*"]["section"] == "S80"
    assert run.history["final"]["H*"]["no_section_passes"] == ["slack"]
    unfixable = run.history["no_section_passes"]
    assert [(e["check"], e["group"]) for e in unfixable] == [("slack", "H*")]
    # the probe with the largest section (S200) gives the statics value again
    verify.check("hanger whose live tension is 2 of 20 kN permanent, min_tension 0.2: slack margin with "
                 "the largest section, 0.2 x 20/2", "common practice (form of the check); statics of a "
                 "statically determinate hanger", unfixable[0]["utilization_with_largest"], 0.2 * 20 / 2,
                 rtol=1e-9)
    assert "no catalogue section makes slack of H* pass" in run.history["message"]
    info = with_final_checks(run.history, run_checks(run.spec.design, run.results), run.spec)
    assert not info["final"]["H*"]["passes"] and info["final"]["H*"]["checks_failing"] == ["slack"]
    assert "still fail" not in info["message"]      # the failure is the one already named


def _hangers_with_deck(limit):
    data = {**SIZED, "report": {"deck": ["D*", "G*.*"]},
            "combinations": [{"name": "permanent", "factors": {"dead": 1.0}},
                             {"name": "full", "factors": {"dead": 1.0, "q": 1.0}}],
            "design": {**SIZED["design"], "deflection_limit": limit, "cable_factor": 2.0}}
    return parse_case(data)


def test_sizing_matches_brute_force_with_every_check(verify):
    # Three hangers under a two-span girder with a permanent state and a deck:
    # cable strength, slack margin, deck deflection and uplift are all
    # checked.  Brute force: every catalogue section analysed and checked in
    # full; the chosen one must pass every check and the next smaller fail one.
    # With span / 720 the deck deflection, not strength, sets the size.
    spec = _hangers_with_deck(720.0)
    results = cablefe.solve(cablefe.build_model(spec))
    run = size_members(spec, results)
    assert run.settled
    names = [s.name for s in spec.catalogues["strands"].sections]
    chosen = names.index(run.spec.members[1].section)
    passing, kinds = [], []
    for k in range(len(names)):
        s, r, _ = _analyse(apply_sections(spec, [k]), results.names)
        out = run_checks(s.design, r)
        kinds.append({c.check for c in out.checks})
        passing.append(all(c.utilization <= 1 for c in out.checks) and not out.uplift)
    assert {"cable", "slack", "deflection-down", "deflection-up"} <= kinds[0]    # every check is in play
    verify.check("sizing of three hangers under a two-span girder with every check: chosen catalogue index",
                 "brute force: every catalogue section re-analysed with every check, the smallest passing one",
                 chosen, passing.index(True))
    assert passing[chosen] and chosen > 0 and not passing[chosen - 1]
    # deflection governs: strength alone, with the forces of the sized design, asks for less
    strength, ok = select(run.spec, run.results)
    assert ok[0] and strength[0] < chosen
    assert run.history["final"]["H*"]["passes"] and run.history["no_section_passes"] == []


def test_deflection_limit_sizes_a_simply_supported_beam_like_the_closed_form(verify):
    # Simply supported beam, live load q on top of a permanent g: the live
    # midspan deflection 5 q L^4 / (384 E I) must stay below L / 300.
    # Source: Young & Budynas 2002, Roark's Formulas for Stress and Strain,
    # 7th ed., table 8.1 case 2e (uniform load, both ends simply supported).
    # So I >= 5 q L^3 300 / (384 E) = 9.30e-5 m^4: the catalogue's 10000 cm^4
    # section, while stress (fy / 1.0) already passes from 4000 cm^4 upwards.
    L, q, E = 10.0, 5e3, 210e9
    inertia = (2000, 4000, 6000, 8000, 10000, 14000, 20000)        # cm^4
    cat = [{"name": f"B{i}", "area": f"{20 + 10 * k} cm^2", "Iy": f"{i} cm^4", "Iz": f"{i} cm^4",
            "J": f"{i / 10} cm^4", "Wy": f"{i / 10} cm^3", "Wz": f"{i / 10} cm^3"} for k, i in enumerate(inertia)]
    data = {"materials": {"steel": {"E": "210 GPa", "fy": "355 MPa"}},
            "sections": {"b": {**BEAM}},
            "catalogues": {"beams": {"material": "steel", "sections": cat}},
            "nodes": {"A": [0, 0, 0], "B": [L, 0, 0]},
            "supports": {"A": "x y z rx", "B": "y z rx"},
            "members": [{"id": "G", "type": "beam", "nodes": ["A", "B"], "section": "b", "divide": 8}],
            "loads": [{"case": "g", "members": ["G"], "per_length": [0, 0, -1]},
                      {"case": "q", "members": ["G"], "per_length": [0, 0, -5]}],
            "combinations": [{"name": "permanent", "factors": {"g": 1.0}},
                             {"name": "live", "factors": {"g": 1.0, "q": 1.0}}],
            "report": {"deck": ["*"]},
            "design": {"deflection_limit": 300, "yield_factor": 1.0,
                       "size": [{"members": "G", "catalogue": "beams"}]}}
    spec = parse_case(data)
    run = size_members(spec, cablefe.solve(cablefe.build_model(spec)))
    assert run.settled
    need = 5 * q * L ** 3 * 300 / (384 * E)
    expected = next(i for i in inertia if i * 1e-8 >= need)
    verify.check("deflection limit L/300 sizes a simply supported beam: chosen I, cm^4",
                 "Young & Budynas 2002, Roark's Formulas for Stress and Strain, 7th ed., table 8.1 case 2e "
                 "(5 q L^4 / 384 E I)", float(run.spec.sections[run.spec.members[0].section].Iy * 1e8),
                 float(expected), rtol=1e-12)
    defl = [c for c in run_checks(run.spec.design, run.results).checks if c.check == "deflection-down"]
    # the live deflection itself, against the closed form (8 elements: nodal values of cubic beam
    # elements are exact for consistent loads; 1e-3 covers the axial/geometric terms of the nonlinear run)
    verify.check("simply supported beam 10 m, live 5 kN/m, sized section: live midspan deflection 5qL^4/384EI",
                 "Young & Budynas 2002, Roark's Formulas for Stress and Strain, 7th ed., table 8.1 case 2e",
                 defl[0].demand, 5 * q * L ** 4 / (384 * E * expected * 1e-8), rtol=1e-3, unit="m")
    assert defl[0].utilization <= 1
    # strength alone asks for less: the deflection governs
    strength, ok = select(run.spec, run.results)
    assert ok[0] and inertia[strength[0]] < expected


def test_cli_names_the_key_of_a_missing_catalogue(tmp_path, capsys):
    from cablefe.cli import main
    case = tmp_path / "case.toml"
    text = (Path(__file__).resolve().parent.parent / "cases" / "sized_hangers.toml").read_text()
    case.write_text(text)        # no example-strands.csv beside this copy
    assert main(["run", str(case), "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "design.size[0].catalogue" in err[0] and "example-strands" in err[0]
    assert not (tmp_path / "out").exists()
