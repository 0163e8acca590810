"""Rotations for the corotational beam: SO(3) exponential and logarithm and
the inverse left Jacobian of SO(3) with its derivative, batched over elements.

Rotation vectors are axis times angle (rad); rotation matrices act on column
vectors.  Spatial increments compose as ``R_new = expm(skew(dtheta)) @ R_old``.
"""
from __future__ import annotations

import numpy as np

# Below this angle (rad) the J^-1 coefficient and its derivative use Taylor
# series: the closed forms lose digits to cancellation (about eps/t^2 and
# eps/t^4); at 0.7 rad both routes agree to ~1e-15 absolute.
_SERIES_ANGLE = 0.7

_I3 = np.eye(3)


def skew(v):
    """Skew-symmetric (cross-product) matrices.

    Parameters
    ----------
    v : array_like, shape (..., 3)

    Returns
    -------
    ndarray, shape (..., 3, 3)
        ``skew(v) @ w == cross(v, w)``.
    """
    v = np.asarray(v, dtype=float)
    out = np.zeros(v.shape[:-1] + (3, 3))
    out[..., 0, 1] = -v[..., 2]
    out[..., 0, 2] = v[..., 1]
    out[..., 1, 0] = v[..., 2]
    out[..., 1, 2] = -v[..., 0]
    out[..., 2, 0] = -v[..., 1]
    out[..., 2, 1] = v[..., 0]
    return out


def expm_so3(theta):
    """Rotation matrices from rotation vectors (Rodrigues' formula).

    Parameters
    ----------
    theta : array_like, shape (n, 3)
        Rotation vectors (rad): axis times angle.

    Returns
    -------
    ndarray, shape (n, 3, 3)
    """
    theta = np.asarray(theta, dtype=float)
    t = np.linalg.norm(theta, axis=-1)
    # sin t / t and (1 - cos t)/t^2 = 0.5 (sin(t/2)/(t/2))^2 via sinc: exact
    # at t = 0 and free of cancellation for small t.
    a = np.sinc(t / np.pi)
    b = 0.5 * np.sinc(t / (2.0 * np.pi)) ** 2
    K = skew(theta)
    return _I3 + a[..., None, None] * K + b[..., None, None] * (K @ K)


def logm_so3(R):
    """Rotation vectors from rotation matrices (principal logarithm).

    Robust over the whole range: near 0 the angle comes from ``atan2`` of the
    antisymmetric and trace parts; for angles above pi/2 the axis is taken from
    the symmetric part, which stays well conditioned up to and at pi.

    Parameters
    ----------
    R : array_like, shape (n, 3, 3)
        Rotation matrices.

    Returns
    -------
    ndarray, shape (n, 3)
        Rotation vectors with angle in [0, pi] (rad).  At exactly pi the sign
        of the axis is arbitrary (both vectors are valid logarithms).
    """
    R = np.asarray(R, dtype=float)
    w = 0.5 * np.stack(
        [R[..., 2, 1] - R[..., 1, 2], R[..., 0, 2] - R[..., 2, 0], R[..., 1, 0] - R[..., 0, 1]],
        axis=-1,
    )  # = sin(t) * axis
    s = np.linalg.norm(w, axis=-1)
    c = 0.5 * (np.trace(R, axis1=-2, axis2=-1) - 1.0)
    t = np.arctan2(s, c)

    # Small and moderate angles: theta = t / sin(t) * w.
    factor = np.ones_like(t)
    nz = s > 0.0
    factor[nz] = t[nz] / s[nz]
    theta = factor[..., None] * w

    # Large angles: (R + R^T)/2 - cos t I = (1 - cos t) a a^T.  Take the column
    # with the largest diagonal entry for the axis, sign from w (sin t >= 0).
    big = c < 0.0
    if np.any(big):
        Rb = R[big]
        cb = c[big]
        S = 0.5 * (Rb + np.swapaxes(Rb, -1, -2)) - cb[:, None, None] * _I3
        k = np.argmax(np.diagonal(S, axis1=-2, axis2=-1), axis=-1)
        col = np.take_along_axis(S, k[:, None, None], axis=-1)[..., 0]
        axis = col / np.linalg.norm(col, axis=-1, keepdims=True)
        sign = np.where(np.einsum("ni,ni->n", axis, w[big]) < 0.0, -1.0, 1.0)
        theta[big] = (sign * t[big])[:, None] * axis
    return theta


# c(t) = (1 - (t/2) cot(t/2)) / t^2 and d(t) = c'(t) / t as series in t^2.
_C_SERIES = np.array([1 / 12, 1 / 720, 1 / 30240, 1 / 1209600, 1 / 47900160,
                      691 / 1307674368000, 1 / 74724249600])
_D_SERIES = np.array([1 / 360, 1 / 7560, 1 / 201600, 1 / 5987520, 691 / 130767436800,
                      1 / 6227020800, 3617 / 762187345920000])


def _jinv_coefficients(t):
    """Coefficients of the inverse left Jacobian of SO(3).

    ``J^-1(theta) = I - skew(theta)/2 + c(t) skew(theta)^2`` with
    ``c(t) = (1 - (t/2) cot(t/2)) / t^2``; also ``d = c'(t) / t``.
    """
    c = np.empty_like(t)
    d = np.empty_like(t)
    small = t < _SERIES_ANGLE
    ts = t[small] ** 2
    # Taylor series in t^2 (coefficients from sympy.series); the first
    # omitted term is below 1e-17 for t < 0.7.
    c[small] = np.polynomial.polynomial.polyval(ts, _C_SERIES)
    d[small] = np.polynomial.polynomial.polyval(ts, _D_SERIES)
    tl = t[~small]
    half = 0.5 * tl
    cot = np.cos(half) / np.sin(half)
    c[~small] = (1.0 - half * cot) / tl**2
    d[~small] = -2.0 / tl**4 + cot / (2.0 * tl**3) + 1.0 / (4.0 * tl**2 * np.sin(half) ** 2)
    return c, d


def _jinv(theta):
    """Inverse left Jacobian: ``delta theta = J^-1(theta) delta v`` for a
    spatial spin ``delta v`` of ``expm(skew(theta))``.  Shape (n, 3, 3)."""
    t = np.linalg.norm(theta, axis=-1)
    c, _ = _jinv_coefficients(t)
    K = skew(theta)
    return _I3 - 0.5 * K + c[:, None, None] * (K @ K)


def _d_jinvT_m(theta, m):
    """Derivative of ``J^-T(theta) m`` with respect to ``theta`` (m fixed).

    ``J^-T m = m + theta x m / 2 + c(t) (theta (theta.m) - t^2 m)``.
    Returns shape (n, 3, 3).
    """
    t = np.linalg.norm(theta, axis=-1)
    c, d = _jinv_coefficients(t)
    tm = np.einsum("ni,ni->n", theta, m)
    v = theta * tm[:, None] - (t**2)[:, None] * m
    H = -0.5 * skew(m)
    H = H + d[:, None, None] * np.einsum("ni,nj->nij", v, theta)
    H = H + c[:, None, None] * (
        np.einsum("ni,nj->nij", theta, m) + tm[:, None, None] * _I3 - 2.0 * np.einsum("ni,nj->nij", m, theta)
    )
    return H

