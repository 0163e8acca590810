"""Path following from the case file: [analysis] control = "arc-length", track.

Outside references: the exact path of the Von Mises two-bar truss (Bažant &
Cedolin 1991, Stability of Structures, ch. 4) and the shallow sinusoidal
arch under a sinusoidal load (Fung & Kaplan 1952; Bažant & Cedolin 1991,
ch. 2), both cited from memory.
"""
import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

import cablefe
from cablefe.cli import main
from cablefe.spec import AnalysisSettings, Material, Member, NodalLoad, Section
from conftest import make_spec

# the Von Mises truss: half-span A, rise H0, bars of axial stiffness EA
A, H0, EA = 10.0, 1.0, 1.0e6
L0 = math.hypot(A, H0)
TOL = 1e-10


def truss_load(u):
    """Apex load P (N, down) in equilibrium at apex drop u (m).

    source: Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from
    memory): N = EA (L - L0) / L0 and P = 2 EA (H0 - u)(1/L - 1/L0) with
    L = sqrt(A^2 + (H0 - u)^2); exact for bars with this strain measure.
    """
    L = np.hypot(A, H0 - u)
    return 2.0 * EA * (H0 - u) * (1.0 / L - 1.0 / L0)


def bar_force(u):
    return EA * (np.hypot(A, H0 - u) - L0) / L0


def limit_point():
    """cos θ* = (cos α)^(1/3) (Bažant & Cedolin 1991, ch. 4, from memory)."""
    theta = math.acos((A / L0) ** (1.0 / 3.0))
    u = H0 - A * math.tan(theta)
    return u, truss_load(u)


TRUSS = """
title = "Von Mises truss"
[units]
length = "m"
force = "N"
[materials.m]
E = "1 MPa"
[sections.s]
material = "m"
area = "1 m^2"
[nodes]
L = [-10, 0, 0]
C = [0, 0, 1]
R = [10, 0, 0]
[supports]
L = "x y z"
R = "x y z"
C = "x y"
[[members]]
id = "left"
type = "bar"
nodes = ["L", "C"]
section = "s"
[[members]]
id = "right"
type = "bar"
nodes = ["C", "R"]
section = "s"
[[loads]]
case = "apex"
node = "C"
force = [0, 0, {P}]
[analysis]
increments = {increments}
tolerance = {tol}
{extra}
"""


def run_truss(tmp_path, P, extra, increments=40):
    case = tmp_path / "truss.toml"
    case.write_text(TRUSS.format(P=-P, increments=increments, tol=TOL, extra=extra))
    out = tmp_path / "out"
    code = main(["solve", str(case), "-o", str(out)])
    return code, json.loads((out / "results.json").read_text())["results"]["apex"]


def test_von_mises_truss_through_its_limit_point_from_the_case_file(tmp_path, verify):
    u_star, P_max = limit_point()
    P = 2.0 * P_max                       # λ = 1 exists only on the inverted branch
    code, res = run_truss(tmp_path, P, 'control = "arc-length"\ntrack = ["C"]')
    assert code == 0 and res["converged"] and res["load_factor"] == 1.0
    lam = np.array([e["load_factor"] for e in res["path"]])
    u = np.array([-e["displacements"]["C"][2] for e in res["path"]])
    assert lam[-1] == 1.0 and np.any(np.diff(lam) < 0)

    # every converged step lies on the exact path: the residual at the only
    # free DOF is λ P - P(u), and converged means |r| <= TOL * ref with ref
    # the larger of the applied load and the summed bar forces at C, so
    # ref <= |λ| P + 2 |N|
    # source: Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory)
    verify.check("Von Mises truss by arc length from a case file: apex load at every converged step "
                 "P = 2EA(H0 - u)(1/L - 1/L0), through the limit point", "Bažant & Cedolin 1991, "
                 "Stability of Structures, ch. 4 (from memory)", lam * P, truss_load(u), rtol=0,
                 atol=TOL * np.max(np.abs(lam) * P + 2 * np.abs(bar_force(u))), unit="N")

    # the path shows the limit point: the largest λ before the snap is the
    # sample nearest u*; with P'(u*) = 0 it is below P_max by at most
    # 1/2 max|P''| h^2, h the distance of that sample from u*
    k = int(np.argmax(np.where(u < H0, lam, -np.inf)))
    assert u[k - 1] < u_star < u[k + 1]
    h = abs(u[k] - u_star)
    grid = np.linspace(u[k - 1], u[k + 1], 2001)
    d2 = np.gradient(np.gradient(truss_load(grid), grid), grid)
    # source: Bažant & Cedolin 1991, ch. 4 (limit load, from memory)
    assert 0.0 <= P_max - lam[k] * P + TOL * 2 * P_max <= 0.5 * np.abs(d2).max() * h**2 + TOL * 4 * P_max
    verify.check("Von Mises truss: largest load of the traced path before the snap vs the limit load "
                 "at cos(theta*) = cos(alpha)^(1/3) (bound: 1/2 max|P''| h^2 for the sample h from the limit)",
                 "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory)", lam[k] * P, P_max,
                 rtol=0, atol=0.5 * np.abs(d2).max() * h**2 + TOL * 4 * P_max, unit="N")
    assert h < 0.05

    # stable up to the limit point, unstable on the descending branch, and
    # stable again on the inverted one, where the result ends
    # source: dP/du < 0 between u* and 2 H0 - u* (Bažant & Cedolin 1991, ch. 4)
    assert res["stability"] == {"negative_pivots": 0, "stable": True}
    assert any("unstable equilibrium" in w for w in res["warnings"])
    u_end = brentq(lambda x: truss_load(x) - P, 2.0 * H0, 4.0 * H0, xtol=1e-14)
    # dP/du ~ 3e3 N/m there: the residual test moves u by < 1e-9 m
    verify.check("Von Mises truss by arc length from a case file: final apex drop where P(u) = P on the "
                 "inverted branch", "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory); "
                 "root by scipy.optimize.brentq", u[-1], u_end, atol=1e-9, unit="m")


def test_load_control_records_the_path_and_warns_of_the_jump(tmp_path, verify):
    u_star, P_max = limit_point()
    code, res = run_truss(tmp_path, 2.0 * P_max, 'track = ["C"]', increments=8)
    assert code == 0 and res["converged"]
    lam = np.array([e["load_factor"] for e in res["path"]])
    u = np.array([-e["displacements"]["C"][2] for e in res["path"]])
    assert np.all(np.diff(lam) > 0) and lam[-1] == 1.0
    # source: Bažant & Cedolin 1991, ch. 4 (from memory): every converged
    # state is on the exact path, none on its unstable branch
    verify.check("Von Mises truss under load control to 2 P_max: apex load at every recorded step, "
                 "P = 2EA(H0 - u)(1/L - 1/L0)", "Bažant & Cedolin 1991, Stability of Structures, ch. 4 "
                 "(from memory)", lam * 2.0 * P_max, truss_load(u), rtol=0,
                 atol=TOL * np.max(lam * 2.0 * P_max + 2 * np.abs(bar_force(u))), unit="N")
    assert not np.any((u > u_star) & (u < 2 * H0 - u_star))
    assert res["stability"]["stable"]
    assert any("limit point" in w and "jumped" in w for w in res["warnings"])


def test_below_the_limit_load_both_controls_agree(tmp_path, verify):
    u_star, P_max = limit_point()
    P = 0.8 * P_max
    _, arc = run_truss(tmp_path, P, 'control = "arc-length"\ntrack = ["C"]')
    _, load = run_truss(tmp_path, P, 'track = ["C"]')
    assert arc["converged"] and load["converged"] and arc["warnings"] == [] == load["warnings"]
    u_ref = brentq(lambda x: truss_load(x) - P, 0.0, u_star, xtol=1e-14)
    for control, res in (("arc length", arc), ("load control", load)):
        # source: Bažant & Cedolin 1991, ch. 4 (from memory); dP/du >= 1e2 N/m
        # on this branch: the residual test moves u by < 1e-9 m
        verify.check(f"Von Mises truss at 0.8 P_max by {control}: apex drop on the stable branch",
                     "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory); root by "
                     "scipy.optimize.brentq", -res["nodes"]["C"]["displacement"][2], u_ref, atol=1e-9,
                     unit="m")
        assert np.all(np.diff([e["load_factor"] for e in res["path"]]) > 0)


@pytest.mark.parametrize("extra, key", [
    ('track = ["C", "Q"]', "analysis.track[1]"),
    ('track = "C"', "analysis.track"),
    ('track = ["C", 3]', "analysis.track[1]"),
    ('track = ["C", "C"]', "analysis.track[1]"),
    ('control = "arclength"', "analysis.control"),
    ('control = 1', "analysis.control"),
])
def test_bad_control_and_track_keys(tmp_path, capsys, extra, key):
    case = tmp_path / "truss.toml"
    case.write_text(TRUSS.format(P=-100.0, increments=4, tol=TOL, extra=extra))
    out = tmp_path / "out"
    assert main(["solve", str(case), "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith(f"cablefe: {case}: {key}: ")
    assert not out.exists()



# ---------------------------------------------------------------------------
# a shallow sinusoidal arch snapping through under a sinusoidal load
# ---------------------------------------------------------------------------

E_ARCH, SPAN, RG, RISE_RATIO = 2.1e11, 10.0, 0.01, 3.0     # RG: radius of gyration (m)
AREA = 0.01
INERTIA = AREA * RG**2
RISE = RISE_RATIO * RG                                      # e = 3 r: a symmetric snap
K1 = math.pi / SPAN


def arch_load(a1):
    """Sinusoidal load amplitude p (N/m, down) in equilibrium at crown rise a1 (m).

    Shallow pinned arch w0 = e sin(πx/L) between immovable supports under
    p sin(πx/L): the symmetric path is the first mode alone, with the axial
    force N = EA k²(a1² - e²)/4 and EI k⁴(a1 - e) + N k² a1 + p = 0,
    k = π/L; the limit point is at a1² = (e² - 4 r²)/3 and no antisymmetric
    bifurcation exists for e < 4 r.  source: Fung & Kaplan 1952, Buckling
    of low arches or curved beams of small curvature, NACA TN 2840, and
    Bažant & Cedolin 1991, Stability of Structures, ch. 2 (both from
    memory); re-derived here from the shallow-arch energy.
    """
    return E_ARCH * INERTIA * K1**4 * (RISE - a1) - E_ARCH * AREA * K1**4 * a1 * (a1**2 - RISE**2) / 4.0


def arch_path(n):
    x = np.linspace(0.0, SPAN, n + 1)
    nodes = {f"N{i}": (x[i], 0.0, RISE * math.sin(K1 * x[i])) for i in range(n + 1)}
    members = [Member(f"B{i}", "beam", (f"N{i}", f"N{i + 1}"), "s") for i in range(n)]
    # in the x-z plane: y, rx and rz restrained everywhere, ends pinned
    supports = {f"N{i}": (False, True, False, True, False, True) for i in range(1, n)}
    supports["N0"] = supports[f"N{n}"] = (True, True, True, True, False, True)
    a_lim = math.sqrt((RISE**2 - 4 * RG**2) / 3.0)
    P = 1.5 * arch_load(a_lim)        # λ = 1 on the inverted branch
    # the sinusoid lumped at equally spaced nodes: discrete orthogonality of
    # the sines keeps the load in the first mode exactly
    loads = [NodalLoad("p", f"N{i}", (0.0, 0.0, -P * math.sin(K1 * x[i]) * SPAN / n)) for i in range(1, n)]
    spec = make_spec(nodes, members, supports, loads=loads,
                     materials={"m": Material("m", E=E_ARCH, G=E_ARCH / 2.6)},
                     # in-plane bending about the local y axis; out of plane made stiff
                     sections={"s": Section("s", "m", area=AREA, Iy=INERTIA, Iz=100 * INERTIA, J=100 * INERTIA)},
                     analysis=AnalysisSettings(increments=10, tolerance=1e-9, max_iterations=30,
                                               control="arc-length", track=(f"N{n // 2}",)))
    res = cablefe.solve(cablefe.build_model(spec)).items[0]
    o = res.outcome
    assert o.converged and o.load_factor == 1.0, o.message
    lam = np.array([e[0] for e in o.path])
    crown = np.array([RISE + e[2][0][2] for e in o.path])     # the tracked crown node is first
    return lam * P, crown, np.array(o.negative_pivots), a_lim


def test_shallow_arch_snaps_through_against_the_shallow_arch_solution(verify):
    p20, a20, neg20, a_lim = arch_path(20)
    p40, a40, neg40, _ = arch_path(40)
    p_max = arch_load(a_lim)
    d20 = np.max(np.abs(p20 - arch_load(a20))) / p_max
    d40 = np.max(np.abs(p40 - arch_load(a40))) / p_max
    # source: Fung & Kaplan 1952; Bažant & Cedolin 1991, ch. 2 (from memory).
    # The model differs from the shallow-arch solution by the mesh, O(h^2)
    # for cubic beam elements under lumped loads, and by the shallow-arch
    # approximations, O((π e / L)^2) ~ 1e-4 of p_max.  Measured: about 2.6e-3 and
    # 7.0e-4.  The whole traced path (through the limit load p_max and the
    # inverted branch) lies within 1e-3 p_max of the solution at 40
    # elements, and the error falls at order 2 (rate 2 -/+ 0.3: the 1e-4
    # floor is 0.14 of the finer error)
    assert d40 < 1e-3
    verify.check("shallow sinusoidal arch (e = 3 r, 40 beam elements) by arc length: load at every "
                 "converged step vs the shallow-arch solution at the same crown rise, through the "
                 "snap-through (tolerance 1e-3 p_max)", "Fung & Kaplan 1952, NACA TN 2840; Bažant & "
                 "Cedolin 1991, Stability of Structures, ch. 2 (both from memory)",
                 p40, arch_load(a40), rtol=0, atol=1e-3 * p_max, unit="N/m")
    assert 1.7 < math.log2(d20 / d40) < 2.3
    verify.check("shallow sinusoidal arch, 20 and 40 beam elements: order of the largest load error",
                 "Fung & Kaplan 1952, NACA TN 2840 (from memory); O(h^2) of cubic beam elements",
                 math.log2(d20 / d40), 2.0, atol=0.3)
    # the path goes over the limit point and comes back: λ falls after it
    assert np.max(p40) == p40[-1] and np.any(np.diff(p40) < 0)
    assert np.any(p40[:-1] > 0.95 * p_max) and a40.min() < -a_lim
    # unstable exactly on the descending branch |a| < a_lim (where dp/da > 0
    # with a falling); checked away from the limit points, where the
    # count changes
    for a, n in zip(a40, neg40):
        if abs(abs(a) / a_lim - 1.0) > 0.05:
            assert (n > 0) == (abs(a) < a_lim), (a / a_lim, n)
            verify.check("shallow sinusoidal arch, 40 elements: unstable (negative pivots) exactly on the "
                         "descending branch |a| < a_lim, a_lim^2 = (e^2 - 4r^2)/3 (1 = unstable)",
                         "Fung & Kaplan 1952, NACA TN 2840; Bažant & Cedolin 1991, Stability of Structures, "
                         "ch. 2 (both from memory)", float(n > 0), float(abs(a) < a_lim))


def test_arc_length_on_a_load_that_moves_nothing(tmp_path):
    # no load: no first arc length can be set; the result is the unloaded
    # equilibrium (the drawn geometry, stress-free: zero displacement), by
    # load control
    code, res = run_truss(tmp_path, 0.0, 'control = "arc-length"\ntrack = ["C"]')
    assert code == 0 and res["converged"] and res["load_factor"] == 1.0
    assert res["nodes"]["C"]["displacement"] == [0.0, 0.0, 0.0]
    assert res["path"][-1]["displacements"]["C"] == [0.0, 0.0, 0.0]


def test_arc_length_passes_where_a_shaped_structure_stands_still(tmp_path):
    # a case freshly shaped (form-finding) under the loads it is then solved
    # for: the drawn geometry is the equilibrium at λ = 0 and at λ = 1, so
    # the displacements go out and come back, standing still (du/dλ = 0) on
    # the way, which a cylindrical arc length cannot pass (it stalled at
    # λ = 0.5 here).  Consistency with load control: both end in states that
    # satisfy the same residual test (1e-8 of the load scale)
    from pathlib import Path
    case = Path(__file__).resolve().parents[1] / "cases" / "shaped_footbridge.toml"
    text = case.read_text()
    assert text.count("[analysis]\n") == 1
    arc = tmp_path / "arc.toml"
    arc.write_text(text.replace("[analysis]\n", '[analysis]\ncontrol = "arc-length"\n'))
    shaped = tmp_path / "shaped.toml"
    assert main(["shape", str(arc), "-o", str(shaped)]) == 0
    assert 'control = "arc-length"' in shaped.read_text()
    load = tmp_path / "load.toml"
    load.write_text(shaped.read_text().replace('control = "arc-length"', 'control = "load"'))
    assert main(["solve", str(load), "-o", str(tmp_path / "load")]) == 0
    assert main(["solve", str(shaped), "-o", str(tmp_path / "arc")]) == 0
    a = json.loads((tmp_path / "arc" / "results.json").read_text())["results"]
    b = json.loads((tmp_path / "load" / "results.json").read_text())["results"]
    for name in b:
        assert a[name]["converged"] and a[name]["stability"]["stable"]
        ta = np.array([m["tension"] for m in a[name]["members"].values()])
        tb = np.array([m["tension"] for m in b[name]["members"].values()])
        # measured 5e-9; 1e-6 of the largest tension leaves room for the
        # different iterates of the two drivers within the residual test
        assert_allclose(ta, tb, rtol=0, atol=1e-6 * np.abs(tb).max())
