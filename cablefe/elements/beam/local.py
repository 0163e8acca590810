"""The linear beam that acts in each corotated frame: axial force, torque and
end moments from the local deformations, and the matching 7 x 7 stiffness.

Local deformations are the chord length ``l`` and the local end rotations
``theta_1``, ``theta_2`` (rad, in the corotated axes).  A linear
Euler-Bernoulli beam of length ``L0`` acts on them: ``N = EA (l - Ls)/Ls``
with the stress-free length ``Ls``, torque ``GJ/L0 (theta_2x - theta_1x)``
and the classical 4-2 bending relations with ``EIy/L0`` and ``EIz/L0``.
"""
from __future__ import annotations

import numpy as np


def local_forces(l, Ls, L0, E, G, A, Iy, Iz, J, th1, th2):
    """Axial force and local end moments of the corotated linear beams.

    Parameters
    ----------
    l, Ls, L0 : (n,) current chord, stress-free and initial length, m
    E, G : (n,) Young's and shear moduli, Pa
    A, Iy, Iz, J : (n,) area (m^2), second moments and torsion constant (m^4)
    th1, th2 : (n, 3) local end rotations, rad

    Returns
    -------
    N : (n,) axial force, tension positive, N
    m1, m2 : (n, 3) local end moments conjugate to ``th1``, ``th2``, N m
    """
    N = E * A / Ls * (l - Ls)
    ky = E * Iy / L0
    kz = E * Iz / L0
    torque = G * J / L0 * (th2[:, 0] - th1[:, 0])
    # local end moments conjugate to theta_1, theta_2 (classical 4-2 relations)
    m1 = np.stack([-torque, ky * (4 * th1[:, 1] + 2 * th2[:, 1]),
                   kz * (4 * th1[:, 2] + 2 * th2[:, 2])], axis=1)
    m2 = np.stack([torque, ky * (2 * th1[:, 1] + 4 * th2[:, 1]),
                   kz * (2 * th1[:, 2] + 4 * th2[:, 2])], axis=1)
    return N, m1, m2


def local_stiffness(Ls, L0, E, G, A, Iy, Iz, J):
    """Stiffness ``d (N, m1, m2) / d (l, th1, th2)`` of the linear beams, (n, 7, 7).

    Parameters as in :func:`local_forces`; N/m, N, N m/rad by DOF pair.
    """
    n = Ls.shape[0]
    Kl = np.zeros((n, 7, 7))
    Kl[:, 0, 0] = E * A / Ls
    gj = G * J / L0
    Kl[:, 1, 1] = Kl[:, 4, 4] = gj
    Kl[:, 1, 4] = Kl[:, 4, 1] = -gj
    for (a, b), k in (((2, 5), E * Iy / L0), ((3, 6), E * Iz / L0)):
        Kl[:, a, a] = Kl[:, b, b] = 4 * k
        Kl[:, a, b] = Kl[:, b, a] = 2 * k
    return Kl
