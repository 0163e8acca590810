"""Corotational 3D beam element (two nodes, six DOFs per node).

Formulation
-----------
The element follows the corotational description of Battini & Pacoste (2002),
"Co-rotational beam elements with warping effects in instability problems",
Comput. Methods Appl. Mech. Engrg. 191, 1755-1789 (section 3, without the
warping DOF), which refines Crisfield (1990), "A consistent co-rotational
formulation for non-linear, three-dimensional, beam-elements", Comput. Methods
Appl. Mech. Engrg. 81, 131-150, and Crisfield (1997), *Non-linear Finite
Element Analysis of Solids and Structures*, Vol. 2, ch. 17 (references cited
from memory).  The variations were re-derived for this module; the tests check
them against central finite differences.

* The corotated frame ``Rr = [r1, r2, r3]`` (columns) rides with the element:
  ``r1`` is the current chord i -> j, ``r3 = r1 x q / |r1 x q|`` and
  ``r2 = r3 x r1``, where ``q`` is the mean of the two current nodal section
  y axes (the mean of the nodal rotations applied to the initial y axis).  It
  depends on nodal rotations only through the section axes, which makes it
  objective and cheap to differentiate.
* Local rotations are extracted with the proper logarithm of SO(3),
  ``theta_a = log(Rr^T R_a F0)``, so total nodal rotations can be any size
  (beyond 90 degrees, full turns); only the local (deformational) rotations
  must stay well below pi, which any usable mesh ensures.
* In the corotated frame a linear Euler-Bernoulli beam of length ``L0`` acts:
  axial force ``N = EA (l - Ls) / Ls`` with the stress-free length
  ``Ls = L0 (1 + axial_strain)``, torque ``GJ/L0 (theta_jx - theta_ix)`` and the
  classical 4-2 bending relations with ``EIy/L0``, ``EIz/L0``.
* Internal forces are ``f = B^T f_l`` with ``delta d_l = B delta d`` and the
  spatial spin variations ``delta w`` of the nodal rotations
  (``R_new = expm(skew(dtheta)) @ R_old``).  The consistent tangent is
  ``K = B^T K_l B + (d B^T / d d) f_l``, including the variation of the
  inverse of the left Jacobian of SO(3) and of the frame spin matrix.  With
  spin variables, ``K`` is not symmetric away from equilibrium.

Conventions
-----------
* Frames are 3x3 matrices whose COLUMNS are the local axes x, y, z in global
  components: ``v_global = frame @ v_local``.
* Nodal DOFs are ``[ux, uy, uz, rx, ry, rz]`` of node i, then node j (see
  :mod:`cablefe.elements`).  ``force`` is the force (and moment) each node
  exerts on the element, in global axes.
* ``local_end_forces`` are the stress resultants ``[N, Vy, Vz, T, My, Mz]`` at
  end i, then at end j, in the current corotated axes ``Rr``: the force and
  moment vectors with which the material beyond a section (towards j) acts on
  the material before it (towards i).  So N is tension positive at both ends,
  ``T`` is the torque vector component along x, and ``My``, ``Mz`` are the
  components of the bending moment vector, which for small strains equal
  ``EIy * dtheta_y/dx`` and ``EIz * dtheta_z/dx`` (moment vector = stiffness x
  curvature vector).  A cantilever along x clamped at i with a tip load P in +y
  has ``Vy = P`` and ``Mz(i) = P L``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import Family, register

__all__ = [
    "BeamResponse",
    "VERTICAL_COSINE",
    "skew",
    "expm_so3",
    "logm_so3",
    "local_frames",
    "response",
    "equivalent_nodal_loads",
]

#: A member counts as vertical for the default ``up`` vector when
#: ``|e_x . Z| > VERTICAL_COSINE`` (within about 0.81 degrees of plumb); it then
#: takes global X instead of global Z as its ``up`` direction.
VERTICAL_COSINE = 0.9999

# |e_x x up_unit| below this means up is parallel to the member.
_PARALLEL_SINE = 1e-6

# Below this angle (rad) the J^-1 coefficient and its derivative use Taylor
# series: the closed forms lose digits to cancellation (about eps/t^2 and
# eps/t^4); at 0.7 rad both routes agree to ~1e-15 absolute.
_SERIES_ANGLE = 0.7

# Orthonormality tolerance for rotation matrices passed in; accumulated
# round-off over thousands of multiplicative updates stays far below it.
_ORTHO_TOL = 1e-6

_I3 = np.eye(3)


@dataclass(frozen=True)
class BeamResponse:
    """State of a batch of n corotational beam elements.

    Attributes
    ----------
    force : ndarray, shape (n, 12)
        Global internal force vector [f_i (N), m_i (N m), f_j (N), m_j (N m)]:
        what each node exerts on the element.
    tangent : ndarray, shape (n, 12, 12) or None
        ``d force / d [u_i, theta_i, u_j, theta_j]`` with spatial rotation
        increments (N/m, N, N m/rad).  Not symmetric away from equilibrium.
        None when ``want_tangent`` was False.
    local_end_forces : ndarray, shape (n, 12)
        ``[N, Vy, Vz, T, My, Mz]`` at end i then end j (N, N m) in the current
        corotated axes, signed as stress resultants (see module docstring).
    frame : ndarray, shape (n, 3, 3)
        Current corotated frame, columns = local x, y, z in global axes.
    length : ndarray, shape (n,)
        Current chord length (m).
    axial_force : ndarray, shape (n,)
        Axial force of the local beam, tension positive (N).
    """

    force: np.ndarray
    tangent: np.ndarray | None
    local_end_forces: np.ndarray
    frame: np.ndarray
    length: np.ndarray
    axial_force: np.ndarray


# --------------------------------------------------------------------------
# SO(3) helpers
# --------------------------------------------------------------------------


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


# --------------------------------------------------------------------------
# input checking
# --------------------------------------------------------------------------


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


# --------------------------------------------------------------------------
# frames
# --------------------------------------------------------------------------


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
    xi = _vectors("xi", xi)
    n = xi.shape[0]
    xj = _vectors("xj", xj, n)
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


# --------------------------------------------------------------------------
# element response
# --------------------------------------------------------------------------


def response(
    xi,
    xj,
    Ri,
    Rj,
    frame0,
    L0,
    E,
    G,
    A,
    Iy,
    Iz,
    J,
    axial_strain=None,
    want_tangent=True,
):
    """Internal forces and consistent tangent of corotational beam elements.

    Parameters
    ----------
    xi, xj : array_like, shape (n, 3)
        Current end positions (m).
    Ri, Rj : array_like, shape (n, 3, 3)
        Current total nodal rotations (identity in the initial state).
    frame0 : array_like, shape (n, 3, 3)
        Initial local frames from :func:`local_frames` (columns = axes).
    L0 : array_like, shape (n,)
        Initial length (m); the local beam's reference length.
    E, G : array_like, shape (n,) or scalar
        Young's and shear moduli (Pa).
    A : array_like, shape (n,) or scalar
        Cross-section area (m^2).
    Iy, Iz : array_like, shape (n,) or scalar
        Second moments of area about local y and z (m^4).
    J : array_like, shape (n,) or scalar
        Torsion constant (m^4).
    axial_strain : array_like, shape (n,), optional
        Stress-free strain (e.g. alpha * dT); the stress-free length is
        ``L0 * (1 + axial_strain)``.  Default 0.
    want_tangent : bool
        Compute the tangent (n, 12, 12) as well.

    Returns
    -------
    BeamResponse

    Raises
    ------
    ValueError
        Bad shapes or values; a zero-length chord; a local deformation so
        large that the corotated frame is undefined (mean section y axis
        along the chord: refine the mesh or reduce the load step).
    """
    xi = _vectors("xi", xi)
    n = xi.shape[0]
    xj = _vectors("xj", xj, n)
    Ri = _matrices("Ri", Ri, n)
    Rj = _matrices("Rj", Rj, n)
    F0 = _matrices("frame0", frame0, n)
    L0 = _scalars("L0", L0, n)
    E = _scalars("E", E, n)
    G = _scalars("G", G, n)
    A = _scalars("A", A, n)
    Iy = _scalars("Iy", Iy, n)
    Iz = _scalars("Iz", Iz, n)
    J = _scalars("J", J, n)
    eps0 = np.zeros(n) if axial_strain is None else _scalars("axial_strain", axial_strain, n, positive=False)
    Ls = L0 * (1.0 + eps0)
    bad = np.flatnonzero(Ls <= 0.0)
    if bad.size:
        raise ValueError(
            f"element {bad[0]}: axial_strain {eps0[bad[0]]!r} gives a non-positive stress-free length"
        )

    # --- corotated frame ------------------------------------------------
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

    # --- local deformations and local forces ---------------------------------
    th1 = logm_so3(np.einsum("nki,nkj->nij", Rr, T1))
    th2 = logm_so3(np.einsum("nki,nkj->nij", Rr, T2))
    N = E * A / Ls * (l - Ls)
    ky = E * Iy / L0
    kz = E * Iz / L0
    torque = G * J / L0 * (th2[:, 0] - th1[:, 0])
    # local end moments conjugate to theta_1, theta_2 (classical 4-2 relations)
    m1 = np.stack([-torque, ky * (4 * th1[:, 1] + 2 * th2[:, 1]),
                   kz * (4 * th1[:, 2] + 2 * th2[:, 2])], axis=1)
    m2 = np.stack([torque, ky * (2 * th1[:, 1] + 4 * th2[:, 1]),
                   kz * (2 * th1[:, 2] + 4 * th2[:, 2])], axis=1)
    Ji1 = _jinv(th1)
    Ji2 = _jinv(th2)
    mt1 = np.einsum("nki,nk->ni", Ji1, m1)  # J^-T m: moments conjugate to local spins
    mt2 = np.einsum("nki,nk->ni", Ji2, m2)
    Mt = mt1 + mt2

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

    force = np.zeros((n, 12))
    force[:, 0:3] = -N[:, None] * r1
    force[:, 6:9] = N[:, None] * r1
    force[:, 3:6] = np.einsum("nij,nj->ni", Rr, mt1)
    force[:, 9:12] = np.einsum("nij,nj->ni", Rr, mt2)
    force -= np.einsum("nki,nk->ni", Gt, Mt)

    # Stress resultants: minus the nodal action at i, plus at j, in Rr axes.
    loc = np.einsum("nki,nbk->nbi", Rr, force.reshape(n, 4, 3)).reshape(n, 12)
    local_end_forces = np.concatenate([-loc[:, 0:6], loc[:, 6:12]], axis=1)

    tangent = None
    if want_tangent:
        tangent = _tangent(
            n, l, Ls, L0, E, G, A, Iy, Iz, J, N, r1, r2, r3, Rr, p1, p2, q, q1, q2, alpha, beta,
            c1, c2, th1, th2, m1, m2, mt1, mt2, Mt, Ji1, Ji2, Gt,
        )
    return BeamResponse(
        force=force,
        tangent=tangent,
        local_end_forces=local_end_forces,
        frame=Rr,
        length=l,
        axial_force=N,
    )


def _tangent(n, l, Ls, L0, E, G, A, Iy, Iz, J, N, r1, r2, r3, Rr, p1, p2, q, q1, q2, alpha, beta,
             c1, c2, th1, th2, m1, m2, mt1, mt2, Mt, Ji1, Ji2, Gt):
    """Consistent tangent ``d force / d d`` (see :func:`response`).

    Every varying quantity X gets a Jacobian ``DX`` of shape (n, dim(X), 12)
    with respect to ``d = [dx_i, dw_i, dx_j, dw_j]`` (spatial spins).
    """
    ix1, iw1, ix2, iw2 = slice(0, 3), slice(3, 6), slice(6, 9), slice(9, 12)
    outer = lambda a, b: np.einsum("ni,nj->nij", a, b)  # noqa: E731

    Dl = np.zeros((n, 12))
    Dl[:, ix1] = -r1
    Dl[:, ix2] = r1
    P = (_I3 - outer(r1, r1)) / l[:, None, None]
    Dr1 = np.zeros((n, 3, 12))
    Dr1[:, :, ix1] = -P
    Dr1[:, :, ix2] = P
    Wr = Rr @ Gt  # global spin of the corotated frame
    Dr2 = -skew(r2) @ Wr
    Dr3 = -skew(r3) @ Wr
    Dp1 = np.zeros((n, 3, 12))
    Dp1[:, :, iw1] = -skew(p1)
    Dp2 = np.zeros((n, 3, 12))
    Dp2[:, :, iw2] = -skew(p2)
    Dq = 0.5 * (Dp1 + Dp2)

    # Local rotation variations: delta theta_a = J^-1 (Rr^T dw_a - omega).
    RtS1 = np.zeros((n, 3, 12))
    RtS1[:, :, iw1] = np.swapaxes(Rr, 1, 2)
    RtS2 = np.zeros((n, 3, 12))
    RtS2[:, :, iw2] = np.swapaxes(Rr, 1, 2)
    Dth1 = Ji1 @ (RtS1 - Gt)
    Dth2 = Ji2 @ (RtS2 - Gt)

    # Material part B^T K_l B with B = [Dl; Dth1; Dth2].
    B = np.concatenate([Dl[:, None, :], Dth1, Dth2], axis=1)
    Kl = np.zeros((n, 7, 7))
    Kl[:, 0, 0] = E * A / Ls
    gj = G * J / L0
    Kl[:, 1, 1] = Kl[:, 4, 4] = gj
    Kl[:, 1, 4] = Kl[:, 4, 1] = -gj
    for (a, b), k in (((2, 5), E * Iy / L0), ((3, 6), E * Iz / L0)):
        Kl[:, a, a] = Kl[:, b, b] = 4 * k
        Kl[:, a, b] = Kl[:, b, a] = 2 * k
    K = np.swapaxes(B, 1, 2) @ (Kl @ B)

    # Geometric part: variations of B^T at fixed local forces.
    K[:, ix1, :] -= N[:, None, None] * Dr1
    K[:, ix2, :] += N[:, None, None] * Dr1
    H1 = _d_jinvT_m(th1, m1)
    H2 = _d_jinvT_m(th2, m2)
    for iw, mt, H, Dth in ((iw1, mt1, H1, Dth1), (iw2, mt2, H2, Dth2)):
        K[:, iw, :] += -skew(np.einsum("nij,nj->ni", Rr, mt)) @ Wr + Rr @ H @ Dth
    DM = H1 @ Dth1 + H2 @ Dth2
    K -= np.swapaxes(Gt, 1, 2) @ DM

    # Variation of Gt^T at fixed Mt, row by row of Gt.
    DGM = np.zeros((n, 12, 12))
    Dl_l2 = Dl / (l**2)[:, None]
    X = Mt[:, 1, None, None] * (Dr3 / l[:, None, None] - outer(r3, Dl_l2))
    DGM[:, ix1] += X
    DGM[:, ix2] -= X
    Y = Mt[:, 2, None, None] * (Dr2 / l[:, None, None] - outer(r2, Dl_l2))
    DGM[:, ix1] -= Y
    DGM[:, ix2] += Y
    Dq1 = np.einsum("ni,nij->nj", q, Dr1) + np.einsum("ni,nij->nj", r1, Dq)
    Dq2 = np.einsum("ni,nij->nj", q, Dr2) + np.einsum("ni,nij->nj", r2, Dq)
    Dalpha = (
        Dq1 / (q2 * l)[:, None]
        - (q1 / (q2**2 * l))[:, None] * Dq2
        - (q1 / (q2 * l**2))[:, None] * Dl
    )
    Z = Mt[:, 0, None, None] * (outer(r3, Dalpha) + alpha[:, None, None] * Dr3)
    DGM[:, ix1] += Z
    DGM[:, ix2] -= Z
    Dbeta = -Dq2 / (2.0 * q2**2)[:, None]
    skew_r3 = skew(r3)
    for iw, p, c, Dp in ((iw1, p1, c1, Dp1), (iw2, p2, c2, Dp2)):
        DGM[:, iw] += Mt[:, 0, None, None] * (
            outer(c, Dbeta) + beta[:, None, None] * (-skew_r3 @ Dp + skew(p) @ Dr3)
        )
    K -= DGM
    return K


# --------------------------------------------------------------------------
# member loads
# --------------------------------------------------------------------------

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
    xi0 = _vectors("xi0", xi0)
    n = xi0.shape[0]
    xj0 = _vectors("xj0", xj0, n)
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


# --------------------------------------------------------------------------
# mass
# --------------------------------------------------------------------------


def local_mass_matrix(L, mass_per_length, torsional_inertia, rotary_y, rotary_z):
    """Consistent mass matrices of beam elements in their local axes.

    Axial and torsional motion interpolated linearly, bending by the Hermite
    cubics of the stiffness (the classical consistent matrix, e.g.
    Przemieniecki 1968, Theory of Matrix Structural Analysis, §11; from
    memory), plus the rotary inertia of the section in bending (Rayleigh
    beam terms ``rho I / (30 L) [36, 3L, -36, 3L; ...]``).  Local DOFs
    ``[u, v, w, theta_x, theta_y, theta_z]`` at i then j, with
    ``theta_z = dv/dx`` and ``theta_y = -dw/dx`` as in this module.

    Parameters
    ----------
    L : (n,) element length, m
    mass_per_length : (n,) translational mass per length, kg/m
    torsional_inertia : (n,) mass moment of inertia per length about the
        axis (rho Ip), kg m
    rotary_y, rotary_z : (n,) rotary inertia per length of bending about
        local y (w-theta_y plane, rho Iy) and local z (v-theta_z, rho Iz), kg m

    Returns
    -------
    (n, 12, 12) kg, kg m, kg m^2 by DOF pair
    """
    L = np.asarray(L, dtype=float)
    n = L.shape[0]
    m = np.broadcast_to(np.asarray(mass_per_length, dtype=float), (n,)) * L
    jx = np.broadcast_to(np.asarray(torsional_inertia, dtype=float), (n,)) * L
    ry = np.broadcast_to(np.asarray(rotary_y, dtype=float), (n,)) / L
    rz = np.broadcast_to(np.asarray(rotary_z, dtype=float), (n,)) / L
    M = np.zeros((n, 12, 12))
    two = np.array([[2.0, 1.0], [1.0, 2.0]]) / 6.0
    for dof, scale in ((0, m), (3, jx)):          # axial, torsion
        idx = np.array([dof, dof + 6])
        M[:, idx[:, None], idx[None, :]] += scale[:, None, None] * two
    one = np.ones(n)
    l1, l2 = L, L * L
    # Hermite translational mass and Rayleigh rotary inertia, v-theta_z plane
    trans = np.stack([np.stack([156 * one, 22 * l1, 54 * one, -13 * l1], -1),
                      np.stack([22 * l1, 4 * l2, 13 * l1, -3 * l2], -1),
                      np.stack([54 * one, 13 * l1, 156 * one, -22 * l1], -1),
                      np.stack([-13 * l1, -3 * l2, -22 * l1, 4 * l2], -1)], -2) / 420.0
    rot = np.stack([np.stack([36 * one, 3 * l1, -36 * one, 3 * l1], -1),
                    np.stack([3 * l1, 4 * l2, -3 * l1, -l2], -1),
                    np.stack([-36 * one, -3 * l1, 36 * one, -3 * l1], -1),
                    np.stack([3 * l1, -l2, -3 * l1, 4 * l2], -1)], -2) / 30.0
    vz = np.array([1, 5, 7, 11])
    M[:, vz[:, None], vz[None, :]] += m[:, None, None] * trans + rz[:, None, None] * rot
    # w-theta_y plane: theta_y = -dw/dx flips the sign of the w-theta coupling
    flip = np.array([1.0, -1.0, 1.0, -1.0])
    sign = flip[:, None] * flip[None, :]
    wy = np.array([2, 4, 8, 10])
    M[:, wy[:, None], wy[None, :]] += sign * (m[:, None, None] * trans + ry[:, None, None] * rot)
    return M


def mass_matrix(frame, L, mass_per_length, torsional_inertia, rotary_y, rotary_z):
    """Consistent mass matrices of beam elements in global axes.

    Parameters
    ----------
    frame : (n, 3, 3) local frames (columns = local x, y, z in global axes);
        for modes about a loaded state, the current corotated frame
    L, mass_per_length, torsional_inertia, rotary_y, rotary_z :
        see :func:`local_mass_matrix`

    Returns
    -------
    (n, 12, 12) in global axes, DOFs ``[u_i, theta_i, u_j, theta_j]``
    """
    Ml = local_mass_matrix(L, mass_per_length, torsional_inertia, rotary_y, rotary_z)
    F = np.asarray(frame, dtype=float)
    n = F.shape[0]
    # d_local = T d_global with T = blockdiag(F^T x 4)
    T = np.zeros((n, 12, 12))
    Ft = np.swapaxes(F, 1, 2)
    for b in range(4):
        T[:, 3 * b:3 * b + 3, 3 * b:3 * b + 3] = Ft
    return np.swapaxes(T, 1, 2) @ Ml @ T


# -- registration ------------------------------------------------------------------

def _evaluate(table, state, loads, lam, want_tangent, guess):
    props = table.props
    i, j = table.nodes[:, 0], table.nodes[:, 1]
    # stress-free length from the reference geometry, not from the
    # (possibly shaped, already bent) coordinates
    return response(state.positions[i], state.positions[j], state.rotations[i], state.rotations[j],
                    props["frame0"], props["length"], props["E"], props["G"], props["A"],
                    props["Iy"], props["Iz"], props["J"], axial_strain=lam * loads.strain[table.family],
                    want_tangent=want_tangent)


def _mass(table, own, added, lumped, frames):
    """Always consistent, with the section's rotary and torsional inertia:
    density times area is the own mass per length, so rho I = (w/g) I / A
    (polar Iy + Iz)."""
    props = table.props
    rho = own / props["A"]
    return mass_matrix(props["frame0"] if frames is None else frames, props["length"], own + added,
                       rho * (props["Iy"] + props["Iz"]), rho * props["Iy"], rho * props["Iz"])


register(Family("beam", _evaluate, _mass))
