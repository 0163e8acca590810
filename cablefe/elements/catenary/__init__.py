"""Elastic catenary cable element (exact equilibrium of a uniformly heavy elastic cable).

One element spans nodes i and j with a cable of unstressed length ``L0``,
weight ``w`` per unit unstressed length (``W = w L0``) acting in -z and axial
stiffness ``EA``; its end forces are the horizontal force ``H`` and the upward
support force ``V`` at j (Irvine 1981, Cable Structures, §1.3).  The package
is split by responsibility:

* :mod:`.profile`: the closed-form chord of given end forces, its
  flexibility and the stretched length, free of cancellation (the local
  frame and Irvine's equations are written out there);
* :mod:`.inverse`: the inner solve for the end forces spanning a chord;
* :mod:`.kernel`: the batched element kernel, forces and tangent in 3D;
* :mod:`.sampling`: tension along the cable and the deformed curve;
* :mod:`.checks`: input validation shared by all of them;
* this module: the element mass and the family's registration.

Special states handled in closed form:

* weightless (``W = 0``): a straight elastic tie, ``N = EA (L - L0)/L0`` when
  the chord ``L`` exceeds ``L0``, otherwise slack: zero force, zero stiffness;
* vertical chord (``l = 0``, within 1e-13 of the element size): ``H = 0`` and V
  from statics of a hanging cable; when the cable is longer than the chord
  it hangs folded on itself with zero tension at the fold.  That state is
  reported ``slack``; its force is still the statics of the hanging cable
  (the supports carry its weight), its horizontal stiffness is zero and its
  vertical stiffness is the exact one (``w/2`` for an inextensible cable).
"""
from __future__ import annotations

import numpy as np

from .. import Family, register
from ..bar import mass_matrix as _straight_mass_matrix
from .inverse import VERTICAL_TOLERANCE, solve_end_forces
from .kernel import CatenaryResponse, horizontal_unit, in_plane_stiffness, response
from .profile import catenary_chord, catenary_flexibility, stretched_length
from .sampling import shape_points, tension_at

__all__ = [
    "NODE_DOFS",
    "VERTICAL_TOLERANCE",
    "CatenaryResponse",
    "cable_inputs",
    "catenary_chord",
    "catenary_flexibility",
    "horizontal_unit",
    "in_plane_stiffness",
    "mass_matrix",
    "response",
    "shape_points",
    "solve_end_forces",
    "stretched_length",
    "tension_at",
]

NODE_DOFS = 3


def mass_matrix(length, mass_per_length, lumped=False) -> np.ndarray:
    """Mass matrices of cable elements, (n, 6, 6) kg; see :func:`cablefe.elements.bar.mass_matrix`.

    The cable's mass is spread along its chord, linearly between the ends
    (or lumped at them): the exact catenary tangent condenses the cable's
    interior statically, so the element has no inertia of its own between
    its nodes.  Its own modes between the nodes (the sagging string's
    modes) are therefore only found by dividing the cable (``divide``);
    see the modes documentation for how finely.
    """
    return _straight_mass_matrix(length, mass_per_length, lumped)


# -- registration ------------------------------------------------------------------

def cable_inputs(table, loads, lam: float) -> tuple[np.ndarray, np.ndarray]:
    """Stress-free length (m) and weight per unit stress-free length (N/m) of
    the catenary elements at load factor ``lam``.

    A thermal strain e stretches the stress-free length to ``L0 (1 + e)``
    but leaves the mass alone: the weight per unit of the stretched length
    is ``w0 / (1 + e)``, so the element weighs ``w0 L0`` whatever the
    temperature (Irvine 1981, Cable Structures, sec. 1.3, thermal effects).
    """
    strain = lam * loads.strain[table.family]
    stretch = 1.0 + strain
    return table.props["unstressed_length"] * stretch, lam * loads.weight[table.family] / stretch


def _evaluate(table, state, loads, lam, want_tangent, guess):
    # ``response`` is looked up in this package at call time, so replacing
    # the package's attribute replaces the kernel the assembler calls
    L0, weight = cable_inputs(table, loads, lam)
    # an unconverged inner solve is marked in ``converged`` and fails the
    # analysis step (solvers.static), so it is not logged here
    return response(state.positions[table.nodes[:, 0]], state.positions[table.nodes[:, 1]],
                    L0, table.props["EA"], weight, guess=guess, want_tangent=want_tangent, warn=False)


def _mass(table, own, added, lumped, frames):
    return mass_matrix(table.props["unstressed_length"], own + added, lumped)


def _warm_start(r):
    """The end forces of a solved state start the next inner solve."""
    return (r.H, r.V)


register(Family("cable", _evaluate, _mass, _warm_start))
