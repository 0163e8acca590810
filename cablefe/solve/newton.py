"""Newton–Raphson with load control, increment cutting and a line search.

The driver sees a *problem*: an object with

``initial_state()``
    the state at load factor 0;
``impose(state, lam_from, lam_to)``
    the state with the prescribed DOFs moved to load factor ``lam_to``;
``evaluate(state, lam, want_tangent)``
    ``(residual, reference, tangent)`` over the unknowns: the out-of-balance
    force vector, a force scale for the relative test, and the sparse
    tangent (or None);
``advance(state, du)``
    the state after the increment ``du`` of the unknowns;
``commit(state)``
    called after each converged increment (warm starts);
``solve_linear(K, r)``
    ``K^-1 r``; raises :class:`cablefe.errors.MechanismError` when K is
    singular.

Convergence test (the only one): an increment has converged when

    ||r||_2 <= tolerance * reference

with ``reference`` the problem's force scale (the larger of the applied load
norm and the norm of the summed magnitudes of element forces at each DOF).  A
non-finite residual is a failure, never a success.
"""
from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import MechanismError

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class NewtonSettings:
    increments: int = 10
    tolerance: float = 1e-8
    max_iterations: int = 30
    max_cuts: int = 12
    line_search: int = 6          # number of halvings tried along a Newton step


@dataclass(frozen=True)
class PathOutcome:
    """Result of following the load path from 0 to 1.

    Attributes
    ----------
    state : the last converged state
    converged : True when load factor 1 was reached
    load_factor : the last converged load factor
    iterations : total Newton iterations
    residual : relative residual of the last converged state
    status : "converged" | "max-cuts" | "mechanism" | "non-finite"
    message : a sentence for the engineer
    history : relative residual of every iteration, in order
    increments : load factors of the converged increments
    """

    state: object
    converged: bool
    load_factor: float
    iterations: int
    residual: float
    status: str
    message: str
    history: tuple = ()
    increments: tuple = ()


def is_converged(residual_norm: float, reference: float, tolerance: float) -> bool:
    """``||r|| <= tolerance * reference``; NaN or inf never converge."""
    return bool(np.isfinite(residual_norm) and residual_norm <= tolerance * reference)


@dataclass
class _Step:
    state: object
    converged: bool
    iterations: int
    ratio: float
    failure: str = ""
    mechanism: MechanismError | None = None
    history: list = field(default_factory=list)


def _relative(r, ref) -> float:
    n = float(np.linalg.norm(r))
    return n / ref if math.isfinite(n) else math.inf


def newton_increment(problem, state, lam, settings: NewtonSettings) -> _Step:
    """Iterate at fixed load factor ``lam`` from ``state``."""
    history = []
    r, ref, K = problem.evaluate(state, lam, True)
    ratio = _relative(r, ref)
    for it in range(settings.max_iterations + 1):
        history.append(ratio)
        if not math.isfinite(ratio):
            return _Step(state, False, it, ratio, "non-finite", history=history)
        if is_converged(ratio, 1.0, settings.tolerance):
            return _Step(state, True, it, ratio, history=history)
        if it == settings.max_iterations:
            break
        try:
            du = -problem.solve_linear(K, r)
        except MechanismError as exc:
            return _Step(state, False, it, ratio, "mechanism", mechanism=exc, history=history)
        if not np.all(np.isfinite(du)):
            return _Step(state, False, it, ratio, "non-finite", history=history)
        # backtracking on the residual norm: accept the first step that
        # reduces it, else the best one tried
        alpha = 1.0
        best = None
        for _ in range(settings.line_search + 1):
            trial = problem.advance(state, alpha * du)
            r_t, ref_t, K_t = problem.evaluate(trial, lam, True)
            ratio_t = _relative(r_t, ref_t)
            if best is None or ratio_t < best[0]:
                best = (ratio_t, trial, r_t, K_t)
            if ratio_t < ratio:
                break
            alpha *= 0.5
        ratio, state, r, K = best
    return _Step(state, False, settings.max_iterations, ratio, "max-iterations", history=history)


def follow_load_path(problem, settings: NewtonSettings = NewtonSettings(), progress=None) -> PathOutcome:
    """Trace the equilibrium path from load factor 0 to 1.

    Increments start at ``1/settings.increments``; a failed increment is
    halved (at most ``max_cuts`` times in a row) and an easy one (at most a
    third of the iteration limit) lets the next grow by half.

    Parameters
    ----------
    problem : see the module docstring
    settings : NewtonSettings
    progress : callable(load_factor, iterations), optional

    Returns
    -------
    PathOutcome
    """
    state = problem.initial_state()
    lam = 0.0
    step = 1.0 / max(settings.increments, 1)
    total_iterations = 0
    history: list[float] = []
    done: list[float] = []
    cuts = 0
    last_ratio = 0.0
    while lam < 1.0:
        target = min(1.0, lam + step)
        if 1.0 - target < 1e-12:
            target = 1.0
        trial_state = problem.impose(state, lam, target)
        result = newton_increment(problem, trial_state, target, settings)
        total_iterations += result.iterations
        history.extend(result.history)
        if result.converged:
            state, lam, last_ratio = result.state, target, result.ratio
            problem.commit(state)
            done.append(lam)
            cuts = 0
            if progress is not None:
                progress(lam, total_iterations)
            log.info("load factor %.4f reached in %d iterations", lam, result.iterations)
            if result.iterations <= max(2, settings.max_iterations // 3):
                step *= 1.5
            continue
        cuts += 1
        log.info("increment to %.4f failed (%s); cutting", target, result.failure)
        # a step that no longer moves the load factor cannot succeed either
        if cuts > settings.max_cuts or step * 0.5 < 1e-10:
            if result.failure == "mechanism":
                status, msg = "mechanism", str(result.mechanism)
            elif result.failure == "non-finite":
                status, msg = "non-finite", "the residual became non-finite"
            else:
                status, msg = "max-cuts", (f"no convergence beyond load factor {lam:.4f} after "
                                           f"{settings.max_cuts} increment cuts")
            return PathOutcome(state, False, lam, total_iterations, last_ratio, status,
                               msg + f"; last converged load factor {lam:.4f}", tuple(history), tuple(done))
        step *= 0.5
    return PathOutcome(state, True, 1.0, total_iterations, last_ratio, "converged",
                       "converged", tuple(history), tuple(done))
