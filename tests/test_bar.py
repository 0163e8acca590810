"""Bar element: internal forces and tangent stiffness."""
import numpy as np
from hypothesis import given, settings, strategies as st
from numpy.testing import assert_allclose

from cablefe.elements import bar

finite = st.floats(-5.0, 5.0, allow_nan=False)


def _fd_tangent(xi, xj, L0, EA, tension_only, h=1e-6):
    x = np.concatenate([xi, xj], axis=1)
    n = len(x)
    K = np.zeros((n, 6, 6))
    for c in range(6):
        xp, xm = x.copy(), x.copy()
        xp[:, c] += h
        xm[:, c] -= h
        fp = bar.response(xp[:, :3], xp[:, 3:], L0, EA, tension_only).force
        fm = bar.response(xm[:, :3], xm[:, 3:], L0, EA, tension_only).force
        K[:, :, c] = (fp - fm) / (2 * h)
    return K


def test_axial_force_is_engineering_strain_of_unstressed_length(verify):
    # source: definition of the axial force from the engineering strain of the
    # unstressed length, N = EA (L - L0) / L0 (docs/case-format.md, member types)
    xi = np.array([[0.0, 0.0, 0.0]])
    xj = np.array([[3.0, 4.0, 0.0]])
    r = bar.response(xi, xj, np.array([4.9]), np.array([2.0e6]))
    verify.check("bar 3-4-5 m long, unstressed length 4.9 m, EA = 2e6 N: axial force",
                 "engineering strain of the unstressed length, N = EA (L - L0)/L0 (hand calculation)",
                 r.tension, 2.0e6 * (5.0 - 4.9) / 4.9, rtol=1e-14, unit="N")
    verify.check("bar 3-4-5 m long: end force = N times the direction cosines (0.6, 0.8, 0)",
                 "statics of a two-force member (hand calculation)",
                 r.force[0, 3:], 2.0e6 * (5.0 - 4.9) / 4.9 * np.array([0.6, 0.8, 0.0]), rtol=1e-14,
                 atol=0.0, unit="N")
    assert_allclose(r.force[0, :3], -r.force[0, 3:], rtol=1e-14)


@settings(max_examples=60, deadline=None)
@given(st.lists(finite, min_size=6, max_size=6), st.floats(0.6, 1.4), st.booleans())
def test_tangent_is_derivative_of_internal_force(coords, ratio, tension_only):
    xi = np.array([coords[:3]])
    xj = xi + np.array([coords[3:]]) + np.array([[6.0, 0.5, -0.3]])
    L = np.linalg.norm(xj - xi)
    L0 = np.array([L * ratio])
    if abs(L - L0[0]) < 1e-4 * L:   # the slack kink itself has no derivative
        L0 = L0 * 1.01
    EA = np.array([1.0e5])
    to = np.array([tension_only])
    K = bar.response(xi, xj, L0, EA, to).tangent
    # central differences: truncation error O(h^2 * f''') ~ 1e-12 * EA / L^2;
    # round-off ~ eps * N / h, about 1e-5 here
    assert_allclose(K, _fd_tangent(xi, xj, L0, EA, to), rtol=1e-6, atol=1e-4)


def test_slack_tension_only_bar_carries_nothing():
    r = bar.response(np.zeros((1, 3)), np.array([[1.0, 0, 0]]), np.array([1.2]), np.array([1e6]),
                     np.array([True]))
    assert r.slack[0]
    assert_allclose(r.force, 0.0, atol=0.0)
    assert_allclose(r.tangent, 0.0, atol=0.0)
