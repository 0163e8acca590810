"""Output along the catenary: the tension at points of the cable and the
deformed curve, for result files and plots (the element kernel only needs
the ends).
"""
from __future__ import annotations

import numpy as np

from .checks import _cable_arrays, _points, _vector
from .kernel import _EZ, horizontal_unit
from .profile import _chord


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
    L0, weight, EA = _cable_arrays(unstressed_length, weight, EA, n)
    H, V = _vector("H", H, n), _vector("V", V, n)
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

