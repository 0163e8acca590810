"""Nonlinear solves that start from a converged base state.

Every solve of a study is the base combination plus something: a live
load on the lane (patch, sweep) or errors of the unstressed lengths
(tolerance).  Residual, for load factor λ from 0 to 1:

    r(u, λ) = f_int(u; E_base + λ E_add) - f_base - λ f_add - (1 - λ) r0

with ``E`` the loads carried inside elements (catenary weight, thermal
strain), ``f`` nodal loads and ``r0`` the out-of-balance of the base state
in the (possibly modified) model, so the path starts in equilibrium at the
base state and ends in the equilibrium of base plus addition.

A :class:`StudyContext` is the picklable description of a study's solves
(the case, the base state, what to record); a :class:`Session` is what a
worker builds from it once and reuses for all its tasks: the model, the
sparsity pattern and the linear solver with its ordering.  Each task starts
from the same warm starts, so its result does not depend on which worker
ran it, nor on the tasks it ran before.
"""
from __future__ import annotations

import logging
import threading
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..assembly import Assembler, State
from ..model import LoadVectors, Model, build_model
from ..results import element_end_tensions
from ..solvers import linear
from ..solvers.newton import NewtonSettings, follow_load_path
from ..solvers.static import StaticProblem
from ..spec import CaseSpec

log = logging.getLogger(__name__)

#: load increments of a study solve (cut when needed): the additions are
#: small next to the permanent state they start from
STUDY_INCREMENTS = 1
#: the base tangent's factorization is reused for the Newton steps
#: (modified Newton: one back-substitution instead of a factorization per
#: step) while each step reduces the residual norm at least this much ...
CONTRACTION = 0.5
#: ... and for at most this many steps; then full Newton takes over
MODIFIED_STEPS = 8
#: a study solve first tries plain Newton steps (no line search) for at
#: most this many iterations, in one increment; only when that fails does
#: the load path of the analysis settings (energy line search, increment
#: cuts) start again from the base state.  Measured on the suspension
#: footbridge of bench_studies.py (patch load twice the permanent load per
#: hanger): the energy line search accepts a first step that raises the
#: residual 40-fold and then crawls in part steps (6-16 iterations per
#: position), where plain Newton converges in 5-6.  Both attempts start
#: from the base state, so a task's result does not depend on the worker.
PLAIN_ITERATIONS = 12


class FromBaseProblem(StaticProblem):
    """The problem interface of :mod:`cablefe.solvers.newton` for base + addition.

    Parameters
    ----------
    session : Session
    added : LoadVectors added to the base loads (zero for tolerance solves)
    model : Model, optional
        A model with other unstressed lengths (same pattern); default the
        session's model.
    """

    def __init__(self, session: "Session", added: LoadVectors, model: Model | None = None):
        assembler = session.assembler
        if model is not None:
            # same pattern, other unstressed lengths: share the pattern arrays
            assembler = Assembler.__new__(Assembler)
            assembler.__dict__.update(session.assembler.__dict__)
            assembler.model = model
            assembler._guess = {}
        own = model is None or model is session.model
        model = model or session.model
        # StaticProblem's own set-up (attributes its methods and the driver
        # read), with the start at the base state: its out-of-balance in the
        # session's model is the session's, found once
        r0 = session.base_out_of_balance if own else np.zeros(model.ndof)
        super().__init__(model, session.base_loads + added, assembler, session.solver, start_out_of_balance=r0)
        self.base = session.base_loads
        self.added = added
        self._start = session.base_state
        self.assembler.remember(session.base_responses)
        if not own:
            # other unstressed lengths: the base state is out of balance
            ev = self.assembler.evaluate(self._start, self.base, 1.0, want_tangent=False)
            self._r0 = ev.internal - self.base.nodal
        # modified Newton with the base factorization, while it converges fast
        self._base_factor = session.base_factor if model is session.model else None
        self._previous = None
        self._steps = 0
        self._at = None

    def _loads_at(self, lam: float) -> LoadVectors:
        return self.base + self.added.scaled(lam)

    def _assembly_loads(self, lam: float) -> tuple[LoadVectors, float]:
        return self._loads_at(lam), 1.0

    def impose(self, state: State, lam_from: float, lam_to: float) -> State:
        return state   # support movements are those of the base state

    def out_of_balance(self, ev, lam: float) -> np.ndarray:
        return ev.internal - self.base.nodal - lam * self.added.nodal - (1.0 - lam) * self._r0

    def evaluate(self, state: State, lam: float, want_tangent: bool = True):
        """As :meth:`StaticProblem.evaluate` (a failed element gives a NaN
        residual and ``failure_reason``), at base + λ addition; while the
        base factorization serves, the tangent is only built when needed."""
        build = want_tangent and self._base_factor is None
        self._at = None
        ev = self._checked_evaluation(state, *self._assembly_loads(lam), build, lam)
        if ev is None:
            return np.full(len(self.free), np.nan), 1.0, None
        self._at = (state, lam)
        r = self.out_of_balance(ev, lam)[self.free]
        applied = self.base.nodal + lam * self.added.nodal + (1.0 - lam) * self._r0
        ref = max(float(np.linalg.norm(applied[self.free])), float(np.linalg.norm(ev.magnitude[self.free])),
                  np.finfo(float).tiny)
        return r, ref, ev.tangent

    def solve_linear(self, K, r):
        if K is None and self._at is None:      # the evaluation failed: so does the step
            return super().solve_linear(None, r)
        if self._base_factor is not None:
            size = float(np.linalg.norm(r))
            if self._steps < MODIFIED_STEPS and (self._previous is None or size < CONTRACTION * self._previous):
                self._previous = size
                self._steps += 1
                self._solved = True
                return self._base_factor.solve(r)
            self._base_factor = None     # slow: full Newton from here on
        if K is None:
            state, lam = self._at
            K = self.assembler.evaluate(state, *self._assembly_loads(lam), True).tangent
        return super().solve_linear(K, r)


def member_extremes(model: Model, responses, beam_loads: np.ndarray | None):
    """Largest and smallest axial force (N) and slack flag of every member.

    As :func:`cablefe.results.member_forces`, with the beams' member loads
    ``beam_loads`` (n_beam, 12) subtracted from their end forces.
    """
    per = element_end_tensions(model, responses)
    if "beam" in per and beam_loads is not None and np.any(beam_loads):
        r = responses["beam"]
        n = len(r.force)
        acting = r.force - beam_loads
        loc = np.einsum("nki,nbk->nbi", r.frame, acting.reshape(n, 4, 3)).reshape(n, 12)
        ends = np.stack([-loc[:, 0], loc[:, 6]], axis=1)
        per["beam"] = (ends, ends.max(axis=1), ends.min(axis=1), np.zeros(n, bool))
    nm = len(model.members)
    mx = np.full(nm, -np.inf)
    mn = np.full(nm, np.inf)
    slack = np.zeros(nm, dtype=bool)
    for f, (_, emax, emin, eslack) in per.items():
        owner = model.families[f].member
        np.maximum.at(mx, owner, emax)
        np.minimum.at(mn, owner, emin)
        slack |= np.bincount(owner, weights=eslack, minlength=nm) > 0
    return mx, mn, slack


@dataclass(frozen=True)
class Watch:
    """What a study records: node indices and member indices."""

    nodes: np.ndarray
    members: np.ndarray


@dataclass(frozen=True)
class StudyContext:
    """Everything a worker needs to run the tasks of one study (picklable).

    ``token`` identifies the context in a worker's cache.
    """

    token: str
    spec: CaseSpec
    base_factors: dict
    base_positions: np.ndarray
    base_rotations: np.ndarray | None
    watch: Watch
    study: Any                      # StudySpec
    solver: str = "superlu"
    newton: NewtonSettings = field(default_factory=NewtonSettings)


@dataclass(frozen=True)
class TaskResult:
    """Plain arrays from one solve (SI units).

    displacements : (nw, 3) m of the watched nodes, from the case coordinates
    max_tension, min_tension : (mw,) N of the watched members
    slack : (mw,) bool
    """

    index: int
    converged: bool
    message: str
    iterations: int
    displacements: np.ndarray
    max_tension: np.ndarray
    min_tension: np.ndarray
    slack: np.ndarray


class Session:
    """A worker's model, pattern and solver for one context, reused by its tasks."""

    def __init__(self, ctx: StudyContext):
        from .lane import build_lane
        self.ctx = ctx
        self.model = build_model(ctx.spec)
        self.assembler = Assembler(self.model)
        self.solver = linear.make_linear_solver(ctx.solver, symmetric=not self.model.has_rotations)
        self.base_loads = self.model.combined_loads(ctx.base_factors)
        self.base_state = State(np.array(ctx.base_positions, dtype=float),
                                None if ctx.base_rotations is None else np.array(ctx.base_rotations))
        self.base_responses = self.assembler.element_responses(self.base_state, self.base_loads, 1.0, False)
        self.lane = build_lane(self.model, ctx.study) if ctx.study.kind != "tolerance" else None
        self.lock = threading.Lock()
        # one factorization of the base tangent before any task: afterwards
        # every task sees the solver in the same state (ordering found),
        # whichever task a worker runs first.  The factorization itself is
        # kept (by a solver of its own, whose handle no later
        # factorization reuses) for modified Newton steps and influence lines.
        # the evaluation with element tangents is kept: influence lines read
        # the gradient rows of tensions and reactions from its element blocks
        self.base_evaluation = self.assembler.evaluate(self.base_state, self.base_loads, 1.0, True)
        self.base_tangent = self.base_evaluation.tangent
        # the base state's out-of-balance, which every solve's residual removes
        self.base_out_of_balance = self.base_evaluation.internal - self.base_loads.nodal
        self.base_factor = None
        if self.base_tangent.shape[0]:
            try:
                self.solver.factorize(self.base_tangent)
                keeper = linear.make_linear_solver(ctx.solver, symmetric=not self.model.has_rotations)
                self.base_factor = keeper.factorize(self.base_tangent)
            except linear.SingularMatrixError:
                pass

    def solve(self, index: int, added: LoadVectors, model: Model | None = None) -> TaskResult:
        # a study records no stability per solve: no pivot counts at the
        # converged states (the iterations still check their tangents)
        settings = replace(self.ctx.newton, stability=False)
        plain = replace(settings, increments=1, line_search=0, max_cuts=0,
                        max_iterations=min(PLAIN_ITERATIONS, settings.max_iterations))
        problem = FromBaseProblem(self, added, model)
        outcome = follow_load_path(problem, plain)
        if not outcome.converged:
            log.info("study solve %d: plain Newton did not converge (%s); following the load path", index,
                     outcome.message)
            spent = outcome.iterations
            problem = FromBaseProblem(self, added, model)
            outcome = follow_load_path(problem, settings)
            outcome = replace(outcome, iterations=outcome.iterations + spent)
        m = problem.model
        lam = outcome.load_factor
        loads = problem._loads_at(lam)
        responses = problem.evaluation_at(outcome.state, lam).responses
        mx, mn, slack = member_extremes(m, responses, loads.beam_loads)
        w = self.ctx.watch
        disp = outcome.state.positions[w.nodes] - m.coordinates[w.nodes]
        return TaskResult(index, bool(outcome.converged), outcome.message, int(outcome.iterations),
                          disp, mx[w.members], mn[w.members], slack[w.members])


_SESSIONS: dict[str, Session] = {}
_SESSIONS_LOCK = threading.Lock()


def session_for(ctx: StudyContext) -> Session:
    """The cached session of ``ctx`` in this process (built on first use)."""
    with _SESSIONS_LOCK:
        s = _SESSIONS.get(ctx.token)
        if s is None:
            if len(_SESSIONS) >= 2:   # keep memory bounded: studies run one after another
                _SESSIONS.pop(next(iter(_SESSIONS)))
            s = _SESSIONS[ctx.token] = Session(ctx)
        return s


def forget_session(token: str) -> None:
    with _SESSIONS_LOCK:
        _SESSIONS.pop(token, None)


def run_task(ctx: StudyContext, task) -> TaskResult:
    """Run one task (an object with ``index`` and ``run(session)``) in this process."""
    s = session_for(ctx)
    with s.lock:   # a session's assembler and solver serve one task at a time
        return task.run(s)
