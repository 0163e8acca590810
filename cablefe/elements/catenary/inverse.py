"""Inverse of the catenary's chord map: the end forces (H, V) of elastic
catenaries spanning given chords, for all elements at once.

Damped Newton on Irvine's equations (see :mod:`.profile`) from the better of
two closed-form starts (a shallow elastic cable, the exact inextensible
catenary) or a warm start; weightless and vertical elements are solved in
closed form.
"""
from __future__ import annotations

import logging

import numpy as np

from .checks import _check_solver, _nonnegative, _pair_and_cable
from .profile import _chord, _flexibility

# the package's logger: one name for every catenary message
logger = logging.getLogger(__package__)

#: horizontal projections below this fraction of the element size are treated
#: as exactly vertical (H = 0); the neglected horizontal force is of the same
#: relative order, far below any solver tolerance.
VERTICAL_TOLERANCE = 1e-13


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
    l, h, L0, weight, EA = _pair_and_cable(("l", l), ("h", h), unstressed_length, weight, EA)
    _nonnegative("l (horizontal projection)", l, "m")
    _check_solver(guess, l.shape[0], tol, max_iter)
    return _solve(l, h, L0, weight, EA, guess, float(tol), int(max_iter))
