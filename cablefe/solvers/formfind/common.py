"""Form-finding, shared pieces: result types, the shaped case and the
equilibrium solves both methods use.  All quantities SI (N, m, N/m)."""
from __future__ import annotations

import contextlib
import logging
from dataclasses import dataclass, replace
from typing import Mapping

import numpy as np

from ...model import Model
from ...spec import BeamReference, CaseSpec, ShapeSpec
from ..newton import NewtonSettings
from ..static import StaticResult, solve_combination


log = logging.getLogger(__name__)


AXES = ("x", "y", "z")

#: the shaped model counts as settled when re-solving it moves no node by
#: more than this fraction of the model's size (the acceptance check on a
#: written case is 1e-6 of the span; this leaves two orders of margin)
SETTLE_FRACTION = 1e-8

#: relative residual used for the equilibrium solves while shaping: tighter
#: than the usual analysis tolerance so that a written case starts inside it
SHAPE_TOLERANCE = 1e-10


class ShapeError(ValueError):
    """Form-finding ran but could not deliver the asked shape.

    Attributes
    ----------
    unmet : tuple of TargetReport
        The targets not met (empty when the failure is not about targets).
    """

    def __init__(self, message: str, unmet=()):
        self.unmet = tuple(unmet)
        super().__init__(message)


@dataclass(frozen=True)
class TargetReport:
    """One target coordinate: node id, axis ("x" | "y" | "z"), target and reached value (m)."""

    node: str
    axis: str
    target: float
    reached: float

    @property
    def miss(self) -> float:
        return self.reached - self.target


@dataclass(frozen=True)
class ForceDensityShape:
    """Result of the linear force density step (SI units).

    Attributes
    ----------
    coordinates : (nn, 3) node positions, m
    force_density : family -> (n,) q per element, N/m
    tension : family -> (n,) N = q L per element, N
    unstressed_length : family -> (n,) element unstressed length, m
    member_length0 : (nm,) unstressed length of each member (sum of its
        elements), m; NaN for beams
    """

    coordinates: np.ndarray
    force_density: Mapping[str, np.ndarray]
    tension: Mapping[str, np.ndarray]
    unstressed_length: Mapping[str, np.ndarray]
    member_length0: np.ndarray


@dataclass(frozen=True)
class CuttingTable:
    """Cutting lengths of the cable and bar members (SI units).

    ``tension`` is the mean of the member's two end tensions (for a cable the
    tensions along its tangent at the first and last node); ``loaded_length``
    is the stretched length under the permanent load (arc length for a
    cable, chord for a bar); ``fabrication_length`` is ``L0 (1 + alpha dT)``
    at ``[shape] fabrication_temperature`` (None without it).
    """

    member: tuple[str, ...]
    unstressed_length: np.ndarray
    tension: np.ndarray
    loaded_length: np.ndarray
    fabrication_length: np.ndarray | None = None


@dataclass(frozen=True)
class ShapeResult:
    """A found shape.

    Attributes
    ----------
    spec : CaseSpec of the shaped case (SI), ``raw`` still the input's TOML
    model : Model built from ``spec``
    equilibrium : StaticResult of the permanent loads at the found shape
    member_length0 : (nm,) member unstressed lengths, m (NaN for beams)
    targets : reports of every target coordinate (target method)
    iterations : Newton iterations of the target method (0 for force density)
    largest_movement : largest node displacement when the shaped model is
        solved again under the permanent loads, m
    cutting : CuttingTable
    log : lines describing how the shape was reached (first shape, regularised
        search, final iterations), for the command line
    """

    spec: CaseSpec
    model: Model
    equilibrium: StaticResult
    member_length0: np.ndarray
    targets: tuple[TargetReport, ...]
    iterations: int
    largest_movement: float
    cutting: CuttingTable
    log: tuple[str, ...] = ()


# ---------------------------------------------------------------------------
# helpers shared by both methods
# ---------------------------------------------------------------------------

def permanent_factors(shape: ShapeSpec) -> dict[str, float]:
    """Load-case factors of the permanent state (every permanent case once)."""
    return {case: 1.0 for case in shape.permanent}


def member_lengths(model: Model) -> np.ndarray:
    """(nm,) unstressed length of each cable and bar member (sum over its elements), m; NaN for beams."""
    out = np.full(len(model.members), np.nan)
    for f in ("bar", "cable"):
        t = model.families[f]
        if len(t):
            total = np.bincount(t.member, weights=t.props["unstressed_length"], minlength=len(out))
            members = np.unique(t.member)
            out[members] = total[members]
    return out


def model_size(model: Model) -> float:
    """Diagonal of the bounding box of the nodes, m (at least 1e-12)."""
    c = model.coordinates
    return max(float(np.linalg.norm(np.ptp(c, axis=0))) if len(c) else 0.0, 1e-12)


def shaped_case(spec: CaseSpec, model: Model, coordinates, member_length0, rotations=None) -> CaseSpec:
    """The case with found node coordinates and member unstressed lengths.

    Parameters
    ----------
    spec : the input case
    model : Model built from ``spec`` (fixes the node order)
    coordinates : (nn, 3) node positions in model order, m, in site
        coordinates (``model.to_site`` of a state's positions), or None to keep
        the case's geometry.  Supported directions keep the case's
        coordinates (a prescribed support movement stays a load).
    member_length0 : (nm,) unstressed length per member, m (NaN: unchanged)
    rotations : (nn, 3, 3) total nodal rotations of the found state (from
        the beams' stress-free orientation, as in
        :class:`cablefe.assembly.State`), or None.  Required when
        coordinates are given and the model has beams.

    Returns
    -------
    CaseSpec
        ``length0`` on every cable and bar (``pretension`` removed),
        ``interior`` on every divided member when coordinates are given,
        and then, with beams, ``beam_reference`` for every beam node: the
        stress-free position of ``model`` and the rotation vector of
        ``rotations``.

    Raises
    ------
    ValueError
        Coordinates given for a model with beams without their rotations:
        the beams would reload stress-free in the found shape.
    """
    member_length0 = np.asarray(member_length0, dtype=float)
    beam_reference = spec.beam_reference
    if coordinates is not None and _has_beams(model):
        if rotations is None:
            raise ValueError("shaped_case: a model with beams needs the found nodal rotations to keep the "
                             "beams' stress-free geometry")
        beam_reference = _beam_reference_table(spec, model, np.asarray(rotations, dtype=float))
    nodes = dict(spec.nodes)
    X = None
    if coordinates is not None:
        X = np.array(coordinates, dtype=float)
        held = np.zeros(X.shape, dtype=bool)
        g = model.dof[:, :3]
        held[g >= 0] = model.supported[g[g >= 0]]
        X[held] = model.site_coordinates[held]
        for name in spec.nodes:
            nodes[name] = tuple(float(v) for v in X[model.node_index[name]])
    members = []
    for k, mem in enumerate(spec.members):
        changes = {}
        if mem.type in ("cable", "bar") and np.isfinite(member_length0[k]):
            changes.update(length0=float(member_length0[k]), pretension=None)
        if X is not None and mem.divide > 1:
            info = model.members[k]
            changes["interior"] = tuple(tuple(float(v) for v in X[model.node_index[n]])
                                        for n in info.node_ids[1:-1])
        members.append(replace(mem, **changes) if changes else mem)
    return replace(spec, nodes=nodes, members=tuple(members), beam_reference=beam_reference)


def _beam_reference_table(spec: CaseSpec, model: Model, rotations: np.ndarray) -> dict:
    """``[beam_reference]`` entries of every beam node: stress-free position (m) and rotation vector (rad).

    The positions are the model's own stress-free ones (``[nodes]``, or the
    case's earlier ``[beam_reference]``); ``rotations`` are totals from that
    stress-free orientation, so they are written as they are.
    """
    from ...elements.beam.rotations import logm_so3
    turning = np.flatnonzero(model.dof[:, 3] >= 0)
    theta = logm_so3(rotations[turning])
    ref = model.to_site(model.reference_coordinates if model.reference_coordinates is not None
                        else model.coordinates)
    out = {}
    for k, n in enumerate(turning.tolist()):
        name = model.node_ids[n]
        old = spec.beam_reference.get(name)
        out[name] = BeamReference(name, tuple(float(v) for v in ref[n]), tuple(float(v) for v in theta[k]),
                                  old.key if old is not None else f"beam_reference.{name}")
    return out


def _settings(spec: CaseSpec) -> NewtonSettings:
    a = spec.analysis
    return NewtonSettings(a.increments, min(a.tolerance, SHAPE_TOLERANCE), a.max_iterations, a.max_cuts,
                          max_total_iterations=a.max_total_iterations, max_total_cuts=a.max_total_cuts)


def _equilibrium(model: Model, factors, settings, linear_solver) -> StaticResult:
    # trial shapes by load control, whatever [analysis] control asks for the results
    res = solve_combination(model, "permanent state", factors, settings=settings, linear_solver=linear_solver,
                            control="load")
    if not res.converged:
        raise ShapeError(f"no equilibrium under the permanent loads: {res.outcome.message}")
    return res


class _SearchNotes(logging.Filter):
    """Warnings of the equilibria on the way (not results): kept at info level only."""

    def filter(self, record):
        if record.levelno == logging.WARNING:
            log.info("while searching: %s", record.getMessage())
            return False
        return True


@contextlib.contextmanager
def _searching():
    """Hold back the solver's warnings about intermediate shapes of a search.

    A rough sketch passes through states (overstretched cables, indefinite
    tangents) that say nothing about the found shape; the found shape's own
    equilibrium is solved again afterwards, with its warnings.
    """
    notes = _SearchNotes()
    loggers = [logging.getLogger(n) for n in ("cablefe.solvers.static", "cablefe.solvers.newton")]
    for lg in loggers:
        lg.addFilter(notes)
    try:
        yield
    finally:
        for lg in loggers:
            lg.removeFilter(notes)


def _movement(model: Model, result: StaticResult) -> float:
    return float(np.max(np.linalg.norm(result.state.positions - model.coordinates, axis=1), initial=0.0))


def _has_beams(model: Model) -> bool:
    return len(model.families["beam"]) > 0


def _format_length(spec: CaseSpec, value: float) -> str:
    u = spec.units
    return f"{value / u.length_scale:.6g} {u.length}"
