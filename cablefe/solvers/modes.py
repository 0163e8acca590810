"""Natural modes about a converged state, and the pedestrian comfort check.

The generalised eigenproblem ``K phi = omega² M phi`` is solved on the free
DOFs, with

* ``K`` the tangent stiffness at the converged ``about`` state: geometric
  stiffness included (so the frequencies follow the tension), slack members
  contributing nothing, each cable element its exact catenary tangent.  The
  catenary tangent condenses the cable's interior statically: the element
  has no inertia between its nodes, so a cable's own modes (the sagging
  string's) appear only when the cable is divided; see
  :data:`CABLE_DIVISION_NOTE`.  A beam tangent, unsymmetric away from
  equilibrium with spin rotations, is symmetrised (its skew part vanishes
  at equilibrium up to the residual).
* ``M`` the members' own weight / g plus the case's added masses
  (:func:`cablefe.assembly.assemble_mass`).

The lowest ``count`` modes are found by shift-invert Lanczos
(``scipy.sparse.linalg.eigsh``, ARPACK mode 3) with ``K - sigma M``
factorised once through cablefe's linear layer
(:mod:`cablefe.solvers.linear`), a slightly negative shift keeping it
positive definite for a stable structure.  Small problems (fewer unknowns
than ``count + 2``) are solved densely.
"""
from __future__ import annotations

import logging
import time
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..assembly import Assembler, assemble_mass
from ..dynamics import pedestrians as ped
from ..errors import CaseError
from ..model import Model
from . import linear

log = logging.getLogger(__name__)

GRAVITY = 9.80665   # m/s², standard gravity: the model's weights are forces

#: why and how finely cables must be divided for their own modes
CABLE_DIVISION_NOTE = (
    "Each cable element uses its exact catenary tangent, which condenses the cable's interior "
    "statically: the element has no inertia between its nodes, so the cable's own modes between "
    "its nodes are missed. Divide cables (divide = n) to resolve them: with elements linear "
    "between nodes the n-th mode of a cable divided into N elements is off by about "
    "(n pi / N)^2 / 24 (lumped mass: too low; consistent mass: too high), so N >= 7 n keeps the "
    "n-th cable mode within 1 %. Modes of the whole structure dominated by the deck need only as "
    "many cable nodes as hangers.")

KINDS = ("vertical", "lateral", "longitudinal", "torsional")
MASS_MATRICES = ("consistent", "lumped")

#: a mode whose eigenvalue is below this fraction of the largest diagonal
#: ratio K_ii / M_ii has (nearly) zero stiffness: a mechanism.  Real soft
#: modes sit far above it: the lowest mode of a cable of N elements with
#: tension T is about (T / EA) / N^2 of the ratio (1e-10 for T/EA = 1e-4,
#: N = 1000); a zero mode computes to round-off, ~1e-16 of it.
ZERO_STIFFNESS = 1e-12
#: largest accepted |Phi^T M Phi - I| of the computed, mass-normalised modes
ORTHOGONALITY_TOL = 1e-6


class ModesError(ValueError):
    """The modes cannot be computed (singular or unstable state, no mass)."""


@dataclass(frozen=True)
class Mode:
    """One natural mode (SI units).

    Attributes
    ----------
    number : 1 for the lowest
    frequency : Hz
    period : s
    generalised_mass : kg, phi^T M phi for the shape scaled to a largest
        nodal translation of 1
    effective_mass : (3,) kg in global x, y, z, (phi^T M r_d)² / phi^T M phi
    effective_mass_ratio : (3,) effective mass / mobile mass in x, y, z
    kind : "vertical" | "lateral" | "longitudinal" | "torsional"
    energy : kind -> share of the mode's kinetic energy (sums to 1)
    pedestrians : the comfort check, or None
    """

    number: int
    frequency: float
    period: float
    generalised_mass: float
    effective_mass: np.ndarray
    effective_mass_ratio: np.ndarray
    kind: str
    energy: Mapping[str, float]
    pedestrians: ped.ComfortCheck | None = None


@dataclass(frozen=True)
class ModesResult:
    """Modes about one converged state (SI units).

    Attributes
    ----------
    about : name of the result whose state was used
    modes : tuple of Mode, lowest first
    shapes : (k, nn, 6) mass-normalised shapes (m/√kg, rad/√kg), zero at
        restrained DOFs and missing rotations
    positions : (nn, 3) node positions at the ``about`` state, m
    total_mass : kg, members' own mass plus added masses
    own_mass : kg, members' own mass (from the element mass matrices)
    self_weight_mass : kg, the model's total self-weight / g (a check of own_mass)
    added_mass : kg
    mobile_mass : (3,) kg, mass moving with a rigid translation of the free
        DOFs in x, y, z (what the effective masses of all modes sum to)
    orthogonality : max |Phi^T M Phi - I| of the computed modes
    method : "shift-invert Lanczos" | "dense"
    shift : the shift sigma, rad²/s²
    solves : linear solves with the factorised shifted tangent
    seconds : wall time of the eigensolution, s
    factorization_seconds : time of the one factorisation, s
    axes : (2, 3) longitudinal and lateral unit vectors used for kinds
    mass_matrix : "consistent" | "lumped" (bars and cables)
    pedestrians : dict describing the comfort check (lane, area, n', constants) or None
    warnings : tuple of str
    """

    about: str
    modes: tuple[Mode, ...]
    shapes: np.ndarray
    positions: np.ndarray
    total_mass: float
    own_mass: float
    self_weight_mass: float
    added_mass: float
    mobile_mass: np.ndarray
    orthogonality: float
    method: str
    shift: float
    solves: int
    seconds: float
    factorization_seconds: float
    axes: np.ndarray
    mass_matrix: str
    pedestrians: Mapping | None = None
    warnings: tuple[str, ...] = field(default=())


# -- masses -------------------------------------------------------------------------

def added_masses(model: Model, masses) -> tuple[dict, np.ndarray]:
    """Per-element (family -> kg/m) and per-node (kg) added masses of ``[modes] masses``."""
    per_length = {f: np.zeros(len(t)) for f, t in model.families.items()}
    node_mass = np.zeros(len(model.node_ids))
    for k, item in enumerate(masses):
        key = item.key or f"modes.masses[{k}]"
        if item.node is not None:
            if item.node not in model.node_index:
                raise CaseError(f"{key}.node", f'no node named "{item.node}"')
            node_mass[model.node_index[item.node]] += item.mass
            continue
        hit = model.member_ids_matching(item.members)
        if not hit:
            raise CaseError(f"{key}.members", f"no member matches {list(item.members)}")
        for m in hit:
            mi = model.members[m]
            per_length[mi.family][mi.elements] += item.per_length
    return per_length, node_mass


def _lumped_node_mass(model: Model, per_length: dict, node_mass: np.ndarray) -> np.ndarray:
    """(nn,) half of each element's mass on each end node, plus node masses, kg."""
    out = node_mass.copy()
    for f, t in model.families.items():
        if len(t):
            m = (t.props["weight"] / GRAVITY + per_length[f]) * t.props["unstressed_length"]
            out += np.bincount(t.nodes.ravel(), weights=np.repeat(0.5 * m, 2), minlength=len(out))
    return out


# -- the eigenproblem ---------------------------------------------------------------

def tangent_at(model: Model, result):
    """Symmetrised tangent stiffness of the free DOFs at a converged result's state.

    Returns
    -------
    K : csr_matrix (nfree, nfree), N/m (N, N m/rad on rotations)
    responses : family -> element response at the state (beam frames for the mass)
    """
    assembler = Assembler(model)
    assembler.remember(result.responses)   # the catenary end forces of the state as warm start
    loads = model.combined_loads(result.factors)
    ev = assembler.evaluate(result.state, loads, result.outcome.load_factor, want_tangent=True)
    K = ev.tangent
    skew = abs(K - K.T)
    scale = abs(K).max() if K.nnz else 1.0
    if skew.nnz and skew.max() > 1e-8 * scale:
        log.info("modes: tangent asymmetry %.1e (relative) symmetrised", skew.max() / scale)
    return ((K + K.T) * 0.5).tocsr(), ev.responses


def lowest_modes(K: sp.spmatrix, M: sp.spmatrix, count: int, solver: str | linear.LinearSolver = "auto",
                 shift: float | None = None):
    """Lowest ``count`` eigenpairs of ``K phi = lam M phi`` (both symmetric).

    Returns
    -------
    lam : (k,) eigenvalues, rad²/s², ascending
    phi : (n, k) M-orthonormal eigenvectors
    info : dict with ``method``, ``shift``, ``solves``, ``factorization_seconds``
    """
    n = K.shape[0]
    info = {"method": "dense", "shift": 0.0, "solves": 0, "factorization_seconds": 0.0}
    diagK, diagM = K.diagonal(), M.diagonal()
    ratio = diagK[(diagK > 0) & (diagM > 0)] / diagM[(diagK > 0) & (diagM > 0)]
    scale = float(np.median(ratio)) if ratio.size else 1.0
    info["scale"] = scale
    info["largest_ratio"] = float(ratio.max()) if ratio.size else 1.0
    if count + 2 > n:
        lam, phi = sla.eigh(K.toarray(), M.toarray())
        return lam[:count], phi[:, :count], info
    sigma = -1e-6 * scale if shift is None else float(shift)
    if not isinstance(solver, linear.LinearSolver):
        solver = linear.make_linear_solver(solver, symmetric=True)
    t0 = time.perf_counter()
    try:
        fact = solver.factorize((K - sigma * M).tocsr())
    except linear.SingularMatrixError as exc:
        raise _Singular(getattr(exc, "equations", ()) or (), str(exc)) from None
    info["factorization_seconds"] = time.perf_counter() - t0
    calls = [0]

    def solve(x):
        calls[0] += 1
        return fact.solve(np.asarray(x, dtype=float).ravel())

    op = spla.LinearOperator((n, n), matvec=solve, dtype=float)
    v0 = np.random.default_rng(20261204).standard_normal(n)   # reproducible runs
    with _single_threaded_blas():
        lam, phi = spla.eigsh(K, k=count, M=M, sigma=sigma, which="LM", OPinv=op, v0=v0,
                              ncv=min(n, max(2 * count + 1, 20)))
    order = np.argsort(lam)
    info.update(method="shift-invert Lanczos", shift=sigma, solves=calls[0])
    return lam[order], phi[:, order], info


def _single_threaded_blas():
    """OpenBLAS on one thread for ARPACK's loop.

    ARPACK's work between solves is matrix-vector products of n x ncv
    blocks, far too small to share between threads; with 2 threads on a
    busy 2-core machine the spinning threads made it 6x slower (measured,
    benchmarks/README.md).  MKL (PARDISO's solves) keeps its threads.
    """
    from threadpoolctl import threadpool_info, threadpool_limits
    prefixes = {i["prefix"] for i in threadpool_info() if i.get("internal_api") == "openblas"}
    return threadpool_limits(limits={p: 1 for p in prefixes})


class _Singular(Exception):
    def __init__(self, equations, message):
        super().__init__(message)
        self.equations = np.asarray(equations, dtype=np.int64)


# -- classification -----------------------------------------------------------------

def structure_axes(coords: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """(2, 3) longitudinal and lateral horizontal unit vectors: the principal
    horizontal direction of the points (x when they have no extent)."""
    xy = coords[:, :2]
    w = np.ones(len(xy)) if weights is None else weights
    if len(xy) < 2 or w.sum() <= 0:
        return np.array([[1.0, 0, 0], [0, 1.0, 0]])
    c = xy - np.average(xy, axis=0, weights=w)
    cov = (c * w[:, None]).T @ c
    vals, vecs = np.linalg.eigh(cov)
    e = vecs[:, -1]
    if vals[-1] <= 0:
        e = np.array([1.0, 0.0])
    if abs(e[0]) >= abs(e[1]):   # a stable sign: pointing to +x (or +y)
        e = e * np.sign(e[0])
    else:
        e = e * np.sign(e[1])
    return np.array([[e[0], e[1], 0.0], [-e[1], e[0], 0.0]])


def kinetic_shares(shape: np.ndarray, node_mass: np.ndarray, coords: np.ndarray, axes: np.ndarray,
                   bins: int = 100, rotational: np.ndarray | None = None) -> dict[str, float]:
    """Share of a mode's kinetic energy by kind, from lumped nodal masses.

    Longitudinal and lateral: the horizontal motion along and across the
    longitudinal axis.  Vertical motion is split along the axis into
    stations (``bins`` equal slices of the length): at each station the
    energy of the mean (mass-weighted) vertical motion is heave
    ("vertical"), the rest, nodes of one station moving against each
    other, is twist ("torsional").  ``rotational`` (nn,) is the kinetic
    energy of each node's rotations (beams' rotary and torsional inertia);
    it goes to the kind of the axis the node turns about: the longitudinal
    axis (torsional), the lateral axis (vertical bending), the vertical
    axis (lateral bending).
    """
    u = shape[:, :3]
    along = u @ axes[0]
    across = u @ axes[1]
    up = u[:, 2]
    e_long = float(np.sum(node_mass * along**2))
    e_lat = float(np.sum(node_mass * across**2))
    s = coords @ axes[0]
    span = np.ptp(s) if len(s) else 0.0
    station = np.zeros(len(s), dtype=np.int64) if span <= 0 else \
        np.minimum(((s - s.min()) / span * bins).astype(np.int64), bins - 1)
    m_st = np.bincount(station, weights=node_mass, minlength=bins)
    mu_st = np.bincount(station, weights=node_mass * up, minlength=bins)
    heave = float(np.sum(np.divide(mu_st**2, m_st, out=np.zeros(bins), where=m_st > 0)))
    e_up = float(np.sum(node_mass * up**2))
    twist = max(e_up - heave, 0.0)
    total = e_long + e_lat + e_up
    if rotational is not None and np.any(rotational > 0):
        theta = shape[:, 3:]
        parts = np.stack([(theta @ axes[0]) ** 2, (theta @ axes[1]) ** 2, theta[:, 2] ** 2], axis=1)
        norm = parts.sum(axis=1)
        share = np.divide(parts, norm[:, None], out=np.zeros_like(parts), where=norm[:, None] > 0)
        turn = (rotational[:, None] * share).sum(axis=0)
        twist += turn[0]
        heave += turn[1]
        e_lat += turn[2]
        total += float(turn.sum())
    if total <= 0:
        return {k: 0.0 for k in KINDS}
    return {"vertical": heave / total, "lateral": e_lat / total, "longitudinal": e_long / total,
            "torsional": twist / total}


# -- the analysis -------------------------------------------------------------------

def compute_modes(model: Model, result, spec, linear_solver: str | None = None) -> ModesResult:
    """Natural modes about a converged result, with the comfort check when configured.

    Parameters
    ----------
    model : Model
    result : StaticResult, converged
    spec : :class:`cablefe.spec.ModesSpec`
    linear_solver : backend name overriding ``[analysis] solver``

    Raises
    ------
    ModesError
        Singular (mechanism) or unstable state, or a structure without mass.
    CaseError
        Added masses or a lane naming missing nodes or members.
    """
    t0 = time.perf_counter()
    warnings: list[str] = []
    per_length, node_mass = added_masses(model, spec.masses)
    K, responses = tangent_at(model, result)
    frames = responses["beam"].frame if "beam" in responses else None
    lumped = spec.mass_matrix == "lumped"
    M_all = assemble_mass(model, lumped, per_length, node_mass, frames, GRAVITY)
    free = model.free
    M = M_all[free][:, free].tocsr()
    own_all = assemble_mass(model, lumped, None, None, frames, GRAVITY)
    translation = model.dof[:, :3]
    ones = np.zeros(model.ndof)
    ones[translation[:, 2]] = 1.0
    own_mass = float(ones @ (own_all @ ones))
    total_mass = float(ones @ (M_all @ ones))
    self_weight_mass = model.self_weight() / GRAVITY
    if total_mass <= 0.0 or M.nnz == 0:
        raise ModesError("the structure has no mass: give the sections a weight or density, "
                         "or add masses in [modes] masses")
    if abs(own_mass - self_weight_mass) > 1e-9 * max(self_weight_mass, 1.0):
        warnings.append(f"members' mass {own_mass:.6g} kg differs from self-weight / g "
                        f"{self_weight_mass:.6g} kg")
    # influence vectors of rigid translations over the free DOFs
    R = np.zeros((len(free), 3))
    eq = -np.ones(model.ndof, dtype=np.int64)
    eq[free] = np.arange(len(free))
    for d in range(3):
        hit = eq[translation[:, d]]
        R[hit[hit >= 0], d] = 1.0
    MR = M @ R
    mobile = np.einsum("nd,nd->d", R, MR)
    count = min(spec.count, len(free))
    if count < spec.count:
        warnings.append(f"only {len(free)} free DOFs: {count} modes instead of {spec.count}")
    try:
        lam, phi, info = lowest_modes(K, M, count, linear_solver or model.spec.analysis.solver)
    except _Singular as exc:
        eqs = exc.equations[:12]
        where = ", ".join(f"{n} {d}" for n, d in (model.describe_dof(int(free[e])) for e in eqs))
        raise ModesError(f'the tangent at "{result.name}" is singular (a mechanism'
                         + (f": {where}" if where else "") + "); restrain it or check slack members") from None
    scale = info["largest_ratio"]
    if lam[0] < ZERO_STIFFNESS * scale:
        v = np.abs(phi[:, 0])
        worst = np.argsort(v)[::-1][:6]
        where = ", ".join(f"{n} {d}" for n, d in (model.describe_dof(int(free[e])) for e in worst))
        what = ("negative stiffness: the state is unstable" if lam[0] < -ZERO_STIFFNESS * scale
                else "(nearly) zero stiffness: a mechanism, e.g. a node held only by slack members")
        raise ModesError(f'the tangent at "{result.name}" has a mode of {what} '
                         f"(eigenvalue {lam[0]:.3g} rad²/s²) moving {where}; no modes were computed")
    # mass-normalise and check orthogonality
    gm = np.einsum("ik,ik->k", phi, M @ phi)
    phi = phi / np.sqrt(gm)[None, :]
    G = phi.T @ (M @ phi)
    ortho = float(np.max(np.abs(G - np.eye(len(lam))))) if len(lam) else 0.0
    if ortho > ORTHOGONALITY_TOL:
        warnings.append(f"computed modes are not mass-orthogonal to {ORTHOGONALITY_TOL:g} "
                        f"(max |Phi^T M Phi - I| = {ortho:.1e})")
    # full-size shapes
    shapes = np.zeros((len(lam), len(model.node_ids), 6))
    g = np.zeros((model.ndof, len(lam)))
    g[free] = phi
    have = model.dof >= 0
    for k in range(len(lam)):
        shapes[k][have] = g[model.dof[have], k]
    nodal = _lumped_node_mass(model, per_length, node_mass)
    spin = None
    if model.has_rotations:
        # kinetic energy of each node's rotations: phi_i (M phi)_i summed over its rotation DOFs
        energy = np.zeros((model.ndof, len(lam)))
        energy[free] = phi * (M @ phi)
        rot = np.where(model.dof[:, 3:] >= 0, model.dof[:, 3:], 0)
        spin = (energy[rot] * (model.dof[:, 3:, None] >= 0)).sum(axis=1).T   # (k, nn)
    coords = result.state.positions
    pedestrian_info = None
    lane = None
    if spec.pedestrians is not None:
        lane = _lane(model, spec.pedestrians, coords)
        axes = structure_axes(coords[lane["nodes"]])
        values = ped.constants(spec.pedestrians.constants)
        p = spec.pedestrians
        area = p.width * lane["length"]
        pedestrian_info = {"lane": list(p.lane), "width": p.width, "density": p.density,
                           "damping": p.damping, "lane_length": lane["length"], "area": area,
                           "pedestrians": area * p.density,
                           "equivalent_pedestrians": ped.equivalent_pedestrians(area, p.density,
                                                                                p.damping, values),
                           "constants": values, "overridden": sorted(p.constants)}
    else:
        axes = structure_axes(coords, nodal)
    modes = []
    participation = phi.T @ MR      # (k, 3); phi^T M phi = 1
    for k in range(len(lam)):
        omega = np.sqrt(max(lam[k], 0.0))
        f = omega / (2.0 * np.pi)
        peak = float(np.max(np.linalg.norm(shapes[k][:, :3], axis=1)))
        eff = participation[k] ** 2
        ratio = np.divide(eff, mobile, out=np.zeros(3), where=mobile > 0)
        shares = kinetic_shares(shapes[k], nodal, coords, axes, rotational=None if spin is None else spin[k])
        kind = max(KINDS, key=lambda name: shares[name])
        check = None
        if spec.pedestrians is not None:
            check = _comfort(shapes[k], f, kind, lane, axes, spec.pedestrians, pedestrian_info, values)
        modes.append(Mode(k + 1, f, 1.0 / f if f > 0 else float("inf"),
                          1.0 / peak**2 if peak > 0 else float("inf"), eff, ratio, kind, shares, check))
    seconds = time.perf_counter() - t0
    for w in warnings:
        log.warning("modes: %s", w)
    return ModesResult(result.name, tuple(modes), shapes, coords.copy(), total_mass, own_mass,
                       self_weight_mass, total_mass - own_mass, mobile, ortho, info["method"],
                       info["shift"], info["solves"], seconds, info["factorization_seconds"], axes,
                       spec.mass_matrix, pedestrian_info, tuple(warnings))


def _lane(model: Model, p, coords) -> dict:
    """Elements walked on: node pairs, lengths at the about state (m), and all their nodes."""
    hit = model.member_ids_matching(p.lane)
    if not hit:
        raise CaseError(f"{p.key}.lane", f"no member matches {list(p.lane)}")
    pairs = []
    for m in hit:
        mi = model.members[m]
        pairs.append(model.families[mi.family].nodes[mi.elements])
    pairs = np.concatenate(pairs)
    lengths = np.linalg.norm(coords[pairs[:, 1]] - coords[pairs[:, 0]], axis=1)
    return {"pairs": pairs, "lengths": lengths, "length": float(lengths.sum()),
            "nodes": np.unique(pairs.ravel())}


def _comfort(shape, frequency, kind, lane, axes, p, info, values) -> ped.ComfortCheck:
    direction = ped.DIRECTION_OF_KIND[kind]
    e = {"vertical": np.array([0.0, 0.0, 1.0]), "longitudinal": axes[0], "lateral": axes[1]}[direction]
    u = shape[:, :3] @ e
    a, b = u[lane["pairs"][:, 0]], u[lane["pairs"][:, 1]]
    integral = ped.lane_integral(a, b, lane["lengths"])
    peak = float(np.max(np.abs(u[lane["nodes"]])))
    return ped.check_mode(frequency, kind, integral, peak, info["area"], p.width, p.density, p.damping,
                          values)
