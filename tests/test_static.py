"""Whole-model nonlinear statics against closed-form and published results."""
import numpy as np
from hypothesis import given, settings, strategies as st
from numpy.testing import assert_allclose
from scipy.optimize import brentq

import cablefe
from cablefe.spec import (Material, Member, NodalLoad, PrescribedDisplacement, Section, SelfWeight,
                          TemperatureLoad)
from conftest import make_spec

EA = 2.0e11 * 1.0e-3


def test_prestressed_string_with_central_point_load(verify):
    # source: statics of a two-bar string (equilibrium of the loaded node; exact):
    # P = 2 N sin(theta), N = EA (L - L0)/L0, L = a / cos(theta).  Exact.
    a, L0, P = 5.0, 4.99, 20e3
    spec = make_spec(
        nodes={"A": (-a, 0, 0), "C": (0, 0, 0), "B": (a, 0, 0)},
        members=[Member("L", "bar", ("A", "C"), "s", length0=L0),
                 Member("R", "bar", ("C", "B"), "s", length0=L0)],
        supports={"A": (True,) * 6, "B": (True,) * 6, "C": (False, True, False, False, False, False)},
        loads=[NodalLoad("point", "C", (0.0, 0.0, -P))])
    res = cablefe.solve(cablefe.build_model(spec))
    assert res.all_converged

    def balance(u):
        L = np.hypot(a, u)
        return 2 * EA * (L - L0) / L0 * u / L - P
    u = brentq(balance, 0.0, 1.0, xtol=1e-15)
    L = np.hypot(a, u)
    verify.check("prestressed two-bar string, central point load: displacement of the loaded node",
                 "statics of the loaded node, P = 2 N sin(theta), N = EA (L - L0)/L0 (exact; root by brentq)",
                 res.node_displacement("point", "C"), [0, 0, -u], atol=1e-10, unit="m")
    verify.check("prestressed two-bar string, central point load: bar tension",
                 "statics of the loaded node, P = 2 N sin(theta), N = EA (L - L0)/L0 (exact; root by brentq)",
                 res.tension("point", "L"), [EA * (L - L0) / L0] * 2, rtol=1e-9, unit="N")
    # reactions balance the load: the support pulls up by P/2 at each end
    r = res.reactions("point")
    verify.check("prestressed two-bar string: vertical reactions sum to the load", "statics of the "
                 "whole string", r["A"][2] + r["B"][2], P, rtol=1e-9, unit="N")


def _parabolic_chain(n, w=2.0e3, span=100.0, sag=8.0, E=1.6e11, A=5.0e-3):
    """A chain of n bars cut from the exact parabolic cable of sag ``sag``.

    Each bar gets the unstressed length of the parabolic arc it replaces,
    ∫ ds / (1 + T/EA) with T = H sqrt(1 + z'^2), so only the discretization
    separates the chain from the continuous cable.
    """
    from scipy.integrate import quad
    H = w * span**2 / (8 * sag)
    EA_ = E * A

    def z(x):
        return -4 * sag * x / span * (1 - x / span)

    def dz(x):
        return -4 * sag / span * (1 - 2 * x / span)

    xs = np.linspace(0.0, span, n + 1)
    L0 = [quad(lambda x: np.sqrt(1 + dz(x)**2) / (1 + H * np.sqrt(1 + dz(x)**2) / EA_), a, b,
               epsabs=0, epsrel=1e-13)[0] for a, b in zip(xs[:-1], xs[1:])]
    nodes = {f"P{k}": (xs[k], 0.0, z(xs[k])) for k in range(n + 1)}
    members = [Member(f"E{k}", "bar", (f"P{k}", f"P{k+1}"), "s", length0=L0[k]) for k in range(n)]
    sup = {f"P{k}": (False, True, False, False, False, False) for k in range(1, n)}
    sup.update({"P0": (True,) * 6, f"P{n}": (True,) * 6})
    # w per horizontal length, lumped at the nodes: w * span / n at each interior node
    loads = [NodalLoad("w", f"P{k}", (0.0, 0.0, -w * span / n)) for k in range(1, n)]
    spec = make_spec(nodes, members, sup, loads=loads,
                     materials={"st": Material("st", E=E, G=E / 2.6)},
                     sections={"s": Section("s", "st", area=A)})
    res = cablefe.solve(cablefe.build_model(spec))
    assert res.all_converged
    mid = res["w"].state.positions[res.model.node_index[f"P{n // 2}"]]
    return -mid[2], -res.reactions("w")["P0"][0], res


def test_parabolic_cable_converges_at_second_order(verify):
    # source: parabolic cable under w per horizontal length, H = w L^2 / (8 d),
    # support tension sqrt(H^2 + (wL/2)^2) (Irvine 1981, Cable Structures,
    # ch. 2; common practice).  A chain of bars with the load lumped at its
    # nodes converges to it at order 2 (the lumped load is the midpoint rule of
    # the distributed one; common practice).
    w, span, sag = 2.0e3, 100.0, 8.0
    ns, errs = [4, 8, 16, 32], []
    for n in ns:
        d, H, res = _parabolic_chain(n, w, span, sag)
        # statics of the lumped chain: thrust times mid sag is the midspan
        # moment of a simply supported span carrying the same point loads at
        # the nodes' deformed x positions (tends to w L^2 / 8)
        x = res["w"].state.positions[[res.model.node_index[f"P{k}"] for k in range(1, n // 2)], 0]
        P = w * span / n
        moment = (n - 1) * P / 2 * span / 2 - np.sum(P * (span / 2 - x))
        verify.check("bar chains (4 to 32 bars) cut from a parabolic cable, span 100 m, lumped loads: "
                     "thrust x mid sag = midspan moment of the simply supported span",
                     "statics of the lumped chain (funicular polygon; Irvine 1981, Cable Structures, ch. 2)",
                     H * d, moment, rtol=1e-9, unit="N m")
        errs.append(abs(d - sag) / sag)
    rate = -np.polyfit(np.log(ns), np.log(errs), 1)[0]
    verify.check("same bar chains: order of convergence of the mid sag to the parabola's 8 m",
                 "Irvine 1981, Cable Structures, ch. 2 (H = wL^2/8d); lumped load as the midpoint rule "
                 "(common practice)", rate, 2.0, atol=0.1)
    # the loop's last pass: 32 bars
    verify.check("same cable as 32 bars: mid sag vs the parabola's", "Irvine 1981, Cable Structures, ch. 2 "
                 "(H = wL^2/8d; common practice)", d, sag, rtol=1e-3, unit="m")
    # the reaction of the finest chain approaches the support tension
    H_exact = w * span**2 / (8 * sag)
    r = res.reactions("w")["P0"]
    verify.check("same cable as 32 bars: support reaction vs sqrt(H^2 + (wL/2)^2) (less the lumped end load)",
                 "Irvine 1981, Cable Structures, ch. 2 (common practice)", np.hypot(r[0], r[2]),
                 np.hypot(H_exact, w * span / 2 * (1 - 1 / 32)), rtol=2e-3, unit="N")


def test_divided_catenary_is_exact_and_bar_chain_converges_to_it():
    # source: Irvine 1981, Cable Structures, §1.3: a cable divided into exact
    # elastic catenary elements has its nodes on the same exact curve as one
    # element; a chain of bars with lumped weight converges to it at order 2.
    span, dz, L0 = 120.0, 20.0, 128.0
    mat = {"st": Material("st", E=1.6e11, G=1.6e11 / 2.6, unit_weight=0.0)}
    sec = {"s": Section("s", "st", area=2.0e-3, weight=150.0)}

    def hang(kind, n):
        spec = make_spec({"A": (0, 0, 0), "B": (span, 0, dz)},
                         [Member("C", kind, ("A", "B"), "s", length0=L0, divide=n)],
                         {"A": (True,) * 6, "B": (True,) * 6},
                         loads=[SelfWeight("g")], materials=mat, sections=sec)
        return cablefe.solve(cablefe.build_model(spec))

    one = hang("cable", 1)
    H1, V1 = one["g"].responses["cable"].H[0], one["g"].responses["cable"].V[0]
    eight = hang("cable", 8)
    assert eight.all_converged
    assert_allclose(-eight.reactions("g")["A"][0], H1, rtol=1e-9)
    assert_allclose(eight.reactions("g")["B"][2], V1, rtol=1e-9)
    # bar chains with the weight lumped at the nodes
    ns, errs = [8, 16, 32, 64], []
    for n in ns:
        r = hang("bar", n)
        errs.append(abs(-r.reactions("g")["A"][0] - H1) / H1)
    rate = -np.polyfit(np.log(ns), np.log(errs), 1)[0]
    assert_allclose(rate, 2.0, atol=0.15)


def _net_spec(rotation=np.eye(3), shift=np.zeros(3), weight=False):
    nodes, members, sup = {}, [], {}
    for i in range(4):
        for j in range(4):
            x = np.array([i * 2.0, j * 2.0, 0.3 * (i - 1.5) * (j - 1.5)])
            nodes[f"N{i}{j}"] = tuple(rotation @ x + shift)
            if i in (0, 3) or j in (0, 3):
                sup[f"N{i}{j}"] = (True, True, True, False, False, False)
    for i in range(4):
        for j in range(4):
            if i < 3 and 0 < j < 3:
                members.append(Member(f"X{i}{j}", "cable", (f"N{i}{j}", f"N{i+1}{j}"), "s", pretension=5e3))
            if j < 3 and 0 < i < 3:
                members.append(Member(f"Y{i}{j}", "bar", (f"N{i}{j}", f"N{i}{j+1}"), "s", pretension=4e3,
                                      tension_only=True))
    load = rotation @ np.array([300.0, -200.0, -1500.0])
    loads = [NodalLoad("p", "N11", tuple(load)), NodalLoad("p", "N22", tuple(0.5 * load))]
    if weight:
        loads.append(SelfWeight("p"))
    return make_spec(nodes, members, sup, loads=loads)


def _rot(axis, angle):
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    K = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    return np.eye(3) + np.sin(angle) * K + (1 - np.cos(angle)) * K @ K


@settings(max_examples=8, deadline=None)
@given(st.lists(st.floats(-1, 1), min_size=3, max_size=3).filter(lambda v: np.linalg.norm(v) > 0.1),
       st.floats(-np.pi, np.pi), st.lists(st.floats(-50, 50), min_size=3, max_size=3))
def test_rigid_motion_leaves_tensions_unchanged(axis, angle, shift):
    # source: objectivity of the continuum (Truesdell & Noll 1965, The
    # non-linear field theories of mechanics): forces are frame-indifferent.
    base = cablefe.solve(cablefe.build_model(_net_spec()))
    moved = cablefe.solve(cablefe.build_model(_net_spec(_rot(axis, angle), np.array(shift))))
    assert base.all_converged and moved.all_converged
    assert_allclose(moved.member_forces("p").tension, base.member_forces("p").tension, rtol=1e-7, atol=1e-6)


@settings(max_examples=5, deadline=None)
@given(st.floats(-np.pi, np.pi), st.lists(st.floats(-50, 50), min_size=3, max_size=3))
def test_heavy_model_is_invariant_under_rotation_about_gravity(angle, shift):
    # source: as above; with weight acting in -z only rotations about z keep the load
    base = cablefe.solve(cablefe.build_model(_net_spec(weight=True)))
    moved = cablefe.solve(cablefe.build_model(_net_spec(_rot([0, 0, 1], angle), np.array(shift), True)))
    assert_allclose(moved.member_forces("p").tension, base.member_forces("p").tension, rtol=1e-7, atol=1e-6)


def test_temperature_and_support_movement_of_a_tie(verify):
    # source: linear thermoelasticity of a restrained bar, N = -EA alpha dT
    # (Timoshenko & Goodier 1951, Theory of Elasticity, ch. 14), here with the
    # geometrically exact strain; and a support moved along the tie adds
    # EA * d / L0.  Exact for a straight bar.
    mat = {"steel": Material("steel", E=2.0e11, G=7.7e10, alpha=1.2e-5)}
    spec = make_spec({"A": (0, 0, 0), "B": (10, 0, 0)},
                     [Member("T", "bar", ("A", "B"), "s", pretension=50e3)],
                     {"A": (True,) * 6, "B": (True,) * 6},
                     loads=[TemperatureLoad("cold", ("T",), -20.0),
                            PrescribedDisplacement("pull", "B", (0.004, 0.0, 0.0))],
                     materials=mat)
    res = cablefe.solve(cablefe.build_model(spec))
    L0 = 10.0 / (1 + 50e3 / EA)
    L0c = L0 * (1 - 1.2e-5 * 20)
    source = ("linear thermoelasticity of a restrained bar (Timoshenko & Goodier 1951, Theory of "
              "Elasticity, ch. 14) with the strain N = EA (L - L0)/L0 (exact)")
    verify.check("pretensioned 10 m tie between fixed supports, cooled by 20 K: tension", source,
                 res.tension("cold", "T")[0], EA * (10.0 - L0c) / L0c, rtol=1e-10, unit="N")
    verify.check("same tie, one support pulled 4 mm along it: tension", source,
                 res.tension("pull", "T")[0], EA * (10.004 - L0) / L0, rtol=1e-10, unit="N")
    assert_allclose(res.node_displacement("pull", "B"), [0.004, 0, 0], atol=1e-14)


def test_missing_support_is_reported_as_a_mechanism():
    spec = make_spec({"A": (0, 0, 0), "B": (10, 0, 0), "C": (20, 0, 0)},
                     [Member("T1", "bar", ("A", "B"), "s"), Member("T2", "bar", ("B", "C"), "s")],
                     {"A": (True,) * 6, "C": (True,) * 6},
                     loads=[NodalLoad("p", "B", (0, 0, -1e3))])
    res = cablefe.solve(cablefe.build_model(spec))
    r = res["p"]
    assert not r.converged
    assert r.outcome.status == "mechanism"
    assert "B y" in r.outcome.message and "B z" in r.outcome.message


def test_statically_determinate_support_movement_moves_rigidly(verify):
    # source: kinematics; a statically determinate structure follows a support
    # movement as a rigid body with no force (any statics text, e.g.
    # Hibbeler, Structural Analysis, ch. 2; common practice).  All forces are
    # zero, so only the round-off floor of the convergence test can stop it.
    d = (0.0123, 0.0071, 0.0)
    spec = make_spec({"A": (0, 0, 0), "B": (6, 8, 0)},
                     [Member("T", "bar", ("A", "B"), "s")],
                     {"A": (True, True, True, False, False, False), "B": (False, True, True, False, False, False)},
                     loads=[PrescribedDisplacement("move", "A", d)])
    res = cablefe.solve(cablefe.build_model(spec))
    assert res.all_converged
    # B slides along x keeping the bar's length: (6 + u - dx)^2 + (8 - dy)^2 = 10^2
    u = np.sqrt(100 - (8 - d[1]) ** 2) - 6 + d[0]
    source = "kinematics of a statically determinate structure (Hibbeler, Structural Analysis, ch. 2; common practice)"
    verify.check("bar on a pin and a roller, the pin moved by (12.3, 7.1) mm: roller slides keeping the "
                 "bar's length", source, res.node_displacement("move", "B"), [u, 0, 0], atol=1e-9, unit="m")
    verify.check("same bar: no force", source, res.tension("move", "T"), [0.0, 0.0], atol=1e-3, unit="N")


def test_cantilever_follows_a_rotated_clamp_without_force(verify):
    # source: kinematics of a rigid rotation (common practice): a cantilever
    # whose clamp turns by theta about z swings as a rigid body, tip at
    # L (cos theta, sin theta, 0), with no internal force.
    theta, L = 0.0137, 7.3
    sec = {"s": Section("s", "steel", area=1.0e-2, Iy=2.0e-4, Iz=3.0e-4, J=1.0e-4)}
    spec = make_spec({"A": (0, 0, 0), "B": (L, 0, 0)},
                     [Member("G", "beam", ("A", "B"), "s", divide=4)],
                     {"A": (True,) * 6},
                     loads=[PrescribedDisplacement("turn", "A", (0.0, 0.0, 0.0), (0.0, 0.0, theta))],
                     sections=sec)
    res = cablefe.solve(cablefe.build_model(spec))
    assert res.all_converged
    verify.check("cantilever 7.3 m whose clamp turns 0.0137 rad about z: tip at L (cos theta, sin theta, 0)",
                 "kinematics of a rigid rotation (common practice)", res.node_displacement("turn", "B"),
                 [L * (np.cos(theta) - 1), L * np.sin(theta), 0], atol=1e-9, unit="m")
