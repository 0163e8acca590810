"""Mass of beam elements: the consistent mass matrix with the section's rotary
and torsional inertia, in local and in global axes.
"""
from __future__ import annotations

import numpy as np


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

