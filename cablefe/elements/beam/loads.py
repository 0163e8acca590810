"""Member loads on beams: consistent nodal loads of a uniform load on part of
each element (linear shape functions axially, Hermite cubics across).
"""
from __future__ import annotations

import numpy as np

from .checks import _end_points, _matrices, _scalars, _vectors

_GAUSS2 = np.array([-1.0, 1.0]) / np.sqrt(3.0)  # exact for cubics


def equivalent_nodal_loads(xi0, xj0, frame0, L0, p_global, a, b):
    """Consistent nodal loads of a uniform load on part of each element.

    Axial components use linear shape functions, transverse components the
    Hermite cubics; the integrands are cubic, so two-point Gauss quadrature
    over [a, b] is exact.  The load acts through the shear centre (no
    torque).  The result is an external load: add it to the applied load
    vector.

    Parameters
    ----------
    xi0, xj0 : array_like, shape (n, 3)
        Initial end coordinates (m); used to check that ``frame0`` belongs to
        the element.
    frame0 : array_like, shape (n, 3, 3)
        Initial local frames (columns = axes), from :func:`local_frames`.
    L0 : array_like, shape (n,)
        Element length (m) along which ``a`` and ``b`` are measured.
    p_global : array_like, shape (n, 3)
        Load per unit length in fixed global axes (N/m).
    a, b : array_like, shape (n,) or scalar
        Start and end of the loaded stretch, measured from node i (m),
        ``0 <= a < b <= L0``.

    Returns
    -------
    ndarray, shape (n, 12)
        Nodal forces (N) and moments (N m) in global axes,
        ``[f_i, m_i, f_j, m_j]``.
    """
    xi0, xj0, n = _end_points(xi0, xj0, ("xi0", "xj0"))
    F0 = _matrices("frame0", frame0, n)
    L0 = _scalars("L0", L0, n)
    p = _vectors("p_global", p_global, n)
    a = _scalars("a", a, n, positive=False)
    b = _scalars("b", b, n, positive=False)
    slack = 1e-12 * L0  # round-off in patch ends computed from path lengths
    bad = np.flatnonzero((a < -slack) | (b <= a) | (b > L0 + slack))
    if bad.size:
        k = bad[0]
        raise ValueError(
            f"element {k}: load patch [{a[k]!r}, {b[k]!r}] m must satisfy 0 <= a < b <= L0 = {L0[k]!r} m"
        )
    chord = xj0 - xi0
    ex = chord / np.linalg.norm(chord, axis=1)[:, None]
    bad = np.flatnonzero(np.einsum("ni,ni->n", ex, F0[:, :, 0]) < 1.0 - 1e-9)
    if bad.size:
        raise ValueError(f"element {bad[0]}: frame0 x axis does not point from xi0 to xj0")
    a = np.clip(a, 0.0, L0)
    b = np.clip(b, 0.0, L0)

    pl = np.einsum("nki,nk->ni", F0, p)  # local load components
    half = 0.5 * (b - a)
    x = 0.5 * (a + b)[:, None] + half[:, None] * _GAUSS2  # (n, 2)
    w = half[:, None]  # both Gauss weights are 1 on [-1, 1]
    xi = x / L0[:, None]
    L = L0[:, None]
    N1 = 1.0 - xi
    N2 = xi
    H1 = 1.0 - 3 * xi**2 + 2 * xi**3
    H2 = L * (xi - 2 * xi**2 + xi**3)
    H3 = 3 * xi**2 - 2 * xi**3
    H4 = L * (xi**3 - xi**2)
    integ = lambda f: np.sum(w * f, axis=1)  # noqa: E731
    px, py, pz = pl[:, 0], pl[:, 1], pl[:, 2]
    local = np.zeros((n, 4, 3))
    local[:, 0] = np.stack([px * integ(N1), py * integ(H1), pz * integ(H1)], axis=1)
    # theta_z = dv/dx and theta_y = -dw/dx, hence the minus sign for p_z.
    local[:, 1] = np.stack([np.zeros(n), -pz * integ(H2), py * integ(H2)], axis=1)
    local[:, 2] = np.stack([px * integ(N2), py * integ(H3), pz * integ(H3)], axis=1)
    local[:, 3] = np.stack([np.zeros(n), -pz * integ(H4), py * integ(H4)], axis=1)
    return np.einsum("nij,nbj->nbi", F0, local).reshape(n, 12)

