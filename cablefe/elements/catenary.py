"""Elastic catenary cable element (exact equilibrium of a uniformly heavy elastic cable).

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

Special states handled in closed form:

* weightless (``W = 0``): a straight elastic tie, ``N = EA (L - L0)/L0`` when
  the chord ``L`` exceeds ``L0``, otherwise slack: zero force, zero stiffness;
* vertical chord (``l = 0``, within 1e-13 of the element size): ``H = 0`` and V
  from statics of a hanging cable; when the cable is longer than the chord
  it hangs folded on itself with zero tension at the fold.  That state is
  reported ``slack``; its force is still the statics of the hanging cable
  (the supports carry its weight), its horizontal stiffness is zero and its
  vertical stiffness is the exact one (``w/2`` for an inextensible cable).
"""
from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np

from . import Family, register
from .bar import tie_stiffness, two_node_matrix

logger = logging.getLogger(__name__)

NODE_DOFS = 3

#: horizontal projections below this fraction of the element size are treated
#: as exactly vertical (H = 0); the neglected horizontal force is of the same
#: relative order, far below any solver tolerance.
VERTICAL_TOLERANCE = 1e-13

_EZ = np.array([0.0, 0.0, 1.0])


# ---------------------------------------------------------------------------
# input handling
# ---------------------------------------------------------------------------

def _vector(name, value, n=None):
    """Finite float array of shape (n,) from a scalar or (n,) input (a read-only view: never written)."""
    arr = np.asarray(value, dtype=float)
    if arr.ndim > 1:
        raise ValueError(f"{name} must be a scalar or a 1-D array per element, got shape {arr.shape}")
    if n is not None:
        if arr.ndim == 1 and arr.shape[0] not in (1, n):
            raise ValueError(f"{name} has {arr.shape[0]} entries, expected {n} (one per element)")
        arr = np.broadcast_to(arr, (n,))
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must be finite, got {arr[~np.isfinite(arr)][:3]}")
    return arr


def _batch_size(*values):
    sizes = {np.asarray(v).shape[0] for v in values if np.ndim(v) == 1}
    if len(sizes) > 1:
        raise ValueError(f"per-element arrays have different lengths {sorted(sizes)}")
    return sizes.pop() if sizes else 1


def _check_cable(L0, weight, EA):
    if np.any(L0 <= 0.0):
        raise ValueError(f"unstressed_length must be > 0 m, got {L0[L0 <= 0.0][:3]}")
    if np.any(weight < 0.0):
        raise ValueError(f"weight must be >= 0 N/m, got {weight[weight < 0.0][:3]}")
    if np.any(EA <= 0.0):
        raise ValueError(f"EA must be > 0 N, got {EA[EA <= 0.0][:3]}")


def _points(name, value):
    arr = np.asarray(value, dtype=float)
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise ValueError(f"{name} must have shape (n, 3), got {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must be finite")
    return arr


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
# starting values for the inverse map
# ---------------------------------------------------------------------------

def _solve_sinh_ratio(R):
    """Root ``lam > 0`` of ``sinh(lam)/lam = R`` (R > 1), Newton on the convex log form.

    Starts from a proven upper bound and so descends monotonically.
    """
    logR = np.log(R)
    lam = np.minimum(np.sqrt(6.0 * (R - 1.0)), logR + 2.0 * np.log(logR + 2.0) + 1.5)
    for _ in range(40):
        big = lam > 20.0
        ls = np.where(big, 1.0, lam)
        small = ls < 1e-2
        phi = np.where(big, lam - np.log(2.0 * lam),
                       np.where(small, np.log1p(ls * ls / 6.0 + ls**4 / 120.0), np.log(np.sinh(ls) / ls)))
        dphi = np.where(big, 1.0 - 1.0 / lam,
                        np.where(small, ls / 3.0 - ls**3 / 45.0, 1.0 / np.tanh(ls) - 1.0 / ls))
        lam = np.maximum(lam - (phi - logR) / dphi, 0.5 * lam)
    return lam


def _guess_inextensible(l, h, L0, w):
    """Inextensible catenary through the chord (exact as EA -> inf); needs L0 > chord."""
    R = np.sqrt(np.maximum(L0 * L0 - h * h, 0.0)) / l
    lam = np.maximum(_solve_sinh_ratio(np.maximum(R, 1.0 + 1e-9)), 1e-6)
    H = w * l / (2.0 * lam)
    V = 0.5 * w * (L0 + h / np.tanh(lam))
    return H, V


def _guess_taut(l, h, L0, w, EA):
    """Shallow elastic cable: positive root of N^3 L0/EA - (c - L0) N^2 - (w L0 l)^2/(24 c) = 0.

    The chord shortening by sag of a taut cable under the chord-normal weight
    component is ``(w L0 l)^2 / (24 c N^2)``; adding the elastic stretch gives
    this cubic, which has exactly one positive root (one sign change).
    """
    c = np.hypot(l, h)
    a = L0 / EA
    b = c - L0
    d = (w * L0 * l) ** 2 / (24.0 * c)
    with np.errstate(divide="ignore", invalid="ignore"):
        bound_sag = np.where(b > 0.0, d * a / (b * b), np.inf)
    N = np.maximum(b, 0.0) / a + np.minimum(np.cbrt(d / a), bound_sag)
    for _ in range(60):
        # monotone Newton from above on a cubic convex beyond its root
        p = ((a * N - b) * N) * N - d
        dp = (3.0 * a * N - 2.0 * b) * N
        with np.errstate(divide="ignore", invalid="ignore"):
            N = np.where(dp > 0.0, N - p / dp, N)
    H = N * l / c
    V = N * h / c + 0.5 * w * L0
    return H, V


# ---------------------------------------------------------------------------
# inverse map
# ---------------------------------------------------------------------------

def _scaled_residual(H, V, l, h, L0, W, EA, s_l, s_h):
    lc, hc = _chord(H, V, L0, W, EA)
    return lc - l, hc - h, (lc - l) / s_l, (hc - h) / s_h


def _residual_scales(l, h, L0, W, EA):
    # l itself scales the first residual: the forward map gives l to a few ulp
    # (a sum of positive terms), which pins H even for nearly vertical chords.
    # h can be a small difference of the two halves of the cable, each up to
    # about L0 (1 + W/EA) long, which sets the floor of its rounding error.
    return l, np.maximum(np.hypot(l, h), 1e-2 * L0 * (1.0 + W / EA))


def _correction_size(H, V, l, h, L0, W, EA):
    """Length of the Newton correction relative to (H, T): picks the best start.

    The residual itself is a poor judge: a nearly straight cable meets its
    chord to within a small residual under almost any tension.
    """
    lc, hc = _chord(H, V, L0, W, EA)
    F_lH, F_lV, F_hV = _flexibility(H, V, L0, W, EA)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        det = F_lH * F_hV - F_lV * F_lV
        dH = (F_hV * (lc - l) - F_lV * (hc - h)) / det
        dV = (F_lH * (hc - h) - F_lV * (lc - l)) / det
        size = np.hypot(dH / H, dV / np.maximum(np.hypot(H, V), np.hypot(H, V - W)))
    return np.where(np.isfinite(size), size, np.inf)


def _newton(l, h, L0, W, EA, H, V, tol, max_iter):
    """Damped Newton on Irvine's equations for all elements at once (H stays > 0).

    The damping uses the natural monotonicity test (Deuflhard 2004, Newton
    Methods for Nonlinear Problems, ch. 3; from memory): a step t is accepted when
    the simplified correction ``F_k^-1 r(x_k + t dx)`` is shorter than
    ``(1 - t/4) |dx|``.  The test is affine invariant, so it does not stall in
    the narrow curved valleys that the residual norm has for nearly vertical or
    nearly taut light cables.  Corrections are measured relative to (H, T).
    A step that lowers the scaled residual norm is accepted too.
    """
    H = H.copy()
    V = V.copy()
    s_l, s_h = _residual_scales(l, h, L0, W, EA)
    active = np.ones(H.shape, dtype=bool)
    for _ in range(max_iter):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        Hk, Vk = H[idx], V[idx]
        args = (l[idx], h[idx], L0[idx], W[idx], EA[idx], s_l[idx], s_h[idx])
        rl, rh, ql, qh = _scaled_residual(Hk, Vk, *args)
        done = np.maximum(np.abs(ql), np.abs(qh)) <= tol
        merit = np.hypot(ql, qh)
        F_lH, F_lV, F_hV = _flexibility(Hk, Vk, L0[idx], W[idx], EA[idx])
        det = F_lH * F_hV - F_lV * F_lV

        def correction(r_l, r_h, j=slice(None)):
            return (-(F_hV[j] * r_l - F_lV[j] * r_h) / det[j], -(F_lH[j] * r_h - F_lV[j] * r_l) / det[j])

        dH, dV = correction(rl, rh)
        sigma_H = Hk
        sigma_V = np.maximum(np.hypot(Hk, Vk), np.hypot(Hk, Vk - W[idx]))
        size = np.hypot(dH / sigma_H, dV / sigma_V)
        # keep H > 0: at most a tenfold drop, at most a hundredfold rise per step
        t = np.ones_like(Hk)
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.where(dH < -0.9 * Hk, -0.9 * Hk / dH, t)
            t = np.where(dH > 99.0 * Hk, 99.0 * Hk / dH, t)
        t = np.where(done, 1.0, t)
        accepted = np.zeros(idx.size, dtype=bool)
        pending = np.isfinite(size)
        for _ in range(50):
            j = np.flatnonzero(pending)
            if j.size == 0:
                break
            Ht = Hk[j] + t[j] * dH[j]
            Vt = Vk[j] + t[j] * dV[j]
            sub = tuple(a[j] for a in args)
            rlt, rht, qlt, qht = _scaled_residual(Ht, Vt, *sub)
            bH, bV = correction(rlt, rht, j)
            simplified = np.hypot(bH / sigma_H[j], bV / sigma_V[j])
            errt = np.maximum(np.abs(qlt), np.abs(qht))
            # near the solution the correction is blurred by the rounding of the
            # stiff (tension) direction, while the residual still shows progress
            # in the soft one (chord rotation): either decrease is progress
            monotone = (simplified <= (1.0 - 0.25 * t[j]) * size[j]) | (np.hypot(qlt, qht) < merit[j])
            # the polishing step of a converged element must keep it converged
            ok = np.isfinite(simplified) & (Ht > 0.0) & np.where(done[j], errt <= tol, monotone)
            Hk[j[ok]] = Ht[ok]
            Vk[j[ok]] = Vt[ok]
            accepted[j[ok]] = True
            pending[j[ok]] = False
            # a polishing step on a converged element is tried once only
            pending[j[~ok & done[j]]] = False
            t[j[~ok]] *= 0.5
        H[idx] = Hk
        V[idx] = Vk
        # converged elements had their polishing step; stalled ones cannot improve
        active[idx[done | ~accepted]] = False
    _, _, ql, qh = _scaled_residual(H, V, l, h, L0, W, EA, s_l, s_h)
    err = np.maximum(np.abs(ql), np.abs(qh))
    converged = np.isfinite(err) & (err <= tol) & (H > 0.0)
    return H, V, converged


def _vertical_statics(h, L0, W, EA):
    """V of a cable on a vertical chord (H = 0), from the piecewise-linear h(V).

    ``h = (L0/EA)(V - W/2) + (|V| - |V - W|) L0/W``: hanging from j (V >= W),
    hanging from i (V <= 0), or folded with a zero-tension fold (0 < V < W).
    """
    flex = L0 / EA
    V = 0.5 * W + h / (flex + 2.0 * L0 / W)
    V = np.where(V >= W, 0.5 * W + (h - L0) / flex, V)
    V = np.where(V <= 0.0, 0.5 * W + (h + L0) / flex, V)
    return V


def _check_solver(guess, n, tol, max_iter):
    if not (tol > 0.0) or int(max_iter) < 1:
        raise ValueError(f"need tol > 0 and max_iter >= 1, got tol={tol}, max_iter={max_iter}")
    if guess is not None:
        try:
            Hw, Vw = guess
            np.broadcast_to(np.asarray(Hw, dtype=float), (n,))
            np.broadcast_to(np.asarray(Vw, dtype=float), (n,))
        except (TypeError, ValueError) as err:
            raise ValueError(f"guess must be a pair (H, V) of arrays with {n} entries each") from err


def _classify(l, h, L0, weight):
    c = np.hypot(l, h)
    weightless = weight == 0.0
    vertical = ~weightless & (l <= VERTICAL_TOLERANCE * np.maximum(L0, c))
    general = ~weightless & ~vertical
    return c, weightless, vertical, general


def _solve(l, h, L0, weight, EA, guess, tol, max_iter, warn=True):
    n = l.shape[0]
    W = weight * L0
    c, weightless, vertical, general = _classify(l, h, L0, weight)
    H = np.zeros(n)
    V = np.zeros(n)
    converged = np.ones(n, dtype=bool)

    # straight elastic tie, or slack (zero force) when the chord is not longer than L0
    with np.errstate(divide="ignore", invalid="ignore"):
        N = np.where(weightless & (c > L0), EA * (c - L0) / L0, 0.0)
        H = np.where(N > 0.0, N * l / c, H)
        V = np.where(N > 0.0, N * h / c, V)

    V = np.where(vertical, _vertical_statics(h, L0, np.where(vertical, W, 1.0), EA), V)

    g = np.flatnonzero(general)
    if g.size:
        lg, hg, L0g, wg, Wg, EAg = l[g], h[g], L0[g], weight[g], W[g], EA[g]
        candidates = [_guess_taut(lg, hg, L0g, wg, EAg)]
        slackish = L0g > np.hypot(lg, hg)
        if np.any(slackish):
            Hc, Vc = _guess_inextensible(lg, hg, L0g, wg)
            candidates.append((np.where(slackish, Hc, np.nan), np.where(slackish, Vc, np.nan)))
        if guess is not None:
            Hw, Vw = guess
            Hw = np.broadcast_to(np.asarray(Hw, dtype=float), (n,))[g]
            Vw = np.broadcast_to(np.asarray(Vw, dtype=float), (n,))[g]
            usable = np.isfinite(Hw) & np.isfinite(Vw) & (Hw > 0.0)
            candidates.append((np.where(usable, Hw, np.nan), np.where(usable, Vw, np.nan)))
        best_H, best_V = candidates[0]
        best = np.full(g.size, np.inf)
        for Hc, Vc in candidates:
            valid = np.isfinite(Hc) & (Hc > 0.0) & np.isfinite(Vc)
            merit = np.where(valid, _correction_size(np.where(valid, Hc, 1.0), np.where(valid, Vc, 0.0),
                                                     lg, hg, L0g, Wg, EAg), np.inf)
            better = merit < best
            best = np.where(better, merit, best)
            best_H = np.where(better, Hc, best_H)
            best_V = np.where(better, Vc, best_V)
        Hg, Vg, cg = _newton(lg, hg, L0g, Wg, EAg, best_H, best_V, tol, max_iter)
        H[g] = Hg
        V[g] = Vg
        converged[g] = cg
        if warn and not np.all(cg):
            logger.warning("catenary: inner Newton did not converge for %d of %d elements",
                           int(np.count_nonzero(~cg)), n)
    return H, V, converged


# ---------------------------------------------------------------------------
# public API
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
    n = _batch_size(H, V, unstressed_length, weight, EA)
    H, V = _vector("H", H, n), _vector("V", V, n)
    L0, weight, EA = (_vector("unstressed_length", unstressed_length, n), _vector("weight", weight, n),
                      _vector("EA", EA, n))
    _check_cable(L0, weight, EA)
    if np.any(H < 0.0):
        raise ValueError(f"H must be >= 0 N, got {H[H < 0.0][:3]}")
    if what is not None and np.any((H == 0.0) & (V == 0.0) & (weight == 0.0)):
        raise ValueError(f"the {what} of an unloaded weightless cable (H = V = weight = 0) is undefined")
    return H, V, L0, weight, EA


def catenary_flexibility(H, V, unstressed_length, weight, EA):
    """Flexibility ``d(l, h)/d(H, V)`` of the elastic catenary, analytic.

    Parameters
    ----------
    As :func:`catenary_chord`.

    Returns
    -------
    (n, 2, 2) array ``[[dl/dH, dl/dV], [dh/dH, dh/dV]]``, m/N; symmetric.  At
    ``H = 0`` with the cable folded (``0 <= V <= W``) ``dl/dH`` is ``inf``
    (no horizontal stiffness).
    """
    H, V, L0, weight, EA = _end_force_arrays(H, V, unstressed_length, weight, EA, "flexibility")
    F_lH, F_lV, F_hV = _flexibility(H, V, L0, weight * L0, EA)
    return np.stack([np.stack([F_lH, F_lV], axis=-1), np.stack([F_lV, F_hV], axis=-1)], axis=-2)


def solve_end_forces(l, h, unstressed_length, weight, EA, guess=None, tol=1e-12, max_iter=100):
    """End forces (H, V) of elastic catenaries spanning given chords (inverse of Irvine's map).

    Vectorized damped Newton over all elements at once, from the better of a
    shallow elastic-cable estimate and the exact inextensible catenary (or
    from ``guess`` when it fits better).  Weightless and vertical elements are
    solved in closed form.

    Parameters
    ----------
    l : (n,) horizontal projection of the chord, m (>= 0)
    h : (n,) rise of the chord from node i to node j, m
    unstressed_length : (n,) unstressed length L0, m
    weight : (n,) weight per unit unstressed length, N/m (>= 0, may be 0)
    EA : (n,) axial stiffness, N
    guess : tuple (H, V) of (n,) arrays, optional
        Warm start, e.g. the previous solution; entries with ``H <= 0`` or not
        finite are ignored.
    tol : float
        Converged when ``|l(H,V) - l| <= tol * l`` and
        ``|h(H,V) - h| <= tol * max(chord, 0.01 L0 (1 + W/EA))``; one more Newton step
        is then taken, which makes the result accurate to rounding.
    max_iter : int

    Returns
    -------
    H, V : (n,) horizontal force and upward support force at node j, N
    converged : (n,) bool; False marks elements whose Newton iteration failed
        (their H, V are the last iterate).
    """
    n = _batch_size(l, h, unstressed_length, weight, EA)
    l, h = _vector("l", l, n), _vector("h", h, n)
    L0, weight, EA = (_vector("unstressed_length", unstressed_length, n), _vector("weight", weight, n),
                      _vector("EA", EA, n))
    _check_cable(L0, weight, EA)
    if np.any(l < 0.0):
        raise ValueError(f"l (horizontal projection) must be >= 0 m, got {l[l < 0.0][:3]}")
    _check_solver(guess, n, tol, max_iter)
    return _solve(l, h, L0, weight, EA, guess, float(tol), int(max_iter))


@dataclass(frozen=True)
class CatenaryResponse:
    """Response of a batch of elastic catenary elements (SI units).

    Attributes
    ----------
    force : (n, 6) internal nodal forces ``[f_i, f_j]``, N; ``f_i + f_j = (0, 0, W)``
    tangent : (n, 6, 6) d force / d [x_i, x_j], N/m (symmetric), or None
    end_tension : (n, 2) tension along the cable tangent at node i and node j, N
    max_tension, min_tension : (n,) extreme tensions over the length, N
    slack : (n,) bool, zero tension somewhere (slack weightless tie, folded vertical cable)
    H : (n,) horizontal force, N (warm start for the next call)
    V : (n,) upward support force at node j, N (warm start for the next call)
    converged : (n,) bool, the inner Newton iteration converged
    """

    force: np.ndarray
    tangent: np.ndarray | None
    end_tension: np.ndarray
    max_tension: np.ndarray
    min_tension: np.ndarray
    slack: np.ndarray
    H: np.ndarray
    V: np.ndarray
    converged: np.ndarray


def horizontal_unit(d):
    """Horizontal unit vectors (n, 3) along the chords ``d = xj - xi`` (n, 3).

    On a vertical chord any horizontal direction will do (H = 0 there); x
    is taken.
    """
    l = np.hypot(d[:, 0], d[:, 1])
    safe = l > 0.0
    e = np.zeros_like(d)
    e[:, 0] = np.where(safe, d[:, 0] / np.where(safe, l, 1.0), 1.0)
    e[:, 1] = np.where(safe, d[:, 1] / np.where(safe, l, 1.0), 0.0)
    return e


def in_plane_stiffness(F_lH, F_lV, F_hV):
    """Stiffness ``d(H, V)/d(l, h)`` from the flexibility ``d(l, h)/d(H, V)``.

    The symmetric 2 x 2 flexibility (entries ``F_lH``, ``F_lV``, ``F_hV``,
    m/N, as from :func:`catenary_flexibility`) is inverted in closed form.
    A folded cable (``F_lH`` infinite, no horizontal stiffness) keeps only
    the vertical stiffness ``1 / F_hV``.

    Returns
    -------
    K_ll, K_lh, K_hh : (n,) arrays, N/m
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        det = F_lH * F_hV - F_lV * F_lV
        folded = np.isinf(F_lH)
        K_ll = np.where(folded, 0.0, F_hV / det)
        K_lh = np.where(folded, 0.0, -F_lV / det)
        K_hh = np.where(folded, 1.0 / F_hV, F_lH / det)
    return K_ll, K_lh, K_hh


def response(xi, xj, unstressed_length, EA, weight, guess=None, want_tangent=True, tol=1e-12, max_iter=100,
             warn=True):
    """Internal forces and tangent stiffness of elastic catenary elements.

    Parameters
    ----------
    xi, xj : (n, 3) current positions of nodes i and j, m
    unstressed_length : (n,) unstressed length L0 (thermal strain already applied), m
    EA : (n,) axial stiffness, N
    weight : (n,) weight per unit unstressed length acting in -z, N/m (>= 0, may be 0)
    guess : tuple (H, V) of (n,) arrays, optional
        Warm start, normally ``(previous.H, previous.V)``.
    want_tangent : bool
    tol, max_iter : passed to :func:`solve_end_forces`
    warn : bool
        Log a warning for elements whose inner solve did not converge
        (``converged`` marks them either way); the static analysis turns
        them into a failed step instead.

    Returns
    -------
    CatenaryResponse

    Notes
    -----
    In the vertical plane of the chord the stiffness is the inverse of the
    flexibility ``d(l, h)/d(H, V)``; turning that plane about z by a sideways
    movement of j turns H with it, which adds ``H/l`` across the plane.  A
    weightless element gives the straight-tie tangent
    ``EA/L0 e e^T + N/L (I - e e^T)``; a vertical chord gives the isotropic
    horizontal stiffness ``1/(dl/dH)`` (about T/L when taut).
    """
    xi = _points("xi", xi)
    xj = _points("xj", xj)
    if xi.shape != xj.shape:
        raise ValueError(f"xi and xj must have the same shape, got {xi.shape} and {xj.shape}")
    n = xi.shape[0]
    L0, EA, weight = (_vector("unstressed_length", unstressed_length, n), _vector("EA", EA, n),
                      _vector("weight", weight, n))
    _check_cable(L0, weight, EA)
    _check_solver(guess, n, tol, max_iter)
    d = xj - xi
    l = np.hypot(d[:, 0], d[:, 1])
    h = d[:, 2]
    H, V, converged = _solve(l, h, L0, weight, EA, guess, float(tol), int(max_iter), warn)
    W = weight * L0
    Va = V - W
    c, weightless, vertical, general = _classify(l, h, L0, weight)

    e_h = horizontal_unit(d)
    f_j = H[:, None] * e_h + V[:, None] * _EZ
    f_i = -H[:, None] * e_h + (W - V)[:, None] * _EZ
    force = np.concatenate([f_i, f_j], axis=1)

    T_i = np.hypot(H, Va)
    T_j = np.hypot(H, V)
    end_tension = np.stack([T_i, T_j], axis=1)
    max_tension = np.maximum(T_i, T_j)
    vertex_inside = (Va < 0.0) & (V > 0.0)
    min_tension = np.where(vertex_inside, H, np.minimum(T_i, T_j))
    slack = min_tension <= 0.0

    tangent = None
    if want_tangent:
        k = np.zeros((n, 3, 3))
        curved = general | vertical
        if np.any(curved):
            cidx = np.flatnonzero(curved)
            K_ll, K_lh, K_hh = in_plane_stiffness(*_flexibility(H[cidx], V[cidx], L0[cidx], W[cidx], EA[cidx]))
            chord_h = l[cidx]
            # sideways turn of the vertical plane; on a vertical chord the
            # limit H/l -> dH/dl makes the horizontal stiffness isotropic
            K_pp = np.where(vertical[cidx], K_ll, H[cidx] / np.where(chord_h > 0.0, chord_h, 1.0))
            eh = e_h[cidx]
            ep = np.stack([-eh[:, 1], eh[:, 0], np.zeros(cidx.size)], axis=1)
            ez = np.broadcast_to(_EZ, eh.shape)
            k[cidx] = (K_ll[:, None, None] * np.einsum("ni,nj->nij", eh, eh)
                       + K_lh[:, None, None] * (np.einsum("ni,nj->nij", eh, ez) + np.einsum("ni,nj->nij", ez, eh))
                       + K_hh[:, None, None] * np.einsum("ni,nj->nij", ez, ez)
                       + K_pp[:, None, None] * np.einsum("ni,nj->nij", ep, ep))
        taut_tie = weightless & (c > L0)
        if np.any(taut_tie):
            tidx = np.flatnonzero(taut_tie)
            N = EA[tidx] * (c[tidx] - L0[tidx]) / L0[tidx]
            k[tidx] = tie_stiffness(d[tidx] / c[tidx, None], EA[tidx] / L0[tidx], N / c[tidx])
        tangent = two_node_matrix(k)

    return CatenaryResponse(force=force, tangent=tangent, end_tension=end_tension, max_tension=max_tension,
                            min_tension=min_tension, slack=slack, H=H, V=V, converged=converged)


def tension_at(s, H, V, unstressed_length, weight):
    """Tension at unstressed coordinate s from node i, ``T(s) = sqrt(H^2 + (V - W + w s)^2)``.

    Parameters
    ----------
    s : (n,) or (n, m) unstressed coordinate(s), m (0 at node i, L0 at node j)
    H, V, unstressed_length, weight : (n,) as in :func:`catenary_chord`

    Returns
    -------
    Tension with the shape of ``s``, N.
    """
    s = np.asarray(s, dtype=float)
    if s.ndim not in (1, 2):
        raise ValueError(f"s must have shape (n,) or (n, m), got {s.shape}")
    n = s.shape[0]
    H, V = _vector("H", H, n), _vector("V", V, n)
    L0, weight = _vector("unstressed_length", unstressed_length, n), _vector("weight", weight, n)
    extra = (slice(None),) + (None,) * (s.ndim - 1)
    v = (V - weight * L0)[extra] + weight[extra] * s
    return np.hypot(H[extra], v)


def shape_points(xi, xj, unstressed_length, EA, weight, H, V, n_points):
    """Points on the deformed cable at equal steps of unstressed arc length.

    Uses Irvine's elastic catenary profile in unstressed coordinate s::

        x(s) = H s/EA + (H/w)[asinh(v(s)/H) - asinh(v(0)/H)]
        z(s) = (v(0) s + w s^2/2)/EA + (H/w)[sqrt(1 + (v(s)/H)^2) - sqrt(1 + (v(0)/H)^2)]

    with v(s) = V - W + w s, evaluated in the same cancellation-free form as
    the chord.  The curve starts at xi and ends at xj when (H, V) solve the
    element.  A slack weightless element (H = V = 0) has no defined shape; it
    is drawn as its straight chord.

    Parameters
    ----------
    xi, xj : (n, 3) node positions, m (xj fixes the vertical plane of the cable)
    unstressed_length, EA, weight : (n,) as in :func:`response`
    H, V : (n,) end forces, N (from :func:`response` or :func:`solve_end_forces`)
    n_points : int >= 2

    Returns
    -------
    (n, n_points, 3) positions, m.
    """
    xi = _points("xi", xi)
    xj = _points("xj", xj)
    n = xi.shape[0]
    if int(n_points) < 2:
        raise ValueError(f"n_points must be >= 2, got {n_points}")
    L0, EA, weight = (_vector("unstressed_length", unstressed_length, n), _vector("EA", EA, n),
                      _vector("weight", weight, n))
    H, V = _vector("H", H, n), _vector("V", V, n)
    _check_cable(L0, weight, EA)
    frac = np.linspace(0.0, 1.0, int(n_points))
    s = L0[:, None] * frac[None, :]
    m = s.shape[1]
    rep = lambda a: np.repeat(a, m)
    Va = V - weight * L0
    undefined = (H == 0.0) & (V == 0.0) & (weight == 0.0)
    Hs = np.where(undefined, 1.0, H)            # placeholder, replaced by the chord below
    ws = (weight[:, None] * s).ravel()
    x, z = _chord(rep(Hs), rep(Va) + ws, s.ravel(), ws, rep(EA))
    x = x.reshape(n, m)
    z = z.reshape(n, m)
    d = xj - xi
    e_h = horizontal_unit(d)
    pts = xi[:, None, :] + x[:, :, None] * e_h[:, None, :] + z[:, :, None] * _EZ
    straight = xi[:, None, :] + frac[None, :, None] * d[:, None, :]
    return np.where(undefined[:, None, None], straight, pts)


def stretched_length(H, V, unstressed_length, weight, EA):
    """Deformed arc length ``L0 + (1/EA) int T ds`` of each element, m.

    Parameters
    ----------
    As :func:`catenary_chord`.

    Returns
    -------
    (n,) arc length, m.  A slack weightless element (H = V = 0) keeps L0.
    """
    H, V, L0, weight, EA = _end_force_arrays(H, V, unstressed_length, weight, EA)
    return L0 + L0 * _mean_tension(H, V, weight * L0) / EA


def mass_matrix(length, mass_per_length, lumped=False) -> np.ndarray:
    """Mass matrices of cable elements, (n, 6, 6) kg; see :func:`cablefe.elements.bar.mass_matrix`.

    The cable's mass is spread along its chord, linearly between the ends
    (or lumped at them): the exact catenary tangent condenses the cable's
    interior statically, so the element has no inertia of its own between
    its nodes.  Its own modes between the nodes (the sagging string's
    modes) are therefore only found by dividing the cable (``divide``);
    see the modes documentation for how finely.
    """
    from .bar import mass_matrix as straight
    return straight(length, mass_per_length, lumped)


# -- registration ------------------------------------------------------------------

def cable_inputs(table, loads, lam: float) -> tuple[np.ndarray, np.ndarray]:
    """Stress-free length (m) and weight per unit stress-free length (N/m) of
    the catenary elements at load factor ``lam``.

    A thermal strain e stretches the stress-free length to ``L0 (1 + e)``
    but leaves the mass alone: the weight per unit of the stretched length
    is ``w0 / (1 + e)``, so the element weighs ``w0 L0`` whatever the
    temperature (Irvine 1981, Cable Structures, sec. 1.3, thermal effects).
    """
    strain = lam * loads.strain[table.family]
    stretch = 1.0 + strain
    return table.props["unstressed_length"] * stretch, lam * loads.weight[table.family] / stretch


def _evaluate(table, state, loads, lam, want_tangent, guess):
    L0, weight = cable_inputs(table, loads, lam)
    # an unconverged inner solve is marked in ``converged`` and fails the
    # analysis step (solvers.static), so it is not logged here
    return response(state.positions[table.nodes[:, 0]], state.positions[table.nodes[:, 1]],
                    L0, table.props["EA"], weight, guess=guess, want_tangent=want_tangent, warn=False)


def _mass(table, own, added, lumped, frames):
    return mass_matrix(table.props["unstressed_length"], own + added, lumped)


def _warm_start(r):
    """The end forces of a solved state start the next inner solve."""
    return (r.H, r.V)


register(Family("cable", _evaluate, _mass, _warm_start))
