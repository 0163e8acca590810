"""Batched catenary element kernel: internal forces and the 6 x 6 tangent of
elastic catenary elements at their current node positions.

The in-plane stiffness is the inverse of the analytic flexibility
(:mod:`.profile`), the end forces come from the inner solve (:mod:`.inverse`);
this module places both in 3D.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..bar import tie_stiffness, two_node_matrix
from .checks import _cable_arrays, _check_solver, _points
from .inverse import _classify, _solve
from .profile import _flexibility

_EZ = np.array([0.0, 0.0, 1.0])


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
    L0, weight, EA = _cable_arrays(unstressed_length, weight, EA, n)
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

