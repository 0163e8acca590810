"""Elastic catenary element: forward map, inverse, forces, tangent, limits, shape."""
import logging

import mpmath as mp
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from numpy.testing import assert_allclose

from cablefe.elements import catenary as cat

EPS = np.finfo(float).eps
mp.mp.dps = 40
# the verify fixture only records, so one instance may serve every example
SHARED_FIXTURE = [HealthCheck.function_scoped_fixture]


# ---------------------------------------------------------------------------
# independent references, evaluated at 40 digits
# ---------------------------------------------------------------------------

def irvine_chord_mp(H, V, L0, w, EA):
    """Irvine's chord equations at high precision (mpmath numbers in and out).

    source: Irvine 1981, Cable Structures, §1.3, elastic catenary between
    A(0, 0) and B(l, h), V the vertical reaction at B.  For w = 0 the same
    equations reduce to Hooke's law along a straight tie.
    """
    H, V, L0, w, EA = (mp.mpf(x) for x in (H, V, L0, w, EA))
    W = w * L0
    if W == 0:
        T = mp.sqrt(H**2 + V**2)
        return H * L0 * (1 / EA + 1 / T), V * L0 * (1 / EA + 1 / T)
    l = H * L0 / EA + H * L0 / W * (mp.asinh(V / H) - mp.asinh((V - W) / H))
    h = W * L0 / EA * (V / W - mp.mpf(1) / 2) + H * L0 / W * (mp.sqrt(1 + (V / H) ** 2)
                                                              - mp.sqrt(1 + ((V - W) / H) ** 2))
    return l, h


def irvine_profile_mp(s, H, V, L0, w, EA):
    """Point (x, z) at unstressed coordinate s from A on the elastic catenary.

    source: Irvine 1981, Cable Structures, §1.3, Lagrangian profile of the
    elastic catenary (from memory; at s = L0 it is the chord equation above).
    """
    s, H, V, L0, w, EA = (mp.mpf(x) for x in (s, H, V, L0, w, EA))
    va = V - w * L0
    x = H * s / EA + H / w * (mp.asinh((va + w * s) / H) - mp.asinh(va / H))
    z = (va * s + w * s**2 / 2) / EA + H / w * (mp.sqrt(1 + ((va + w * s) / H) ** 2) - mp.sqrt(1 + (va / H) ** 2))
    return x, z


def place(l, h, azimuth, origin=(0.0, 0.0, 0.0)):
    """Element end positions for a chord (l, h) turned by an azimuth about z."""
    xi = np.array([origin], dtype=float)
    xj = xi + np.array([[l * np.cos(azimuth), l * np.sin(azimuth), h]])
    return xi, xj


def fd_tangent(xi, xj, L0, EA, w, step):
    """Central differences of the internal force, one step per element."""
    x = np.concatenate([xi, xj], axis=1)
    K = np.zeros((len(x), 6, 6))
    for c in range(6):
        xp, xm = x.copy(), x.copy()
        xp[:, c] += step
        xm[:, c] -= step
        fp = cat.response(xp[:, :3], xp[:, 3:], L0, EA, w, want_tangent=False).force
        fm = cat.response(xm[:, :3], xm[:, 3:], L0, EA, w, want_tangent=False).force
        K[:, :, c] = (fp - fm) / (2.0 * step[:, None])
    return K


# ---------------------------------------------------------------------------
# forward map and flexibility
# ---------------------------------------------------------------------------

FORWARD_CASES = [
    # H, V, L0, w, EA
    (1.0e3, 600.0, 100.0, 10.0, 1.0e8),          # level-ish, vertex inside
    (1.0e3, 600.0, 100.0, 1.0e-9, 1.0e8),        # W/H = 1e-10: naive form loses every digit
    (1.0e3, 0.05, 100.0, 1.0e-3, 1.0e8),         # W/H = 1e-4, almost weightless and level
    (1.0e8, 2.0e7, 50.0, 20.0, 1.0e10),          # H very large (W/H = 1e-5), inclined
    (5.0, 1.0e3, 100.0, 10.0, 1.0e7),            # H tiny: slack, heavy, steep
    (1.0e3, -300.0, 100.0, 10.0, 1.0e8),         # B below A, both ends of one sign
    (1.0e3, 5.0e3, 100.0, 10.0, 1.0e8),          # steep up, both ends of one sign
    (1.0e3, 2.0e3, 100.0, 0.0, 1.0e8),           # weightless tie at 63 degrees
]


@pytest.mark.parametrize("H, V, L0, w, EA", FORWARD_CASES)
def test_forward_map_matches_irvine_equations(verify, H, V, L0, w, EA):
    # source: Irvine 1981, Cable Structures, §1.3 (chord equations), at 40 digits
    l, h = cat.catenary_chord([H], [V], [L0], [w], [EA])
    l_ref, h_ref = (float(x) for x in irvine_chord_mp(H, V, L0, w, EA))
    # l is a sum of positive terms: a few tens of roundings at most (1e-14 ~ 45 eps);
    # h can be a small difference of the two halves of the cable, so its error
    # is relative to L0, not to h
    problem = f"elastic catenary H = {H:g} N, V = {V:g} N, L0 = {L0:g} m, w = {w:g} N/m, EA = {EA:g} N"
    verify.check(problem + ": horizontal chord l", "Irvine 1981, Cable Structures, §1.3 (chord equations), evaluated by mpmath at 40 digits", l, l_ref, rtol=1e-14, unit="m")
    verify.check(problem + ": vertical chord h", "Irvine 1981, Cable Structures, §1.3 (chord equations), evaluated by mpmath at 40 digits", h, h_ref, rtol=1e-14, atol=1e-14 * L0,
                 unit="m")


@settings(max_examples=40, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(st.floats(-4.0, 3.0), st.floats(-70.0, 70.0), st.floats(0.0, 3.0), st.floats(-5.0, -2.0))
def test_forward_map_matches_irvine_equations_everywhere(verify, log_sag, angle, log_L0, log_strain):
    # source: Irvine 1981, Cable Structures, §1.3 (chord equations), at 40 digits
    L0, w = 10.0**log_L0, 25.0
    W = w * L0
    H = W / 10.0**log_sag
    V = 0.5 * W + H * np.tan(np.radians(angle))
    EA = np.hypot(H, max(abs(V), abs(V - W))) / 10.0**log_strain
    l, h = cat.catenary_chord([H], [V], [L0], [w], [EA])
    l_ref, h_ref = (float(x) for x in irvine_chord_mp(H, V, L0, w, EA))
    # the reference is exact to double precision; the asinh sums may amplify
    # the rounding of V - W by the slope, still within 1e-13 of the length
    verify.check("elastic catenary, random sag (W/H 1e-3 to 1e4), slope, length and strain: horizontal "
                 "chord l", "Irvine 1981, Cable Structures, §1.3 (chord equations), evaluated by mpmath at 40 digits", l, l_ref, rtol=1e-13, unit="m")
    verify.check("elastic catenary, random sag, slope, length and strain: vertical chord h",
                 "Irvine 1981, Cable Structures, §1.3 (chord equations), evaluated by mpmath at 40 digits", h, h_ref, rtol=1e-13, atol=1e-13 * L0, unit="m")


@pytest.mark.parametrize("H, V, L0, w, EA", FORWARD_CASES)
def test_flexibility_is_derivative_of_irvine_equations(verify, H, V, L0, w, EA):
    # source: Irvine 1981, Cable Structures, §1.3, differentiated by mpmath at 40 digits
    F = cat.catenary_flexibility([H], [V], [L0], [w], [EA])[0]
    m = [mp.mpf(x) for x in (H, V, L0, w, EA)]
    F_ref = np.array([[float(mp.diff(lambda x: irvine_chord_mp(x, m[1], *m[2:])[i], m[0])),
                       float(mp.diff(lambda x: irvine_chord_mp(m[0], x, *m[2:])[i], m[1]))] for i in (0, 1)])
    # the analytic entries are sums of accurate terms; 1e-12 leaves room for the
    # few cases where a term is a difference of two (log1p and atan2 forms)
    verify.check(f"elastic catenary H = {H:g} N, V = {V:g} N, L0 = {L0:g} m, w = {w:g} N/m, EA = {EA:g} N: "
                 "flexibility d(l, h)/d(H, V)", "Irvine 1981, Cable Structures, §1.3, differentiated "
                 "by mpmath.diff at 40 digits", F, F_ref, rtol=1e-12, atol=1e-13 * np.abs(F_ref).max(),
                 unit="m/N")
    assert_allclose(F[0, 1], F[1, 0], rtol=0, atol=0)   # complementary energy: symmetric


def test_forward_map_is_continuous_as_weight_vanishes():
    # the weightless tie is the W -> 0 limit of Irvine's equations (Hooke's law)
    H, V, L0, EA = 2.0e3, 1.5e3, 80.0, 5.0e7
    l0, h0 = cat.catenary_chord([H], [V], [L0], [0.0], [EA])
    for w in (1e-3, 1e-6, 1e-9, 1e-12):
        l, h = cat.catenary_chord([H], [V + 0.5 * w * L0], [L0], [w], [EA])
        # the change is of order (W/T)^2 relative (sag shortening)
        W = w * L0
        assert_allclose(l, l0, rtol=(W / H) ** 2 + 4 * EPS)
        assert_allclose(h, h0, rtol=(W / H) ** 2 + 4 * EPS)


# ---------------------------------------------------------------------------
# inverse map
# ---------------------------------------------------------------------------

element = st.tuples(
    st.booleans(),                 # weightless?
    st.floats(-4.0, 2.5),          # log10 W/H: from very taut to very slack
    st.floats(-60.0, 60.0),        # chord slope angle, degrees
    st.floats(0.0, 2.7),           # log10 L0 / m
    st.floats(-1.0, 4.0),          # log10 w / (N/m)
    st.floats(-4.0, -2.0),         # log10 of the largest strain
)


@settings(max_examples=60, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(st.lists(element, min_size=1, max_size=8))
def test_inverse_recovers_end_forces(verify, elements):
    # source: Irvine 1981, Cable Structures, §1.3: (l, h) from the chord
    # equations at 40 digits, then solved back for (H, V) in one batch
    H, V, L0, w, EA, l, h = ([] for _ in range(7))
    for weightless, log_sag, angle, log_L0, log_w, log_strain in elements:
        L0_k, w_k = 10.0**log_L0, (0.0 if weightless else 10.0**log_w)
        W_k = 10.0**log_w * L0_k
        H_k = W_k / 10.0**log_sag
        # for a shallow cable the chord slope is about (V - W/2)/H
        V_k = H_k * np.tan(np.radians(angle)) + 0.5 * w_k * L0_k
        EA_k = np.hypot(H_k, max(abs(V_k), abs(V_k - w_k * L0_k))) / 10.0**log_strain
        l_k, h_k = irvine_chord_mp(H_k, V_k, L0_k, w_k, EA_k)
        for lst, val in zip((H, V, L0, w, EA, l, h), (H_k, V_k, L0_k, w_k, EA_k, float(l_k), float(h_k))):
            lst.append(val)
    H, V, L0, w, EA, l, h = map(np.array, (H, V, L0, w, EA, l, h))
    Hs, Vs, converged = cat.solve_end_forces(l, h, L0, w, EA)
    assert converged.all()
    # (l, h) carry rounding of 1 ulp; the inverse amplifies it by at most about
    # 1/strain <= 1e4 (taut cables), so 1e-9 keeps a 1e3 margin
    source = ("Irvine 1981, Cable Structures, §1.3: chord (l, h) of known end forces by mpmath at 40 "
              "digits, solved back for (H, V)")
    verify.check("batches of random catenaries, taut to very slack, some weightless: horizontal force H "
                 "from the chord", source, Hs, H, rtol=1e-9, unit="N")
    force_scale = np.maximum(H, w * L0)     # V may pass through zero
    verify.check("same catenaries: vertical end force V / max(H, W) from the chord", source,
                 Vs / force_scale, V / force_scale, rtol=1e-9, atol=1e-9)


def test_cold_start_converges_for_extreme_chords():
    # any chord / L0 / weight: from 1000 times slack to 5 % overstretched, level
    # to exactly vertical, light to heavy (self-weight strain up to 5 %)
    ratio, angle, weight_strain = np.meshgrid(np.geomspace(1e-3, 1.05, 13),
                                              np.radians([-90, -89.999, -60, -20, 0, 10, 45, 80, 89.99, 90]),
                                              np.geomspace(1e-7, 5e-2, 6), indexing="ij")
    ratio, angle, weight_strain = ratio.ravel(), angle.ravel(), weight_strain.ravel()
    L0 = np.full(ratio.size, 120.0)
    EA = np.full(ratio.size, 3.0e8)
    w = weight_strain * EA / L0
    c = ratio * L0
    l, h = np.abs(c * np.cos(angle)), c * np.sin(angle)
    H, V, converged = cat.solve_end_forces(l, h, L0, w, EA)
    assert converged.all()
    inclined = l > cat.VERTICAL_TOLERANCE * L0
    l2, h2 = cat.catenary_chord(H, V, L0, w, EA)
    # the stopping test of solve_end_forces, checked from outside
    assert_allclose(l2[inclined], l[inclined], rtol=1e-12)
    h_scale = np.maximum(c, 1e-2 * L0 * (1 + w * L0 / EA))
    assert_allclose((h2 - h) / h_scale, 0.0, rtol=0, atol=1e-12)


def test_non_convergence_is_reported(caplog):
    # a very slack heavy cable cannot be solved in one Newton step
    l, h, L0, w, EA = np.array([1.0, 60.0]), np.array([0.3, 1.0]), np.array([200.0, 60.0]), 50.0, 1e8
    with caplog.at_level(logging.WARNING, logger="cablefe.elements.catenary"):
        _, _, converged = cat.solve_end_forces(l, h, L0, w, EA, max_iter=1)
    assert not converged[0]
    assert "did not converge" in caplog.text
    _, _, converged = cat.solve_end_forces(l, h, L0, w, EA)
    assert converged.all()


def test_warm_start_reaches_the_cold_solution():
    xi, xj = place(70.0, 12.0, 0.4)
    L0, EA = np.array([75.0]), np.array([2.0e8])
    cold = cat.response(xi, xj, L0, EA, [30.0])
    # the assembly passes the previous H, V with a changed load factor and geometry
    warm = cat.response(xi, xj + 0.3, L0, EA, [36.0], guess=(cold.H, cold.V))
    again = cat.response(xi, xj + 0.3, L0, EA, [36.0])
    assert warm.converged.all()
    assert_allclose(warm.force, again.force, rtol=1e-12, atol=1e-12 * np.abs(again.force).max())
    # a guess from a slack or vertical state (H = 0) falls back to the cold start
    zero = cat.response(xi, xj + 0.3, L0, EA, [36.0], guess=(np.zeros(1), np.zeros(1)))
    assert_allclose(zero.force, again.force, rtol=1e-12, atol=1e-12 * np.abs(again.force).max())


# ---------------------------------------------------------------------------
# element response
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("H, V, w", [(800.0, 300.0, 12.0), (800.0, 2400.0, 12.0), (50.0, 900.0, 20.0),
                                     (800.0, -150.0, 12.0)])
def test_single_element_forces(verify, H, V, w):
    # source: Irvine 1981, Cable Structures, §1.3: the element placed on the
    # chord of known end forces must return them
    L0, EA, azimuth = 100.0, 4.0e8, 2.2
    W = w * L0
    l, h = (float(x) for x in irvine_chord_mp(H, V, L0, w, EA))
    xi, xj = place(l, h, azimuth, origin=(3.0, -7.0, 11.0))
    r = cat.response(xi, xj, [L0], [EA], [w])
    e_h = np.array([np.cos(azimuth), np.sin(azimuth), 0.0])
    e_z = np.array([0.0, 0.0, 1.0])
    expected = np.concatenate([-H * e_h + (W - V) * e_z, H * e_h + V * e_z])
    # (l, h) are rounded to 1 ulp; the inverse amplifies that by about the
    # condition number of the flexibility (< 1e4 here)
    problem = f"catenary element placed on the chord of H = {H:g} N, V = {V:g} N, w = {w:g} N/m"
    source = "Irvine 1981, Cable Structures, §1.3 (chord equations by mpmath at 40 digits)"
    verify.check(problem + ": end forces", source, r.force[0], expected, rtol=1e-9,
                 atol=1e-9 * np.hypot(H, V), unit="N")
    # the supports together carry the weight
    verify.check(problem + ": the two end forces carry the weight W", "statics of the whole cable",
                 r.force[0, :3] + r.force[0, 3:], [0.0, 0.0, W], rtol=1e-14, atol=1e-14 * W, unit="N")
    T_i, T_j = np.hypot(H, V - W), np.hypot(H, V)
    # the tension is least at the vertex when it lies inside the span
    verify.check(problem + ": end tensions, largest and least tension (H at a vertex inside the span)",
                 source + "; T = sqrt(H^2 + v^2)",
                 [*r.end_tension[0], r.max_tension[0], r.min_tension[0]],
                 [T_i, T_j, max(T_i, T_j), H if V - W < 0 < V else min(T_i, T_j)], rtol=1e-9, unit="N")
    assert not r.slack[0] and r.converged[0]


def test_weightless_element_is_the_straight_tie(verify):
    # source: N = EA (L - L0)/L0 for a weightless tie (docs/case-format.md, member types)
    xi = np.array([[0.0, 0.0, 0.0], [1.0, 1.0, 1.0]])
    xj = np.array([[3.0, 4.0, 12.0], [4.0, 5.0, 13.0]])       # chord 13
    L0, EA = np.array([12.9, 13.5]), np.array([2.0e6, 2.0e6])
    r = cat.response(xi, xj, L0, EA, [0.0, 0.0])
    N = EA[0] * (13.0 - 12.9) / 12.9
    e = np.array([3.0, 4.0, 12.0]) / 13.0
    source = "N = EA (L - L0)/L0 for a weightless tie along its chord (hand calculation)"
    verify.check("weightless cable on a 3-4-12 chord of 13 m, L0 = 12.9 m: end forces N e", source,
                 r.force[0], np.concatenate([-N * e, N * e]), rtol=1e-13, unit="N")
    verify.check("same tie: end tensions", source, r.end_tension[0], [N, N], rtol=1e-13, unit="N")
    k = EA[0] / L0[0] * np.outer(e, e) + N / 13.0 * (np.eye(3) - np.outer(e, e))
    verify.check("same tie: tangent EA/L0 e e^T + N/L (I - e e^T) (blocks j-j and i-j)",
                 "stiffness of a prestressed straight tie, elastic plus geometric part (hand calculation)",
                 [r.tangent[0, 3:, 3:], r.tangent[0, :3, 3:]], [k, -k], rtol=1e-12,
                 atol=1e-12 * EA[0] / L0[0], unit="N/m")
    # slack: chord shorter than L0 carries nothing and has no stiffness
    assert r.slack[1] and not r.slack[0]
    assert np.all(r.force[1] == 0.0) and np.all(r.tangent[1] == 0.0)


def test_tangent_is_continuous_as_weight_vanishes():
    xi, xj = place(30.0, 18.0, 1.1)
    L0, EA = np.array([34.5]), np.array([1.0e7])
    tie = cat.response(xi, xj, L0, EA, [0.0])
    light = cat.response(xi, xj, L0, EA, [1e-6])
    # the sag effect on the stiffness is of relative order (W/N)^2 EA/N, here < 1e-12
    scale = np.abs(tie.tangent).max()
    assert_allclose(light.tangent, tie.tangent, rtol=0, atol=1e-9 * scale)
    assert_allclose(light.force[0, 3:], tie.force[0, 3:], rtol=1e-9, atol=1e-9 * np.abs(tie.force).max())


fd_state = st.tuples(
    st.sampled_from(["inclined", "near-vertical", "weightless"]),
    st.floats(0.3, 1.05),               # chord / L0
    st.floats(-6.0, -2.0),              # log10 W/EA (self-weight strain)
    st.floats(-89.0, 89.0),             # slope angle of the chord, degrees
    st.floats(-4.0, -1.0),              # log10 l/c for nearly vertical chords
    st.floats(0.0, 2.0 * np.pi),        # azimuth
    st.floats(0.0, 2.3),                # log10 L0
    st.floats(5.0, 9.0),                # log10 EA
)


@settings(max_examples=40, deadline=None)
@given(st.lists(fd_state, min_size=1, max_size=6))
def test_tangent_is_derivative_of_internal_force(states):
    xi, xj, L0, EA, w = [], [], [], [], []
    for kind, ratio, log_wea, angle, log_lc, azimuth, log_L0, log_EA in states:
        L0_k, EA_k = 10.0**log_L0, 10.0**log_EA
        if kind == "weightless" and abs(ratio - 1.0) < 0.02:
            ratio = 0.9   # the slack/taut kink of a weightless tie has no derivative
        c = ratio * L0_k
        beta = np.radians(angle)
        if kind == "near-vertical":
            beta = np.sign(angle or 1.0) * np.arccos(10.0**log_lc)
        a, b = place(c * np.cos(beta), c * np.sin(beta), azimuth, origin=(1.0, 2.0, 3.0))
        w_k = 0.0 if kind == "weightless" else 10.0**log_wea * EA_k / L0_k
        for lst, val in zip((xi, xj, L0, EA, w), (a[0], b[0], L0_k, EA_k, w_k)):
            lst.append(val)
    xi, xj, L0, EA, w = map(np.array, (xi, xj, L0, EA, w))
    r = cat.response(xi, xj, L0, EA, w)
    assert r.converged.all()
    K = r.tangent
    K_max = np.abs(K).max(axis=(1, 2))
    assert_allclose(K, np.transpose(K, (0, 2, 1)), rtol=0, atol=1e-14 * K_max.max())
    # shortest length over which the response changes: the horizontal
    # projection, the chord, and the movement that changes the least tension
    # by its own size (T_min/|K|; for a weightless slack tie, the distance to
    # going taut)
    d = xj - xi
    chord = np.linalg.norm(d, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        tension_scale = np.where(r.slack, np.abs(chord - L0), r.min_tension / K_max)
    scale = np.minimum(np.minimum(np.hypot(d[:, 0], d[:, 1]), chord), tension_scale)
    step = 1e-4 * scale
    # Central differences at h and h/2, Richardson-extrapolated: truncation
    # O((step/scale)^4) instead of O((step/scale)^2), which matters where one
    # end's tension is close to zero (a taut cable whose chord equals its
    # unstressed length) and the force's curvature is large.
    Kfd = (4.0 * fd_tangent(xi, xj, L0, EA, w, step / 2) - fd_tangent(xi, xj, L0, EA, w, step)) / 3.0
    # round-off: forces are reproducible to about 1e-12 relative (inner
    # solve), and the perturbed positions are rounded to eps |x|, which
    # changes the force by up to K_max eps |x| (this dominates where the
    # step is tiny: a nearly slack end makes T_min/|K| of order 1e-7 m at
    # coordinates of a few metres); divided by the steps and combined as in
    # the extrapolation, (4 / (h/2) + 1 / h) / 3 = 3 / h
    f_max = np.abs(r.force).max(axis=1)
    x_max = np.abs(np.concatenate([xi, xj], axis=1)).max(axis=1)
    for k in range(len(L0)):
        noise = 1e-12 * f_max[k] + K_max[k] * np.finfo(float).eps * x_max[k]
        atol = 1e-6 * K_max[k] + 3.0 * noise / step[k]
        assert_allclose(K[k], Kfd[k], rtol=0, atol=atol)


# ---------------------------------------------------------------------------
# vertical chords
# ---------------------------------------------------------------------------

def test_vertical_hanging_cable_statics_and_isotropic_stiffness(verify):
    # source: statics of a cable hanging from node j with Hooke's law per
    # element ds: stretched length L0 + L0 (V - W/2)/EA must equal the chord
    L0, EA, w = 50.0, 1.0e7, 20.0
    W = w * L0
    h = 50.2
    xi, xj = place(0.0, h, 0.0)
    r = cat.response(xi, xj, [L0], [EA], [w])
    V = 0.5 * W + EA * (h - L0) / L0
    source = "statics of a hanging cable with Hooke's law per element ds (hand calculation)"
    verify.check("cable hanging straight down, L0 = 50 m, w = 20 N/m, chord 50.2 m: end forces", source,
                 r.force[0], [0, 0, W - V, 0, 0, V], rtol=1e-13, atol=1e-13 * V, unit="N")
    verify.check("same cable: end tensions", source, r.end_tension[0], [V - W, V], rtol=1e-13, unit="N")
    assert not r.slack[0]
    # horizontal stiffness: H/l -> 1/(dl/dH) with dl/dH = int (1/EA + 1/T) ds,
    # the limit of Irvine's flexibility at H = 0 (about T/L for a taut cable)
    k_h = 1.0 / (L0 / EA + L0 / W * np.log(V / (V - W)))
    K = r.tangent[0, 3:, 3:]
    verify.check("same cable: horizontal and vertical stiffness 1/int(1/EA + 1/T) ds and EA/L0",
                 "Irvine 1981, Cable Structures, §1.3 (flexibility in the limit H = 0; hand calculation)",
                 np.diag(K), [k_h, k_h, EA / L0], rtol=1e-12, unit="N/m")
    assert_allclose(K - np.diag(np.diag(K)), 0.0, atol=1e-12 * EA / L0)
    # a chord a hair off vertical is the same element: no division by zero, no jump
    xi2, xj2 = place(1e-6 * h, h, 0.7)
    r2 = cat.response(xi2, xj2, [L0], [EA], [w])
    # H changes by k_h * l, which moves the matrix by that much relative to T
    assert_allclose(r2.tangent, r.tangent, rtol=0, atol=1e-6 * EA / L0)
    assert_allclose(r2.force, r.force, rtol=0, atol=1e-6 * V)


def test_vertical_folded_cable(verify):
    # source: statics of a cable folded on itself below two points on one
    # vertical: zero tension at the fold, the two legs carry their own weight,
    # leg lengths (1 + T/EA)-stretched add up to the cable and differ by h
    L0, EA, w = 50.0, 1.0e7, 20.0
    W = w * L0
    h = 20.0
    xi, xj = place(0.0, h, 0.0)
    r = cat.response(xi, xj, [L0], [EA], [w])
    V = 0.5 * W + h / (L0 / EA + 2.0 * L0 / W)
    source = ("statics of a cable folded on itself: zero tension at the fold, legs stretched by "
              "(1 + T/EA) (hand calculation)")
    verify.check("cable 50 m folded below two points 20 m apart on one vertical: end forces", source,
                 r.force[0], [0, 0, W - V, 0, 0, V], rtol=1e-13, unit="N")
    assert r.slack[0] and r.converged[0]
    assert_allclose(r.min_tension, 0.0, atol=0)
    K = r.tangent[0, 3:, 3:]
    assert np.all(np.isfinite(r.tangent))
    # no horizontal stiffness at the fold; vertical: dh/dV = L0/EA + 2 L0/W
    verify.check("same fold: stiffness, none horizontal, vertical 1/(L0/EA + 2 L0/W)", source,
                 K, np.diag([0.0, 0.0, 1.0 / (L0 / EA + 2.0 * L0 / W)]), rtol=1e-12, atol=0, unit="N/m")
    # the inextensible fold: legs (L0 +- h)/2 give V = w (L0 + h)/2
    r_stiff = cat.response(xi, xj, [L0], [1e15], [w])
    verify.check("same fold, nearly inextensible (EA = 1e15 N): upper end force w (L0 + h)/2", source,
                 r_stiff.V, 0.5 * w * (L0 + h), rtol=1e-12, unit="N")


# ---------------------------------------------------------------------------
# limits from the literature
# ---------------------------------------------------------------------------

def test_chord_stiffness_approaches_ernst_equivalent_modulus(verify):
    # source: Ernst 1965, Der Bauingenieur 40 (from memory):
    #   E_eq = E / [1 + (gamma l)^2 E / (12 sigma^3)],
    # gamma = weight per volume, l = horizontal projection, sigma = stress.
    # For an inclined chord the sag is set by the chord-normal weight component
    # w cos(a) over the chord length L_c; since l = L_c cos(a), (w cos(a) L_c)^2
    # = (w l)^2, so the horizontal projection with the full weight is the same
    # thing.  In forces: E_eq A = EA / [1 + (w l)^2 EA / (12 T^3)], T the
    # tension along the chord (mean of the end tensions).
    alpha = np.radians(30.0)
    L0, w = 100.0, 100.0
    W = w * L0
    tautness = np.array([10.0, 30.0, 100.0, 300.0, 1000.0])
    deviation = []
    for tau in tautness:
        T = tau * W
        # EA chosen so that the sag term equals the elastic one (E_eq = E/2):
        # the check is blind to neither part
        EA = 12.0 * T**3 / (w * L0 * np.cos(alpha)) ** 2
        H, V = T * np.cos(alpha), T * np.sin(alpha) + 0.5 * W
        l, h = (float(x) for x in irvine_chord_mp(H, V, L0, w, EA))
        xi, xj = place(l, h, 0.3)
        r = cat.response(xi, xj, [L0], [EA], [w])
        chord = np.hypot(l, h)
        e = (xj - xi)[0] / chord
        k_chord = e @ r.tangent[0, 3:, 3:] @ e
        sigma_A = r.end_tension[0].mean()
        ernst = EA / (1.0 + (w * l) ** 2 * EA / (12.0 * sigma_A**3)) / chord
        assert 0.4 < ernst * chord / EA < 0.6
        deviation.append(abs(k_chord / ernst - 1.0))
    deviation = np.array(deviation)
    # Ernst's formula is the leading term in the sag ratio ~ W/T; what it leaves
    # out (sag ratio squared, and the strain ~ (W/T)^2 at fixed E_eq/E) falls
    # off as (W/T)^2: fit the rate on log-log data
    rate = np.polyfit(np.log(1.0 / tautness), np.log(deviation), 1)[0]
    assert 1.8 < rate < 2.2
    verify.check("inclined catenary (30 degrees) with E_eq = E/2: order in W/T of the chord stiffness "
                 "difference from Ernst's modulus", "Ernst 1965, Der Bauingenieur 40 (from memory)",
                 rate, 2.0, atol=0.2)
    # the loop's last pass: the tautest cable, T = 1000 W
    verify.check("same cable, T = 1000 W: chord stiffness vs Ernst's equivalent modulus E_eq A / chord",
                 "Ernst 1965, Der Bauingenieur 40 (from memory)", k_chord, ernst, rtol=1e-6, unit="N/m")


def test_shallow_level_cable_parabolic_limit(verify):
    # source: common practice, parabolic cable H = w L^2/(8 d), support tension
    # sqrt(H^2 + (w L/2)^2), length S = L [1 + 8/3 (d/L)^2 - 32/5 (d/L)^4]
    # (derivations in Irvine 1981, Cable Structures, ch. 2)
    span, w, EA = 100.0, 50.0, 1.0e12
    sag_ratios = np.array([0.1, 0.05, 0.02, 0.01, 0.005])
    h_dev, s_dev = [], []
    for ratio in sag_ratios:
        L0 = span * (1.0 + 8.0 / 3.0 * ratio**2 - 32.0 / 5.0 * ratio**4)
        xi, xj = place(span, 0.0, 0.0)
        r = cat.response(xi, xj, [L0], [EA], [w])
        W = w * L0
        sag = -cat.shape_points(xi, xj, [L0], [EA], [w], r.H, r.V, 3)[0, 1, 2]
        # the load per horizontal length of the parabola is W / span
        H_parabola = (W / span) * span**2 / (8.0 * sag)
        h_dev.append(abs(r.H[0] / H_parabola - 1.0))
        verify.check("shallow level catenary, span 100 m, d/L 0.1 to 0.005: support tension sqrt(H^2 + (W/2)^2)",
                     "statics of a symmetric level cable (common practice)",
                     r.end_tension[0], np.hypot(r.H[0], 0.5 * W), rtol=1e-12, unit="N")
        S = cat.stretched_length(r.H, r.V, [L0], [w], [EA])[0]
        d = sag / span
        s_dev.append(abs(S / (span * (1.0 + 8.0 / 3.0 * d**2 - 32.0 / 5.0 * d**4)) - 1.0))
    # the catenary and the parabola agree to first order in d/L: H differs in
    # (d/L)^2, and the lengths, equal through the (d/L)^2 term, in (d/L)^4
    rate_H = np.polyfit(np.log(sag_ratios), np.log(h_dev), 1)[0]
    rate_S = np.polyfit(np.log(sag_ratios), np.log(s_dev), 1)[0]
    verify.check("shallow level catenary vs parabola: order of the thrust difference in d/L",
                 "Irvine 1981, Cable Structures, ch. 2 (H = wL^2/8d; common practice)", rate_H, 2.0, atol=0.1)
    verify.check("shallow level catenary vs parabola: order of the length difference in d/L",
                 "Irvine 1981, Cable Structures, ch. 2 (S = L[1 + 8/3 (d/L)^2 - 32/5 (d/L)^4])",
                 rate_S, 4.0, atol=0.2)
    # the loop's last pass: d/L = 0.005
    verify.check("shallow level catenary, d/L = 0.005: thrust vs the parabola's wL^2/8d",
                 "Irvine 1981, Cable Structures, ch. 2 (H = wL^2/8d; common practice)",
                 r.H[0], H_parabola, rtol=1e-4, unit="N")


# ---------------------------------------------------------------------------
# shape, tension along the cable, length
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("H, V, w", [(800.0, 300.0, 12.0), (50.0, 900.0, 20.0), (3.0e4, 2.0e4, 12.0)])
def test_shape_points_lie_on_irvine_profile(verify, H, V, w):
    # source: Irvine 1981, Cable Structures, §1.3, profile x(s), z(s) (from memory)
    L0, EA, azimuth = 100.0, 4.0e8, -0.8
    l, h = (float(x) for x in irvine_chord_mp(H, V, L0, w, EA))
    xi, xj = place(l, h, azimuth, origin=(5.0, 1.0, -2.0))
    pts = cat.shape_points(xi, xj, [L0], [EA], [w], [H], [V], 11)[0]
    s = np.linspace(0.0, L0, 11)
    ref = np.array([[float(v) for v in irvine_profile_mp(sk, H, V, L0, w, EA)] for sk in s])
    e_h = np.array([np.cos(azimuth), np.sin(azimuth), 0.0])
    expected = xi + ref[:, :1] * e_h + ref[:, 1:] * np.array([0.0, 0.0, 1.0])
    # cancellation-free forms: a few ulp of the length
    verify.check(f"catenary H = {H:g} N, V = {V:g} N, w = {w:g} N/m, L0 = 100 m: 11 points of the drawn "
                 "profile", "Irvine 1981, Cable Structures, §1.3, profile x(s), z(s) (from memory), by "
                 "mpmath", pts, expected, rtol=0, atol=1e-13 * L0, unit="m")
    assert_allclose(pts[-1], xj[0], rtol=0, atol=1e-13 * L0)


def test_divided_cable_matches_the_single_element(verify):
    # source: Irvine 1981, Cable Structures, §1.3: n elements with nodes on the
    # exact profile at equal unstressed length carry the same H, the vertical
    # force v(s) at their ends, and leave no out-of-balance at interior nodes
    H, V, L0, w, EA, n = 900.0, 700.0, 120.0, 15.0, 2.0e8, 6
    W = w * L0
    s = np.linspace(0.0, L0, n + 1)
    xz = np.array([[float(v) for v in irvine_profile_mp(sk, H, V, L0, w, EA)] for sk in s])
    nodes = np.stack([xz[:, 0], np.zeros(n + 1), xz[:, 1]], axis=1)
    parts = cat.response(nodes[:-1], nodes[1:], np.full(n, L0 / n), EA, w)
    whole = cat.response(nodes[:1], nodes[-1:], [L0], [EA], [w])
    # node coordinates carry 1 ulp; each short element amplifies it by ~1/strain
    source = "Irvine 1981, Cable Structures, §1.3 (nodes on the profile by mpmath)"
    verify.check("cable of 6 elements with nodes on the exact profile: horizontal force H in every element",
                 source, parts.H, H, rtol=1e-8, unit="N")
    verify.check("same cable: vertical force V - W + w s at the element ends", source,
                 parts.V, V - W + w * s[1:], rtol=1e-8, atol=1e-8 * H, unit="N")
    out_of_balance = parts.force[:-1, 3:] + parts.force[1:, :3]
    assert_allclose(out_of_balance, 0.0, atol=1e-8 * H)
    assert_allclose(parts.force[0, :3], whole.force[0, :3], rtol=1e-8, atol=1e-8 * H)
    assert_allclose(parts.force[-1, 3:], whole.force[0, 3:], rtol=1e-8, atol=1e-8 * H)
    pts = cat.shape_points(nodes[:1], nodes[-1:], [L0], [EA], [w], whole.H, whole.V, n + 1)[0]
    verify.check("same cable as one element: drawn profile through the nodes", source,
                 pts, nodes, rtol=0, atol=1e-12 * L0, unit="m")


@pytest.mark.parametrize("H, V, w", [(800.0, 300.0, 12.0), (50.0, 900.0, 20.0), (1.0e3, 400.0, 1e-7),
                                     (1.0e3, 400.0, 0.0), (0.0, 1500.0, 10.0), (0.0, 700.0, 10.0)])
def test_stretched_length_and_tension_along_the_cable(verify, H, V, w):
    # source: Irvine 1981, Cable Structures, §1.3: ds stretches to (1 + T/EA) ds,
    # T(s) = sqrt(H^2 + (V - W + w s)^2); integrated by mpmath quadrature
    L0, EA = 100.0, 1.0e5
    m = [mp.mpf(x) for x in (H, V, L0, w, EA)]
    tension = lambda s: mp.sqrt(m[0] ** 2 + (m[1] - m[3] * m[2] + m[3] * s) ** 2)
    length = float(mp.quad(lambda s: 1 + tension(s) / m[4], [0, (m[2] - m[1] / m[3] if 0 < V < w * L0 else 0), m[2]]))
    source = ("Irvine 1981, Cable Structures, §1.3: ds stretches to (1 + T/EA) ds, "
              "T(s) = sqrt(H^2 + (V - W + w s)^2); integrated by mpmath.quad")
    problem = f"catenary H = {H:g} N, V = {V:g} N, w = {w:g} N/m, L0 = 100 m, EA = 1e5 N"
    verify.check(problem + ": stretched length", source,
                 cat.stretched_length([H], [V], [L0], [w], [EA]), length, rtol=1e-14, unit="m")
    s = np.array([[0.0, 13.0, 50.0, 100.0]])
    expected = [[float(tension(mp.mpf(x))) for x in s[0]]]
    verify.check(problem + ": tension at s = 0, 13, 50, 100 m", source,
                 cat.tension_at(s, [H], [V], [L0], [w]), expected, rtol=1e-14, unit="N")


# ---------------------------------------------------------------------------
# input errors
# ---------------------------------------------------------------------------

def test_bad_input_raises():
    xi, xj = place(10.0, 0.0, 0.0)
    with pytest.raises(ValueError, match="unstressed_length"):
        cat.response(xi, xj, [0.0], [1e6], [1.0])
    with pytest.raises(ValueError, match="weight"):
        cat.response(xi, xj, [10.0], [1e6], [-1.0])
    with pytest.raises(ValueError, match="EA"):
        cat.response(xi, xj, [10.0], [-1e6], [1.0])
    with pytest.raises(ValueError, match="shape"):
        cat.response(xi[0], xj[0], [10.0], [1e6], [1.0])
    with pytest.raises(ValueError, match="H must be"):
        cat.catenary_chord([-1.0], [0.0], [10.0], [1.0], [1e6])
    with pytest.raises(ValueError, match="undefined"):
        cat.catenary_chord([0.0], [0.0], [10.0], [0.0], [1e6])
    with pytest.raises(ValueError, match="lengths"):
        cat.solve_end_forces([1.0, 2.0], [0.0, 0.0, 0.0], 10.0, 1.0, 1e6)
    with pytest.raises(ValueError, match="guess"):
        cat.response(xi, xj, [10.0], [1e6], [1.0], guess=(np.ones(3), np.ones(3)))
    with pytest.raises(ValueError, match="l \\(horizontal"):
        cat.solve_end_forces([-1.0], [0.0], [10.0], [1.0], [1e6])
