"""Corotational 3D beam element (two nodes, six DOFs per node).

The package is split by responsibility:

* :mod:`.rotations`: SO(3) exponential, logarithm and inverse left Jacobian;
* :mod:`.frames`: initial section frames and the corotated frame with its spin;
* :mod:`.local`: the linear beam acting in the corotated frame;
* :mod:`.kernel`: the batched element kernel, forces and consistent tangent;
* :mod:`.loads`: consistent nodal loads of member loads;
* :mod:`.mass`: consistent mass matrices;
* :mod:`.checks`: input validation shared by all of them;
* this module: the family's registration.

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

from .. import Family, register
from .frames import VERTICAL_COSINE, local_frames
from .kernel import BeamResponse, response
from .loads import equivalent_nodal_loads
from .mass import local_mass_matrix, mass_matrix
from .rotations import expm_so3, logm_so3, skew

__all__ = [
    "BeamResponse",
    "VERTICAL_COSINE",
    "skew",
    "expm_so3",
    "logm_so3",
    "local_frames",
    "response",
    "equivalent_nodal_loads",
    "local_mass_matrix",
    "mass_matrix",
]


# -- registration ------------------------------------------------------------------

def _evaluate(table, state, loads, lam, want_tangent, guess):
    # ``response`` is looked up in this package at call time, so replacing
    # the package's attribute replaces the kernel the assembler calls
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
