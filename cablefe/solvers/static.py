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
import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from ..assembly import Assembler, Evaluation, State, initial_state
from ..errors import MechanismError
from ..model import LoadVectors, Model
from . import linear
from .arclength import follow_arc_length
from .newton import NewtonSettings, PathOutcome, follow_load_path

#: strain beyond which a member's strain is flagged as implausible (3 %:
#: common practice, far beyond the elastic range of structural steel and
#: of cable strand)
PLAUSIBLE_STRAIN = 0.03
#: displacement beyond which movements are flagged, as a fraction of the
#: model's size (common practice: a structure in service moves far less)
PLAUSIBLE_MOVEMENT = 0.1
#: a node's free DOFs are counted as a mechanism when the tangent's
#: diagonal there is below this fraction of the largest diagonal

log = logging.getLogger(__name__)


def _expm_so3(theta: np.ndarray) -> np.ndarray:
    from ..elements.beam.rotations import expm_so3
    return expm_so3(theta)


class StaticProblem:
    """Residual/tangent pair of one combination for the Newton driver."""

    def __init__(self, model: Model, loads: LoadVectors, assembler: Assembler | None = None,
                 linear_solver: str | linear.LinearSolver = "auto", start_out_of_balance: np.ndarray | None = None):
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
        # the last successful evaluation ``(state, λ, Evaluation)``: the
        # driver commits, and the result is built from, the state it last
        # evaluated, so those need no evaluation of their own
        self._last = None
        # the internal forces of the start at λ = 0, unless a subclass that
        # starts elsewhere gives its own out-of-balance
        self._r0 = (self.assembler.evaluate(self._start, loads, 0.0, want_tangent=False).internal
                    if start_out_of_balance is None else start_out_of_balance)
        self._pres = np.flatnonzero(loads.prescribed != 0.0)
        # (node, direction) of each prescribed DOF, found once
        owner = np.empty((model.ndof, 2), dtype=np.int64)
        owner[model.dof[model.dof >= 0]] = np.argwhere(model.dof >= 0)
        self._pres_owner = owner[self._pres]
        self._roundoff = None
        #: why the last failed evaluation failed (read by the Newton driver's message)
        self.failure_reason = ""
        self._solved = False        # a linear solve since the last commit
        self.krylov_iterations = 0  # conjugate gradient iterations of the inexact Newton steps
        self.last_increment_solved = False
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

    def _checked_evaluation(self, state: State, loads, factor: float, want_tangent: bool, lam: float):
        """The assembled evaluation, or None (with ``failure_reason`` set) when an
        element cannot be evaluated or a catenary's inner solve did not converge.

        ``factor`` multiplies ``loads`` in the assembly; ``lam`` is the load
        factor named in the message.
        """
        try:
            with np.errstate(all="ignore"):
                ev = self.assembler.evaluate(state, loads, factor, want_tangent)
        except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            self.failure_reason = f"an element could not be evaluated at load factor {lam:.4f}: {exc}"
            return None
        cab = ev.responses.get("cable")
        if cab is not None and not np.all(cab.converged):
            bad = np.flatnonzero(~cab.converged)
            mem = self.model.members[int(self.model.families["cable"].member[bad[0]])]
            self.failure_reason = (f"the catenary equations of {bad.size} cable element(s) (first in member "
                                   f'"{mem.id}") did not converge at load factor {lam:.4f}')
            return None
        self._last = (state, lam, ev)
        return ev

    def _assembly_loads(self, lam: float) -> tuple[LoadVectors, float]:
        """The loads and the factor on them that the assembly is given at load factor ``lam``."""
        return self.loads, lam

    def evaluation_at(self, state: State, lam: float) -> Evaluation:
        """Forces (no tangent needed) at ``state`` and load factor ``lam``.

        The last evaluation when it was of this very state (the same object)
        at this load factor, otherwise a new one.
        """
        last = self._last
        if last is not None and last[0] is state and last[1] == lam:
            return last[2]
        loads, factor = self._assembly_loads(lam)
        return self.assembler.evaluate(state, loads, factor, want_tangent=False)

    def evaluate(self, state: State, lam: float, want_tangent: bool = True):
        """Residual, force scale and tangent; a failed element makes the residual NaN.

        A catenary whose inner solve did not converge, or any element kernel
        that refuses the state (non-finite positions, a vanishing length)
        gives a NaN residual: the Newton driver counts that as a failed
        step (the line search shortens it, the increment is cut), never as
        a converged one.  ``failure_reason`` keeps the cause.
        """
        loads, factor = self._assembly_loads(lam)
        ev = self._checked_evaluation(state, loads, factor, want_tangent, lam)
        if ev is None:
            return np.full(len(self.free), np.nan), 1.0, None
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
        # warm starts for the next increment: the element responses of the
        # converged state, usually the driver's last evaluation
        last = self._last
        if last is not None and last[0] is state:
            responses = last[2].responses
        else:
            loads, factor = self._assembly_loads(1.0)
            responses = self.assembler.element_responses(state, loads, factor, False)
        self.assembler.remember(responses)
        self.last_increment_solved, self._solved = self._solved, False
        self.failure_reason = ""

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
        self._solved = True
        if K is None:   # the evaluation failed (see evaluate): a non-finite step fails too
            return np.full(len(self.free), np.nan)
        if K.shape[0] == 0:
            return np.zeros(0)
        try:
            return self._factorize(K).solve(r)
        except linear.SingularMatrixError as exc:
            eqs = getattr(exc, "equations", None)
            if eqs is None or len(eqs) == 0:
                eqs = linear.find_unrestrained(K)
            raise MechanismError([self.model.describe_dof(int(self.free[e])) for e in eqs]) from None

    def solve_again(self, r):
        """``K_last^-1 r`` with the last factorisation made, or None (modified Newton)."""
        last = self._factorized
        if last is None:
            return None
        try:
            return last[3].solve(r)
        except linear.SingularMatrixError:
            return None

    @property
    def symmetric_tangent(self) -> bool:
        """True when the tangent is symmetric (bars and cables; beam models'
        spin variables make it unsymmetric away from equilibrium)."""
        return self.solver.symmetric and not self.model.has_rotations

    def solve_krylov(self, K, r, rtol: float, maxiter: int):
        """``K^-1 r`` to the relative residual ``rtol`` by conjugate gradients
        preconditioned with the last factorisation (inexact Newton steps),
        or None: no factorisation yet, a tangent that is not symmetric, a
        direction of non-positive curvature, or no convergence within
        ``maxiter`` iterations (see :mod:`cablefe.solvers.linear.krylov`)."""
        last = self._factorized
        if last is None or K is None or not self.symmetric_tangent or K.shape[0] == 0:
            return None
        # no more back-substitutions than a third of a new factorisation
        # costs with this backend (PARDISO: one, so none are tried; SuperLU: ten)
        maxiter = min(maxiter, int(last[3].solves_per_factorisation / 3.0))
        if maxiter < 2:
            return None
        found = linear.preconditioned_cg(K, r, last[3].precondition, rtol, maxiter)
        self.krylov_iterations += found.iterations
        return found.x if found.converged else None

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
        if K is None:
            return None
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
    equilibrium : the equilibrium check at the final state (see
        :func:`equilibrium_check`), N
    notes : warnings found after the solve (model warnings, a mechanism
        hidden by a zero load, equilibrium, plausibility); ``warnings``
        gives them after the driver's own
    """

    name: str
    factors: Mapping[str, float]
    outcome: PathOutcome
    state: State
    reactions: np.ndarray
    responses: Mapping[str, object]
    equilibrium: Mapping[str, object] = field(default_factory=dict)
    notes: tuple = ()

    @property
    def converged(self) -> bool:
        return self.outcome.converged

    @property
    def warnings(self) -> tuple:
        """Every warning of the result: the driver's, then the later checks'."""
        return tuple(self.outcome.warnings) + tuple(self.notes)


def _length_failure(model: Model, loads: LoadVectors) -> str:
    """A sentence naming the first member whose stress-free length reaches 0 on the way to
    load factor 1 (thermal strain <= -1), or "".

    The stress-free length is ``L0 (1 + lam strain)``: it vanishes at ``lam = -1/strain``.
    """
    worst = (math.inf, None, 0.0)
    for f, t in model.families.items():
        strain = loads.strain[f]
        bad = np.flatnonzero(strain <= -1.0)
        if bad.size:
            k = bad[np.argmin(strain[bad])]
            lam = -1.0 / float(strain[k])
            if lam < worst[0]:
                worst = (lam, int(t.member[k]), float(strain[k]))
    lam, member, strain = worst
    if member is None:
        return ""
    mem = model.members[member]
    return (f'member "{mem.id}": the thermal strain {strain:.4g} (alpha x temperature change) makes its '
            f"stress-free length <= 0 at load factor {lam:.4g}; check the temperature and alpha")


def _unsolved(problem: StaticProblem, name: str, factors, status: str, message: str) -> StaticResult:
    """A failed result at the starting state (load factor 0): nothing was solved."""
    state = problem.initial_state()
    outcome = PathOutcome(state, False, 0.0, 0, 0.0, status, message)   # the start balances at 0
    ev = problem.assembler.evaluate(state, problem.loads, 0.0, want_tangent=False)
    reactions = _reactions(problem, ev, 0.0)
    return StaticResult(name, dict(factors), outcome, state, reactions, ev.responses,
                        equilibrium_check(problem, ev, reactions, 0.0),
                        tuple(problem.model.warnings))


def _reactions(problem: StaticProblem, ev: Evaluation, lam: float) -> np.ndarray:
    model = problem.model
    reactions = problem.out_of_balance(ev, lam)
    reactions[problem.free] = 0.0
    if not model.supported.all():
        reactions[~model.supported] = 0.0
    return reactions


def equilibrium_check(problem: StaticProblem, ev: Evaluation, reactions: np.ndarray, lam: float) -> dict:
    """Equilibrium of the state ``ev`` at load factor ``lam``, N (SI).

    Returns
    -------
    dict
        ``largest_unbalanced_force`` (N) the largest out-of-balance force at
        a free translational DOF, and ``unbalanced_at`` its ``[node,
        direction]``; ``largest_unbalanced_moment`` (N m) where nodes
        rotate; ``total_load`` (3,) N the sum of the applied loads (nodal,
        member and self-weight loads, the catenaries' weight included) at
        ``lam``; ``reactions_plus_loads`` (3,) N the sum of the support
        reactions plus ``total_load``, zero for a structure in equilibrium
        (statics of the free body of the whole structure); ``load_scale``
        (N) the sum of the magnitudes of the applied forces, against which
        the other values are judged.
    """
    model = problem.model
    loads = problem.loads
    nodal = lam * loads.nodal
    trans = model.dof[:, :3]
    has = trans >= 0
    total = np.array([nodal[trans[:, d][has[:, d]]].sum() for d in range(3)])
    scale = float(np.abs(nodal[trans[has]]).sum())
    t = model.families.get("cable")
    if t is not None and len(t):
        # the catenary carries its weight inside the element: w0 L0 per element
        W = lam * float(np.sum(loads.weight["cable"] * t.props["unstressed_length"]))
        total[2] -= W
        scale += abs(W)
    support = np.array([reactions[trans[:, d][has[:, d]]].sum() for d in range(3)])
    r = problem.out_of_balance(ev, lam)
    free = np.zeros(model.ndof, dtype=bool)
    free[problem.free] = True
    tr = np.zeros(model.ndof, dtype=bool)
    tr[trans[has]] = True
    out = {"largest_unbalanced_force": 0.0, "unbalanced_at": None}
    ft = np.flatnonzero(free & tr)
    if ft.size:
        k = int(ft[np.argmax(np.abs(r[ft]))])
        out = {"largest_unbalanced_force": float(abs(r[k])), "unbalanced_at": list(model.describe_dof(k))}
    fr = np.flatnonzero(free & ~tr)
    if fr.size:
        out["largest_unbalanced_moment"] = float(np.max(np.abs(r[fr])))
    out.update({"total_load": total.tolist(), "reactions_plus_loads": (support + total).tolist(),
                "load_scale": scale})
    return out


def _lost_load(problem: StaticProblem, ev: Evaluation, equilibrium: dict, reactions: np.ndarray,
               lam: float) -> str:
    """A warning when loads act where nothing carries them, or "".

    Summed over the whole structure, the reactions plus the applied loads
    equal minus the summed out-of-balance forces of the free DOFs (the
    element forces cancel in pairs; a catenary's own pair sums to its
    weight, counted in the loads).  What is left beyond that is load that
    reaches no member and no support: a load on a restrained node that is
    not a support.
    """
    model = problem.model
    trans = model.dof[:, :3]
    r = problem.out_of_balance(ev, lam)
    free = np.zeros(model.ndof, dtype=bool)
    free[problem.free] = True
    left = np.array(equilibrium["reactions_plus_loads"], dtype=float)
    for d in range(3):
        g = trans[:, d][trans[:, d] >= 0]
        left[d] += r[g][free[g]].sum()
    lost = float(np.linalg.norm(left))
    scale = equilibrium["load_scale"] + float(np.abs(reactions).sum())
    if lost <= 1e-9 * scale + problem.roundoff:
        return ""
    return (f"equilibrium check: {lost:.4g} N of the applied load reaches no member and no support "
            f"(applied loads {equilibrium['load_scale']:.4g} N in magnitude)")


def _element_axial(model: Model, responses) -> dict:
    """family -> (n,) largest |axial force| of each element, N (for plausibility checks)."""
    out = {}
    for f, r in responses.items():
        if f == "cable":
            out[f] = np.maximum(np.abs(r.max_tension), np.abs(r.min_tension))
        elif f == "bar":
            out[f] = np.abs(r.tension)
        elif f == "beam":
            out[f] = np.max(np.abs(r.local_end_forces[:, [0, 6]]), axis=1)
    return out


def _plausibility(model: Model, result_state: State, responses) -> list[str]:
    """Warnings for numbers an engineer would not expect (not errors)."""
    notes = []
    axial = _element_axial(model, responses)
    broken, strained = [], []
    for f, N in axial.items():
        t = model.families[f]
        p = t.props
        EA = p["EA"] if "EA" in p else p["E"] * p["A"]
        brk = p["breaking_load"]
        over = np.flatnonzero(np.isfinite(brk) & (N > brk))
        broken += [(float(N[k] / brk[k]), int(t.member[k])) for k in over]
        strain = N / EA
        big = np.flatnonzero(strain > PLAUSIBLE_STRAIN)
        strained += [(float(strain[k]), int(t.member[k])) for k in big]

    def names(pairs):
        best = {}
        for v, m in pairs:
            best[m] = max(v, best.get(m, 0.0))
        order = sorted(best, key=best.get, reverse=True)
        shown = ", ".join(f"{model.members[m].id} ({best[m]:.3g})" for m in order[:5])
        return shown + (f" and {len(order) - 5} more" if len(order) > 5 else "")
    if broken:
        notes.append(f"tension beyond the breaking load (ratio in brackets): {names(broken)}")
    if strained:
        notes.append(f"axial strain beyond {PLAUSIBLE_STRAIN:.0%} (strain in brackets): {names(strained)}; "
                     "far beyond the elastic range: check sections, units and loads")
    size = model.size
    if size > 0.0 and len(model.coordinates):
        move = np.linalg.norm(result_state.positions - model.coordinates, axis=1)
        k = int(np.argmax(move))
        if move[k] > PLAUSIBLE_MOVEMENT * size:
            notes.append(f"node {model.node_ids[k]} moves {move[k]:.4g} m, more than "
                         f"{PLAUSIBLE_MOVEMENT:.0%} of the model's size ({size:.4g} m): check supports, "
                         "sections and loads")
    return notes


def _hidden_mechanism(problem: StaticProblem, state: State, lam: float) -> str:
    """A warning when the converged state is a mechanism the driver never saw, or "".

    Newton converges without a linear solve when the start is already in
    equilibrium (a zero load): a slack net under no load then "converges"
    although its free nodes can move without resistance.  The tangent of
    such a state is factorised once here.
    """
    _, _, K = problem.evaluate(state, lam, True)
    if K is None or K.shape[0] == 0:
        return ""
    try:
        problem.solve_linear(K, np.zeros(K.shape[0]))
    except MechanismError as exc:
        return (f"the converged state is a mechanism ({exc}); it is in equilibrium only because the "
                "load on it is zero (or balanced): any load would move it without resistance")
    return ""


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

    A result that cannot be solved is returned marked not converged (its
    ``outcome.status`` says why), never raised: a stress-free length that
    vanishes on the way (status ``"invalid-length"``), a failed element
    evaluation, a mechanism, a spent work budget.
    """
    a = model.spec.analysis
    settings = settings or NewtonSettings(a.increments, a.tolerance, a.max_iterations, a.max_cuts,
                                          max_total_iterations=a.max_total_iterations,
                                          max_total_cuts=a.max_total_cuts)
    loads = model.combined_loads(factors)
    problem = StaticProblem(model, loads, assembler=assembler, linear_solver=linear_solver or a.solver)
    failure = _length_failure(model, loads)
    if failure:
        log.warning("%s: %s", name, failure)
        return _unsolved(problem, name, factors, "invalid-length", failure)
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
    ev = problem.evaluation_at(outcome.state, lam)
    reactions = _reactions(problem, ev, lam)
    equilibrium = equilibrium_check(problem, ev, reactions, lam)
    notes = list(model.warnings)
    if outcome.converged and not problem.last_increment_solved:
        hidden = _hidden_mechanism(problem, outcome.state, lam)
        if hidden:
            notes.append(hidden)
    lost = _lost_load(problem, ev, equilibrium, reactions, lam)
    if lost:
        notes.append(lost)
    notes += _plausibility(model, outcome.state, ev.responses)
    for w in notes[len(model.warnings):]:     # the model's own are the model's to report
        log.warning("%s: %s", name, w)
    log.info("%s: %s", name, outcome.message)
    return StaticResult(name, dict(factors), outcome, outcome.state, reactions, ev.responses,
                        equilibrium, tuple(notes))
