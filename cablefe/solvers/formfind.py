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

import contextlib
import logging
from dataclasses import dataclass, replace
from types import MappingProxyType
from typing import Callable, Mapping

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..assembly import Assembler, State
from ..elements import catenary
from ..errors import CaseError, MechanismError
from ..model import LoadVectors, Model, build_model, match_members
from ..spec import BeamReference, CaseSpec, ShapeSpec
from . import linear
from .newton import NewtonSettings
from .static import StaticResult, solve_combination

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
    from ..elements.beam import logm_so3
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


# ---------------------------------------------------------------------------
# force density
# ---------------------------------------------------------------------------

def _member_force_density(model: Model, shape: ShapeSpec) -> np.ndarray:
    """(nm,) q of the first matching pattern, in the order given; CaseErrors for beams and unmatched members."""
    ids = [m.id for m in model.members]
    q = np.full(len(ids), np.nan)
    for pattern, value in shape.force_density.items():
        hit = np.asarray(match_members(ids, (pattern,)), dtype=np.int64)
        if hit.size:
            fresh = hit[np.isnan(q[hit])]
            q[fresh] = value
    kinds = np.array([m.type for m in model.members])
    beams = np.flatnonzero(kinds == "beam")
    if beams.size:
        raise CaseError("shape.force_density", f'member "{ids[beams[0]]}" is a beam: the force density method '
                        'takes cable and bar members only (use method = "target" with beams)')
    unmatched = np.flatnonzero(np.isnan(q))
    if unmatched.size:
        raise CaseError("shape.force_density", f'member "{ids[unmatched[0]]}" matches no pattern '
                        f'(patterns: {", ".join(shape.force_density)})')
    tension_only = (kinds == "cable") | np.array([m.tension_only for m in model.spec.members], dtype=bool)
    pushed = np.flatnonzero((q < 0.0) & tension_only)
    if pushed.size:
        k = int(pushed[0])
        what = "cable" if kinds[k] == "cable" else "tension-only bar"
        raise CaseError("shape.force_density", f'member "{ids[k]}" is a {what} and cannot take the '
                        f"compression of force density {q[k]:.6g} N/m")
    return q


def catenary_length_for_chord_force(l, h, chord_force, weight, EA, max_iter=200):
    """Unstressed length of elastic catenaries spanning (l, h) with a given chord force.

    The chord force of a catenary is ``[H l + (V - W/2) h] / c`` (the chord
    component of the mean end force with half the weight taken off each
    end); it falls as the unstressed length grows.  Vectorized bisection on a
    bracket found by doubling, each trial solved exactly by
    :func:`cablefe.elements.catenary.solve_end_forces`.

    Parameters
    ----------
    l, h : (n,) horizontal projection and rise of the chord, m
    chord_force : (n,) wanted chord force, N (> 0)
    weight : (n,) weight per unstressed length, N/m
    EA : (n,) axial stiffness, N

    Returns
    -------
    L0 : (n,) unstressed length, m
    ok : (n,) bool, False where no length gives that force (a force too
        small to hold the cable's weight on that chord)
    """
    l, h, N, w, EA = (np.asarray(a, dtype=float) for a in (l, h, chord_force, weight, EA))
    c = np.hypot(l, h)
    straight = c / (1.0 + N / EA)          # exact when weightless
    if not np.any(w > 0.0):
        return straight, np.ones(len(c), dtype=bool)

    def excess(L0, guess=None):
        H, V, conv = catenary.solve_end_forces(l, h, L0, w, EA, guess=guess)
        return (H * l + (V - 0.5 * w * L0) * h) / c - N, (H, V)

    # a straight bar of that tension is too short to sag under weight: it
    # pulls harder than N; shorten further only if that fails
    lo = straight.copy()
    f_lo, _ = excess(lo)
    for _ in range(60):
        bad = ~(f_lo >= 0.0)
        if not bad.any():
            break
        lo = np.where(bad, 0.5 * lo, lo)
        f_lo, _ = excess(lo)
    step = 1e-6 * lo
    hi = lo + step
    f_hi, _ = excess(hi)
    for _ in range(80):
        bad = f_hi > 0.0
        if not bad.any():
            break
        step = np.where(bad, 2.0 * step, step)
        hi = np.where(bad, lo + step, hi)
        f_hi, _ = excess(hi)
    ok = (f_lo >= 0.0) & (f_hi <= 0.0)
    guess = None
    for _ in range(max_iter):
        mid = 0.5 * (lo + hi)
        f_mid, guess = excess(mid, guess)
        up = f_mid > 0.0
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
        if np.all(hi - lo <= 4e-16 * hi):
            break
    weightless = w <= 0.0
    return np.where(weightless, straight, 0.5 * (lo + hi)), ok | weightless


def force_density_shape(model: Model, shape_spec: ShapeSpec, permanent_loads: LoadVectors) -> ForceDensityShape:
    """Linear force density form-finding (Schek 1974).

    Parameters
    ----------
    model : Model of cable and bar members only
    shape_spec : ShapeSpec with ``force_density`` (pattern -> q, N/m)
    permanent_loads : LoadVectors of the permanent state (nodal forces,
        catenary weight per unstressed length, thermal strain)

    Returns
    -------
    ForceDensityShape

    Raises
    ------
    CaseError
        ``shape.force_density``: a beam, a member matching no pattern, a
        cable in compression, free nodes without a unique equilibrium, or a
        cable whose force density cannot hold its weight.
    """
    q_member = _member_force_density(model, shape_spec)
    nn = len(model.node_ids)
    fams = [f for f in ("bar", "cable") if len(model.families[f])]
    ends_i = np.concatenate([model.families[f].nodes[:, 0] for f in fams])
    ends_j = np.concatenate([model.families[f].nodes[:, 1] for f in fams])
    q = np.concatenate([q_member[model.families[f].member] for f in fams])
    ne = len(q)
    C = sp.csr_matrix((np.r_[-np.ones(ne), np.ones(ne)], (np.r_[np.arange(ne), np.arange(ne)], np.r_[ends_i, ends_j])),
                      shape=(ne, nn))
    D = (C.T @ sp.diags(q) @ C).tocsc()

    # loads: nodal forces, element weight lumped half to each end
    dof = model.dof[:, :3]
    P = np.where(dof >= 0, permanent_loads.nodal[np.maximum(dof, 0)], 0.0)
    t = model.families["cable"]
    if len(t):
        W = permanent_loads.weight["cable"] * t.props["unstressed_length"]
        np.add.at(P[:, 2], t.nodes.ravel(), -0.5 * np.repeat(W, 2))

    # positions of held directions: the case's, moved by prescribed movements
    X = model.coordinates.copy()
    free = np.zeros((nn, 3), dtype=bool)
    free[dof >= 0] = ~model.restrained[dof[dof >= 0]]
    moved = np.where(dof >= 0, permanent_loads.prescribed[np.maximum(dof, 0)], 0.0)
    X = np.where(free, X, X + moved)
    # directions with the same free nodes share one factorization
    groups: dict[bytes, list[int]] = {}
    for d in range(3):
        groups.setdefault(np.packbits(free[:, d]).tobytes(), []).append(d)
    for dirs in groups.values():
        f = free[:, dirs[0]]
        if not f.any():
            continue
        held = ~f
        rhs = P[np.ix_(f, dirs)] - D[f][:, held] @ X[np.ix_(held, dirs)]
        try:
            lu = spla.splu(D[f][:, f].tocsc())
            sol = lu.solve(np.asfortranarray(rhs))
        except RuntimeError:
            sol = np.full(rhs.shape, np.nan)
        if not np.all(np.isfinite(sol)):
            raise CaseError("shape.force_density", "the force densities give the free nodes no unique "
                            "equilibrium (singular force density matrix): every free node needs a path of "
                            "members to a support, and mixed signs must not cancel")
        X[np.ix_(f, dirs)] = sol

    force_density, tension, lengths = {}, {}, {}
    for f in ("bar", "cable"):
        tab = model.families[f]
        qe = q_member[tab.member]
        if not len(tab):
            force_density[f] = tension[f] = lengths[f] = np.zeros(0)
            continue
        d = X[tab.nodes[:, 1]] - X[tab.nodes[:, 0]]
        L = np.linalg.norm(d, axis=1)
        N = qe * L
        EA = tab.props["EA"]
        thermal = 1.0 + permanent_loads.strain[f]
        if f == "bar":
            L0_eff = L / (1.0 + N / EA)
        else:
            L0_eff, ok = catenary_length_for_chord_force(np.hypot(d[:, 0], d[:, 1]), d[:, 2], N,
                                                         permanent_loads.weight["cable"], EA)
            if not ok.all():
                k = int(tab.member[np.flatnonzero(~ok)[0]])
                raise CaseError("shape.force_density", f'cable "{model.members[k].id}": its force density '
                                f"{q_member[k]:.6g} N/m cannot hold its weight on the found chord")
        force_density[f] = qe
        tension[f] = N
        lengths[f] = L0_eff / thermal
    L0m = np.full(len(model.members), np.nan)
    for f in ("bar", "cable"):
        tab = model.families[f]
        if len(tab):
            total = np.bincount(tab.member, weights=lengths[f], minlength=len(L0m))
            hit = np.unique(tab.member)
            L0m[hit] = total[hit]
    return ForceDensityShape(X, force_density, tension, lengths, L0m)


# ---------------------------------------------------------------------------
# target method
# ---------------------------------------------------------------------------

def length_sensitivity(model: Model, state: State, loads: LoadVectors, responses=None) -> dict:
    """Derivative of the element internal forces with respect to their unstressed lengths.

    Parameters
    ----------
    model : Model
    state : State at which to differentiate (node positions fixed)
    loads : LoadVectors of the state (at load factor 1)
    responses : family -> element response at ``state``, optional

    Returns
    -------
    dict family -> (n, 6) ``d f_int / d L0`` (N/m) for "bar" and "cable",
    L0 being the stress-free length before thermal strain.

    Notes
    -----
    Bar: ``N = EA (L - L0')/L0'`` with ``L0' = L0 (1 + eps)``, so
    ``dN/dL0 = -EA L (1 + eps)/L0'^2``; slack bars give zero (their
    ``slack_stiffness`` ratio of it while searching).

    Cable: with the end forces (H, V) held, Irvine's chord equations
    (Irvine 1981, Cable Structures, §1.3; W = w L0') give
    ``d(l, h)/dL0' = (H, V - W) (1/EA + 1/T_i)`` (length added at node i,
    T_i the tension there).  Keeping the chord fixed,
    ``d(H, V)/dL0' = -F^-1 d(l, h)/dL0'`` with F the catenary flexibility,
    and ``f_j = (H e_h, V)``, ``f_i = (-H e_h, W - V)``.
    """
    if responses is None:
        responses = Assembler(model).element_responses(state, loads, 1.0, want_tangent=False)
    out = {}
    t = model.families["bar"]
    if len(t):
        r = responses["bar"]
        p = t.props
        grow = 1.0 + loads.strain["bar"]
        L0e = p["unstressed_length"] * grow
        d = state.positions[t.nodes[:, 1]] - state.positions[t.nodes[:, 0]]
        e = d / np.where(r.length > 0.0, r.length, 1.0)[:, None]
        # a slack bar keeps its regularising stiffness ratio (zero unless searching)
        keep = p.get("slack_stiffness", 0.0)
        dN = np.where(r.slack, keep, 1.0) * (-p["EA"] * r.length * grow / L0e**2)
        out["bar"] = np.concatenate([-dN[:, None] * e, dN[:, None] * e], axis=1)
    t = model.families["cable"]
    if len(t):
        r = responses["cable"]
        p = t.props
        grow = 1.0 + loads.strain["cable"]
        L0e = p["unstressed_length"] * grow
        w = loads.weight["cable"]
        EA = p["EA"]
        H, V = r.H, r.V
        Va = V - w * L0e
        Ta = np.hypot(H, Va)
        # a slack weightless tie or a cable folded at node i has no defined sensitivity: zero
        live = (Ta > 0.0) & ~((H == 0.0) & (V == 0.0) & (w == 0.0))
        dH = np.zeros(len(H))
        dV = np.zeros(len(H))
        if live.any():
            k = np.flatnonzero(live)
            F = catenary.catenary_flexibility(H[k], V[k], L0e[k], w[k], EA[k])
            K_ll, K_lh, K_hh = catenary.in_plane_stiffness(F[:, 0, 0], F[:, 0, 1], F[:, 1, 1])
            s = 1.0 / EA[k] + 1.0 / Ta[k]
            dl, dh = H[k] * s, Va[k] * s
            dH[k] = -(K_ll * dl + K_lh * dh)
            dV[k] = -(K_lh * dl + K_hh * dh)
        d = state.positions[t.nodes[:, 1]] - state.positions[t.nodes[:, 0]]
        eh = catenary.horizontal_unit(d)
        ez = np.array([0.0, 0.0, 1.0])
        dfj = dH[:, None] * eh + dV[:, None] * ez
        dfi = -dH[:, None] * eh + np.where(live, w - dV, 0.0)[:, None] * ez
        out["cable"] = np.concatenate([dfi, dfj], axis=1) * grow[:, None]
    return out


def _adjust_owner(model: Model, shape: ShapeSpec) -> tuple[np.ndarray, list[str]]:
    """(nm,) unknown number per member (-1: not adjusted) and a label per unknown."""
    owner = np.full(len(model.members), -1, dtype=np.int64)
    labels: list[str] = []
    ids = [m.id for m in model.members]
    for g, group in enumerate(shape.adjust):
        key = f"{group.key or f'shape.adjust[{g}]'}.members"
        hit = match_members(ids, group.members)
        if not hit:
            raise CaseError(key, f"no member matches {list(group.members)}")
        for k in hit:
            mem = model.members[k]
            if mem.type == "beam":
                raise CaseError(key, f'member "{mem.id}" is a beam: beams keep their stress-free shape; '
                                "only cable and bar unstressed lengths can be adjusted")
            if owner[k] >= 0:
                raise CaseError(key, f'member "{mem.id}" is already adjusted by an earlier [[shape.adjust]] group')
        if group.together:
            owner[hit] = len(labels)
            labels.append(f"{len(hit)} members together ({', '.join(group.members)})")
        else:
            owner[hit] = np.arange(len(labels), len(labels) + len(hit))
            labels.extend(ids[k] for k in hit)
    return owner, labels


def _target_list(model: Model, shape: ShapeSpec):
    nodes, axes, values, names = [], [], [], []
    for node, comps in shape.targets.items():
        if node not in model.node_index:
            raise CaseError(f"shape.targets.{node}", f'no node named "{node}"')
        for axis, value in comps.items():
            nodes.append(model.node_index[node])
            axes.append(AXES.index(axis))
            values.append(float(value))
            names.append((node, axis))
    return np.asarray(nodes, dtype=np.int64), np.asarray(axes, dtype=np.int64), np.asarray(values), names


def _target_jacobian(model, result, loads, owner, L0_start, target_dofs, npar, linear_solver):
    """d(target coordinates)/d(unknown factors) at an equilibrium, (ntargets, npar)."""
    asm = Assembler(model)
    ev = asm.evaluate(result.state, loads, 1.0, want_tangent=True)
    sens = length_sensitivity(model, result.state, loads, ev.responses)
    G = np.zeros((asm.nfree, npar))
    for f, df in sens.items():
        t = model.families[f]
        col = owner[t.member]
        # unknown = factor on the starting length: dL0/dfactor = starting length
        scale = L0_start[f]
        rows = asm.equation[t.dofs]
        cols = np.broadcast_to(col[:, None], rows.shape)
        keep = (rows >= 0) & (cols >= 0)
        np.add.at(G, (rows[keep], cols[keep]), (df * scale[:, None])[keep])
    solver = linear.make_linear_solver(linear_solver, symmetric=not model.has_rotations)
    try:
        S = -solver.factorize(ev.tangent).solve(G) if asm.nfree else np.zeros((0, npar))
    except linear.SingularMatrixError as exc:
        raise ShapeError(f"the tangent stiffness at the permanent state is singular ({exc})") from None
    eq = asm.equation[target_dofs]
    J = np.zeros((len(target_dofs), npar))
    J[eq >= 0] = S[eq[eq >= 0]]
    return J


def _unmet_message(spec, reports, tol, reason):
    unmet = [r for r in reports if abs(r.miss) > tol]
    shown = "; ".join(f"{r.node} {r.axis}: reached {_format_length(spec, r.reached)}, target "
                      f"{_format_length(spec, r.target)}, off by {_format_length(spec, r.miss)}" for r in unmet[:12])
    more = f" (+{len(unmet) - 12} more)" if len(unmet) > 12 else ""
    return unmet, (f"{len(unmet)} shape target(s) not met within {_format_length(spec, tol)} ({reason}): "
                   f"{shown}{more}")


#: stiffness ratio kept by slack tension-only members while searching: enough
#: to keep a slack hanger from making the structure a mechanism, small
#: enough not to hold up anything it should not.  The final equilibrium is
#: always the exact model's (no regularisation).
SLACK_STIFFNESS = 1.0e-3


def _regularised(model: Model) -> Model:
    """The model with slack tension-only bars keeping :data:`SLACK_STIFFNESS` of their EA."""
    t = model.families["bar"]
    if not len(t) or not t.props["tension_only"].any():
        return model
    props = dict(t.props)
    props["slack_stiffness"] = np.where(t.props["tension_only"], SLACK_STIFFNESS, 0.0)
    fams = dict(model.families)
    fams["bar"] = replace(t, props=MappingProxyType(props))
    return replace(model, families=MappingProxyType(fams))


def _has_tension_only_bars(model: Model) -> bool:
    t = model.families["bar"]
    return bool(len(t) and t.props["tension_only"].any())


#: strain given to the adjusted members for the first shape when the drawing
#: has no equilibrium to start from (members at zero strain, no pretension):
#: about the strain of a steel cable at a fifth of its working stress
#: (200 MPa / 200 GPa; common practice puts permanent cable stresses at
#: 30-45 % of the breaking strength), enough geometric stiffness for Newton's
#: method; the search changes the lengths from there
START_STRAIN = 1.0e-3


def _target_shape(spec, model0, factors, settings, linear_solver, progress):
    shape = spec.shape
    owner, labels = _adjust_owner(model0, shape)
    npar = len(labels)
    t_nodes, t_axes, t_values, t_names = _target_list(model0, shape)
    target_dofs = model0.dof[t_nodes, t_axes]
    L0_member = member_lengths(model0)
    L0_start = {f: model0.families[f].props["unstressed_length"].copy() for f in ("bar", "cable")}
    beams = _has_beams(model0)
    settle = SETTLE_FRACTION * model_size(model0)
    tol = shape.tolerance
    notes: list[str] = []
    if npar != len(t_values):
        log.warning("shape: %d target coordinate(s) and %d unknown length(s): the steps are least-squares "
                    "%s", len(t_values), npar,
                    "fits (targets may not all be met)" if len(t_values) > npar else "minimum-norm changes")

    # longest member of each unknown: a step's length change, m per unit factor
    group_length = np.zeros(npar)
    adjusted = np.flatnonzero(owner >= 0)
    np.maximum.at(group_length, owner[adjusted], L0_member[adjusted])

    def lengths(theta):
        out = L0_member.copy()
        adj = owner >= 0
        out[adj] = L0_member[adj] * theta[owner[adj]]
        return out

    def build(X, theta, rotations=None):
        # each trial starts from the last equilibrium; beams keep their
        # stress-free geometry through [beam_reference] and the found rotations
        if beams and rotations is None:
            return build_model(shaped_case(spec, model0, None, lengths(theta)))
        return build_model(shaped_case(spec, model0, X, lengths(theta), rotations))

    # slack tension-only members keep a little stiffness while searching;
    # the last iterations use the exact model
    regular = _has_tension_only_bars(model0)
    exact = not regular

    def equilibrium(model):
        return _equilibrium(model if exact else _regularised(model), factors, settings, linear_solver)

    theta = np.ones(npar)
    model = model0
    try:
        # a drawing that needs many cut increments is no start anyway: try it briefly
        probe = replace(settings, max_cuts=min(settings.max_cuts, 3))
        result = _equilibrium(model if exact else _regularised(model), factors, probe, linear_solver)
        notes.append("start: the drawing as given")
    except (ShapeError, MechanismError) as exc:
        # a rough drawing (members at zero strain, no pretension) has no
        # stiffness across its members for Newton's method to start from:
        # give the adjusted members a small tension and let the loads bring
        # the structure into its stable, tensioned equilibrium (the unknown
        # lengths are changed from there anyway)
        theta = np.full(npar, 1.0 / (1.0 + START_STRAIN))
        model = build(None, theta)
        try:
            result = equilibrium(model)
        except (ShapeError, MechanismError) as exc2:
            raise ShapeError(f"no equilibrium of the drawing ({exc}), nor with the adjusted members "
                             f"pretensioned to a strain of {START_STRAIN:g} ({exc2})") from None
        notes.append(f"start: no equilibrium of the drawing as given ({_short(exc)}); first shape with the "
                     f"adjusted members shortened to a strain of {START_STRAIN:g}")
    # positions and targets in site coordinates (the case's): the models built
    # on the way may each have their own local origin
    X = model.to_site(result.state.positions)
    best = np.inf
    stalled = shrinking = 0
    radius = None          # trust region on the predicted target movement, m
    searched = 0

    def reports():
        reached = X[t_nodes, t_axes]
        return tuple(TargetReport(n, a, float(v), float(r)) for (n, a), v, r in zip(t_names, t_values, reached))

    for it in range(shape.max_iterations + 1):
        miss = X[t_nodes, t_axes] - t_values
        worst = float(np.max(np.abs(miss)))
        moved = _movement(model, result)
        if progress is not None:
            progress(it, worst)
        log.info("shape iteration %d: largest target miss %.3e m, settle movement %.3e m%s", it, worst, moved,
                 "" if exact else " (slack members regularised)")
        if worst <= tol and not exact:
            # targets met with the regularised model: switch to the exact one
            # (identical unless a tension-only member is slack) and go on
            exact = True
            searched = it
            try:
                result = equilibrium(model)
            except (ShapeError, MechanismError) as exc:
                unmet, msg = _unmet_message(spec, reports(), tol, f"the exact model has no equilibrium at the "
                                            f"searched shape ({exc}): a tension-only member is slack there")
                raise ShapeError(msg, unmet) from None
            X = model.to_site(result.state.positions)
            miss = X[t_nodes, t_axes] - t_values
            worst = float(np.max(np.abs(miss)))
            moved = _movement(model, result)
            best, stalled, radius = np.inf, 0, None
            log.info("shape: exact model at the searched shape: largest target miss %.3e m", worst)
        if worst <= tol and (beams or moved <= settle):
            if regular:
                notes.append(f"search: {searched} iteration(s) with slack members keeping {SLACK_STIFFNESS:g} of "
                             f"their EA; exact model: {it - searched} more")
            notes.append(f"{it} iteration(s) in all; largest target miss {_format_length(spec, worst)}")
            return model, result, X, lengths(theta), reports(), it, tuple(notes)
        if it == shape.max_iterations:
            break
        if worst < 0.9 * best:
            best, stalled = worst, 0
        elif worst > tol:
            stalled += 1
            if stalled >= 5:
                unmet, msg = _unmet_message(spec, reports(), tol, "no further progress: the targets "
                                            "may be out of reach of the adjusted lengths")
                raise ShapeError(msg, unmet)
        step = np.zeros(npar)
        J = None
        if worst > tol:
            loads = model.combined_loads(factors)
            J = _target_jacobian(model if exact else _regularised(model), result, loads, owner, L0_start,
                                 target_dofs, npar, linear_solver)
            row = np.linalg.norm(J, axis=1)
            dead = (row <= 1e-12 * max(float(row.max(initial=0.0)), 1e-300)) & (np.abs(miss) > tol)
            if dead.any():
                unmet, msg = _unmet_message(spec, reports(), tol, "no adjusted length moves "
                                            + ", ".join(f"{t_names[k][0]} {t_names[k][1]}" for k in np.flatnonzero(dead)))
                raise ShapeError(msg, unmet)
            step, _, rank, _ = np.linalg.lstsq(J, -miss, rcond=None)
            if rank < min(J.shape):
                log.warning("shape: the sensitivity of the targets to the lengths has rank %d < %d; "
                            "some targets move together", rank, min(J.shape))
            # a full step asking for a length <= 0 again and again means the
            # targets need members that vanish
            negative = theta + step <= 0.0
            shrinking = shrinking + 1 if negative.any() else 0
            if shrinking >= 3:
                unmet, msg = _unmet_message(spec, reports(), tol, "they ask for an unstressed length <= 0 in "
                                            + ", ".join(labels[k] for k in np.flatnonzero(negative)[:6]))
                raise ShapeError(msg, unmet)
            # keep every length positive and the step inside the range where
            # the linearization is trusted: at most half of each factor
            ratio = float(np.max(np.abs(step) / theta, initial=0.0))
            if ratio > 0.5:
                step *= 0.5 / ratio
            # trust region on the target miss (first radius: the largest
            # miss): neither the predicted movement of the targets nor any
            # length change may exceed it.  The second bound matters at a
            # slack member, whose length barely moves anything until it is
            # taut, and then moves its node one for one
            if radius is None:
                radius = max(worst, tol)
            size = _trust_size(J, step, group_length)
            if size > radius:
                step *= radius / size
        old = float(np.linalg.norm(miss))
        for attempt in range(10):
            trial = theta + step
            try:
                trial_model = build(X, trial, result.state.rotations)
                trial_result = equilibrium(trial_model)
            except (ShapeError, MechanismError) as exc:
                if attempt == 9 or not step.any():
                    unmet, msg = _unmet_message(spec, reports(), tol, f"equilibrium lost while adjusting: {exc}")
                    raise ShapeError(msg, unmet) from None
                step *= 0.25
                if radius is not None:
                    radius *= 0.25
                continue
            if J is None or not step.any():
                break
            new_miss = trial_model.to_site(trial_result.state.positions)[t_nodes, t_axes] - t_values
            new = float(np.linalg.norm(new_miss))
            # accept a step that lowers the miss; otherwise shrink the region
            if new < old or attempt == 9 or new <= tol:
                predicted_miss = float(np.linalg.norm(miss + J @ step))
                gain = (old - new) / max(old - predicted_miss, 1e-300)
                size = _trust_size(J, step, group_length)
                if gain > 0.75:
                    radius = max(radius, 2.0 * size)
                elif gain < 0.25:
                    radius = 0.5 * size
                break
            log.info("shape: step rejected (miss %.3e -> %.3e m): trust region shrunk", old, new)
            step *= 0.25
            radius = _trust_size(J, step, group_length)
        theta, model, result = trial, trial_model, trial_result
        X = model.to_site(result.state.positions)
    # out of iterations: the loop only ends here when the targets were not met
    _, msg = _unmet_message(spec, reports(), tol, f"no convergence in {shape.max_iterations} iterations")
    raise ShapeError(msg, [r for r in reports() if abs(r.miss) > tol])


def _trust_size(J, step, group_length) -> float:
    """Size of a step for the trust region, m: the largest predicted target
    movement or length change."""
    return max(float(np.max(np.abs(J @ step), initial=0.0)),
               float(np.max(np.abs(step) * group_length, initial=0.0)))


def _short(exc, n=120) -> str:
    text = str(exc)
    return text if len(text) <= n else text[:n - 1] + "…"


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
            arc = catenary.stretched_length(r.H, r.V, L0e, loads.weight[f], p["EA"])
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
