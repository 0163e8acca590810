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

The problem may also carry ``roundoff``: the force (N) below which its
residual cannot be computed reliably (round-off of stiff members), 0 if
absent, and three optional methods:

``inertia(K, factorized_only=False)``
    ``(positive, negative, zero)`` eigenvalue counts of the (symmetric part
    of the) tangent ``K``, or None when unknown: the stability check.  With
    ``factorized_only`` only when the factorisation just made for
    ``solve_linear`` gives it without more work (the iterations' check).
``observe(state, lam)``
    what to record of each converged step (``PathOutcome.path``).
``solve_again(r)``
    ``K_last^-1 r`` with the last factorisation made by ``solve_linear``, or
    None when there is none: modified Newton steps near the solution.
``solve_krylov(K, r, rtol, maxiter)``
    ``K^-1 r`` to the relative residual ``rtol`` by conjugate gradients
    preconditioned with the last factorisation, or None (no factorisation,
    negative curvature, no convergence): inexact Newton steps, used only
    when the problem's ``symmetric_tangent`` is True.

Near the solution (relative residual below ``NewtonSettings.krylov_ratio``)
and after a factorisation of a positive definite tangent, a step solves
the present tangent inexactly by :func:`cablefe.solvers.linear.krylov.
preconditioned_cg` with the last factors as preconditioner (at most
:data:`KRYLOV_ITERATIONS` back-substitutions, to the relative residual
:func:`forcing`).  Problems without them (an unsymmetric tangent) take
the chord step with the last factors below ``modified_ratio`` instead.
Otherwise, when such an attempt fails, or when a step does not cut the
residual enough, the tangent is factorised.

Stability is measured on every factorised tangent: the negative pivots
(eigenvalues) of the tangent at each converged state are kept in
``PathOutcome.negative_pivots`` and any tangent met in the iterations with
negative pivots is noted, so that a limit point jumped over between two
stable states is reported (:func:`stability_warnings`).  Without
``inertia`` a Newton direction that is not a descent direction
(``du . r > 0`` with ``du = -K^-1 r``, which proves that the symmetric part
of ``K`` is not positive definite) stands in for the count.

The count at a converged state is read from the factorisation of the last
iteration when that tangent was positive definite and its residual was
already below :data:`PIVOT_REUSE_RATIO` of the force scale: the state has
moved by one small Newton correction since, which cannot turn a positive
definite tangent indefinite unless the state is at a critical point to
within that correction.  Otherwise (an indefinite or unknown last count,
a large last step, convergence without a step) the converged state's
tangent is factorised once more.  ``NewtonSettings.stability = False``
skips the count at converged states altogether (solves whose stability
nobody reads; the iterations are still checked).

Convergence test (the only one): an increment has converged when

    ||r||_2 <= max(tolerance * reference, roundoff)

with ``reference`` the problem's force scale (the larger of the applied load
norm and the norm of the summed magnitudes of element forces at each DOF).
The round-off floor lets a structure that only moves rigidly (all forces
zero) or very stiff members under small loads converge instead of chasing
noise.  A non-finite residual is a failure, never a success.
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
    max_total_iterations: int = 400    # Newton iterations of the whole load path (a budget per result)
    max_total_cuts: int = 40           # increment cuts of the whole load path (a budget per result)
    whole_load_first: bool = True      # try the whole load in one increment before 1/increments
    stability: bool = True             # count the negative pivots at each converged state
    modified_ratio: float = 1e-4       # below this relative residual, step with the last factorisation
    krylov_ratio: float = 1e-2         # below this, inexact steps: CG preconditioned by the last factorisation


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
    status : "converged" | "max-cuts" | "mechanism" | "non-finite" | "budget"
    message : a sentence for the engineer
    history : relative residual of every iteration, in order
    increments : load factors of the converged increments
    warnings : sentences for the engineer, e.g. an indefinite tangent met
        on the way (a limit point may have been jumped)
    negative_pivots : negative pivots (eigenvalues) of the tangent at each
        converged step, in the order of ``increments``; None where unknown
    path : ``problem.observe(state, λ)`` of each converged step
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
    warnings: tuple = ()
    negative_pivots: tuple = ()
    path: tuple = ()


def is_converged(residual_norm: float, reference: float, tolerance: float, roundoff: float = 0.0) -> bool:
    """``||r|| <= max(tolerance * reference, roundoff)``; NaN or inf never converge."""
    return bool(np.isfinite(residual_norm) and residual_norm <= max(tolerance * reference, roundoff))


@dataclass
class _Step:
    state: object
    converged: bool
    iterations: int
    ratio: float
    failure: str = ""
    mechanism: MechanismError | None = None
    history: list = field(default_factory=list)
    indefinite: bool = False     # some iteration's tangent was not positive definite
    tangent: object = None       # the tangent at the converged state
    # negative pivots of the converged state read from the last iteration's
    # factorisation (see PIVOT_REUSE_RATIO), None when it must be counted
    known_pivots: int | None = None


def _dot(a, b) -> float:
    """``a . b`` of two vectors by numpy's own loop: BLAS ``ddot`` (what ``@``
    and ``np.linalg.norm`` call) wakes its threads for vectors of this size,
    which cost 1-3 ms a call instead of 0.02 ms on a busy 2-core machine
    (measured at 28 812 entries: 0.9 s of a 6-iteration solve)."""
    return float(np.einsum("i,i->", a, b))


def _norm(a) -> float:
    return math.sqrt(_dot(a, a)) if np.all(np.isfinite(a)) else math.inf


def _relative(r, ref) -> float:
    n = _norm(r)
    return n / ref if math.isfinite(n) else math.inf


#: a step is accepted by the energy line search when the slope of the
#: potential along it has dropped to this fraction of its starting value
SLOPE_RATIO = 0.5
#: relative size of du . r above which the tangent is taken as indefinite
INDEFINITE_SLOPE = 1e-10


def _line_search(problem, state, du, r, ratio, lam, settings: NewtonSettings):
    """Step length along the Newton direction ``du``; returns the new
    ``(state, r, reference, tangent, ratio, alpha)``, ``alpha du`` the step taken.

    For a conservative problem ``s(a) = du . r(u + a du)`` is the slope of the
    potential energy along the step, and the energy is least where it
    vanishes.  The full step is taken when ``|s(1)| <= SLOPE_RATIO |s(0)|``
    (a Newton step near the solution) or when it reduces the residual norm
    with ``s(1) < 0`` (energy still falling); otherwise the zero of ``s`` in
    (0, 1) is bracketed by the Illinois variant of regula falsi.  This is the
    line search of Crisfield 1991, Non-linear Finite Element Analysis of
    Solids and Structures, vol. 1, sec. 9.3 (from memory).  A stiffening
    net overshoots by far at the first step of a load increment, where a
    search on the residual norm accepts tiny steps: measured on a 100 x 100
    saddle net, 6 Newton iterations instead of 12.

    Trial states are evaluated without tangent; the tangent is built once,
    at the accepted state (the full step is evaluated with it, as it is the
    step usually accepted).  When ``du`` is not a descent direction
    (``s(0) >= 0``: an indefinite tangent), or the trials do not reduce the
    residual, the search backtracks on the residual norm instead.
    """
    s0 = _dot(du, r)
    trial = problem.advance(state, du)
    r1, ref1, K1 = problem.evaluate(trial, lam, True)
    ratio1 = _relative(r1, ref1)
    s1 = _dot(du, r1) if math.isfinite(ratio1) else math.inf
    if math.isfinite(ratio1) and (abs(s1) <= SLOPE_RATIO * abs(s0) or (ratio1 < ratio and s1 <= 0.0)):
        return trial, r1, ref1, K1, ratio1, 1.0
    best = (ratio1, 1.0, trial, r1, ref1)
    if s0 < 0.0 and math.isfinite(s1) and s1 > 0.0:
        lo, s_lo, hi, s_hi = 0.0, s0, 1.0, s1
        side = 0
        for _ in range(settings.line_search):
            alpha = (lo * s_hi - hi * s_lo) / (s_hi - s_lo)
            # keep clear of the bracket ends: a stiffening problem makes s
            # strongly convex and plain regula falsi crawl along one end
            width = hi - lo
            alpha = min(max(alpha, lo + 0.05 * width), hi - 0.05 * width)
            trial = problem.advance(state, alpha * du)
            r_t, ref_t, _ = problem.evaluate(trial, lam, False)
            ratio_t = _relative(r_t, ref_t)
            if not math.isfinite(ratio_t):
                hi, s_hi, side = alpha, math.inf, 0
                break
            s_t = _dot(du, r_t)
            if ratio_t < best[0]:
                best = (ratio_t, alpha, trial, r_t, ref_t)
            if abs(s_t) <= SLOPE_RATIO * abs(s0):
                return (*_accept(problem, trial, lam), alpha)
            if s_t < 0.0:
                lo, s_lo = alpha, s_t
                if side == -1:
                    s_hi *= 0.5   # Illinois: the end kept twice is halved
                side = -1
            else:
                hi, s_hi = alpha, s_t
                if side == 1:
                    s_lo *= 0.5
                side = 1
        if best[0] < ratio:
            return (*_accept(problem, best[2], lam), best[1])
    # backtracking on the residual norm: the first step that reduces it,
    # else the best one tried
    alpha = 1.0
    for _ in range(settings.line_search):
        alpha *= 0.5
        trial = problem.advance(state, alpha * du)
        r_t, ref_t, _ = problem.evaluate(trial, lam, False)
        ratio_t = _relative(r_t, ref_t)
        if ratio_t < best[0]:
            best = (ratio_t, alpha, trial, r_t, ref_t)
        if ratio_t < ratio:
            break
    if best[1] == 1.0:
        return best[2], best[3], best[4], K1, best[0], 1.0
    return (*_accept(problem, best[2], lam), best[1])


def _accept(problem, state, lam):
    r, ref, K = problem.evaluate(state, lam, True)
    return state, r, ref, K, _relative(r, ref)


def negative_pivots(problem, K) -> int | None:
    """Negative pivots of the tangent ``K`` by ``problem.inertia``; None if unknown."""
    count = getattr(problem, "inertia", None)
    if count is None or K is None:
        return None
    found = count(K)
    return None if found is None else int(found[1])


#: a modified Newton step (with the last factorisation, below
#: ``NewtonSettings.modified_ratio``) must cut the residual at least this
#: much, or the rest of the increment factorises again: near the solution
#: the old tangent differs from the new by the last small corrections, and
#: modified Newton contracts by about that relative difference (Kelley 1995,
#: Iterative Methods for Linear and Nonlinear Equations, SIAM, ch. 5, the
#: chord method, from memory).
MODIFIED_CONTRACTION = 0.1

#: inexact Newton steps (``NewtonSettings.krylov_ratio``): the conjugate
#: gradients preconditioned with the last factorisation get at most this
#: many iterations, each a back-substitution and a product with K, before a
#: new factorisation is made instead; the problem lowers it to a third of
#: what a factorisation costs with its linear solver (SuperLU: about 25
#: back-substitutions, PARDISO about 5, benchmarks/README.md), so a failed
#: attempt wastes at most a third of one
KRYLOV_ITERATIONS = 10
#: an inexact step must at least halve the residual, or the rest of the
#: increment factorises again (the tangent has changed too much for the old
#: factors, or the step met a strongly nonlinear stretch)
INEXACT_CONTRACTION = 0.5
#: largest relative residual asked of the linear solve of an inexact step
KRYLOV_FORCING = 1e-2


def forcing(ratio: float, tolerance: float) -> float:
    """Relative residual asked of the linear solve of an inexact Newton step.

    ``min(KRYLOV_FORCING, max(ratio, 0.1 tolerance / ratio))``: a forcing
    term of the order of the present relative residual keeps Newton's
    quadratic convergence (Dembo, Eisenstat & Steihaug 1982, "Inexact Newton
    methods", SIAM J. Numer. Anal. 19(2), Theorem 3.3, from memory), and no
    tighter than what takes the residual below a tenth of the tolerance in
    this step (the linear solve's residual is the next nonlinear residual,
    up to the quadratic term).
    """
    if not ratio > 0.0:
        return KRYLOV_FORCING
    return min(KRYLOV_FORCING, max(ratio, 0.1 * tolerance / ratio))


#: the negative pivots of the last iteration's tangent stand for those of
#: the converged state when that iteration's relative residual was below
#: this (Newton's quadratic convergence: the last correction is of the
#: order of this fraction of the increment's movement)
PIVOT_REUSE_RATIO = 1e-3


def _iterate_pivots(problem, K) -> int | None:
    """Negative pivots of ``K`` when the factorisation just made gives them, else None."""
    count = getattr(problem, "inertia", None)
    found = None if count is None else count(K, factorized_only=True)
    return None if found is None else int(found[1])


def indefinite_iterate(problem, K, du, r) -> bool:
    """True when the tangent ``K`` just factorised for ``du = -K^-1 r`` is indefinite.

    The pivot count when the factorisation just made gives it, otherwise
    (no ``inertia``, or an unsymmetric tangent) the descent test:
    ``du . r = -r K^-1 r`` is negative for a positive definite ``K``, so a
    positive value proves an indefinite tangent.
    """
    return _indefinite(_iterate_pivots(problem, K), du, r)


def _indefinite(negatives: int | None, du, r) -> bool:
    if negatives is not None:
        return negatives > 0
    return _dot(du, r) > INDEFINITE_SLOPE * _norm(du) * _norm(r)


def converged_pivots(problem, result: "_Step", settings: NewtonSettings) -> int | None:
    """Negative pivots at the converged state of ``result`` (None: unknown or not wanted)."""
    if not settings.stability:
        return None
    if result.known_pivots is not None:
        return result.known_pivots
    return negative_pivots(problem, result.tangent)


#: iterations allowed to the first attempt at the whole load in one
#: increment before it must show Newton's quadratic convergence (the last
#: iteration cutting the residual tenfold): a smooth problem converges in
#: about 6 (measured on saddle nets 50 x 50 to 577 x 577); more means
#: trouble, and small increments are cheaper than iterating on
WHOLE_LOAD_ITERATIONS = 8

#: the whole load in one increment is kept only when the structure answered
#: it no softer than its first tangent predicts: the work of the load on the
#: converged displacement at most this multiple of that on the linear
#: prediction ``K0^-1 f`` (the inverse of the current stiffness parameter of
#: Bergan et al. 1978, "Solution techniques for non-linear finite element
#: problems", IJNME 12, from memory).  Passing a limit point needs the
#: stiffness along the load to fall to zero, and a snap to a remote branch
#: moves far past the linear prediction (measured: the Von Mises truss of the
#: tests at twice its limit load gives 5.9, at 0.8 of it 1.45; saddle nets and
#: hanger decks 0.38-1.01); a softer answer is traced in increments instead
SOFTENING_LIMIT = 1.1

JUMP_ADVICE = 'follow the path with [analysis] control = "arc-length"'


def stability_warnings(load_factors, pivots, jumped=(), measured: bool = True,
                       advice: str = JUMP_ADVICE) -> list[str]:
    """Sentences for the engineer from the stability of a traced path.

    Parameters
    ----------
    load_factors : load factor of each converged step
    pivots : negative pivots of the tangent at each step (None: unknown)
    jumped : ``(λ_from, λ_to)`` of the steps whose iterations met a tangent
        with negative pivots
    measured : False when the problem cannot count pivots at all (no
        ``inertia``): unknown counts are then not worth a warning
    advice : what to do about a jumped limit point
    """
    out = []
    lam = list(load_factors)
    neg = list(pivots)
    bad = [k for k, n in enumerate(neg) if n]
    if bad:
        k = bad[0]
        more = (f" and at {len(bad) - 1} more converged step(s), the last at load factor {lam[bad[-1]]:.4f}"
                if len(bad) > 1 else "")
        out.append(f"unstable equilibrium: the tangent stiffness has {neg[k]} negative pivot(s) at "
                   f"load factor {lam[k]:.4f}{more}; the structure has buckled or passed a limit "
                   f"point there (a nearby state of lower energy exists)")
    unknown = [k for k, n in enumerate(neg) if n is None]
    if measured and unknown:
        out.append(f"the stability (negative pivots of the tangent) could not be determined at load "
                   f"factor {lam[unknown[0]]:.4f}")
    stable = {round(l, 12) for l, n in zip(lam, neg) if n == 0}
    for a, b in jumped:
        # both ends stable: the iterations crossed an unstable stretch
        if (a == 0.0 or round(a, 12) in stable) and round(b, 12) in stable:
            out.append(f"the tangent stiffness had negative pivots in the iterations from load factor "
                       f"{a:.4f} to {b:.4f} between stable states: a limit point (snap-through) was "
                       f"probably jumped; {advice}")
            break
    return out


def observe(problem, state, lam):
    """``problem.observe(state, lam)``, or None when the problem records nothing."""
    look = getattr(problem, "observe", None)
    return None if look is None else look(state, lam)


def newton_increment(problem, state, lam, settings: NewtonSettings, patience: int | None = None,
                     stop_on_indefinite: bool = False, track: list | None = None) -> _Step:
    """Iterate at fixed load factor ``lam`` from ``state``.

    With ``patience`` the attempt is given up (failure ``"slow"``) after that
    many iterations unless the last one cut the residual tenfold (Newton's
    quadratic convergence has set in); with ``stop_on_indefinite`` the first
    tangent that is not positive definite ends it (failure ``"indefinite"``).
    ``track`` collects ``(du, alpha, r0)`` of every step: the Newton
    direction, the step length taken along it and the starting residual.
    """
    limit = settings.max_iterations
    history = []
    r, ref, K = problem.evaluate(state, lam, True)
    r0 = r
    ratio = _relative(r, ref)
    roundoff = float(getattr(problem, "roundoff", 0.0))
    indefinite = False
    known = None      # negative pivots of the last factorised tangent, when it may stand for the next state's
    # modified Newton near the solution: the last factorisation serves while
    # each of its steps cuts the residual tenfold (see MODIFIED_CONTRACTION)
    again = getattr(problem, "solve_again", None)
    factorised = False
    # inexact Newton steps by conjugate gradients preconditioned with the
    # last factorisation, below ``krylov_ratio`` (see KRYLOV_ITERATIONS)
    krylov = (getattr(problem, "solve_krylov", None)
              if settings.krylov_ratio > 0.0 and getattr(problem, "symmetric_tangent", False) else None)
    positive_factor = False      # the last factorised tangent was positive definite
    reuse = (again is not None and settings.modified_ratio > 0.0) or krylov is not None
    for it in range(limit + 1):
        history.append(ratio)
        if not math.isfinite(ratio):
            return _Step(state, False, it, ratio, "non-finite", history=history)
        if is_converged(ratio * ref, ref, settings.tolerance, roundoff):
            return _Step(state, True, it, ratio, history=history, indefinite=indefinite, tangent=K,
                         known_pivots=known)
        if it == limit:
            break
        if patience is not None and it >= patience and not ratio < 0.1 * history[-2]:
            return _Step(state, False, it, ratio, "slow", history=history, indefinite=indefinite)
        kind = "full"     # a factorisation of K, or steps with the last one:
        du = None
        if reuse and factorised and positive_factor and krylov is not None and ratio <= settings.krylov_ratio:
            du = krylov(K, r, forcing(ratio, settings.tolerance), KRYLOV_ITERATIONS)
            kind = "inexact" if du is not None else kind
        # the chord step where conjugate gradients do not apply (a failed
        # attempt factorises: the tangent may be indefinite, and is counted)
        if krylov is None and reuse and factorised and again is not None and ratio <= settings.modified_ratio:
            du = again(r)
            kind = "chord" if du is not None else kind
        modified = kind != "full"
        if du is None:
            try:
                du = -problem.solve_linear(K, r)
            except MechanismError as exc:
                return _Step(state, False, it, ratio, "mechanism", mechanism=exc, history=history)
            factorised = True
        else:
            du = -du
        if not np.all(np.isfinite(du)):
            return _Step(state, False, it, ratio, "non-finite", history=history)
        if not modified:
            negatives = _iterate_pivots(problem, K)
            this_indefinite = _indefinite(negatives, du, r)
            indefinite |= this_indefinite
            positive_factor = not this_indefinite
            known = 0 if negatives == 0 and ratio <= PIVOT_REUSE_RATIO else None
        if indefinite and stop_on_indefinite:
            return _Step(state, False, it + 1, ratio, "indefinite", history=history, indefinite=True)
        before = ratio
        state, r, ref, K, ratio, alpha = _line_search(problem, state, du, r, ratio, lam, settings)
        if modified and not ratio <= (MODIFIED_CONTRACTION if kind == "chord" else INEXACT_CONTRACTION) * before:
            reuse = False     # too slow: a new factorisation from here on
        if track is not None:
            track.append((du, alpha, r0))
    return _Step(state, False, limit, ratio, "max-iterations", history=history)


def follow_load_path(problem, settings: NewtonSettings = NewtonSettings(), progress=None) -> PathOutcome:
    """Trace the equilibrium path from load factor 0 to 1.

    The whole load is tried first in one increment (``whole_load_first``),
    which must show quadratic convergence after
    :data:`WHOLE_LOAD_ITERATIONS` iterations.  That attempt is given up at
    the first tangent that is not positive definite, when it converges to a
    state whose tangent has negative pivots, or when the structure answered
    softer than its first tangent predicts (:data:`SOFTENING_LIMIT`), so
    that an unstable or softening stretch is traced and reported exactly as
    with small increments.  Otherwise (or after giving up) increments start at
    ``1/settings.increments``; a failed increment is halved (at most
    ``max_cuts`` times in a row) and an easy one (at most a third of the
    iteration limit) lets the next grow by half.  A jump over a limit point
    that no iterate's tangent reveals (every tangent met positive definite)
    is not detected, with the whole load as with any fixed increment.

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
    all_cuts = 0
    last_ratio = 0.0
    pivots: list = []
    path: list = []
    jumped: list = []
    counting = settings.stability and hasattr(problem, "inertia")

    def finish():
        # one warning per kind for the whole path, logged once
        warnings = stability_warnings(done, pivots, jumped, counting)
        for w in warnings:
            log.warning(w)
        return tuple(warnings), tuple(pivots), tuple(path)

    if settings.whole_load_first and step < 1.0:
        steps: list = []
        result = newton_increment(problem, problem.impose(state, 0.0, 1.0), 1.0, settings,
                                  patience=WHOLE_LOAD_ITERATIONS, stop_on_indefinite=True, track=steps)
        softer = False
        if result.converged and steps:
            # work of the load on the converged displacement against that on
            # the first tangent's (linear) prediction
            r0 = steps[0][2]
            linear = -_dot(steps[0][0], r0)
            moved = -_dot(sum(alpha * du for du, alpha, _ in steps), r0)
            softer = not (linear > 0.0 and moved <= SOFTENING_LIMIT * linear)
        total_iterations += result.iterations
        history.extend(result.history)
        neg = converged_pivots(problem, result, settings) if result.converged else None
        if result.converged and not result.indefinite and not softer and neg in (0, None) and not (
                neg is None and counting):
            state, lam, last_ratio = result.state, 1.0, result.ratio
            problem.commit(state)
            done.append(lam)
            pivots.append(neg)
            path.append(observe(problem, state, lam))
            if progress is not None:
                progress(lam, total_iterations)
            log.info("the whole load converged in one increment, %d iterations", result.iterations)
        else:
            log.info("the whole load in one increment is not taken (%s); increments of %.4f",
                     result.failure or ("softening" if softer else "unstable state"), step)

    while lam < 1.0:
        target = min(1.0, lam + step)
        if 1.0 - target < 1e-12:
            target = 1.0
        trial_state = problem.impose(state, lam, target)
        result = newton_increment(problem, trial_state, target, settings)
        total_iterations += result.iterations
        history.extend(result.history)
        if result.converged:
            if result.indefinite:
                jumped.append((lam, target))
            state, lam, last_ratio = result.state, target, result.ratio
            problem.commit(state)
            done.append(lam)
            # the stability of the converged state (one more factorisation
            # unless the last iteration's may stand for it)
            pivots.append(converged_pivots(problem, result, settings))
            path.append(observe(problem, state, lam))
            cuts = 0
            if progress is not None:
                progress(lam, total_iterations)
            log.info("load factor %.4f reached in %d iterations", lam, result.iterations)
            if result.iterations <= max(2, settings.max_iterations // 3):
                step *= 1.5
            continue
        cuts += 1
        all_cuts += 1
        log.info("increment to %.4f failed (%s); cutting", target, result.failure)
        # bounded work: a result that keeps cutting (or iterating) stops
        # with what it reached instead of running for minutes
        spent = (total_iterations >= settings.max_total_iterations or all_cuts > settings.max_total_cuts)
        # a step that no longer moves the load factor cannot succeed either
        if cuts > settings.max_cuts or step * 0.5 < 1e-10 or spent:
            reason = getattr(problem, "failure_reason", "")
            if result.failure == "mechanism":
                status, msg = "mechanism", str(result.mechanism)
            elif spent:
                status, msg = "budget", (f"no convergence beyond load factor {lam:.4f}: the work budget of "
                                         f"{settings.max_total_iterations} iterations and "
                                         f"{settings.max_total_cuts} increment cuts per result is spent "
                                         f"({total_iterations} iterations, {all_cuts} cuts; [analysis] "
                                         f"max_total_iterations and max_total_cuts set it)")
            elif result.failure == "non-finite":
                status, msg = "non-finite", reason or "the residual became non-finite"
            else:
                status, msg = "max-cuts", (f"no convergence beyond load factor {lam:.4f} after "
                                           f"{settings.max_cuts} increment cuts")
            warnings, pivots_, path_ = finish()
            return PathOutcome(state, False, lam, total_iterations, last_ratio, status,
                               msg + f"; last converged load factor {lam:.4f}", tuple(history), tuple(done),
                               warnings, pivots_, path_)
        step *= 0.5
    warnings, pivots_, path_ = finish()
    return PathOutcome(state, True, 1.0, total_iterations, last_ratio, "converged",
                       "converged", tuple(history), tuple(done), warnings, pivots_, path_)
