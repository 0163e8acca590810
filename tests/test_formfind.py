"""Form-finding: force density, target method, shaped case and cutting table, CLI."""
import csv
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from numpy.testing import assert_allclose
from scipy.integrate import quad
from scipy.optimize import fsolve

import cablefe
from cablefe.cli import main
from cablefe.elements import bar, catenary
from cablefe.errors import CaseError
from cablefe.io.case_writer import cutting_path
from cablefe.model import build_model
from cablefe.solvers.formfind import (ShapeError, catenary_length_for_chord_force, find_shape,
                                    force_density_shape, length_sensitivity, model_size,
                                    permanent_factors)
from cablefe.solvers.static import solve_combination
from cablefe.spec import (AdjustGroup, AnalysisSettings, Material, Member, NodalLoad, Section,
                          SelfWeight, ShapeSpec)
from conftest import make_spec

CASES = Path(__file__).resolve().parent.parent / "cases"
TIGHT = AnalysisSettings(increments=4, tolerance=1e-11, max_iterations=40)


def _stays_put(model, factors):
    """Largest node movement when the model is solved under ``factors``, and the span."""
    res = solve_combination(model, "check", factors)
    assert res.converged
    span = float(np.linalg.norm(np.ptp(model.coordinates, axis=0)))
    return float(np.max(np.linalg.norm(res.state.positions - model.coordinates, axis=1))), span


# ---------------------------------------------------------------------------
# force density (linear step)
# ---------------------------------------------------------------------------

@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(q=st.lists(st.floats(0.5, 50.0), min_size=4, max_size=4),
       pts=st.lists(st.floats(-5.0, 5.0), min_size=12, max_size=12))
def test_unloaded_free_node_sits_at_weighted_mean_of_neighbours(verify, q, pts):
    ends = np.array(pts).reshape(4, 3)
    names = ["A", "B", "C", "D"]
    nodes = {n: tuple(p) for n, p in zip(names, ends)}
    nodes["F"] = (0.01, 0.02, 0.03) if np.linalg.norm(ends, axis=1).min() > 0.1 else (7.0, 7.0, 7.0)
    members = [Member(f"M{n}", "bar", ("F", n), "s") for n in names]
    spec = make_spec(nodes, members, {n: (True,) * 6 for n in names})
    model = build_model(spec)
    shape = ShapeSpec(method="force-density", force_density={f"M{n}": qi for n, qi in zip(names, q)})
    fd = force_density_shape(model, shape, model.zero_loads())
    # source: Schek 1974, The force density method for form finding and computation of general
    # networks, Comput. Methods Appl. Mech. Eng. 3, eq. for an unloaded node: x = sum q x_j / sum q
    expected = (np.array(q)[:, None] * ends).sum(axis=0) / sum(q)
    source = ("Schek 1974, The force density method for form finding and computation of general "
              "networks, Comput. Methods Appl. Mech. Eng. 3")
    verify.check("force density: unloaded node tied to four random points by random q: its position "
                 "sum q x_j / sum q", source, fd.coordinates[model.node_index["F"]], expected, rtol=0,
                 atol=1e-12 * 10, unit="m")
    # tensions are q times the found lengths
    L = np.linalg.norm(ends - expected, axis=1)
    verify.check("same node: member tensions q L", source + " (definition of the force density)",
                 fd.tension["bar"], np.array(q) * L, rtol=1e-12, unit="N")


def _chain(n, a, rise, P, q, kind="bar", EA_area=1.0e-3):
    nodes = {"A": (0.0, 0.0, 0.0), "B": ((n + 1) * a, 0.0, rise)}
    nodes.update({f"N{i}": (i * a, 0.0, rise * i / (n + 1)) for i in range(1, n + 1)})
    names = ["A"] + [f"N{i}" for i in range(1, n + 1)] + ["B"]
    members = [Member(f"S{k}", kind, (names[k], names[k + 1]), "s", pretension=5.0e3) for k in range(n + 1)]
    loads = [NodalLoad("p", f"N{i}", (0.0, 0.0, -P)) for i in range(1, n + 1)]
    spec = make_spec(nodes, members, {"A": (True,) * 6, "B": (True,) * 6}, loads=loads,
                     sections={"s": Section("s", "steel", area=EA_area)}, analysis=TIGHT)
    return replace(spec, shape=ShapeSpec(method="force-density", permanent=("p",), force_density={"S*": q}))


def test_chain_with_equal_loads_is_the_exact_parabola(verify):
    n, a, rise, P, q = 9, 2.0, 3.0, 1.5e3, 4.0e3
    spec = _chain(n, a, rise, P, q)
    model = build_model(spec)
    fd = force_density_shape(model, spec.shape, model.combined_loads({"p": 1.0}))
    i = np.arange(1, n + 1)
    X = fd.coordinates[[model.node_index[f"N{k}"] for k in i]]
    # source: Schek 1974 (Comput. Methods Appl. Mech. Eng. 3): equal q and equal nodal loads P give
    # z_i = chord_i - (P / 2q) i (n + 1 - i) (second difference P/q), x evenly spaced
    chord = rise * i / (n + 1)
    verify.check("force density: chain of 9 free nodes, equal q and loads, heights",
                 "Schek 1974, Comput. Methods Appl. Mech. Eng. 3 (linear equilibrium of force densities)",
                 X[:, 2], chord - P / (2 * q) * i * (n + 1 - i), atol=1e-12 * rise, unit="m")
    verify.check("force density: chain of 9 free nodes, equal q and loads, horizontal positions evenly spaced",
                 "Schek 1974, Comput. Methods Appl. Mech. Eng. 3 (linear equilibrium of force densities)",
                 X[:, 0], i * a, rtol=1e-13, unit="m")
    assert_allclose(X[:, 1], 0.0, atol=1e-14)


def test_grid_on_hyperbolic_paraboloid_boundary_stays_on_it(verify):
    c, m = 0.08, 7
    nodes, supports, members = {}, {}, []
    for i in range(m):
        for j in range(m):
            x, y = i - 3.0, j - 3.0
            edge = i in (0, m - 1) or j in (0, m - 1)
            nodes[f"G{i}{j}"] = (x, y, c * x * y if edge else 0.0)
            if edge:
                supports[f"G{i}{j}"] = (True,) * 6
    for i in range(m):
        for j in range(m):
            if i + 1 < m and 0 < j < m - 1:
                members.append(Member(f"X{i}{j}", "bar", (f"G{i}{j}", f"G{i + 1}{j}"), "s"))
            if j + 1 < m and 0 < i < m - 1:
                members.append(Member(f"Y{i}{j}", "bar", (f"G{i}{j}", f"G{i}{j + 1}"), "s"))
    model = build_model(make_spec(nodes, members, supports))
    fd = force_density_shape(model, ShapeSpec(method="force-density", force_density={"*": 20.0}),
                             model.zero_loads())
    X = fd.coordinates
    # source: Schek 1974; x*y is harmonic and its grid sampling is discretely harmonic, so equal force
    # densities put every interior node of the grid on z = c x y
    verify.check("force density: 7 x 7 grid, equal q, boundary on z = 0.08 x y: every node on the "
                 "hyperbolic paraboloid", "Schek 1974, Comput. Methods Appl. Mech. Eng. 3; x y is "
                 "discretely harmonic on a grid (hand calculation)", X[:, 2], c * X[:, 0] * X[:, 1],
                 rtol=0, atol=1e-13, unit="m")
    assert_allclose(X[:, :2], model.coordinates[:, :2], rtol=0, atol=1e-13)


def test_force_density_takes_the_first_matching_pattern_and_names_bad_members():
    spec = _chain(3, 2.0, 0.0, 1.0e3, 1.0e3)
    model = build_model(spec)
    loads = model.combined_loads({"p": 1.0})
    shape = ShapeSpec(method="force-density", force_density={"S1": 3.0e3, "S*": 1.0e3})
    fd = force_density_shape(model, shape, loads)
    assert_allclose(fd.force_density["bar"], [1.0e3, 3.0e3, 1.0e3, 1.0e3], rtol=0)
    with pytest.raises(CaseError) as err:
        force_density_shape(model, ShapeSpec(method="force-density", force_density={"S[012]": 1.0e3}), loads)
    assert err.value.key == "shape.force_density" and '"S3"' in str(err.value)
    beam_spec = replace(spec, members=spec.members + (Member("G", "beam", ("A", "B"), "b"),),
                        sections={**spec.sections, "b": Section("b", "steel", 1e-2, Iy=1e-5, Iz=1e-5, J=2e-5)})
    beam_model = build_model(beam_spec)
    with pytest.raises(CaseError) as err:
        force_density_shape(beam_model, spec.shape, beam_model.combined_loads({"p": 1.0}))
    assert err.value.key == "shape.force_density" and '"G"' in str(err.value) and "beam" in str(err.value)


def test_catenary_length_carries_the_chord_force():
    l = np.array([10.0, 6.0, 0.0, 40.0])
    h = np.array([0.0, 8.0, 12.0, -5.0])
    N = np.array([2.0e4, 5.0e3, 3.0e4, 1.0e5])
    w = np.array([150.0, 80.0, 200.0, 500.0])
    EA = np.full(4, 2.0e8)
    L0, ok = catenary_length_for_chord_force(l, h, N, w, EA)
    assert ok.all()
    H, V, conv = catenary.solve_end_forces(l, h, L0, w, EA)
    assert conv.all()
    c = np.hypot(l, h)
    # the matched quantity, by definition: chord component of the mean end force without the weight
    assert_allclose((H * l + (V - 0.5 * w * L0) * h) / c, N, rtol=1e-9)


# ---------------------------------------------------------------------------
# target method
# ---------------------------------------------------------------------------

def test_length_sensitivity_matches_finite_differences():
    rng = np.random.default_rng(3)
    xi = rng.normal(size=(5, 3)) * 2.0
    xj = xi + np.array([[8.0, 1.0, -2.0], [3.0, -4.0, 6.0], [0.5, 0.2, -9.0], [10.0, 0.0, 0.0], [4.0, 4.0, 3.0]])
    pos = np.concatenate([xi, xj])
    n = len(xi)
    nodes = {f"I{k}": tuple(xi[k]) for k in range(n)} | {f"J{k}": tuple(xj[k]) for k in range(n)}
    chord = np.linalg.norm(xj - xi, axis=1)
    members = [Member(f"C{k}", "cable", (f"I{k}", f"J{k}"), "s", length0=float(chord[k] * (1.0 + 0.01 * k)))
               for k in range(n)]
    members += [Member(f"B{k}", "bar", (f"I{k}", f"J{k}"), "s", length0=float(chord[k] * 0.999)) for k in range(n)]
    spec = make_spec(nodes, members, {}, loads=[SelfWeight("g")])
    model = build_model(spec)
    loads = model.combined_loads({"g": 1.0})
    state = cablefe.assembly.State(pos)
    sens = length_sensitivity(model, state, loads)
    # central differences of the element kernels' internal forces at fixed node positions
    for f in ("cable", "bar"):
        t = model.families[f]
        L0 = t.props["unstressed_length"]
        p = t.props

        def force(L):
            if f == "bar":
                return bar.response(xi, xj, L, p["EA"], want_tangent=False).force
            return catenary.response(xi, xj, L, p["EA"], loads.weight["cable"], want_tangent=False).force

        def central(step):
            return (force(L0 + step) - force(L0 - step)) / (2 * step[:, None])

        # Richardson extrapolation of central differences (truncation ~ step^4: a taut heavy
        # cable's force is strongly curved in L0); rounding of the force (1e-13 relative)
        # divided by the step (1e-6 L0) leaves about 1e-7 of the force scale
        step = 1e-6 * L0
        fd = (4 * central(step / 2) - central(step)) / 3
        scale = np.abs(fd).max(axis=1, keepdims=True)
        assert_allclose((sens[f] - fd) / scale, 0.0, rtol=0, atol=1e-6)


def _suspension_polygon(n=8, a=5.0, P=2.0e4, sag=2.0, tolerance=1e-9):
    nodes = {f"N{i}": (i * a, 0.0, -1.0 * 4 * i * (n - i) / n**2) for i in range(n + 1)}
    members = [Member(f"S{i}", "bar", (f"N{i}", f"N{i + 1}"), "s", pretension=5.0e3) for i in range(n)]
    loads = [NodalLoad("p", f"N{i}", (0.0, 0.0, -P)) for i in range(1, n)]
    spec = make_spec(nodes, members, {"N0": (True,) * 6, f"N{n}": (True,) * 6}, loads=loads,
                     sections={"s": Section("s", "steel", area=2.0e-3)}, analysis=TIGHT)
    return replace(spec, shape=ShapeSpec(method="target", permanent=("p",), tolerance=tolerance,
                                         targets={f"N{n // 2}": {"z": -sag}},
                                         adjust=(AdjustGroup(("S*",), together=True),)))


def test_target_sag_of_a_point_loaded_cable_gives_the_parabolic_thrust(verify):
    n, a, P, d = 8, 5.0, 2.0e4, 2.0
    spec = _suspension_polygon(n, a, P, d)
    found = find_shape(spec)
    res = found.equilibrium
    r = res.responses["bar"]
    t = found.model.families["bar"]
    X = res.state.positions
    dx = X[t.nodes[:, 1], 0] - X[t.nodes[:, 0], 0]
    H = r.tension * dx / r.length
    L, w = n * a, P / a
    x = X[:, 0]
    # source: Irvine 1981, Cable Structures, ch. 2: a cable under vertical loads is the funicular
    # of the simply supported beam carrying them, H z(x) = -M(x) (exact statics), with the loads
    # at the found node abscissae
    xs = x[1:-1]
    R = P * np.sum(L - xs) / L
    M = R * x - P * np.sum(np.clip(x[:, None] - xs[None, :], 0.0, None), axis=1)
    source = "Irvine 1981, Cable Structures, ch. 2: funicular of the simply supported beam, H z(x) = -M(x)"
    verify.check("bar cable of 8 panels, 20 kN at each panel point, target midspan sag 2 m: horizontal "
                 "force M_mid/d in every bar", source, H, M[n // 2] / d, rtol=1e-8, unit="N")
    verify.check("same cable: shape H z(x) = -M(x) at the found abscissae", source,
                 X[:, 2] * H[0], -M, rtol=0, atol=1e-8 * H[0] * d, unit="N m")
    # source: Irvine 1981, ch. 2: H = w L^2 / (8 d) for w per horizontal length; equal panel
    # loads P = w a give exactly that for even n (M_mid = P a n^2 / 8) on the undeformed panel
    # points, so the only departure is the shift of the panel points by the stretch N/EA
    strain = np.max(r.tension) / (2.0e11 * 2.0e-3)
    verify.check("same cable: thrust wL^2/8d (tolerance 5 x the strain, the shift of the panel points)",
                 "Irvine 1981, Cable Structures, ch. 2 (H = wL^2/8d)", H, w * L**2 / (8 * d),
                 rtol=5 * strain, unit="N")
    assert abs(found.targets[0].miss) <= spec.shape.tolerance
    moved, span = _stays_put(found.model, {"p": 1.0})
    assert moved < 1e-6 * span


def _irvine_level(L, d, w, EA):
    """H and L0 of an elastic catenary, level supports span L, mid sag d (Irvine 1981, §1.3)."""
    def eqs(v):
        H, L0 = v
        W = w * L0
        # source: Irvine 1981, Cable Structures, §1.3, span and profile at s = L0/2 with V = W/2
        span = H * L0 / EA + (2 * H / w) * np.arcsinh(W / (2 * H))
        sag = W * L0 / (8 * EA) + (H / w) * (np.sqrt(1 + (W / (2 * H)) ** 2) - 1)
        return [span / L - 1, sag / d - 1]
    H0 = w * L**2 / (8 * d)
    sol, info, ok, msg = fsolve(eqs, [H0, L * (1 + 8 / 3 * (d / L) ** 2)], xtol=1e-14, full_output=True)
    assert ok == 1, msg
    return sol


def test_target_sag_of_a_heavy_divided_cable_matches_the_elastic_catenary(verify):
    L, d, n = 100.0, 5.0, 8
    mats = {"strand": Material("strand", E=1.6e11, G=6e10, unit_weight=7.85e4)}
    secs = {"r": Section("r", "strand", area=1.0e-3, weight=150.0)}
    spec = make_spec({"A": (0.0, 0.0, 0.0), "B": (L, 0.0, 0.0)},
                     [Member("C", "cable", ("A", "B"), "r", length0=1.004 * L, divide=n)],
                     {"A": (True,) * 6, "B": (True,) * 6}, loads=[SelfWeight("g")],
                     materials=mats, sections=secs, analysis=TIGHT)
    spec = replace(spec, shape=ShapeSpec(method="target", permanent=("g",), tolerance=1e-9,
                                         targets={f"C.{n // 2}": {"z": -d}}, adjust=(AdjustGroup(("C",)),)))
    found = find_shape(spec)
    H_ref, L0_ref = _irvine_level(L, d, 150.0, 1.6e11 * 1e-3)
    r = found.equilibrium.responses["cable"]
    # target met to 1e-9 m on a 5 m sag: H and L0 follow to about that relative accuracy
    source = "Irvine 1981, Cable Structures, §1.3 (level elastic catenary; solved by scipy.optimize.fsolve)"
    verify.check("heavy cable (150 N/m) of 8 elements, span 100 m, target sag 5 m: horizontal force",
                 source, r.H, H_ref, rtol=1e-7, unit="N")
    verify.check("same cable: found unstressed length", source, found.member_length0[0], L0_ref,
                 rtol=1e-9, unit="m")
    # and the parabolic thrust is within the catenary's (d/L)^2 departure from the parabola
    # source: Irvine 1981, ch. 2, H = w L^2 / (8 d) (load per horizontal length ~ w S / L)
    verify.check("same cable: thrust vs the parabola's wL^2/8d (within 2 (d/L)^2)",
                 "Irvine 1981, Cable Structures, ch. 2 (H = wL^2/8d)", r.H[0],
                 150.0 * L0_ref * L / (8 * d), rtol=2 * (d / L) ** 2, unit="N")


def test_unreachable_targets_name_the_nodes_and_misses():
    spec = _suspension_polygon()
    # one common factor cannot put two nodes off the parabola through them
    shape = replace(spec.shape, targets={"N4": {"z": -2.0}, "N2": {"z": -2.0}}, max_iterations=15)
    with pytest.raises(ShapeError) as err:
        find_shape(replace(spec, shape=shape))
    msg = str(err.value)
    assert "not met" in msg and " m" in msg
    nodes = {r.node for r in err.value.unmet}
    assert nodes and nodes <= {"N2", "N4"}
    assert all(f"{r.node} z" in msg for r in err.value.unmet)
    # a target on a support cannot move at all
    shape = replace(spec.shape, targets={"N0": {"z": 1.0}})
    with pytest.raises(ShapeError, match="no adjusted length moves N0 z"):
        find_shape(replace(spec, shape=shape))


def test_adjusting_nothing_or_beams_is_bad_input():
    spec = _suspension_polygon()
    with pytest.raises(CaseError) as err:
        find_shape(replace(spec, shape=replace(spec.shape, adjust=(AdjustGroup(("Q*",), key="shape.adjust[0]"),))))
    assert err.value.key == "shape.adjust[0].members"


# ---------------------------------------------------------------------------
# shaped case files, cutting table and command line
# ---------------------------------------------------------------------------

def run(*args):
    return subprocess.run([sys.executable, "-m", "cablefe.cli", *map(str, args)], capture_output=True, text=True)


@pytest.fixture(scope="module")
def shaped_footbridge(tmp_path_factory):
    out = tmp_path_factory.mktemp("shape") / "bridge.toml"
    spec = cablefe.read_case(CASES / "shaped_footbridge.toml")
    found = find_shape(spec)
    r = run("shape", CASES / "shaped_footbridge.toml", "-o", out)
    assert r.returncode == 0, r.stderr
    return spec, found, out, r


def test_cli_shape_writes_case_and_cutting_table(shaped_footbridge):
    spec, found, out, r = shaped_footbridge
    assert out.exists() and cutting_path(out) == out.with_name("bridge-cutting.csv") and cutting_path(out).exists()
    assert not list(out.parent.glob(".*")), "no temporary files left behind"
    assert "caution:" in r.stdout and "licensed engineer" in r.stdout
    assert "D4" in r.stdout and "(m)" in r.stdout


def test_shaped_case_round_trip_and_stays_put(shaped_footbridge):
    spec, found, out, _ = shaped_footbridge
    again = cablefe.read_case(out)
    for name, xyz in found.spec.nodes.items():
        assert_allclose(again.nodes[name], xyz, rtol=1e-15, atol=1e-15 * 50)
    L0 = {m.id: m.length0 for m in again.members}
    for k, m in enumerate(found.model.members):
        if m.type in ("cable", "bar"):
            assert_allclose(L0[m.id], found.member_length0[k], rtol=1e-15)
            assert again.members[k].pretension is None
    assert again.shape == spec.shape and again.title == spec.title
    # the targets hold in the reloaded case
    for t in found.targets:
        assert abs(t.miss) <= spec.shape.tolerance
    model = build_model(again)
    moved, span = _stays_put(model, permanent_factors(again.shape))
    assert moved < 1e-6 * span


def test_cutting_table_parses_and_matches_the_elastic_catenary(verify, shaped_footbridge):
    spec, found, out, _ = shaped_footbridge
    with cutting_path(out).open() as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["member", "unstressed_length_m", "tension_kN", "loaded_length_m", "fabrication_length_m"]
    csv_table = {row["member"]: {k: float(v) for k, v in row.items() if k != "member"} for row in rows}
    # the physics below is checked on the full-precision table (m, kN); the file
    # carries it at fabrication precision: lengths to 0.1 mm, tensions to 6 digits
    c = found.cutting
    table = {str(mid): {"unstressed_length_m": c.unstressed_length[k], "tension_kN": c.tension[k] / 1e3,
                        "loaded_length_m": c.loaded_length[k], "fabrication_length_m": c.fabrication_length[k]}
             for k, mid in enumerate(c.member)}
    assert set(csv_table) == set(table)
    for mid, row in csv_table.items():
        for key, v in row.items():
            if "length" in key:
                assert_allclose(v, table[mid][key], rtol=0, atol=0.5e-4 * (1 + 1e-9))
            else:
                assert_allclose(v, table[mid][key], rtol=5e-6)
    model, res = found.model, found.equilibrium
    loads = model.combined_loads(permanent_factors(spec.shape))
    t = model.families["cable"]
    X = res.state.positions
    r = res.responses["cable"]
    for e in range(len(t)):
        mid = model.members[t.member[e]].id
        row = table[mid]
        L0, w, EA = row["unstressed_length_m"], loads.weight["cable"][e], t.props["EA"][e]
        H, V = r.H[e], r.V[e]
        W = w * L0
        T = lambda s: catenary.tension_at(np.array([s]), [H], [V], [L0], [w])[0]
        # source: Irvine 1981, Cable Structures, §1.3: a piece ds of unstressed length stretches to
        # (1 + T/EA) ds, so the loaded arc is the quadrature of (1 + T(s)/EA) over the cutting length
        arc, _ = quad(lambda s: 1.0 + T(s) / EA, 0.0, L0, epsabs=0, epsrel=1e-13)
        verify.check("cutting table of the shaped footbridge, every cable: loaded length",
                     "Irvine 1981, Cable Structures, §1.3, (1 + T/EA) ds integrated by scipy.integrate.quad",
                     row["loaded_length_m"], arc, rtol=1e-12, unit="m")
        # the cutting length spans the found nodes: Irvine's chord equations, §1.3
        l_ref = H * L0 / EA + (H / w) * (np.arcsinh(V / H) - np.arcsinh((V - W) / H))
        h_ref = (W * L0 / EA) * (V / W - 0.5) + (H / w) * (np.sqrt(1 + (V / H) ** 2) - np.sqrt(1 + ((V - W) / H) ** 2))
        d = X[t.nodes[e, 1]] - X[t.nodes[e, 0]]
        verify.check("same cables: chord between the found nodes from the cutting length",
                     "Irvine 1981, Cable Structures, §1.3 (chord equations)",
                     [np.hypot(d[0], d[1]), d[2]], [l_ref, h_ref], rtol=1e-10, atol=1e-10, unit="m")
        # tension column: mean of the end tensions (kN)
        verify.check("same cables: tension column, mean of the end tensions",
                     "Irvine 1981, Cable Structures, §1.3, T = sqrt(H^2 + v^2)",
                     row["tension_kN"] * 1e3, 0.5 * (T(0.0) + T(L0)), rtol=1e-12, unit="N")
        # fabrication at -10 K: L0 (1 + alpha dT)
        verify.check("same cables: fabrication length at -10 K, L0 (1 + alpha dT)",
                     "thermal strain of a free member (common practice)",
                     row["fabrication_length_m"], L0 * (1 + 1.2e-5 * -10.0), rtol=1e-14, unit="m")
    # bars: N = EA (L - L0) / L0 (the interface's definition)
    b = model.families["bar"]
    rb = res.responses["bar"]
    for e in range(len(b)):
        row = table[model.members[b.member[e]].id]
        L0 = row["unstressed_length_m"]
        verify.check("cutting table of the shaped footbridge, every bar: tension EA (L - L0)/L0",
                     "engineering strain of the unstressed length (hand calculation)",
                     row["tension_kN"] * 1e3, b.props["EA"][e] * (rb.length[e] - L0) / L0,
                     rtol=1e-9, atol=1e-9 * b.props["EA"][e] * 1e-9, unit="N")
        assert_allclose(row["loaded_length_m"], rb.length[e], rtol=1e-14)


def test_force_density_net_file_round_trip_stays_put(verify, tmp_path):
    case = tmp_path / "net.toml"
    case.write_text((CASES / "saddle_net.toml").read_text() + """
[shape]
method = "force-density"
permanent = ["self-weight"]
force_density = { "X*" = 10.0, "Y*" = 12.0 }
""")
    out = tmp_path / "net-shaped.toml"
    assert main(["shape", str(case), "-o", str(out)]) == 0
    spec = cablefe.read_case(out)
    assert all(m.length0 is not None and m.pretension is None for m in spec.members)
    moved, span = _stays_put(build_model(spec), {"self-weight": 1.0})
    assert moved < 1e-6 * span
    # source: Schek 1974: the settled shape keeps the force density tensions q L up to the
    # difference between lumped and distributed cable weight (150 mm^2 strand, 2 m members:
    # about 24 N of weight against 20 kN of tension)
    with cutting_path(out).open() as fh:
        rows = list(csv.DictReader(fh))
    X = spec.nodes
    for row in rows:
        m = next(mm for mm in spec.members if mm.id == row["member"])
        L = np.linalg.norm(np.subtract(X[m.nodes[1]], X[m.nodes[0]]))
        q = 10.0 if m.id.startswith("X") else 12.0
        verify.check("saddle net shaped by force density (q = 10 and 12 kN/m), written and solved again: "
                     "every member's tension q L", "Schek 1974, Comput. Methods Appl. Mech. Eng. 3 (up to "
                     "lumped vs distributed cable weight)", float(row["tension_kN"]), q * L, rtol=2e-3,
                     unit="kN")


def test_cli_unmet_targets_exit_1_without_traceback(tmp_path):
    text = (CASES / "shaped_footbridge.toml").read_text()
    case = tmp_path / "bad_targets.toml"
    # C4 held 8 m up and C2 asked below it: the common cable factor cannot do both
    case.write_text(text.replace("C4 = { z = 8.0 }", "C4 = { z = 8.0 }\nC2 = { z = 5.0 }"))
    r = run("shape", case, "-o", tmp_path / "out.toml")
    assert r.returncode == 1, r.stdout + r.stderr
    assert "Traceback" not in r.stderr and "not met" in r.stderr and "C2 z" in r.stderr and " m" in r.stderr
    assert not (tmp_path / "out.toml").exists()


def test_cli_bad_shape_input_exits_2_with_file_and_key(tmp_path):
    case = tmp_path / "bad.toml"
    case.write_text((CASES / "shaped_footbridge.toml").read_text().replace('members = "H*"', 'members = "Q*"'))
    r = run("shape", case, "-o", tmp_path / "out.toml")
    assert r.returncode == 2
    assert r.stderr.strip().count("\n") == 0
    assert "bad.toml" in r.stderr and "shape.adjust[0].members" in r.stderr and "Traceback" not in r.stderr
    assert not (tmp_path / "out.toml").exists()


def test_cli_shape_help_has_examples():
    r = run("shape", "--help")
    assert r.returncode == 0 and "examples:" in r.stdout and "-cutting.csv" in r.stdout


def test_run_shapes_first(tmp_path, capsys):
    assert main(["run", str(CASES / "shaped_footbridge.toml"), "-o", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert (tmp_path / "shaped.toml").exists() and (tmp_path / "shaped-cutting.csv").exists()
    import json
    data = json.loads((tmp_path / "results.json").read_text())
    # displacements are measured from the shaped coordinates: the permanent state does not move
    disp = np.array([v["displacement"] for v in data["results"]["permanent"]["nodes"].values()])
    assert np.abs(disp).max() < 1e-6 * 48.0
    assert "form-finding" in out


def test_beam_deck_keeps_its_stress_free_shape_while_targets_are_reached(tmp_path, caplog):
    import re
    text = (CASES / "shaped_footbridge.toml").read_text()
    text = text.replace('area = "9000 mm^2"', 'area = "9000 mm^2"\nIy = "2e8 mm^4"\nIz = "2e9 mm^4"\nJ = "1e8 mm^4"')
    text = re.sub(r'(id = "D\d-\d"\ntype = )"bar"', r'\1"beam"', text)
    text = text.replace('D0 = "x y z"', 'D0 = "x y z rx"').replace('D8 = "y z"', 'D8 = "y z rx"')
    for k in range(1, 8):
        text = text.replace(f'D{k} = "y"', f'D{k} = "y rx rz"')
    case = tmp_path / "beam_deck.toml"
    case.write_text(text)
    spec = cablefe.read_case(case)
    assert sum(m.type == "beam" for m in spec.members) == 8
    found = find_shape(spec)
    assert all(abs(t.miss) <= spec.shape.tolerance for t in found.targets)
    # the beams were never given new lengths
    beams = [k for k, m in enumerate(found.model.members) if m.type == "beam"]
    assert np.isnan(found.member_length0[beams]).all()
    # the shaped case keeps the deck's stress-free shape: the input's [nodes] of every beam node
    ref = found.spec.beam_reference
    assert set(ref) == {n for k in beams for n in found.model.members[k].node_ids}
    for name, r in ref.items():
        assert r.position == tuple(spec.nodes[name])
    # source: definition of equilibrium -- the shaped case is the found state of the same
    # structure, so re-solving it must not move it (acceptance limit 1e-6 of the size)
    assert found.largest_movement < 1e-6 * model_size(found.model)
    assert "moves" not in caplog.text
