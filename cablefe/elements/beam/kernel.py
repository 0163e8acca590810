"""Batched corotational beam kernel: internal forces, stress resultants and the
consistent tangent of n beam elements at their current configuration.

The corotated frame comes from :mod:`.frames`, the local linear beam from
:mod:`.local`; this module turns local forces into global ones,
``f = B^T f_l``, and differentiates that, ``K = B^T K_l B + (d B^T / d d) f_l``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .checks import _end_points, _matrices, _scalars
from .frames import corotated_frame
from .local import local_forces, local_stiffness
from .rotations import _I3, _d_jinvT_m, _jinv, logm_so3, skew


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
    xi, xj, n = _end_points(xi, xj)
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
    fr = corotated_frame(xi, xj, Ri, Rj, F0, L0)
    l, r1, Rr, Gt = fr.l, fr.r1, fr.Rr, fr.Gt

    # --- local deformations and local forces ---------------------------------
    th1 = logm_so3(np.einsum("nki,nkj->nij", Rr, fr.T1))
    th2 = logm_so3(np.einsum("nki,nkj->nij", Rr, fr.T2))
    N, m1, m2 = local_forces(l, Ls, L0, E, G, A, Iy, Iz, J, th1, th2)
    Ji1 = _jinv(th1)
    Ji2 = _jinv(th2)
    mt1 = np.einsum("nki,nk->ni", Ji1, m1)  # J^-T m: moments conjugate to local spins
    mt2 = np.einsum("nki,nk->ni", Ji2, m2)
    Mt = mt1 + mt2

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
        Kl = local_stiffness(Ls, L0, E, G, A, Iy, Iz, J)
        tangent = _tangent(fr, Kl, N, th1, th2, m1, m2, mt1, mt2, Mt, Ji1, Ji2)
    return BeamResponse(
        force=force,
        tangent=tangent,
        local_end_forces=local_end_forces,
        frame=Rr,
        length=l,
        axial_force=N,
    )


def _tangent(fr, Kl, N, th1, th2, m1, m2, mt1, mt2, Mt, Ji1, Ji2):
    """Consistent tangent ``d force / d d`` (see :func:`response`).

    Every varying quantity X gets a Jacobian ``DX`` of shape (n, dim(X), 12)
    with respect to ``d = [dx_i, dw_i, dx_j, dw_j]`` (spatial spins).
    ``fr`` is the :class:`CorotatedFrame`, ``Kl`` the local stiffness
    (:func:`local_stiffness`), the rest the local state of :func:`response`.
    """
    l, r1, r2, r3, Rr, Gt = fr.l, fr.r1, fr.r2, fr.r3, fr.Rr, fr.Gt
    p1, p2, q, q1, q2 = fr.p1, fr.p2, fr.q, fr.q1, fr.q2
    alpha, beta, c1, c2 = fr.alpha, fr.beta, fr.c1, fr.c2
    n = l.shape[0]
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

