"""Nonlinear static analysis of one load combination.

Residual at the unknowns, for load factor λ in [0, 1]:

    r(u, λ) = f_int(u; λ) - λ f_ext - (1 - λ) f_int(u0; 0)

``f_int(u; λ)`` carries the element loads scaled by λ (catenary weight,
thermal strain); the prescribed support movements are λ times their values.
The last term removes the out-of-balance of the starting geometry together
with the applied load, so a model whose coordinates are an equilibrium shape
starts in equilibrium and never passes through an unloaded, slack state.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from ..assembly import Assembler, Evaluation, State, initial_state
from ..errors import MechanismError
from ..model import LoadVectors, Model
from . import linear
from .arclength import follow_arc_length
from .newton import NewtonSettings, PathOutcome, follow_load_path

log = logging.getLogger(__name__)


def _expm_so3(theta: np.ndarray) -> np.ndarray:
    from ..elements.beam import expm_so3
    return expm_so3(theta)


class StaticProblem:
    """Residual/tangent pair of one combination for the Newton driver."""

    def __init__(self, model: Model, loads: LoadVectors, assembler: Assembler | None = None,
                 linear_solver: str | linear.LinearSolver = "auto"):
        self.model = model
        self.loads = loads
        self.assembler = assembler or Assembler(model)
        self.assembler.forget()   # warm starts of another load path are no guess for this one
        self.free = self.assembler.free
        if isinstance(linear_solver, linear.LinearSolver):
            # shared between the combinations of a model: the ordering and
            # symbolic analysis of the (unchanged) pattern are reused
            self.solver = linear_solver
        else:
            self.solver = linear.make_linear_solver(linear_solver, symmetric=not model.has_rotations)
        self._start = initial_state(model)
        self._r0 = self.assembler.evaluate(self._start, loads, 0.0, want_tangent=False).internal
        self._pres = np.flatnonzero(loads.prescribed != 0.0)
        # (node, direction) of each prescribed DOF, found once
        owner = np.empty((model.ndof, 2), dtype=np.int64)
        owner[model.dof[model.dof >= 0]] = np.argwhere(model.dof >= 0)
        self._pres_owner = owner[self._pres]
        self._roundoff = None
        # the last factorisation and the tangent values it was made of: the
        # stability count and the arc-length predictor reuse it
        self._factorized = None
        # nodes whose displacements every converged step records
        self.track = np.array([model.node_index[n] for n in model.spec.analysis.track], dtype=np.int64)

    # -- the problem interface -------------------------------------------------
    def initial_state(self) -> State:
        return self._start

    def impose(self, state: State, lam_from: float, lam_to: float) -> State:
        if not self._pres.size:
            return state
        pos = state.positions.copy()
        rot = None if state.rotations is None else state.rotations.copy()
        n, d = self._pres_owner.T
        value = self.loads.prescribed[self._pres]
        move = d < 3
        pos[n[move], d[move]] = self.model.coordinates[n[move], d[move]] + lam_to * value[move]
        spin = {}
        for node, direction, v in zip(n[~move], d[~move], value[~move]):
            spin.setdefault(node, np.zeros(3))[direction - 3] = v
        # one rotation per node about the prescribed vector's fixed axis: the
        # steps commute, so the total is expm(prescribed rotation vector)
        # whatever the increments, also when several components are given
        for n, theta in spin.items():
            rot[n] = _expm_so3((lam_to - lam_from) * theta[None])[0] @ rot[n]
        return State(pos, rot)

    def out_of_balance(self, ev: Evaluation, lam: float) -> np.ndarray:
        """f_int - λ f_ext - (1 - λ) f_int(u0; 0) over all DOFs."""
        return ev.internal - lam * self.loads.nodal - (1.0 - lam) * self._r0

    @property
    def roundoff(self) -> float:
        """Force (N) below which the residual is round-off noise.

        An axial force is computed as k (L - L0) with L of the size of the
        model's coordinates, so its absolute error is about eps k x_max for
        the stiffest element k; 64 such errors are allowed to accumulate at a
        DOF.
        """
        if self._roundoff is None:
            k = 0.0
            for f, t in self.model.families.items():
                if len(t):
                    EA = t.props["EA"] if "EA" in t.props else t.props["E"] * t.props["A"]
                    k = max(k, float(np.max(EA / t.props["unstressed_length"])))
            extent = float(np.max(np.abs(self.model.coordinates))) if self.model.coordinates.size else 0.0
            extent = max(extent, float(np.ptp(self.model.coordinates, axis=0).max()) if len(self.model.coordinates) else 0.0)
            self._roundoff = 64.0 * np.finfo(float).eps * k * extent
        return self._roundoff

    def evaluate(self, state: State, lam: float, want_tangent: bool = True):
        ev = self.assembler.evaluate(state, self.loads, lam, want_tangent)
        r = self.out_of_balance(ev, lam)[self.free]
        applied = lam * self.loads.nodal + (1.0 - lam) * self._r0
        ref = max(float(np.linalg.norm(applied[self.free])), float(np.linalg.norm(ev.magnitude[self.free])),
                  np.finfo(float).tiny)
        return r, ref, ev.tangent

    def advance(self, state: State, du: np.ndarray) -> State:
        dof = self.model.dof
        g = np.zeros(self.model.ndof)
        g[self.free] = du
        full = np.where(dof >= 0, g[np.maximum(dof, 0)], 0.0)   # (nn, 6)
        pos = state.positions + full[:, :3]
        rot = state.rotations
        if rot is not None:
            rot = np.einsum("nij,njk->nik", _expm_so3(full[:, 3:]), rot)
        return State(pos, rot)

    def commit(self, state: State) -> None:
        self.assembler.remember(self.assembler.element_responses(state, self.loads, 1.0, False))

    def _factorize(self, K) -> linear.Factorization:
        """The factorisation of ``K``, made once for the same tangent values."""
        last = self._factorized
        if last is not None and last[0].shape == K.data.shape and np.array_equal(last[1], K.indices) \
                and np.array_equal(last[0], K.data) and np.array_equal(last[2], K.indptr):
            return last[3]
        self._factorized = None
        fact = self.solver.factorize(K)
        self._factorized = (K.data.copy(), K.indices.copy(), K.indptr.copy(), fact)
        return fact

    def solve_linear(self, K, r):
        if K.shape[0] == 0:
            return np.zeros(0)
        try:
            return self._factorize(K).solve(r)
        except linear.SingularMatrixError as exc:
            eqs = getattr(exc, "equations", None)
            if eqs is None or len(eqs) == 0:
                eqs = linear.find_unrestrained(K)
            raise MechanismError([self.model.describe_dof(int(self.free[e])) for e in eqs]) from None

    def inertia(self, K, factorized_only: bool = False):
        """Eigenvalue sign counts ``(positive, negative, zero)`` of the tangent.

        Of its symmetric part for beam models (spin variables make the
        tangent unsymmetric away from equilibrium; at an equilibrium the
        symmetric part is the second variation of the energy).  Read from
        the pivots of the factorisation already made of this ``K`` when
        there is one, else one more factorisation (see
        :meth:`cablefe.solvers.linear.LinearSolver.inertia`).  None when it
        cannot be counted (a singular symmetric part: neutral stability),
        and with ``factorized_only`` when the count would need another
        factorisation (an unsymmetric iterate's tangent: the driver then
        uses its descent test).
        """
        if K.shape[0] == 0:
            return (0, 0, 0)
        last = self._factorized
        fact = last[3] if last is not None and last[0].shape == K.data.shape \
            and np.array_equal(last[0], K.data) else None
        try:
            if factorized_only:
                return None if fact is None else fact.inertia()
            if self.model.has_rotations:
                return self.solver.inertia(K, fact)
            return self.solver.inertia(K, self._factorize(K))
        except linear.SingularMatrixError:
            return None

    def observe(self, state: State, lam: float):
        """``(λ, node indices, (k, 3) displacements in m)`` of a converged step.

        The tracked nodes (``[analysis] track``) and the node of largest
        displacement at this step.
        """
        disp = state.positions - self.model.coordinates
        nodes = self.track
        if len(disp):
            biggest = int(np.argmax(np.einsum("ij,ij->i", disp, disp)))
            if biggest not in nodes:
                nodes = np.append(nodes, biggest)
        return float(lam), nodes, disp[nodes].copy()


@dataclass(frozen=True)
class StaticResult:
    """A solved combination (SI units).

    Attributes
    ----------
    name : combination or load case name
    outcome : PathOutcome of the Newton driver
    state : final (last converged) State
    reactions : (ndof,) support forces on the structure at restrained DOFs
    responses : family -> element response at the final state
    """

    name: str
    factors: Mapping[str, float]
    outcome: PathOutcome
    state: State
    reactions: np.ndarray
    responses: Mapping[str, object]

    @property
    def converged(self) -> bool:
        return self.outcome.converged


def solve_combination(model: Model, name: str, factors: Mapping[str, float],
                      settings: NewtonSettings | None = None,
                      linear_solver: str | linear.LinearSolver | None = None,
                      progress=None, assembler: Assembler | None = None,
                      control: str | None = None) -> StaticResult:
    """Solve one combination of load cases nonlinearly from the model's geometry.

    ``control`` ("load" or "arc-length") overrides ``[analysis] control``:
    form-finding solves its trial shapes by load control whatever the
    analysis asks for.

    ``assembler`` and a :class:`~cablefe.solvers.linear.LinearSolver` object
    as ``linear_solver`` may be passed to share their per-pattern work
    between the combinations of one model (see :func:`cablefe.analysis.solve`).
    """
    a = model.spec.analysis
    settings = settings or NewtonSettings(a.increments, a.tolerance, a.max_iterations, a.max_cuts)
    loads = model.combined_loads(factors)
    problem = StaticProblem(model, loads, assembler=assembler, linear_solver=linear_solver or a.solver)
    if (control or a.control) == "arc-length":
        # through limit points to λ = 1; only the final state is kept
        # spherical (ψ = 1): a shaped structure's displacements may stand
        # still while λ moves, which the cylinder cannot pass
        outcome = follow_arc_length(problem, settings, progress=progress, keep_states=False, load_weight=1.0)
        if outcome.status == "no-load":
            # nothing moves at the start (no load, a structure drawn in its
            # equilibrium): no arc length can be set, and no limit point is near
            log.info("%s: the load does not move the structure; load control instead of arc length", name)
            outcome = follow_load_path(problem, settings, progress)
    else:
        outcome = follow_load_path(problem, settings, progress)
    lam = outcome.load_factor
    ev = problem.assembler.evaluate(outcome.state, loads, lam, want_tangent=False)
    reactions = problem.out_of_balance(ev, lam)
    reactions[problem.free] = 0.0
    if not model.supported.all():
        reactions[~model.supported] = 0.0
    log.info("%s: %s", name, outcome.message)
    return StaticResult(name, dict(factors), outcome, outcome.state, reactions, ev.responses)
