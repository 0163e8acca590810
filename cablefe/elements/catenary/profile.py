"""Closed-form profile of the elastic catenary: the chord from the end forces,
its flexibility and the stretched length, free of cancellation.

Local frame of one element: node i at A = (0, 0), node j at B = (l, h), with
``l >= 0`` the horizontal projection of the chord, ``h`` its rise, z up.  The
cable has unstressed length ``L0``, weight ``w`` per unit unstressed length
(``W = w L0``) acting in -z, and axial stiffness ``EA``.  The end forces are
the horizontal force ``H`` (constant along the cable) and the upward support
force ``V`` at B; the support at A carries ``W - V``.  With ``s`` the unstressed
coordinate from A, the vertical component of tension along increasing s is
``v(s) = V - W + w s`` and the tension is ``T(s) = sqrt(H^2 + v(s)^2)``.
Irvine's chord equations (Irvine 1981, Cable Structures, §1.3) are::

    l = H L0/EA + (H L0/W) [asinh(V/H) - asinh((V - W)/H)]
    h = (W L0/EA)(V/W - 1/2) + (H L0/W) [sqrt(1 + (V/H)^2) - sqrt(1 + ((V - W)/H)^2)]

Both brackets cancel catastrophically as ``W -> 0`` (and the prefactor blows
up), and the arguments blow up as ``H -> 0``; this module evaluates them, and
their derivatives, in forms that never subtract nearly equal numbers:

* ``asinh(b) - asinh(a)`` for ends of equal sign is written as
  ``log1p(W c)`` with a cancellation-free ``c`` (and ``log1p(x)/x`` by Kahan's
  trick), for ends of opposite sign as a plain sum of two positive terms;
* ``sqrt(1 + b^2) - sqrt(1 + a^2)`` is rationalised;
* differences of ``sin`` and ``cos`` of the end tangent angles go through
  ``atan2`` of the angle between the end tangents.

The same formulas hold at ``W = 0`` (straight tie) and at ``H = 0`` (vertical
cable), so the element is continuous in both limits.
"""
from __future__ import annotations

import numpy as np

from .checks import _nonnegative, _pair_and_cable

# ---------------------------------------------------------------------------
# cancellation-free kernels (1-D arrays of equal length, validated inputs)
# ---------------------------------------------------------------------------

def _log1p_over_x(x):
    """``log1p(x)/x`` for ``x >= 0``, 1 at 0 (Kahan's trick: accurate to a few ulp)."""
    u = 1.0 + x
    d = u - 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.log(u) / d
    out = np.where(d == 0.0, 1.0, out)
    return np.where(np.isinf(x), 0.0, out)


def _atan_over_x(x):
    """``arctan(x)/x`` for ``x >= 0``, by its series below 1e-4 (1 at 0 instead of 0/0)."""
    small = x < 1e-4
    xs = np.where(small, 1.0, x)
    x2 = x * x
    return np.where(small, 1.0 - x2 / 3.0 + x2 * x2 / 5.0, np.arctan(xs) / xs)


def _sinh_minus_x_over_x(a):
    """``(sinh(a) - a)/a`` for ``0 <= a < 0.5`` by its series (8 terms: error < 1e-18 relative)."""
    a2 = a * a
    out = np.zeros_like(a)
    term = np.ones_like(a)
    for k in range(1, 9):
        term = term * a2 / ((2 * k) * (2 * k + 1))
        out = out + term
    return out


def _asinh_ratio(y, H):
    """``asinh(y/H)`` for ``y >= 0``, ``H >= 0`` without overflow of the ratio."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        q = y / H
        direct = np.arcsinh(np.where(q < 1e300, q, 0.0))
        # asinh(q) = log(y + T) - log(H) once q is astronomically large
        far = np.log(y + np.hypot(y, H)) - np.log(H)
    return np.where(q < 1e300, direct, far)


def _asinh_span(H, Va, Vb, W):
    """``A = asinh(Vb/H) - asinh(Va/H)`` and ``alpha = A / W`` (with ``Vb - Va = W >= 0``).

    ``alpha`` has the finite limit ``1/T`` as ``W -> 0``; ``A`` is the change of
    the inverse Gudermannian of the tangent angle along the cable.  At
    ``H = 0`` with a zero or sign-changing vertical force, ``A = alpha = inf``.
    """
    Ta = np.hypot(H, Va)
    Tb = np.hypot(H, Vb)
    pos = Va >= 0.0
    same = pos | (Vb <= 0.0)
    # both ends of one sign: mirror v -> -v so that 0 <= P <= Q; then
    # A = log((Q + TQ)/(P + TP)) = log1p(W c) with every term of c positive
    P = np.where(pos, Va, -Vb)
    Q = np.where(pos, Vb, -Va)
    TP = np.where(pos, Ta, Tb)
    TQ = np.where(pos, Tb, Ta)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        m = (P + Q) / (TP + TQ)
        c = (1.0 + m) / (P + TP)
        x = W * c
        A_same = np.log1p(x)
        alpha_same = np.where(np.isinf(c), np.inf, c * _log1p_over_x(np.where(np.isfinite(x), x, np.inf)))
        # ends of opposite sign (the vertex lies inside): two positive terms, W > 0
        A_opp = _asinh_ratio(np.maximum(Vb, 0.0), H) + _asinh_ratio(np.maximum(-Va, 0.0), H)
        alpha_opp = A_opp / W
    return np.where(same, A_same, A_opp), np.where(same, alpha_same, alpha_opp)


def _chord(H, V, L0, W, EA):
    """Irvine's forward map (l, h), cancellation free; see module docstring."""
    Va = V - W
    Ta = np.hypot(H, Va)
    Tb = np.hypot(H, V)
    _, alpha = _asinh_span(H, Va, V, W)
    with np.errstate(invalid="ignore", divide="ignore"):
        # (H/W)[asinh(V/H) - asinh(Va/H)] = H * alpha, -> 0 for a vertical cable
        g = np.where(H > 0.0, H * alpha, 0.0)
        # (H/W)[sqrt(1+(V/H)^2) - sqrt(1+(Va/H)^2)] = (Tb - Ta)/W, rationalised
        zr = np.where(Ta + Tb > 0.0, (Va + V) / (Ta + Tb), 0.0)
    l = L0 * (H / EA + g)
    h = L0 * ((V - 0.5 * W) / EA + zr)
    return l, h


def _flexibility(H, V, L0, W, EA):
    """Entries (F_lH, F_lV = F_hH, F_hV) of d(l, h)/d(H, V), cancellation free.

    With T(s) the tension and v(s) its vertical component::

        dl/dH = L0/EA + int v^2/T^3 ds = L0/EA + (L0/W)[A - (Vb/Tb - Va/Ta)]
        dl/dV = dh/dH = (L0/W)(H/Tb - H/Ta)
        dh/dV = L0/EA + (L0/W)(Vb/Tb - Va/Ta)

    ``Vb/Tb - Va/Ta`` and ``H/Tb - H/Ta`` are differences of sin and cos of the
    end tangent angles: ``2 cos(tm) sin(dt/2)`` and ``-2 sin(tm) sin(dt/2)``
    with ``dt = atan2(H W, H^2 + Va Vb)`` the angle between the end tangents.
    """
    Va = V - W
    Vb = V
    Ta = np.hypot(H, Va)
    Tb = np.hypot(H, Vb)
    A, alpha = _asinh_span(H, Va, Vb, W)
    D = H * H + Va * Vb
    dtheta = np.arctan2(H * W, D)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # dt / W, with its finite limit H/T^2 at W = 0; D <= 0 only when W > 0
        ratio = np.where(D > 0.0, (H / D) * _atan_over_x(np.where(D > 0.0, H * W / D, 0.0)), dtheta / W)
        theta_mid = np.arctan2(Va, H) + 0.5 * dtheta
        chord_sin = ratio * np.sinc(dtheta / (2.0 * np.pi))   # 2 sin(dt/2)/W
        P_sin = np.cos(theta_mid) * chord_sin                 # (Vb/Tb - Va/Ta)/W
        P_cos = -np.sin(theta_mid) * chord_sin                # (H/Tb - H/Ta)/W

        # (A - S)/W with S = Vb/Tb - Va/Ta.  Using S = sinh(A) H^2/(Ta Tb) and
        # 1 - H^2/(Ta Tb) = R (a sum of positive terms over a positive one),
        # A - S = sinh(A) R - (sinh(A) - A): both parts positive and at most
        # a small factor apart, so the difference is accurate for small A.
        TaTb = Ta * Tb
        R = (H * H * (Va * Va + Vb * Vb) + (Va * Vb) ** 2) / ((TaTb + H * H) * TaTb)
        A_small = np.minimum(A, 0.5)
        shm = _sinh_minus_x_over_x(A_small)
        Q_small = alpha * ((1.0 + shm) * R - shm)
        sin_b = np.where(Tb > 0.0, Vb / Tb, 0.0)
        sin_a = np.where(Ta > 0.0, Va / Ta, 0.0)
        Q_large = (A - (sin_b - sin_a)) / W
        Q = np.where(A < 0.5, Q_small, Q_large)
    F_lH = L0 / EA + L0 * Q
    F_lV = L0 * P_cos
    F_hV = L0 / EA + L0 * P_sin
    return F_lH, F_lV, F_hV


def _mean_tension(H, V, W):
    """Mean tension over the unstressed length, ``(1/W) int T dv`` (N), stable as W -> 0 and H -> 0."""
    Va = V - W
    Vb = V
    Ta = np.hypot(H, Va)
    Tb = np.hypot(H, Vb)
    _, alpha = _asinh_span(H, Va, Vb, W)
    with np.errstate(divide="ignore", invalid="ignore"):
        # (Vb Tb - Va Ta)/W: rationalised when both ends have one sign
        same = Va * Vb > 0.0
        rational = (Va + Vb) * (H * H + Va * Va + Vb * Vb) / (Vb * Tb + Va * Ta)
        direct = (Vb * Tb - Va * Ta) / W
        vt = np.where(same, rational, np.where(W > 0.0, direct, H))
        h2alpha = np.where(H > 0.0, H * H * alpha, 0.0)
    return 0.5 * (vt + h2alpha)

# ---------------------------------------------------------------------------
# public functions of given end forces
# ---------------------------------------------------------------------------

def catenary_chord(H, V, unstressed_length, weight, EA):
    """Chord (l, h) of an elastic catenary from its end forces (Irvine's forward map).

    Parameters
    ----------
    H : (n,) horizontal force, N (>= 0)
    V : (n,) upward vertical support force at the end B (node j), N
    unstressed_length : (n,) unstressed length L0, m
    weight : (n,) weight per unit unstressed length, N/m (>= 0, may be 0)
    EA : (n,) axial stiffness, N

    Returns
    -------
    l, h : (n,) horizontal projection and rise of the chord from A to B, m
    """
    H, V, L0, weight, EA = _end_force_arrays(H, V, unstressed_length, weight, EA, "chord")
    return _chord(H, V, L0, weight * L0, EA)


def _end_force_arrays(H, V, unstressed_length, weight, EA, what=None):
    """Validated (n,) arrays for the functions of given end forces.

    ``what`` names the quantity for the error raised when it is undefined
    for an unloaded weightless cable; None where it is defined there.
    """
    H, V, L0, weight, EA = _pair_and_cable(("H", H), ("V", V), unstressed_length, weight, EA)
    _nonnegative("H", H, "N")
    if what is not None and np.any((H == 0.0) & (V == 0.0) & (weight == 0.0)):
        raise ValueError(f"the {what} of an unloaded weightless cable (H = V = weight = 0) is undefined")
    return H, V, L0, weight, EA


def catenary_flexibility(H, V, unstressed_length, weight, EA):
    """Flexibility ``d(l, h)/d(H, V)`` of the elastic catenary, analytic.

    The derivatives of Irvine's chord equations, in the same cancellation-free
    form as the chord itself (see :func:`_flexibility`).

    Parameters
    ----------
    H, V, unstressed_length, weight, EA : (n,) arrays
        End forces and cable, as in :func:`catenary_chord`.

    Returns
    -------
    (n, 2, 2) array ``[[dl/dH, dl/dV], [dh/dH, dh/dV]]``, m/N; symmetric.  At
    ``H = 0`` with the cable folded (``0 <= V <= W``) ``dl/dH`` is ``inf``
    (no horizontal stiffness).
    """
    H, V, L0, weight, EA = _end_force_arrays(H, V, unstressed_length, weight, EA, "flexibility")
    F_lH, F_lV, F_hV = _flexibility(H, V, L0, weight * L0, EA)
    return np.stack([np.stack([F_lH, F_lV], axis=-1), np.stack([F_lV, F_hV], axis=-1)], axis=-2)


def stretched_length(H, V, unstressed_length, weight, EA):
    """Deformed arc length ``L0 + (1/EA) int T ds`` of each element, m.

    ``int T ds = L0 Tm`` with the mean tension over the unstressed length
    ``Tm = (V T_j - (V - W) T_i + H^2 A) / (2 W)``, ``A`` the difference of
    the asinh of the end slopes (see :func:`_mean_tension`).

    Parameters
    ----------
    H, V : (n,) end forces that solve the element, N (from
        :func:`~cablefe.elements.catenary.response` or
        :func:`~cablefe.elements.catenary.solve_end_forces`)
    unstressed_length, weight, EA : (n,) as in :func:`catenary_chord`

    Returns
    -------
    (n,) arc length, m.  A slack weightless element (H = V = 0) keeps L0.
    """
    H, V, L0, weight, EA = _end_force_arrays(H, V, unstressed_length, weight, EA)
    return L0 + L0 * _mean_tension(H, V, weight * L0) / EA
