"""No wrong answer reported as converged: failed element solves fail the
step, bad results fail alone, work is bounded, every result carries its
equilibrium check and warnings."""
import dataclasses
import json
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

import cablefe
from cablefe.cli import main
from cablefe.errors import CaseError
from cablefe.spec import Combination, Material, Member, NodalLoad, Section, SelfWeight, TemperatureLoad
from conftest import make_spec

CASES = Path(__file__).resolve().parent.parent / "cases"
E, A, GAMMA = 1.6e11, 1.0e-3, 7.85e4        # Pa, m^2, N/m^3: w0 = 78.5 N/m
W0 = GAMMA * A


def level_cable(span=100.0, L0=102.0, delta_t=0.0, alpha=1.2e-5, divide=1, extra_loads=()):
    """One heavy cable between two level supports (SI)."""
    loads = [SelfWeight("sw")]
    if delta_t:
        loads.append(TemperatureLoad("sw", ("C",), delta_t))
    return make_spec(nodes={"A": (0.0, 0.0, 0.0), "B": (span, 0.0, 0.0)},
                     members=[Member("C", "cable", ("A", "B"), "s", length0=L0, divide=divide)],
                     supports={"A": (True,) * 6, "B": (True,) * 6},
                     loads=loads + list(extra_loads),
                     materials={"st": Material("st", E=E, G=E / 2.6, unit_weight=GAMMA, alpha=alpha)},
                     sections={"s": Section("s", "st", area=A)})


def irvine_level_H(span, L0, w, EA):
    """H of a level elastic catenary: span = H L0/EA + (2H/w) asinh(w L0 / (2H)).

    Irvine 1981, Cable Structures, sec. 1.3 (eq. for the span of a
    symmetric elastic catenary), solved by brentq: independent of the
    element's cancellation-free kernels.
    """
    return brentq(lambda H: H * L0 / EA + 2 * H / w * np.arcsinh(w * L0 / (2 * H)) - span,
                  1e-3, 1e9, xtol=1e-14, rtol=1e-15)


# -- 7. the catenary's weight does not change with temperature ----------------

@pytest.mark.parametrize("delta_t", [0.0, 150.0, -150.0])
def test_heated_catenary_keeps_its_weight_and_matches_irvine(delta_t, verify):
    # source: Irvine 1981, Cable Structures, sec. 1.3: a thermal strain e
    # stretches the unstrained length to L0 (1 + e) with weight w0 / (1 + e)
    # per unit of it; the mass, so the total weight w0 L0, is unchanged.
    span, L0, alpha = 100.0, 102.0, 1.2e-5
    res = cablefe.solve(cablefe.build_model(level_cable(span, L0, delta_t, alpha)))
    assert res.all_converged
    e = alpha * delta_t
    H = irvine_level_H(span, L0 * (1 + e), W0 / (1 + e), E * A)
    V = 0.5 * W0 * L0                                    # hand statics: half the weight at each end
    T = np.hypot(H, V)
    irvine = "Irvine 1981, Cable Structures, sec. 1.3 (elastic catenary, thermal strain)"
    verify.check(f"level heavy cable, temperature change {delta_t:g} K: support tensions",
                 irvine, res.tension("sw", "C"), [T, T], rtol=1e-9, unit="N")
    r = res.reactions("sw")
    # sum of the reactions = the weight w0 L0, whatever the temperature (was (1 + e) w0 L0)
    verify.check(f"level heavy cable, temperature change {delta_t:g} K: sum of vertical reactions = w0 L0",
                 "statics of the whole cable as a free body; " + irvine, r["A"][2] + r["B"][2], W0 * L0,
                 rtol=1e-12, unit="N")
    eq = res["sw"].equilibrium
    verify.check(f"level heavy cable, temperature change {delta_t:g} K: reported total load = w0 L0",
                 "statics: the weight is the mass, unchanged by temperature (hand calculation)",
                 eq["total_load"], [0.0, 0.0, -W0 * L0], rtol=1e-12, atol=1e-9 * W0 * L0, unit="N")


def test_mesh_draws_the_exact_catenary_tension(verify):
    # source: Irvine 1981, Cable Structures, sec. 1.3: T(s) = sqrt(H^2 + v(s)^2)
    # with v(s) = w (s - L0/2) on a level span (unstrained coordinate s);
    # the tension is least (H) at mid-span and not linear between the ends.
    span, L0 = 100.0, 110.0
    res = cablefe.solve(cablefe.build_model(level_cable(span, L0)))
    from cablefe.io.results_io import CURVE_POINTS as c, result_mesh
    mesh = result_mesh(res, "sw")
    H = irvine_level_H(span, L0, W0, E * A)
    s = (np.arange(c - 1) + 0.5) / (c - 1) * L0          # segment middles in unstrained length
    expected = np.hypot(H, W0 * (s - L0 / 2))
    # the results are in kN (force_scale) in a file with units; here N
    verify.check("level heavy cable drawn in the mesh: tension at the middle of each drawn segment",
                 "Irvine 1981, Cable Structures, sec. 1.3: T(s) = sqrt(H^2 + v(s)^2)",
                 mesh.cell_data["tension"][0], expected / res.model.spec.units.force_scale, rtol=1e-9,
                 unit="N")
    # the old drawing (linear between equal end tensions) would be flat
    assert np.ptp(mesh.cell_data["tension"][0]) > 0.01 * expected.max()
    # tension against height along the drawn curve: with dT/ds = w v/T and
    # dz/ds = (v/T)(1 + T/EA) (Irvine 1981, sec. 1.3), dT (1 + T/EA) = w dz, so
    # T + T^2/(2 EA) - w z is constant along an elastic catenary (T = T_A + w (z - z_A)
    # when inextensible)
    k = np.arange(1, c - 1)
    z = mesh.points[2:, 2] * res.model.spec.units.length_scale     # interior points, in order
    T = np.hypot(H, W0 * (k / (c - 1) * L0 - L0 / 2))
    TA = np.hypot(H, W0 * L0 / 2)
    verify.check("level heavy cable drawn in the mesh: T + T^2/(2EA) - w z constant along the curve",
                 "derived from Irvine 1981, Cable Structures, sec. 1.3 (dT/ds = w v/T, dz/ds = (v/T)(1 + T/EA))",
                 T + T**2 / (2 * E * A) - W0 * z, np.full(k.size, TA + TA**2 / (2 * E * A)), rtol=1e-10,
                 unit="N")


# -- 4. equilibrium check against hand statics ---------------------------------

def test_equilibrium_check_against_hand_statics(tmp_path, verify):
    # source: statics of the whole structure as one free body: the support
    # reactions balance the applied loads, self-weight included.  Two
    # catenaries A-C-B with a point load P at C; total weight w0 (L1 + L2).
    P = 3.0e3
    spec = make_spec(nodes={"A": (0.0, 0.0, 0.0), "C": (5.0, 0.0, -0.2), "B": (10.0, 0.0, 0.0)},
                     members=[Member("L", "cable", ("A", "C"), "s", length0=5.01),
                              Member("R", "cable", ("C", "B"), "s", length0=5.02)],
                     supports={"A": (True,) * 6, "B": (True,) * 6,
                               "C": (False, True, False, False, False, False)},
                     loads=[SelfWeight("g"), NodalLoad("g", "C", (0.0, 0.0, -P))],
                     materials={"st": Material("st", E=E, G=E / 2.6, unit_weight=GAMMA)},
                     sections={"s": Section("s", "st", area=A)})
    res = cablefe.solve(cablefe.build_model(spec))
    assert res.all_converged
    total = P + W0 * (5.01 + 5.02)
    eq = res["g"].equilibrium
    statics = "statics of the whole structure as one free body (hand calculation)"
    verify.check("two catenaries with a point load: reported total load = P + w0 (L1 + L2)", statics,
                 eq["total_load"], [0.0, 0.0, -total], rtol=1e-12, atol=1e-12 * total, unit="N")
    r = res.reactions("g")
    verify.check("two catenaries with a point load: sum of vertical reactions = P + w0 (L1 + L2)", statics,
                 r["A"][2] + r["B"][2] + r["C"][2], total, rtol=1e-9, unit="N")
    assert_allclose(eq["reactions_plus_loads"], [0.0, 0.0, 0.0], atol=1e-9 * total)
    assert eq["largest_unbalanced_force"] <= 1e-8 * total
    assert res["g"].warnings == ()
    cablefe.write_results(res, tmp_path)
    entry = json.loads((tmp_path / "results.json").read_text())["results"]["g"]["equilibrium"]
    assert_allclose(entry["total_load"], [0.0, 0.0, -total], rtol=1e-12, atol=1e-12 * total)
    assert set(entry) >= {"largest_unbalanced_force", "reactions_plus_loads", "total_load"}


def test_equilibrium_in_file_units_and_summary(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["solve", str(CASES / "heavy_cable.toml"), "-o", str(out), "--only", "self-weight"]) == 0
    text = capsys.readouterr().out
    assert "equilibrium: largest unbalanced force" in text and "total load" in text
    data = json.loads((out / "results.json").read_text())["results"]["self-weight"]
    model = cablefe.load_model(CASES / "heavy_cable.toml")
    # the total load is the self-weight of the members, in kN
    assert_allclose(-data["equilibrium"]["total_load"][2], model.self_weight() / 1e3, rtol=1e-12)


# -- 2. failed element solves fail the step; bad results fail alone ------------

def test_unconverged_catenary_fails_the_increment(monkeypatch):
    from cablefe import assembly
    real = assembly.catenary.response

    def stubborn(*args, **kwargs):
        r = real(*args, **kwargs)
        return dataclasses.replace(r, converged=np.zeros_like(r.converged))
    monkeypatch.setattr(assembly.catenary, "response", stubborn)
    res = cablefe.solve(cablefe.build_model(level_cable(divide=4)))
    item = res["sw"]
    assert not item.converged             # before: reported converged with the unconverged forces
    assert "did not converge" in item.outcome.message and '"C"' in item.outcome.message


def test_kernel_error_is_a_failed_result_not_a_traceback(monkeypatch):
    from cablefe import assembly
    real = assembly.bar.response

    def broken(xi, *args, **kwargs):
        if np.any(xi[:, 2] < -1e-3):        # fails once the structure has moved
            raise ValueError("unstressed_length must be > 0 m")
        return real(xi, *args, **kwargs)
    monkeypatch.setattr(assembly.bar, "response", broken)
    spec = make_spec(nodes={"A": (0.0, 0.0, 0.0), "C": (5.0, 0.0, 0.0), "B": (10.0, 0.0, 0.0)},
                     members=[Member("L", "bar", ("A", "C"), "s", pretension=1e4),
                              Member("R", "bar", ("C", "B"), "s", pretension=1e4)],
                     supports={"A": (True,) * 6, "B": (True,) * 6,
                               "C": (False, True, False, False, False, False)},
                     loads=[NodalLoad("down", "C", (0.0, 0.0, -5e3)), NodalLoad("side", "C", (1e3, 0.0, 0.0))])
    res = cablefe.solve(cablefe.build_model(spec))
    assert not res["down"].converged and "could not be evaluated" in res["down"].outcome.message
    assert res["side"].converged


def test_vanishing_stress_free_length_fails_that_result_only(tmp_path, capsys):
    spec = cablefe.read_case(CASES / "heavy_cable.toml")
    spec = dataclasses.replace(spec, loads=spec.loads + (TemperatureLoad("frozen", ("*",), -1e6),),
                               combinations=spec.combinations + (Combination("frozen", {"frozen": 1.0}),))
    res = cablefe.solve(cablefe.build_model(spec))
    bad = res["frozen"]
    assert not bad.converged and bad.outcome.status == "invalid-length"
    # alpha 1.2e-5 /K: strain -12, the length vanishes at load factor 1/12
    assert "member" in bad.outcome.message and "load factor 0.08333" in bad.outcome.message
    assert all(r.converged for r in res.items if r.name != "frozen")
    text = (CASES / "heavy_cable.toml").read_text() + (
        '\n[[loads]]\ncase = "frozen"\nmembers = ["*"]\ntemperature = -1e6\n'
        '\n[[combinations]]\nname = "frozen"\nfactors = { frozen = 1.0 }\n')
    case = tmp_path / "frozen.toml"
    case.write_text(text)
    code = main(["solve", str(case), "-o", str(tmp_path / "out")])
    assert code == 1
    data = json.loads((tmp_path / "out" / "results.json").read_text())["results"]
    assert data["frozen"]["status"] == "invalid-length"
    assert all(v["converged"] for k, v in data.items() if k != "frozen")


# -- 5. bounded work ----------------------------------------------------------

def test_work_budget_stops_a_runaway_result():
    # temperature 1e6 K: the towers' cables grow 13-fold; before, this ran for minutes
    spec = cablefe.read_case(CASES / "generated-suspension.toml")
    loads = tuple(dataclasses.replace(ld, delta_t=1e6) if isinstance(ld, TemperatureLoad) and ld.case == "warm"
                  else ld for ld in spec.loads)
    spec = dataclasses.replace(spec, loads=loads,
                               analysis=dataclasses.replace(spec.analysis, max_total_iterations=40))
    res = cablefe.solve(cablefe.build_model(spec), ["warm", "permanent"])
    warm = res["warm"]
    assert not warm.converged and warm.outcome.status == "budget"
    # the budget is checked after each failed increment: at most one increment beyond it
    assert warm.outcome.iterations <= 40 + spec.analysis.max_iterations + 1
    assert "max_total_iterations" in warm.outcome.message
    assert res["permanent"].converged


def test_cut_budget_counts_cuts_over_the_whole_path():
    from cablefe.solvers.newton import NewtonSettings, follow_load_path

    class Hopeless:
        """Converges only at load factors below 1e-3 (a stand-in for a runaway path)."""
        roundoff = 0.0

        def initial_state(self):
            return 0.0

        def impose(self, state, a, b):
            return state

        def evaluate(self, state, lam, want_tangent=True):
            return np.array([0.0 if lam < 1e-3 else np.nan]), 1.0, None

        def advance(self, state, du):
            return state

        def commit(self, state):
            pass

        def solve_linear(self, K, r):
            return -r
    out = follow_load_path(Hopeless(), NewtonSettings(increments=10, max_cuts=50, max_total_cuts=25))
    assert not out.converged and out.status == "budget"


def test_budget_keys_are_read_and_checked(tmp_path):
    text = (CASES / "heavy_cable.toml").read_text()
    case = tmp_path / "c.toml"
    case.write_text(text.replace("[analysis]", "[analysis]\nmax_total_iterations = 77\nmax_total_cuts = 5"))
    a = cablefe.read_case(case).analysis
    assert (a.max_total_iterations, a.max_total_cuts) == (77, 5)
    case.write_text(text.replace("[analysis]", "[analysis]\nmax_total_iterations = 0"))
    with pytest.raises(CaseError, match="analysis.max_total_iterations"):
        cablefe.read_case(case)


# -- 3. warnings: coincident nodes, a mechanism hidden by a zero load ----------

def slack_net(load=0.0):
    """A 3 x 3 net of weightless, slack tension-only bars; edge nodes held."""
    nodes = {f"N{i}{j}": (float(i), float(j), 0.0) for i in range(4) for j in range(4)}
    members = []
    for i in range(4):
        for j in range(4):
            if i < 3 and 0 < j < 3:
                members.append(Member(f"X{i}{j}", "bar", (f"N{i}{j}", f"N{i + 1}{j}"), "s", length0=1.05,
                                      tension_only=True))
            if j < 3 and 0 < i < 3:
                members.append(Member(f"Y{i}{j}", "bar", (f"N{i}{j}", f"N{i}{j + 1}"), "s", length0=1.05,
                                      tension_only=True))
    edge = {n: (True,) * 6 for n in nodes if not (0 < int(n[1]) < 3 and 0 < int(n[2]) < 3)}
    return make_spec(nodes, members, edge, loads=[NodalLoad("none", "N11", (0.0, 0.0, load))],
                     materials={"steel": Material("steel", E=E, G=E / 2.6)})


def test_unloaded_slack_net_is_not_a_plain_success():
    res = cablefe.solve(cablefe.build_model(slack_net()))
    item = res["none"]
    # before: "converged" with every member slack and no warning
    assert any("mechanism" in w for w in item.warnings)


def test_coincident_nodes_are_warned(tmp_path, capsys):
    spec = slack_net()
    nodes = dict(spec.nodes)
    nodes["N11"] = (1.0, 1.0, 0.0)
    nodes["Z"] = (1.0, 1.0, 1e-12)       # within 1e-9 of the 3 m model size
    spec = dataclasses.replace(spec, nodes=nodes)
    model = cablefe.build_model(spec)
    assert any("N11 and Z" in w for w in model.warnings)
    res = cablefe.solve(model)
    assert any("same position" in w for w in res["none"].warnings)
    cablefe.write_results(res, tmp_path)
    data = json.loads((tmp_path / "results.json").read_text())
    assert any("same position" in w for w in data["results"]["none"]["warnings"])


def test_lost_load_is_warned():
    # a load on a node joined to no member is held by nothing the structure has
    spec = level_cable(divide=2)
    spec = dataclasses.replace(spec, nodes={**spec.nodes, "Q": (50.0, 5.0, 0.0)},
                               loads=spec.loads + (NodalLoad("sw", "Q", (0.0, 0.0, -1e3)),))
    res = cablefe.solve(cablefe.build_model(spec))
    assert any("reaches no member and no support" in w for w in res["sw"].warnings)
    assert_allclose(np.linalg.norm(res["sw"].equilibrium["reactions_plus_loads"]), 1e3, rtol=1e-9)


# -- 6. plausibility -----------------------------------------------------------

def test_plausibility_warnings():
    # common practice: a tension beyond the breaking load, a strain beyond a
    # few per cent, a movement beyond a tenth of the structure are mistakes
    soft = Material("soft", E=1e8, G=1e8 / 2.6)
    spec = make_spec(nodes={"A": (0.0, 0.0, 0.0), "C": (5.0, 0.0, 0.0), "B": (10.0, 0.0, 0.0)},
                     members=[Member("L", "bar", ("A", "C"), "s", pretension=1e3),
                              Member("R", "bar", ("C", "B"), "s", pretension=1e3)],
                     supports={"A": (True,) * 6, "B": (True,) * 6,
                               "C": (False, True, False, False, False, False)},
                     loads=[NodalLoad("p", "C", (0.0, 0.0, -2e4))],
                     materials={"soft": soft},
                     sections={"s": Section("s", "soft", area=1e-3, breaking_load=1e4)})
    res = cablefe.solve(cablefe.build_model(spec))
    w = " | ".join(res["p"].warnings)
    assert res["p"].converged
    assert "breaking load" in w and "strain beyond 3%" in w and "more than 10%" in w


def test_huge_area_in_metres_is_warned(tmp_path, capsys):
    text = (CASES / "heavy_cable.toml").read_text()
    spec = cablefe.read_case(CASES / "heavy_cable.toml")
    sec = next(iter(spec.sections.values()))
    spec = dataclasses.replace(spec, sections={**spec.sections, sec.name: dataclasses.replace(sec, area=2.5)})
    model = cablefe.build_model(spec)
    assert any("m^2" in w and "2.5" in w for w in model.warnings)
    assert not any("m^2" in w for w in cablefe.load_model(CASES / "heavy_cable.toml").warnings)
    case = tmp_path / "big.toml"
    case.write_text(text.replace('area = "2200 mm^2"', "area = 2200"))    # mm^2 typed as m^2
    assert main(["check", str(case)]) == 0
    assert "WARNING" in capsys.readouterr().out
