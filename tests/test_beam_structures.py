"""Beams in whole structures: cable-beam models through cablefe.solve.

Outside references: handbook linear beam formulas, a hand compatibility
calculation, the exact circular bending under an end moment, the elastica
(scipy solve_bvp), Euler buckling, central finite differences of the
assembled forces, rigid-body invariance, and the convergence order under
refinement.
"""
import json

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from numpy.testing import assert_allclose
from scipy.integrate import solve_bvp
from scipy.optimize import brentq
from scipy.spatial.transform import Rotation

import cablefe
from cablefe.assembly import Assembler, State, initial_state
from cablefe.cli import main
from cablefe.errors import CaseError
from cablefe.solvers.static import StaticProblem
from cablefe.spec import (AnalysisSettings, Material, Member, MemberLoad, NodalLoad, PatchLoad,
                          PrescribedDisplacement, Section, SelfWeight, TemperatureLoad)
from conftest import make_spec

E, G = 2.1e11, 8.1e10
A, IY, IZ, J = 1.2e-2, 8.0e-5, 2.5e-5, 1.5e-6   # unequal Iy, Iz so that mix-ups show
MATS = {"steel": Material("steel", E=E, G=G, unit_weight=7.85e4, alpha=1.2e-5),
        "strand": Material("strand", E=1.6e11, G=1.6e11 / 2.6, unit_weight=7.85e4)}
SECS = {"girder": Section("girder", "steel", area=A, Iy=IY, Iz=IZ, J=J),
        "stay": Section("stay", "strand", area=5.0e-4),
        # slender strip for the elastica: axial strain P/EA ~ 1e-5 (the
        # elastica is inextensible), yet EA not so large that its round-off
        # (EA * eps per element) swamps the residual test of a fine mesh
        "strip": Section("strip", "steel", area=3.0e-3, Iy=1.0e-8, Iz=4.0e-8, J=1.0e-8)}
FIXED = (True,) * 6
# Stiff members under small loads leave a round-off floor of about 1e-10 in
# the relative residual (EA * eps in the axial forces); 1e-9 is above it.
TIGHT = AnalysisSettings(increments=1, tolerance=1e-9, max_iterations=30)


def spec(nodes, members, supports, loads, analysis=TIGHT, **kw):
    return make_spec(nodes, members, supports, loads=loads, materials=MATS, sections=SECS,
                     analysis=analysis, **kw)


def solve(s):
    res = cablefe.solve(cablefe.build_model(s))
    assert res.all_converged, [r.outcome.message for r in res.items]
    return res


# ---------------------------------------------------------------------------
# linear handbook cases through the whole solver
# ---------------------------------------------------------------------------

def test_simply_supported_girder_under_uniform_load(verify):
    # source: simply supported beam under uniform load w: midspan deflection
    # 5 w L^4 / (384 E I), midspan moment w L^2 / 8, end shear w L / 2
    # (Roark's Formulas for Stress and Strain, Table 8.1, case 2e; from memory).
    # Hermite elements with consistent loads are exact at the nodes for this
    # load; what separates the nonlinear solution from the linear formula is
    # of relative order theta^2, theta = w L^3 / (24 E I) the end slope (the
    # fixed-direction load turns against the rotated girder), ~3e-6 here.
    L, w, n = 12.0, 500.0, 8
    nodes = {"A": (0, 0, 0), "B": (L, 0, 0)}
    sup = {"A": (True, True, True, True, False, False), "B": (False, True, True, False, False, False)}
    members = [Member("G", "beam", ("A", "B"), "girder", divide=n)]
    unit_weight = w / A
    variants = {
        "per_length": [MemberLoad("q", ("G",), (0.0, 0.0, -w))],
        # the same load as two patches along the path A -> B
        "path": [PatchLoad("q", ("A", "B"), (0.0, 0.0, -w), 0.0, 0.4 * L),
                 PatchLoad("q", ("B", "A"), (0.0, 0.0, -w), 0.0, 0.6 * L)],
        "self_weight": [SelfWeight("q")],
    }
    delta = 5 * w * L**4 / (384 * E * IY)
    rtol = (w * L**3 / (24 * E * IY)) ** 2
    for name, loads in variants.items():
        mats = dict(MATS, steel=Material("steel", E=E, G=G, unit_weight=unit_weight))
        s = make_spec(nodes, members, sup, loads=loads, materials=mats, sections=SECS, analysis=TIGHT)
        res = solve(s)
        mid = res.node_displacement("q", f"G.{n // 2}")
        verify.check(f"simply supported girder, uniform load ({name}): midspan deflection 5wL^4/384EI",
                     "Roark's Formulas for Stress and Strain, Table 8.1, case 2e (from memory)",
                     mid[2], -delta, rtol=rtol, unit="m")
        assert abs(mid[1]) < 1e-12 * delta
        d = res.as_dict()["results"]["q"]["members"]["G"]
        moment = np.array(d["moment"])   # (element, end, [My, Mz]), N m (make_spec units)
        shear = np.array(d["shear"])
        # sagging moment = tension at the bottom (-z) fibres = negative My
        verify.check(f"simply supported girder, uniform load ({name}): midspan moment wL^2/8 "
                     "(both sides of the midspan node)",
                     "Roark's Formulas for Stress and Strain, Table 8.1, case 2e (from memory)",
                     [moment[n // 2 - 1, 1, 0], moment[n // 2, 0, 0]], [-w * L**2 / 8] * 2, rtol=rtol,
                     unit="N m")
        # the right-hand part pushes the left-hand part down near A
        verify.check(f"simply supported girder, uniform load ({name}): end shears wL/2",
                     "Roark's Formulas for Stress and Strain, Table 8.1, case 2e (from memory)",
                     [shear[0, 0, 1], shear[-1, 1, 1]], [-w * L / 2, w * L / 2], rtol=rtol, unit="N")
        assert_allclose(moment[:, :, 1], 0.0, atol=1e-9 * w * L**2)


@pytest.mark.parametrize("direction", ["z", "y"])
def test_cantilever_tip_load(direction, verify):
    # source: cantilever with a tip load P: tip deflection P L^3 / (3 E I),
    # fixed-end moment P L (Roark's Formulas for Stress and Strain, Table 8.1,
    # case 1a; from memory).  Nodally exact for Hermite elements; geometric
    # nonlinearity is of relative order theta^2, theta = P L^2 / (2 E I) the
    # tip slope.  A load along global z bends about local y (Iy), along y
    # about local z (Iz).
    L, P = 6.0, 500.0
    axis, I = (2, IY) if direction == "z" else (1, IZ)
    force = np.zeros(3)
    force[axis] = -P
    s = spec({"A": (0, 0, 0), "B": (L, 0, 0)}, [Member("G", "beam", ("A", "B"), "girder", divide=3)],
             {"A": FIXED}, [NodalLoad("tip", "B", tuple(force))])
    res = solve(s)
    tip = res.node_displacement("tip", "B")
    rtol = (P * L**2 / (2 * E * I)) ** 2
    verify.check(f"cantilever, tip load along {direction}: tip deflection PL^3/3EI",
                 "Roark's Formulas for Stress and Strain, Table 8.1, case 1a (from memory)",
                 tip[axis], -P * L**3 / (3 * E * I), rtol=rtol, unit="m")
    d = res.as_dict()["results"]["tip"]
    m = np.array(d["members"]["G"]["moment"])
    # moment vector of the outer part on the inner part: (L e_x) x (-P e_axis)
    expected = np.cross([L, 0, 0], force)
    k = 0 if direction == "z" else 1   # My, or Mz
    verify.check(f"cantilever, tip load along {direction}: fixed-end moment PL (member end and "
                 "support reaction)", "Roark's Formulas for Stress and Strain, Table 8.1, case 1a "
                 "(from memory)", [m[0, 0, k], d["nodes"]["A"]["reaction_moment"][1 + k]],
                 [expected[1 + k], -expected[1 + k]], rtol=rtol, unit="N m")
    verify.check(f"cantilever, tip load along {direction}: support reaction P", "statics of the "
                 "whole cantilever", d["nodes"]["A"]["reaction"][axis], P, rtol=1e-9, unit="N")


def test_stayed_cantilever_hand_calculation(verify):
    # source: hand calculation (compatibility, flexibility method), derived
    # here.  Beam A -> B along x, clamped at A, length L; a bar stay from the
    # tip B to C = (0, 0, h) above the clamp, pinned there; load P down at B.
    # Unknown: the stay tension T.  With Ls = sqrt(L^2 + h^2), the stay pulls
    # the tip towards C with sin a = h/Ls up and cos a = L/Ls back, so the beam
    # tip carries a net downward force P - T sin a and an axial compression
    # T cos a:
    #   tip deflection  v = (P - T sin a) L^3 / (3 E I)     (Roark Table 8.1, 1a)
    #   tip shortening  u = T cos a L / (E A)
    # The stay's stretch is the tip displacement (-u, 0, -v) along the unit
    # vector from C to B, (L, 0, -h)/Ls:  e = (v h - u L)/Ls, and e = T Ls/(Es As).
    # Linear in T; solved below.  The load is small so that the stay's
    # compression on the beam stays ~1e-5 of the cantilever's Euler load and
    # rotations ~1e-5 rad: second-order effects ~1e-5 relative.
    L, h, P = 4.0, 3.0, 1.0e3
    big = Section("big", "steel", area=A, Iy=1.0e-3, Iz=1.0e-3, J=1.0e-3)
    Ls = np.hypot(L, h)
    sa, ca = h / Ls, L / Ls
    EI, EA_b, EA_s = E * 1.0e-3, E * A, 1.6e11 * 5.0e-4

    def mismatch(T):
        v = (P - T * sa) * L**3 / (3 * EI)
        u = T * ca * L / EA_b
        return (v * h - u * L) / Ls - T * Ls / EA_s
    T = brentq(mismatch, 0.0, 10 * P / sa, xtol=1e-12)
    v = (P - T * sa) * L**3 / (3 * EI)
    s = make_spec({"A": (0, 0, 0), "B": (L, 0, 0), "C": (0, 0, h)},
                  [Member("G", "beam", ("A", "B"), "big", divide=2),
                   Member("S", "bar", ("B", "C"), "stay", tension_only=True)],
                  {"A": FIXED, "C": (True, True, True, False, False, False)},
                  loads=[NodalLoad("P", "B", (0.0, 0.0, -P))], materials=MATS,
                  sections=dict(SECS, big=big), analysis=TIGHT)
    res = solve(s)
    source = ("hand calculation, flexibility method with the cantilever tip deflection PL^3/3EI of "
              "Roark's Formulas for Stress and Strain, Table 8.1, case 1a (from memory); root by brentq")
    verify.check("cantilever 4 m propped by a bar stay to 3 m above the clamp, 1 kN at the tip: stay tension",
                 source, res.tension("P", "S"), [T, T], rtol=5e-5, unit="N")
    verify.check("same stayed cantilever: tip deflection", source,
                 res.node_displacement("P", "B")[2], -v, rtol=5e-5, unit="m")
    verify.check("same stayed cantilever: beam axial compression T cos(a)", source,
                 res.tension("P", "G"), [-T * ca, -T * ca], rtol=5e-5, unit="N")


# ---------------------------------------------------------------------------
# large rotations through the full solver
# ---------------------------------------------------------------------------

def test_end_moment_bends_cantilever_into_circle_beyond_quarter_turn(verify):
    # source: pure bending of an elastic beam: constant curvature M / (E I),
    # a circular arc of radius R = E I / M (exact; Euler-Bernoulli).
    # Discretization: under a pure moment each corotated element carries no
    # axial force, so its chord keeps the length h = L/n while the exact arc
    # of angle t = phi/n has chord 2 R sin(t/2) = h (1 - t^2/24 + ...): node
    # positions are off by about t^2/24 relative, and the end rotation is
    # exact (each element turns by M h / (E I)).
    L, n, phi = 5.0, 16, 2.0          # tip turns by 2 rad > pi/2
    M = phi * E * IY / L
    R = E * IY / M
    s = spec({"A": (0, 0, 0), "B": (L, 0, 0)}, [Member("G", "beam", ("A", "B"), "girder", divide=n)],
             {"A": FIXED}, [NodalLoad("m", "B", moment=(0.0, -M, 0.0))],
             analysis=AnalysisSettings(increments=8, tolerance=1e-9, max_iterations=30))
    res = solve(s)
    m = res.model
    ids = [f"G.{k}" for k in range(1, n)] + ["B"]
    s_arc = np.arange(1, n + 1) * L / n
    pos = res["m"].state.positions[[m.node_index[i] for i in ids]]
    # moment about -y curls the beam upwards, centre of the circle at (0, 0, R)
    exact = np.stack([R * np.sin(s_arc / R), 0 * s_arc, R * (1 - np.cos(s_arc / R))], axis=1)
    t = phi / n
    source = "pure bending, Euler-Bernoulli M = EI/R: a circular arc (exact)"
    verify.check("cantilever 5 m (16 beams) bent by an end moment until the tip turns 2 rad: node "
                 "positions on the arc (chord error t^2/24)", source, pos, exact, rtol=0,
                 atol=2 * t**2 / 24 * R * phi, unit="m")
    verify.check("same cantilever: distance of the nodes from the centre of the arc", source,
                 np.linalg.norm(pos - [0, 0, R], axis=1), R, rtol=2 * t**2 / 24, unit="m")
    rot = res.as_dict()["results"]["m"]["nodes"]["B"]["rotation"]
    verify.check("same cantilever: tip rotation ML/EI", source, rot, [0.0, -phi, 0.0], atol=1e-8,
                 unit="rad")
    # constant moment along the member, My = -M at every element end
    verify.check("same cantilever: bending moment -M at every element end", "statics of the free "
                 "body beyond the section",
                 np.array(res.as_dict()["results"]["m"]["members"]["G"]["moment"])[:, :, 0],
                 -M, rtol=1e-8, unit="N m")


def elastica_tip(k2, L=1.0):
    """Tip position (x, drop) of a cantilever under a dead tip load, by
    solving theta'' + k2 cos(theta) = 0, theta(0) = 0, theta'(L) = 0
    (theta below the horizontal, s arc length, k2 = P / EI)."""
    def rhs(s, y):
        return np.vstack([y[1], -k2 * np.cos(y[0]), np.cos(y[0]), np.sin(y[0])])

    def bc(ya, yb):
        return np.array([ya[0], yb[1], ya[2], ya[3]])
    s = np.linspace(0.0, L, 50)
    guess = np.vstack([k2 * (s * L - s**2 / 2), k2 * (L - s), s, 0 * s])
    sol = solve_bvp(rhs, bc, s, guess, tol=1e-10, max_nodes=100000)
    assert sol.success
    return sol.y[2, -1], sol.y[3, -1]


def cantilever_tip_fe(n, k2, L=1.0, increments=4):
    P = k2 * E * 1.0e-8 / L**2
    s = spec({"A": (0, 0, 0), "B": (L, 0, 0)}, [Member("G", "beam", ("A", "B"), "strip", divide=n)],
             {"A": FIXED}, [NodalLoad("P", "B", (0.0, 0.0, -P))],
             analysis=AnalysisSettings(increments=increments, tolerance=1e-8, max_iterations=30))
    res = solve(s)
    tip = res["P"].state.positions[res.model.node_index["B"]]
    return np.array([tip[0], -tip[2]]) / L


def test_elastica_of_cantilever_under_tip_load(verify):
    # source: Bisshopp & Drucker 1945, Large deflection of cantilever beams,
    # Q. Appl. Math. 3, eq. for theta'' + (P/EI) cos(theta) = 0; reference by
    # scipy solve_bvp.  P L^2 / EI = 3 (tip turns by about 1.1 rad).  Mesh
    # error: order 2 (next test) with a constant of about 0.06 L, i.e.
    # 0.06 / 32^2 = 6e-5 L for 32 elements; the strip's axial strain adds
    # ~1e-5.  Allowed: 1e-4 L.
    ref = np.array(elastica_tip(3.0))
    fe = cantilever_tip_fe(32, 3.0)
    verify.check("elastica of a cantilever, PL^2/EI = 3: tip position / L (32 elements)",
                 "Bisshopp & Drucker 1945, Q. Appl. Math. 3; reference by scipy solve_bvp",
                 fe, ref, atol=1e-4)


def test_elastica_converges_at_second_order(verify):
    # source: the corotational element with a linear (cubic Hermite) local
    # beam converges at order 2 in the element length (Crisfield 1997,
    # Non-linear Finite Element Analysis of Solids and Structures, vol. 2,
    # ch. 17; from memory); reference elastica by solve_bvp (Bisshopp &
    # Drucker 1945).
    ref = np.array(elastica_tip(3.0))
    ns = np.array([2, 4, 8, 16])
    err = np.array([np.linalg.norm(cantilever_tip_fe(n, 3.0) - ref) for n in ns])
    rate = -np.polyfit(np.log(ns), np.log(err), 1)[0]
    # pre-asymptotic coarse meshes: allow 0.15 either side of the theory
    verify.check("elastica of a cantilever, PL^2/EI = 3, 2/4/8/16 elements: order of the tip error",
                 "Crisfield 1997, Non-linear Finite Element Analysis of Solids and Structures, vol. 2, "
                 "ch. 17 (from memory); reference elastica Bisshopp & Drucker 1945 by scipy solve_bvp",
                 rate, 2.0, atol=0.15)


def test_euler_load_of_pinned_column_from_assembled_tangent(verify):
    # source: Euler 1744: a pinned column buckles at P = pi^2 E I / L^2.
    # Found as the load at which the smallest eigenvalue of the assembled
    # free-DOF tangent, at the straight compressed equilibrium, crosses zero.
    # The weak axis (Iz) governs.  The model's column is extensible: at the
    # critical load it is shortened by eps = P / EA while its bending
    # stiffness stays E I per undeformed length, so its critical load is
    # pi^2 E I (1 - eps) / (L (1 - eps))^2 = Pe (1 + eps) to first order
    # (derived here; eps = 8e-4, eps^2 negligible).  The discrete load
    # converges as h^2, so two meshes and a Richardson step remove the
    # leading mesh error; what is left is O(h^4) ~ 1e-6 for 16 and 32 elements.
    L = 5.0

    def critical(n):
        s = spec({"A": (0, 0, 0), "B": (L, 0, 0)}, [Member("C", "beam", ("A", "B"), "girder", divide=n)],
                 {"A": (True, True, True, True, False, False), "B": (False, True, True, False, False, False)},
                 [NodalLoad("P", "B", (-1.0, 0.0, 0.0))])
        model = cablefe.build_model(s)
        asm = Assembler(model)
        loads = model.load_cases["P"]

        def smallest(P):
            # straight equilibrium under P: uniform axial strain -P / EA
            pos = model.coordinates * np.array([1.0 - P / (E * A), 1.0, 1.0])
            state = State(pos, initial_state(model).rotations)
            K = asm.evaluate(state, loads, 1.0).tangent.toarray()
            return np.linalg.eigvalsh(0.5 * (K + K.T))[0]
        Pe = np.pi**2 * E * IZ / L**2
        return brentq(smallest, 0.5 * Pe, 1.5 * Pe, xtol=1e-9 * Pe)
    P16, P32 = critical(16), critical(32)
    Pe = np.pi**2 * E * IZ / L**2
    eps = Pe / (E * A)
    verify.check("pinned column: critical load from the tangent (Richardson, 16/32 elements)",
                 "Euler 1744; pi^2 EI/L^2 with the axial shortening correction derived in the test",
                 (4 * P32 - P16) / 3, Pe * (1 + eps), rtol=1e-5, unit="N")
    # and the mesh error itself falls at order 2: by 4 when h halves
    ratio = (P16 - Pe * (1 + eps)) / (P32 - Pe * (1 + eps))
    assert_allclose(ratio, 4.0, rtol=0.05)


# ---------------------------------------------------------------------------
# consistency of the assembled model
# ---------------------------------------------------------------------------

def mixed_spec(up=None, rotate=np.eye(3), gravity=True, loads_scale=1.0):
    """A small cable-beam-bar structure, optionally rotated rigidly."""
    pts = {"A": (0, 0, 0), "B": (6, 0, 0.5), "C": (0, 0, 4), "D": (6, -3, 2), "E": (3, 2, 0)}
    nodes = {k: tuple(rotate @ np.array(v, float)) for k, v in pts.items()}
    up = None if up is None else tuple(rotate @ np.asarray(up, float))
    members = [Member("G", "beam", ("A", "B"), "girder", divide=3, up=up),
               Member("K", "beam", ("E", "G.2"), "girder", divide=2, up=up),
               Member("S", "cable", ("B", "C"), "stay", length0=6.93),
               Member("T", "bar", ("B", "D"), "stay", length0=3.34, tension_only=True)]
    P = rotate @ np.array([2.0e3, 1.0e3, -8.0e3]) * loads_scale
    Mo = rotate @ np.array([3.0e3, -1.0e3, 2.0e3]) * loads_scale
    loads = [NodalLoad("L", "B", tuple(P), tuple(Mo))]
    if gravity:
        loads.append(SelfWeight("L"))
    sup = {"A": FIXED, "C": (True, True, True, False, False, False),
           "D": (True, True, True, False, False, False), "E": FIXED}
    return spec(nodes, members, sup, loads,
                analysis=AnalysisSettings(increments=2, tolerance=1e-10, max_iterations=30))


@settings(max_examples=6, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), scale=st.floats(0.05, 1.0))
def test_tangent_is_derivative_of_assembled_forces_after_large_rotations(seed, scale):
    # source: central finite differences of the assembled internal forces,
    # with the solver's own update (positions add, R <- expm(skew(dtheta)) R).
    # Step h = 1e-6: truncation ~h^2 * |f'''| and round-off ~eps |f| / h both
    # stay below 1e-6 of the tangent's scale.
    rng = np.random.default_rng(seed)
    model = cablefe.build_model(mixed_spec())
    loads = model.load_cases["L"]
    prob = StaticProblem(model, loads)
    s0 = prob.initial_state()
    # a large rigid-ish turn of every node plus a scrambled position field
    rot = Rotation.from_rotvec(rng.normal(size=(len(model.node_ids), 3)) * 0.3
                               + rng.normal(size=3) * scale * 2.0).as_matrix()
    free = model.free
    du = np.zeros(len(free))
    state = prob.advance(State(s0.positions, rot), du)
    state = State(state.positions + 2e-3 * scale * rng.normal(size=state.positions.shape)
                  * (~model.restrained[np.maximum(model.dof[:, :3], 0)]), state.rotations)
    ev = prob.assembler.evaluate(state, loads, 1.0)
    K = ev.tangent.toarray()
    h = 1e-6
    fd = np.empty_like(K)
    for k in range(len(free)):
        e = np.zeros(len(free))
        e[k] = h
        fp = prob.assembler.evaluate(prob.advance(state, e), loads, 1.0, False).internal[free]
        fm = prob.assembler.evaluate(prob.advance(state, -e), loads, 1.0, False).internal[free]
        fd[:, k] = (fp - fm) / (2 * h)
    assert_allclose(K, fd, rtol=0, atol=1e-6 * np.abs(K).max())


@settings(max_examples=4, deadline=None)
@given(angle=st.floats(0.1, 6.0))
def test_rotation_about_vertical_with_gravity_leaves_forces_unchanged(angle):
    # source: objectivity (frame indifference) of the equations of statics:
    # a rigid rotation of structure and loads about the gravity axis rotates
    # the solution and leaves axial forces and local end forces unchanged
    # (exact; tolerance = Newton tolerance 1e-10 relative, amplified by the
    # conditioning of the stiff beam-cable system).
    Q = Rotation.from_rotvec([0.0, 0.0, angle]).as_matrix()
    check_invariance(mixed_spec(), mixed_spec(rotate=Q), Q)


@settings(max_examples=4, deadline=None)
@given(rv=st.tuples(*[st.floats(-2.0, 2.0)] * 3).filter(lambda v: np.linalg.norm(v) > 0.1))
def test_arbitrary_rotation_without_gravity_leaves_forces_unchanged(rv):
    # source: objectivity of statics, as above, for any rotation when only
    # rotated nodal loads act; the beams' up vectors are rotated with them.
    Q = Rotation.from_rotvec(rv).as_matrix()
    up = (0.0, 0.0, 1.0)
    check_invariance(mixed_spec(up=up, gravity=False), mixed_spec(up=up, rotate=Q, gravity=False), Q)


def check_invariance(s0, s1, Q):
    r0, r1 = solve(s0), solve(s1)
    f0, f1 = r0.member_forces("L"), r1.member_forces("L")
    scale = np.abs(f0.tension).max()
    assert_allclose(f1.tension, f0.tension, rtol=0, atol=1e-7 * scale)
    for k in f0.beam_end_forces:
        assert_allclose(f1.beam_end_forces[k], f0.beam_end_forces[k], rtol=0, atol=1e-7 * scale * 6)
    assert_allclose(r1.displacements("L"), r0.displacements("L") @ Q.T, rtol=0, atol=1e-9)


# ---------------------------------------------------------------------------
# wiring: supports, temperature, prescribed rotation, up, outputs
# ---------------------------------------------------------------------------

def test_clamped_girder_under_temperature_takes_axial_force(verify):
    # source: a fully restrained member under a uniform temperature change
    # keeps its length L while its stress-free length becomes L (1 + a dT):
    # N = EA (L - L (1 + a dT)) / (L (1 + a dT)) (the axial law of the
    # interface contract; exact).
    L, dT = 8.0, 25.0
    s = spec({"A": (0, 0, 0), "B": (L, 0, 0)}, [Member("G", "beam", ("A", "B"), "girder", divide=4)],
             {"A": FIXED, "B": FIXED}, [TemperatureLoad("hot", ("G",), dT)])
    res = solve(s)
    strain = 1.2e-5 * dT
    verify.check("girder clamped at both ends, heated by 25 K: axial force EA (L - Ls)/Ls",
                 "elementary restrained thermal bar (common practice; exact)",
                 res.tension("hot", "G"), [-E * A * strain / (1 + strain)] * 2, rtol=1e-8, unit="N")
    assert_allclose(res.displacements("hot"), 0.0, atol=1e-12)


def test_prescribed_support_rotation_of_propped_cantilever(verify):
    # source: slope-deflection with the far end pinned: turning the clamped
    # end by theta takes the moment 3 E I theta / L and the prop reaction
    # 3 E I theta / L^2 (any structural analysis text; from memory).  About
    # local y with Iy and about local z with Iz at once.  Rotations ~3e-4 rad:
    # geometric nonlinearity ~1e-7 relative, round-off of the stiff axial
    # terms ~1e-6 of these small forces.
    L = 3.0
    theta = np.array([0.0, 2.0e-4, -3.0e-4])
    s = spec({"A": (0, 0, 0), "B": (L, 0, 0)}, [Member("G", "beam", ("A", "B"), "girder", divide=2)],
             {"A": FIXED, "B": (False, True, True, False, False, False)},   # a sliding prop
             [PrescribedDisplacement("turn", "A", (0.0, 0.0, 0.0), tuple(theta))],
             analysis=AnalysisSettings(increments=3, tolerance=1e-8, max_iterations=30))
    res = solve(s)
    d = res.as_dict()["results"]["turn"]["nodes"]
    # the clamp's moment on the girder acts in the sense of the imposed turn
    source = "slope-deflection with the far end pinned (any structural analysis text; from memory)"
    verify.check("propped cantilever 3 m, clamp turned by (2e-4, -3e-4) rad about y and z: clamp "
                 "moments 3EI theta/L", source, d["A"]["reaction_moment"][1:],
                 3 * E * np.array([IY, IZ]) * theta[1:] / L, rtol=1e-5, unit="N m")
    verify.check("same propped cantilever: prop reactions 3EI theta/L^2", source,
                 np.array(d["B"]["reaction"])[1:], 3 * E * np.array([-IZ * theta[2], IY * theta[1]]) / L**2,
                 rtol=1e-5, unit="N")


def test_prescribed_rotation_steps_compose_to_the_rotation_vector(verify):
    # source: rotations about one fixed axis commute (Rodrigues; exact), so
    # stepping a prescribed rotation vector in increments ends exactly at
    # expm(theta) whatever the steps; reference rotation from scipy.
    theta = np.array([0.9, -1.3, 0.4])
    s = spec({"A": (0, 0, 0), "B": (3, 0, 0)}, [Member("G", "beam", ("A", "B"), "girder")],
             {"A": FIXED}, [PrescribedDisplacement("turn", "A", (0.0, 0.0, 0.0), tuple(theta))])
    model = cablefe.build_model(s)
    prob = StaticProblem(model, model.load_cases["turn"])
    state = prob.initial_state()
    lams = [0.0, 0.1, 0.35, 0.4, 0.8, 1.0]
    for a, b in zip(lams[:-1], lams[1:]):
        state = prob.impose(state, a, b)
    verify.check("prescribed support rotation vector (0.9, -1.3, 0.4) rad applied in five uneven steps: "
                 "final rotation matrix", "Rodrigues' formula (rotations about one axis commute); "
                 "scipy.spatial.transform.Rotation.from_rotvec",
                 state.rotations[model.node_index["A"]], Rotation.from_rotvec(theta).as_matrix(), atol=1e-14)


def test_up_parallel_to_member_names_the_member():
    s = spec({"A": (0, 0, 0), "B": (0, 0, 5)},
             [Member("T1", "beam", ("A", "B"), "girder", key="members[0]", up=(0.0, 0.0, 2.0))],
             {"A": FIXED}, [NodalLoad("w", "B", (1.0, 0.0, 0.0))])
    with pytest.raises(CaseError) as err:
        cablefe.build_model(s)
    assert err.value.key == "members[0].up"
    assert '"T1"' in str(err.value)


def test_default_up_of_vertical_member_matches_kernel():
    # the model's default for members without ``up`` is the kernel's one
    # (global X for a plumb member), also when other members give ``up``
    from cablefe.elements import beam
    s = spec({"A": (0, 0, 0), "B": (0, 0, 5), "C": (4, 0, 5)},
             [Member("T", "beam", ("A", "B"), "girder"),
              Member("R", "beam", ("B", "C"), "girder", up=(0.0, 1.0, 1.0))],
             {"A": FIXED}, [NodalLoad("w", "C", (0.0, 0.0, -1.0))])
    frames = cablefe.build_model(s).families["beam"].props["frame0"]
    assert_allclose(frames[0], beam.local_frames([[0, 0, 0]], [[0, 0, 5]])[0], atol=1e-15)


def test_footbridge_case_runs_and_reports_deck(tmp_path, capsys):
    case = __file__.rsplit("/tests/", 1)[0] + "/cases/stiffened_footbridge.toml"
    assert main(["run", case, "-o", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    data = json.loads((tmp_path / "results.json").read_text())["results"]
    deck = data["crowd-left"]["deck"]
    assert deck["node"].startswith("D")
    # the reported node really is the deck node that moves most vertically
    dz = {k: v["displacement"][2] for k, v in data["crowd-left"]["nodes"].items() if k.startswith("D")}
    worst = max(dz, key=lambda k: abs(dz[k]))
    assert deck["node"] == worst and deck["vertical"] == dz[worst]
    x = data["crowd-left"]["nodes"][worst]["position"][0] - data["crowd-left"]["nodes"][worst]["displacement"][0]
    line = (f"largest deck deflection {abs(dz[worst]):.3f} m ({'down' if dz[worst] < 0 else 'up'}) "
            f"at node {worst}, x = {x:.1f} m")
    assert line in out
    # the crowd on the left half deflects the left half most
    assert x < 40.0 and dz[worst] < 0
    # beam moments per element end; continuous across the girder's nodes
    g8, g9 = (np.array(data["crowd-left"]["members"][g]["moment"]) for g in ("G8", "G9"))
    assert_allclose(g8[-1, 1], g9[0, 0], rtol=1e-6)
