"""Straight two-node axial element (bar, hanger, stay, tie).

Geometrically exact: the axial force follows the engineering strain of the
unstressed length, ``N = EA (L - L0) / L0``, with L the current chord.  A
``tension_only`` element whose chord is shorter than ``L0`` is slack and
carries nothing (zero force and zero stiffness) -- unless given a
``slack_stiffness`` ratio r > 0 (form-finding uses it while searching, never
for a final equilibrium): a slack element then carries the small force
``r EA (L - L0) / L0`` with stiffness ``r EA / L0``, so that a slack member
does not make the structure a mechanism.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

NODE_DOFS = 3


@dataclass(frozen=True)
class BarResponse:
    """Response of a batch of bars (SI units).

    Attributes
    ----------
    force : (n, 6) internal nodal forces, N
    tangent : (n, 6, 6) d force / d [x_i, x_j], N/m, or None
    tension : (n,) axial force, N (tension positive)
    length : (n,) current chord length, m
    slack : (n,) bool, tension-only bars that went slack
    """

    force: np.ndarray
    tangent: np.ndarray | None
    tension: np.ndarray
    length: np.ndarray
    slack: np.ndarray

    @property
    def end_tension(self) -> np.ndarray:
        return np.repeat(self.tension[:, None], 2, axis=1)


def response(xi, xj, unstressed_length, EA, tension_only=None, want_tangent=True,
             slack_stiffness=None) -> BarResponse:
    """Internal forces and tangent stiffness of straight bars.

    Parameters
    ----------
    xi, xj : (n, 3) current end positions, m
    unstressed_length : (n,) stress-free length L0 (thermal strain included), m
    EA : (n,) axial stiffness, N
    tension_only : (n,) bool, optional
    want_tangent : bool
    slack_stiffness : float or (n,) array, optional
        Ratio of the stiffness kept by a slack tension-only bar (default 0:
        none).  A regularisation for searching, not a physical property.

    Returns
    -------
    BarResponse
    """
    xi = np.asarray(xi, dtype=float)
    xj = np.asarray(xj, dtype=float)
    L0 = np.asarray(unstressed_length, dtype=float)
    EA = np.asarray(EA, dtype=float)
    d = xj - xi
    L = np.sqrt(np.einsum("ni,ni->n", d, d))
    # a collapsed chord has no direction; keep it finite, the solver sees the
    # missing stiffness as a mechanism rather than as NaN
    L_safe = np.where(L > 0.0, L, 1.0)
    e = d / L_safe[:, None]
    N = EA * (L - L0) / L0
    slack = np.zeros(len(L), dtype=bool) if tension_only is None else (np.asarray(tension_only) & (N < 0.0))
    keep = 0.0 if slack_stiffness is None else np.broadcast_to(np.asarray(slack_stiffness, dtype=float), N.shape)
    N = np.where(slack, keep * N, N)
    f = np.concatenate([-N[:, None] * e, N[:, None] * e], axis=1)
    K = None
    if want_tangent:
        eet = np.einsum("ni,nj->nij", e, e)
        k_elastic = np.where(slack, keep * EA / L0, EA / L0)[:, None, None] * eet
        k_geometric = (N / L_safe)[:, None, None] * (np.eye(3)[None] - eet)
        k = k_elastic + k_geometric
        K = np.empty((len(L), 6, 6))
        K[:, :3, :3] = k
        K[:, 3:, 3:] = k
        K[:, :3, 3:] = -k
        K[:, 3:, :3] = -k
    return BarResponse(force=f, tangent=K, tension=N, length=L, slack=slack)


def mass_matrix(length, mass_per_length, lumped=False) -> np.ndarray:
    """Mass matrices of straight two-node elements with three DOFs per node.

    Translational inertia only (a bar or cable has no rotational DOFs).  The
    consistent matrix interpolates the motion linearly between the ends,
    ``m L / 6 [[2 I, I], [I, 2 I]]``; the lumped one puts ``m L / 2`` on
    each end.  Both carry the element's whole mass ``m L`` in every
    direction of rigid translation.

    Parameters
    ----------
    length : (n,) element length the mass is spread over, m
    mass_per_length : (n,) mass per unit of that length, kg/m
    lumped : bool
        Diagonal (lumped) instead of consistent matrices.

    Returns
    -------
    (n, 6, 6) mass matrices in global axes, kg, DOFs ``[x_i, x_j]``
    """
    total = np.asarray(mass_per_length, dtype=float) * np.asarray(length, dtype=float)
    pattern = np.diag([0.5, 0.5]) if lumped else np.array([[2.0, 1.0], [1.0, 2.0]]) / 6.0
    return total[:, None, None] * np.kron(pattern, np.eye(3))[None]
