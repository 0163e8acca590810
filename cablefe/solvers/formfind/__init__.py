"""Form-finding: the shape and unstressed lengths of a cable structure under its permanent loads.

Two methods, chosen by ``[shape] method``:

``"force-density"``
    Schek's linear force density method (Schek 1974, Comput. Methods Appl.
    Mech. Eng. 3): every cable and bar member gets a force density q = N/L
    (N/m); the equilibrium of the free nodes, ``sum_j q_ij (x_i - x_j) = p_i``,
    is then linear and the same matrix serves the three coordinates.  One
    sparse factorization, one solve with the x, y, z right-hand sides (one
    factorization per distinct set of free directions when nodes are held in
    some directions only).  Permanent nodal loads enter ``p``; self-weight
    of bars and catenary weight of cables are lumped half to each end (the
    catenary weight from the model's starting unstressed lengths).
    Tensions ``N = q L``; bar unstressed lengths ``L0 = L / (1 + N/EA)``;
    cable unstressed lengths from the exact elastic catenary: L0 is chosen so
    that the catenary element spanning the found chord carries the chord
    force N, where the chord force of a catenary is the chord component of
    the mean of its two end forces with the weight taken out,
    ``[H l + (V - W/2) h] / c`` (these are exactly the end forces the
    lumped linear step assumed: ``+-N e + W/2 e_z``).

``"target"``
    Unstressed lengths of the ``[[shape.adjust]]`` members are changed until
    the ``[shape.targets]`` node coordinates are reached at equilibrium under
    the permanent loads.  Newton on the sensitivities: at equilibrium
    ``K du = -(df_int/dL0) dL0``, so one factorization of the tangent gives
    every column.  ``df_int/dL0`` is analytic for both families (see
    :func:`length_sensitivity`).  The steps are least-squares solutions
    (minimum-norm when there are more unknowns than targets).

    From a rough sketch.  A drawing that is only roughly right (nodes off
    by a metre, no pretension, tension-only members at zero strain) often
    has no equilibrium for Newton's method to start from: members without
    tension have no stiffness across them.  Then the adjusted members are
    first shortened to a small strain (:data:`START_STRAIN`) and the
    permanent loads are applied along their path, which brings the sketch
    into a stable, tensioned equilibrium.  Every step is held in a trust
    region on the target miss (neither the predicted target movement nor
    any length change may exceed the radius; a step that does not lower the
    miss is retried smaller, a good one widens the region).  While
    searching, slack tension-only bars keep :data:`SLACK_STIFFNESS` of their
    EA so that one slack hanger does not make the structure a mechanism;
    once the targets are met the exact model takes over, and the shape is
    accepted only in its equilibrium.  :attr:`ShapeResult.log` says how the
    shape was reached and how many iterations each stage took.

Both methods end the same way: the found coordinates and unstressed lengths
are turned into a case (:func:`shaped_case`), whose model -- loads rebuilt on
the found geometry -- is solved under the permanent loads from its own
coordinates, and the coordinates are moved to that equilibrium until the
solve no longer moves them (``settle``).  The written case therefore stays
put when it is solved again.  Beams keep the stress-free shape of ``[nodes]``
(or of the case's ``[beam_reference]``) while shaping; the shaped case gets a
``[beam_reference]`` table with that stress-free position of every beam node
and the rotation vector from its stress-free orientation to the found one, so
that the reloaded beams carry exactly the bending of the found state and the
shaped case stays put too.

All quantities SI (N, m, N/m).
"""
from __future__ import annotations

import logging
from typing import Callable

import numpy as np

from ...elements.catenary.profile import stretched_length
from ...errors import CaseError
from ...model import LoadVectors, Model, build_model
from ...spec import CaseSpec
from ..static import StaticResult


log = logging.getLogger(__name__)

__all__ = ["AXES", "SHAPE_TOLERANCE", "SLACK_STIFFNESS", "START_STRAIN", "CuttingTable", "ForceDensityShape",
           "ShapeError", "ShapeResult", "TargetReport", "catenary_length_for_chord_force", "cutting_table",
           "find_shape", "force_density_shape", "length_sensitivity", "member_lengths", "model_size",
           "permanent_factors", "shaped_case"]
from .common import (AXES, SETTLE_FRACTION, SHAPE_TOLERANCE, ShapeError, TargetReport, ForceDensityShape,
    CuttingTable, ShapeResult, permanent_factors, member_lengths, model_size, shaped_case,
    _settings, _equilibrium, _searching, _movement)
from .force_density import catenary_length_for_chord_force, force_density_shape
from .target import length_sensitivity, SLACK_STIFFNESS, START_STRAIN, _target_shape

# ---------------------------------------------------------------------------
# settle, cutting table, driver
# ---------------------------------------------------------------------------

def _settle(spec, model0, X, L0, factors, settings, linear_solver, rounds=12):
    """Rebuild on the found geometry and move it to the equilibrium until it stays put."""
    tol = SETTLE_FRACTION * model_size(model0)
    for _ in range(rounds):
        model = build_model(shaped_case(spec, model0, X, L0))
        result = _equilibrium(model, factors, settings, linear_solver)
        X = model.to_site(result.state.positions)
        if _movement(model, result) <= tol:
            break
    return model, result, X


def cutting_table(model: Model, result: StaticResult, loads: LoadVectors,
                  fabrication_temperature: float | None = None) -> CuttingTable:
    """Unstressed, fabrication and loaded lengths and tension of every cable and bar member.

    Parameters
    ----------
    model : Model
    result : StaticResult of ``loads`` on ``model``
    loads : LoadVectors of the state (for the catenary weight and thermal strain)
    fabrication_temperature : K difference of the fabrication state, optional

    Returns
    -------
    CuttingTable, rows in member order.
    """
    nm = len(model.members)
    L0 = np.zeros(nm)
    loaded = np.zeros(nm)
    t_first = np.zeros(nm)
    t_last = np.zeros(nm)
    alpha = np.zeros(nm)
    used = np.zeros(nm, dtype=bool)
    for f in ("bar", "cable"):
        t = model.families[f]
        if not len(t):
            continue
        r = result.responses[f]
        p = t.props
        if f == "bar":
            ends = np.repeat(r.tension[:, None], 2, axis=1)
            arc = r.length
        else:
            ends = r.end_tension
            L0e = p["unstressed_length"] * (1.0 + loads.strain[f])
            arc = stretched_length(r.H, r.V, L0e, loads.weight[f], p["EA"])
        L0 += np.bincount(t.member, weights=p["unstressed_length"], minlength=nm)
        loaded += np.bincount(t.member, weights=arc, minlength=nm)
        members, first = np.unique(t.member, return_index=True)
        last = len(t.member) - 1 - np.unique(t.member[::-1], return_index=True)[1]
        t_first[members] = ends[first, 0]
        t_last[members] = ends[last, 1]
        alpha[members] = p["alpha"][first]
        used[members] = True
    idx = np.flatnonzero(used)
    fab = None
    if fabrication_temperature is not None:
        fab = L0[idx] * (1.0 + alpha[idx] * fabrication_temperature)
    return CuttingTable(tuple(model.members[k].id for k in idx), L0[idx], 0.5 * (t_first[idx] + t_last[idx]),
                        loaded[idx], fab)


def find_shape(spec: CaseSpec, linear_solver: str | None = None,
               progress: Callable[[int, float], None] | None = None) -> ShapeResult:
    """Form-finding of a case with a ``[shape]`` table.

    Parameters
    ----------
    spec : CaseSpec with ``shape`` set
    linear_solver : backend name, optional (default ``[analysis] solver``)
    progress : callable(iteration, largest target miss in m), optional

    Returns
    -------
    ShapeResult

    Raises
    ------
    CaseError
        Bad ``[shape]`` input found with the model (beams in force density,
        unmatched members, adjust groups matching nothing ...).
    ShapeError
        Targets not met (the message names them and the misses in the case's
        length unit), equilibrium lost, or a length driven to zero.
    """
    shape = spec.shape
    if shape is None:
        raise CaseError("shape", "the case has no [shape] table: nothing to form-find")
    linear_solver = linear_solver or spec.analysis.solver
    settings = _settings(spec)
    model0 = build_model(spec)
    factors = permanent_factors(shape)
    reports: tuple[TargetReport, ...] = ()
    iterations = 0
    notes: tuple[str, ...] = ()
    if shape.method == "force-density":
        fd = force_density_shape(model0, shape, model0.combined_loads(factors))
        L0 = fd.member_length0
        model, result, X = _settle(spec, model0, model0.to_site(fd.coordinates), L0, factors, settings,
                                   linear_solver)
    elif shape.method == "target":
        with _searching():
            model, result, X, L0, reports, iterations, notes = _target_shape(spec, model0, factors, settings,
                                                                             linear_solver, progress)
    else:
        raise CaseError("shape.method", f'unknown form-finding method "{shape.method}" (known: target, force-density)')
    shaped = shaped_case(spec, model0, X, L0, result.state.rotations)
    final = build_model(shaped)
    check = _equilibrium(final, factors, settings, linear_solver)
    movement = _movement(final, check)
    if movement > 1e-6 * model_size(final):
        log.warning("shape: the shaped case re-solved under the permanent loads moves up to %.3g m", movement)
    table_model, table_result = final, check
    cutting = cutting_table(table_model, table_result, table_model.combined_loads(factors),
                            shape.fabrication_temperature)
    return ShapeResult(shaped, final, table_result, np.asarray(L0, dtype=float), reports, iterations,
                       movement, cutting, notes)
