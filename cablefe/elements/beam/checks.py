"""Input checks of the beam functions: point, rotation-matrix and per-element
scalar arrays, with messages that name the argument and the element.
"""
from __future__ import annotations

import numpy as np

from .rotations import _I3

# Orthonormality tolerance for rotation matrices passed in; accumulated
# round-off over thousands of multiplicative updates stays far below it.
_ORTHO_TOL = 1e-6


def _vectors(name, a, n=None):
    a = np.asarray(a, dtype=float)
    if a.ndim != 2 or a.shape[1] != 3 or (n is not None and a.shape[0] != n):
        want = f"({n}, 3)" if n is not None else "(n, 3)"
        raise ValueError(f"{name} must have shape {want}, got {a.shape}")
    _finite(name, a)
    return a


def _matrices(name, a, n):
    a = np.asarray(a, dtype=float)
    if a.shape != (n, 3, 3):
        raise ValueError(f"{name} must have shape ({n}, 3, 3), got {a.shape}")
    _finite(name, a)
    err = np.abs(np.einsum("nki,nkj->nij", a, a) - _I3).max(axis=(1, 2))
    det = np.linalg.det(a)
    bad = np.flatnonzero((err > _ORTHO_TOL) | (det < 0.0))
    if bad.size:
        k = bad[0]
        raise ValueError(
            f"{name}[{k}] is not a rotation matrix (|R^T R - I| = {err[k]:.3g}, det = {det[k]:.6g})"
        )
    return a


def _scalars(name, a, n, positive=True):
    a = np.asarray(a, dtype=float)
    if a.ndim == 0:
        a = np.full(n, float(a))
    if a.shape != (n,):
        raise ValueError(f"{name} must be a scalar or have shape ({n},), got {a.shape}")
    _finite(name, a)
    if positive:
        bad = np.flatnonzero(a <= 0.0)
        if bad.size:
            raise ValueError(f"{name} must be positive; element {bad[0]} has {name} = {a[bad[0]]!r}")
    return a


def _finite(name, a):
    if not np.all(np.isfinite(a)):
        k = np.argwhere(~np.isfinite(a))[0][0]
        raise ValueError(f"{name} has a non-finite value at element {k}")



def _end_points(xi, xj, names=("xi", "xj")):
    """Validated (n, 3) end positions of n elements, and n (taken from ``xi``)."""
    xi = _vectors(names[0], xi)
    n = xi.shape[0]
    return xi, _vectors(names[1], xj, n), n
