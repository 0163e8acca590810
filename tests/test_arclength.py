"""Arc-length path following through a snap-through, against closed forms."""
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq, minimize_scalar

import cablefe
from cablefe.errors import MechanismError
from cablefe.solvers.arclength import follow_arc_length
from cablefe.solvers.newton import NewtonSettings, follow_load_path
from cablefe.solvers.static import StaticProblem
from cablefe.spec import Material, Member, NodalLoad, Section
from conftest import make_spec

# a shallow Von Mises truss: half-span A, rise H0, axial stiffness EA
A, H0, EA = 10.0, 1.0, 1.0e6
L0 = math.hypot(A, H0)
SETTINGS = NewtonSettings(increments=10, tolerance=1e-10, max_iterations=30)


def truss_load(u):
    """Apex load P (N, downwards) in equilibrium at apex drop u (m).

    source: Bažant & Cedolin 1991, Stability of Structures, ch. 4 (Von Mises
    truss; from memory): N = EA (L - L0)/L0, P = 2 EA (H0 - u)(1/L - 1/L0),
    L = sqrt(a^2 + (H0 - u)^2).  Exact for bars with this strain measure.
    """
    L = np.hypot(A, H0 - u)
    return 2.0 * EA * (H0 - u) * (1.0 / L - 1.0 / L0)


def limit_point():
    """Apex drop and load at the limit point, cos θ* = (cos α)^(1/3).

    source: Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from
    memory); α the initial and θ* the limit inclination of the bars.
    """
    cos_alpha = A / L0
    theta = math.acos(cos_alpha ** (1.0 / 3.0))
    u = H0 - A * math.tan(theta)
    return u, truss_load(u)


def truss_problem(P_ref):
    spec = make_spec(
        nodes={"A": (-A, 0, 0), "C": (0, 0, H0), "B": (A, 0, 0)},
        members=[Member("L", "bar", ("A", "C"), "s"), Member("R", "bar", ("C", "B"), "s")],
        # the apex may only drop: restrained horizontally and out of plane
        supports={"A": (True,) * 6, "B": (True,) * 6, "C": (True, True, False, True, True, True)},
        loads=[NodalLoad("p", "C", (0.0, 0.0, -P_ref))],
        materials={"m": Material("m", E=EA, G=EA / 2.6)}, sections={"s": Section("s", "m", area=1.0)})
    model = cablefe.build_model(spec)
    return StaticProblem(model, model.load_cases["p"]), model.node_index["C"]


def test_limit_point_formula_is_the_maximum_of_the_load(verify):
    # source: the recalled limit-point formula checked against scipy's bounded
    # search for the maximum of the closed-form P(u) (Bažant & Cedolin 1991, ch. 4)
    u_star, P_max = limit_point()
    best = minimize_scalar(lambda u: -truss_load(u), bounds=(0.0, H0), method="bounded",
                           options={"xatol": 1e-10})
    # a flat maximum: xatol 1e-10 on u gives P to ~P'' xatol^2, far below 1e-9
    verify.check("Von Mises truss (a = 10 m, H0 = 1 m): apex drop at the limit point, recalled "
                 "cos(theta*) = cos(alpha)^(1/3) vs scipy's bounded maximum of P(u)",
                 "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory); "
                 "scipy.optimize.minimize_scalar", best.x, u_star, atol=1e-6, unit="m")
    verify.check("Von Mises truss: limit load, recalled formula vs scipy's bounded maximum of P(u)",
                 "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory); "
                 "scipy.optimize.minimize_scalar", -best.fun, P_max, rtol=1e-9, unit="N")


def test_arc_length_traces_the_snap_through_of_the_von_mises_truss(verify):
    u_star, P_max = limit_point()
    P_ref = 2.0 * P_max            # λ = 1 only exists on the inverted branch
    prob, apex = truss_problem(P_ref)
    ds = 0.02                      # m of apex drop per step: ~120 steps over the snap
    out = follow_arc_length(prob, SETTINGS, arc_length=ds, max_arc_length=ds, max_steps=400)
    assert out.converged, out.message
    lam = np.array(out.increments)
    u = np.array([H0 - s.positions[apex, 2] for s in out.states])
    assert lam[0] == 0.0 and out.load_factor == 1.0 and lam[-1] == 1.0

    # every converged point is on the closed-form curve, to what the Newton
    # test guarantees: the residual at the single free DOF is λ P_ref - P(u)
    # and converged means |r| <= tolerance * reference
    refs = np.array([prob.evaluate(s, l, False)[1] for s, l in zip(out.states, lam)])
    # source: Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory)
    verify.check("Von Mises truss by arc length (bars, a = 10 m, H0 = 1 m): apex load at every "
                 "converged step, P = 2EA(H0 - u)(1/L - 1/L0), through the snap-through",
                 "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory)",
                 lam * P_ref, truss_load(u), rtol=0, atol=SETTINGS.tolerance * refs.max(), unit="N")

    # the path passes the limit point, the flat state u = H0, the minimum and
    # the inverted flat state u = 2 H0, then rises again to λ = 1
    assert np.any(np.diff(lam) < 0)
    assert lam.min() < -0.4        # the load minimum is -P_max: λ = -0.5
    assert u[-1] > 2.0 * H0
    # landed on the target exactly: P(u) = P_ref on the inverted branch
    u_end = brentq(lambda x: truss_load(x) - P_ref, 2.0 * H0, 4.0 * H0, xtol=1e-14)
    # dP/du there is ~3e3 N/m: |r| <= 1e-10 * ref moves u by < 1e-9 m
    verify.check("Von Mises truss by arc length: final apex drop where P(u) = 2 P_max on the "
                 "inverted branch", "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from "
                 "memory); root by scipy.optimize.brentq", u[-1], u_end, atol=1e-9, unit="m")
    # consecutive points are ds apart in the only unknown (Crisfield's cylinder)
    assert_allclose(np.abs(np.diff(u))[:-1], ds, rtol=1e-12)

    # the limit load: the largest λ before the snap is the path's sample
    # nearest u*; by Taylor with P'(u*) = 0 it is below P_max by at most
    # 1/2 max|P''| (ds/2)^2 over the bracketing interval
    k = int(np.argmax(np.where(u < H0, lam, -np.inf)))
    assert u[k - 1] < u_star < u[k + 1]
    grid = np.linspace(u[k - 1], u[k + 1], 2001)
    d2 = np.gradient(np.gradient(truss_load(grid), grid), grid)
    bound = 0.5 * np.abs(d2).max() * (ds / 2) ** 2
    # source: Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory)
    assert 0.0 <= P_max - lam[k] * P_ref + SETTINGS.tolerance * refs.max() <= bound
    verify.check("Von Mises truss by arc length: largest load before the snap vs the limit load at "
                 "cos(theta*) = cos(alpha)^(1/3) (bound 1/2 max|P''| (ds/2)^2; one-sided, asserted above)",
                 "Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory)",
                 lam[k] * P_ref, P_max, rtol=0, atol=bound + SETTINGS.tolerance * refs.max(), unit="N")
    verify.check("Von Mises truss by arc length: apex drop of the path's highest point before the snap "
                 "vs the limit point u* (within half a step)", "Bažant & Cedolin 1991, Stability of "
                 "Structures, ch. 4 (from memory)", u[k], u_star, rtol=0, atol=ds / 2 * (1 + 1e-9), unit="m")


def test_load_control_cannot_follow_past_the_limit_point():
    # the same truss under load control: the load factor only grows, so the
    # unstable branch between the limit point u* and its mirror 2 H0 - u*
    # (where dP/du < 0) is never visited; the path jumps over it.
    # source: Bažant & Cedolin 1991, Stability of Structures, ch. 4 (from memory)
    u_star, P_max = limit_point()
    P_ref = 2.0 * P_max
    prob, apex = truss_problem(P_ref)
    states = []
    orig_commit = prob.commit
    prob.commit = lambda s: (states.append(s), orig_commit(s))
    lc = follow_load_path(prob, SETTINGS)
    u_lc = np.array([H0 - s.positions[apex, 2] for s in states])
    unstable = (u_lc > u_star) & (u_lc < 2.0 * H0 - u_star)
    assert not unstable.any()
    # nothing it reports lies between the limit load and the inverted branch
    lam_lc = np.array(lc.increments)
    assert not np.any((lam_lc * P_ref > P_max) & (u_lc < 2.0 * H0 - u_star))

    prob2, apex2 = truss_problem(P_ref)
    al = follow_arc_length(prob2, SETTINGS, arc_length=0.05, max_arc_length=0.05, max_steps=200)
    u_al = np.array([H0 - s.positions[apex2, 2] for s in al.states])
    # arc length samples the unstable branch at every step length
    inside = u_al[(u_al > u_star) & (u_al < 2.0 * H0 - u_star)]
    assert inside.size >= int((2.0 * H0 - 2.0 * u_star) / 0.05) - 1


class CubicSpring:
    """One unknown u with r = f(u) - λ, f = u^3 - 4.5 u^2 + 6 u.

    f' = 3 (u - 1)(u - 2): a limit point at u = 1 (λ = 2.5) and a minimum at
    u = 2 (λ = 2).  The solver refuses tangents below 1e-12 as singular, as a
    pivot test does, so steps that land on the limit points meet
    MechanismError.
    """

    def __init__(self):
        self.singular_hits = 0

    def initial_state(self):
        return np.zeros(1)

    def impose(self, state, lam_from, lam_to):
        return state

    def evaluate(self, state, lam, want_tangent=True):
        u = state[0]
        r = np.array([u**3 - 4.5 * u**2 + 6.0 * u - lam])
        K = np.array([[3.0 * u**2 - 9.0 * u + 6.0]]) if want_tangent else None
        return r, max(abs(lam), 1.0), K

    def advance(self, state, du):
        return state + du

    def commit(self, state):
        pass

    def solve_linear(self, K, r):
        if abs(K[0, 0]) < 1e-12:
            self.singular_hits += 1
            raise MechanismError([("spring", "u")])
        return r / K[0, 0]


def test_singular_tangent_at_the_limit_points_does_not_stop_the_driver(verify):
    # steps of exactly 0.25 land on u = 1 and u = 2, where f' = 0
    prob = CubicSpring()
    out = follow_arc_length(prob, SETTINGS, arc_length=0.25, max_arc_length=0.25, target_load_factor=4.0)
    assert out.converged, out.message
    assert prob.singular_hits > 0
    u = np.array([s[0] for s in out.states])
    lam = np.array(out.increments)
    # source: the closed form f(u) of the problem; tolerance as the Newton test
    verify.check("arc length on a cubic spring r = u^3 - 4.5u^2 + 6u - lambda with singular tangents "
                 "at both limit points: load factor at every converged step",
                 "closed form f(u) = u^3 - 4.5u^2 + 6u (hand calculation)",
                 lam, u**3 - 4.5 * u**2 + 6.0 * u, rtol=0, atol=SETTINGS.tolerance * max(lam.max(), 1.0))
    # landed where f(u) = 4 on the rising branch u > 2 (brentq on the cubic)
    verify.check("arc length on the cubic spring: end point where f(u) = 4 on the rising branch u > 2",
                 "closed form f(u); root by scipy.optimize.brentq",
                 u[-1], brentq(lambda x: x**3 - 4.5 * x**2 + 6.0 * x - 4.0, 2.0, 3.0, xtol=1e-15),
                 atol=1e-9)
    assert np.any(np.diff(lam) < 0)


@pytest.mark.parametrize("kw", [{"arc_length": 0.0}, {"arc_length": -1.0}, {"max_steps": 0},
                                {"target_load_factor": 0.0}, {"max_arc_length": math.nan}])
def test_bad_arguments_are_refused(kw):
    with pytest.raises(ValueError):
        follow_arc_length(CubicSpring(), SETTINGS, **kw)


def test_load_control_warns_when_it_jumps_a_limit_point():
    # source: the iterations meet a tangent with a negative pivot, i.e. a
    # negative eigenvalue (Sylvester's law of inertia; any linear algebra
    # text), which on the Von Mises truss happens only past the limit point
    # (Bažant & Cedolin 1991, ch. 4, from memory), while both converged
    # states around the jump are stable
    u_star, P_max = limit_point()
    jumping, _ = truss_problem(2.0 * P_max)       # λ = 1 lies beyond the snap
    out = follow_load_path(jumping, NewtonSettings(increments=8))
    assert out.converged and out.warnings
    assert "limit point" in out.warnings[0]
    below, _ = truss_problem(0.8 * P_max)          # stays on the stable branch
    assert follow_load_path(below, NewtonSettings(increments=8)).warnings == ()
