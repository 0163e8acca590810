"""Frames of the corotational beam: the initial section frames of the
members and the corotated frame that rides with each element, with the
spin matrix that maps nodal increments to the frame's spin.

Frames are 3x3 matrices whose COLUMNS are the local axes x, y, z in global
components: ``v_global = frame @ v_local``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .checks import _end_points, _vectors

#: A member counts as vertical for the default ``up`` vector when
#: ``|e_x . Z| > VERTICAL_COSINE`` (within about 0.81 degrees of plumb); it then
#: takes global X instead of global Z as its ``up`` direction.
VERTICAL_COSINE = 0.9999

# |e_x x up_unit| below this means up is parallel to the member.
_PARALLEL_SINE = 1e-6


def local_frames(xi, xj, up=None):
    """Initial local frames of beam elements.

    Parameters
    ----------
    xi, xj : array_like, shape (n, 3)
        End coordinates (m).
    up : array_like, shape (n, 3) or (3,), optional
        Vector fixing the section orientation: local z lies in the plane of
        local x and ``up`` and points to its side.  Default: global Z, or
        global X for a vertical member (``|e_x . Z| > VERTICAL_COSINE``).

    Returns
    -------
    ndarray, shape (n, 3, 3)
        Right-handed orthonormal frames; COLUMNS are local x (i -> j), y, z in
        global components.

    Raises
    ------
    ValueError
        Zero-length element, or ``up`` parallel to the member (the message
        names the element index).
    """
    xi, xj, n = _end_points(xi, xj)
    d = xj - xi
    L = np.linalg.norm(d, axis=1)
    bad = np.flatnonzero(L <= 0.0)
    if bad.size:
        raise ValueError(f"element {bad[0]} has zero length (both ends at {xi[bad[0]].tolist()})")
    ex = d / L[:, None]
    if up is None:
        vertical = np.abs(ex[:, 2]) > VERTICAL_COSINE
        u = np.where(vertical[:, None], np.array([1.0, 0.0, 0.0]), np.array([0.0, 0.0, 1.0]))
    else:
        u = np.asarray(up, dtype=float)
        if u.shape == (3,):
            u = np.broadcast_to(u, (n, 3))
        u = _vectors("up", u, n)
        nu = np.linalg.norm(u, axis=1)
        bad = np.flatnonzero(nu <= 0.0)
        if bad.size:
            raise ValueError(f"up vector of element {bad[0]} is zero")
        u = u / nu[:, None]
    sine = np.linalg.norm(np.cross(ex, u), axis=1)
    bad = np.flatnonzero(sine < _PARALLEL_SINE)
    if bad.size:
        k = bad[0]
        raise ValueError(
            f"element {k}: up vector {u[k].tolist()} is parallel to the member axis {ex[k].tolist()}; "
            "choose an up vector across the member"
        )
    ez = u - np.einsum("ni,ni->n", u, ex)[:, None] * ex
    ez /= np.linalg.norm(ez, axis=1)[:, None]
    ey = np.cross(ez, ex)
    return np.stack([ex, ey, ez], axis=-1)



@dataclass(frozen=True)
class CorotatedFrame:
    """Kinematics of the corotated frames of n elements (see :func:`corotated_frame`).

    Attributes
    ----------
    l : (n,) current chord length, m
    r1, r2, r3 : (n, 3) corotated axes in global components
    Rr : (n, 3, 3) the frame ``[r1, r2, r3]`` (columns)
    T1, T2 : (n, 3, 3) current section triads at nodes i and j
    p1, p2 : (n, 3) current section y axes at nodes i and j
    q : (n, 3) their mean; ``q1 = r1 . q``, ``q2 = r2 . q > 0`` (n,)
    alpha, beta : (n,) ``q1 / (q2 l)`` and ``1 / (2 q2)``, 1/m and 1
    c1, c2 : (n, 3) ``p1 x r3`` and ``p2 x r3``
    Gt : (n, 3, 12) spin of the frame in its own axes, ``omega = Gt @ delta d``
    """

    l: np.ndarray
    r1: np.ndarray
    r2: np.ndarray
    r3: np.ndarray
    Rr: np.ndarray
    T1: np.ndarray
    T2: np.ndarray
    p1: np.ndarray
    p2: np.ndarray
    q: np.ndarray
    q1: np.ndarray
    q2: np.ndarray
    alpha: np.ndarray
    beta: np.ndarray
    c1: np.ndarray
    c2: np.ndarray
    Gt: np.ndarray


def corotated_frame(xi, xj, Ri, Rj, F0, L0):
    """The corotated frames of beam elements at their current configuration.

    ``r1`` is the current chord i -> j, ``r3 = r1 x q / |r1 x q|`` and
    ``r2 = r3 x r1``, with ``q`` the mean of the current nodal section y
    axes (the nodal rotations applied to the initial y axis).

    Parameters
    ----------
    xi, xj : (n, 3) current end positions, m (validated)
    Ri, Rj : (n, 3, 3) current total nodal rotations (validated)
    F0 : (n, 3, 3) initial local frames (validated)
    L0 : (n,) initial length, m

    Returns
    -------
    CorotatedFrame

    Raises
    ------
    ValueError
        A chord collapsed to zero length, or a mean section y axis along the
        chord (local deformation too large for the frame).
    """
    n = xi.shape[0]
    chord = xj - xi
    l = np.linalg.norm(chord, axis=1)
    bad = np.flatnonzero(l <= 1e-12 * L0)
    if bad.size:
        raise ValueError(f"element {bad[0]}: current chord length {l[bad[0]]!r} m has collapsed to zero")
    r1 = chord / l[:, None]
    T1 = Ri @ F0  # current nodal section triads
    T2 = Rj @ F0
    p1 = T1[:, :, 1]
    p2 = T2[:, :, 1]
    q = 0.5 * (p1 + p2)
    s = np.cross(r1, q)
    q2 = np.linalg.norm(s, axis=1)  # = r2 . q > 0 by construction
    bad = np.flatnonzero(q2 < 1e-8)
    if bad.size:
        raise ValueError(
            f"element {bad[0]}: mean section y axis is along the chord, local deformation too large "
            "for the corotated frame (refine the mesh or reduce the load step)"
        )
    r3 = s / q2[:, None]
    r2 = np.cross(r3, r1)
    Rr = np.stack([r1, r2, r3], axis=-1)
    q1 = np.einsum("ni,ni->n", r1, q)

    # Spin of the corotated frame in its own axes: omega = Gt @ delta d.
    Gt = np.zeros((n, 3, 12))
    alpha = q1 / (q2 * l)
    beta = 0.5 / q2
    c1 = np.cross(p1, r3)
    c2 = np.cross(p2, r3)
    Gt[:, 0, 0:3] = alpha[:, None] * r3
    Gt[:, 0, 3:6] = beta[:, None] * c1
    Gt[:, 0, 6:9] = -alpha[:, None] * r3
    Gt[:, 0, 9:12] = beta[:, None] * c2
    Gt[:, 1, 0:3] = r3 / l[:, None]
    Gt[:, 1, 6:9] = -r3 / l[:, None]
    Gt[:, 2, 0:3] = -r2 / l[:, None]
    Gt[:, 2, 6:9] = r2 / l[:, None]
    return CorotatedFrame(l=l, r1=r1, r2=r2, r3=r3, Rr=Rr, T1=T1, T2=T2, p1=p1, p2=p2, q=q, q1=q1, q2=q2,
                          alpha=alpha, beta=beta, c1=c1, c2=c2, Gt=Gt)
