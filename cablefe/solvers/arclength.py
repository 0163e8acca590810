"""Arc-length path following through limit points (Crisfield's method, cylindrical or spherical).

Load control (:func:`cablefe.solvers.newton.follow_load_path`) prescribes the
load factor λ and cannot pass a maximum of the load: beyond a limit point
there is no nearby equilibrium at the next λ.  Here λ is an unknown too and
each step is fixed by its length in displacement space instead:

    ||Δu||_2 = Δl                                  (the cylinder)

with Δu the displacement of the unknowns since the last converged point.
This is the cylindrical arc-length method of Crisfield 1981, "A fast
incremental/iterative solution procedure that handles snap-through",
Computers & Structures 13, 55-62 (from memory).  Each corrector iteration
solves the linearised equilibrium

    K δu = -r - g δλ,     g = ∂r/∂λ at fixed unknowns,

as two solves with the same tangent, δu = δu_r + δλ δu_t with
δu_r = -K⁻¹ r and δu_t = -K⁻¹ g, and takes δλ as the root of the quadratic
that keeps ``Δu + δu`` on the cylinder whose displacement increment makes
the smallest angle with the one before the iteration (Crisfield's root
selection).  Complex roots, divergence or a singular tangent cut the arc
length in half and retry the step from the last converged point, which also
moves the iterates off an exactly singular tangent at a limit point.

``g`` is a central difference of the residual in λ at fixed unknowns, with
the prescribed DOFs moved along (``problem.impose``).  The residual of
:class:`cablefe.solvers.static.StaticProblem` is not simply ``-λ f_ext``: the
element loads (catenary weight, thermal strain) and support movements scale
with λ and enter it nonlinearly, so an analytic ``-f_ext`` would be wrong in
general.  An inexact ``g`` only slows the corrector; the converged points
satisfy ``r = 0`` to the same test as load control
(:func:`cablefe.solvers.newton.is_converged`).

The predictor direction is ``δu_t`` at the last converged point, its sign
chosen so that it continues the previous step (positive work
``Δu_prev · δu_t``), or so that λ grows towards the target on the first
step.  Where the tangent there is exactly singular, the previous increment
is used as a secant predictor.

With a load weight ``ψ > 0`` (``load_weight``) the constraint is the
sphere ``||Δu||² + ψ² Δλ² = Δl²`` instead, which also passes stretches
where the displacements stand still while λ moves; the static analysis
(``[analysis] control = "arc-length"``) uses the sphere with ``ψ = 1``,
the function's default is the cylinder (``ψ = 0``).

The norm mixes translations (m) and rotations (rad) of the unknowns
unweighted; models with beams whose rotations are large compared with the
translations in metres get a cylinder weighted towards rotations.

When λ crosses ``target_load_factor`` the driver lands on it exactly: a
Newton iteration at fixed λ = target (the load-control corrector, with its
line search) starts from the linear interpolation between the last two
points.  If that fails the crossing step is cut and retried.
"""
from __future__ import annotations

import logging
import math
from dataclasses import dataclass

import numpy as np

from ..errors import MechanismError
from .newton import (NewtonSettings, PathOutcome, _relative, indefinite_iterate, is_converged, negative_pivots,
                     newton_increment, observe, stability_warnings)

log = logging.getLogger(__name__)

#: corrector iterations aimed at per step; the next arc length scales by
#: sqrt(DESIRED_ITERATIONS / iterations), Crisfield's rule (from memory)
DESIRED_ITERATIONS = 4
#: kept for callers that size the cap from the first arc length
MAX_GROWTH = 4.0
#: relative step in λ of the central difference for ∂r/∂λ: truncation
#: ~h² |∂³r/∂λ³| and round-off ~eps |r| / h are both ~1e-10 of the load scale
DLAM = 1.0e-5


@dataclass(frozen=True)
class ArcLengthOutcome(PathOutcome):
    """Result of following the equilibrium path by arc length.

    Attributes
    ----------
    state : the last converged state (at ``target_load_factor`` when converged)
    converged : True when ``target_load_factor`` was reached
    load_factor : the last converged load factor
    iterations : total corrector and landing iterations
    residual : relative residual of the last converged state
    status : "converged" | "max-steps" | "max-cuts" | "mechanism" | "non-finite" | "budget" | "no-load"
        ("no-load": the load does not move the structure at λ = 0, so no
        first arc length can be set)
    message : a sentence for the engineer
    history : relative residual of every iteration, in order
    increments : load factors of the converged points, in order (the path;
        not monotonic past a limit point)
    states : the converged states, one per entry of ``increments``
    arc_lengths : arc length (norm of the unknowns' increment, m or rad) of
        each converged step; the landing step records the interpolated
        length it started from
    negative_pivots, path : as in load control, one entry per converged
        step: aligned with ``increments[1:]`` (the start λ = 0 is not a step)
    """

    states: tuple = ()
    arc_lengths: tuple = ()


def _load_derivative(problem, state, lam) -> np.ndarray:
    """∂r/∂λ at fixed unknowns by a central difference (prescribed DOFs moved along).

    At 0 <= λ < h the one-sided second-order difference
    ``(-3 r(λ) + 4 r(λ + h) - r(λ + 2h)) / 2h`` is used instead: element
    loads must not be evaluated at a negative load factor there (a
    catenary's weight would change sign).
    """
    h = DLAM * max(1.0, abs(lam))
    r_p, _, _ = problem.evaluate(problem.impose(state, lam, lam + h), lam + h, False)
    if 0.0 <= lam < h:
        r_0, _, _ = problem.evaluate(state, lam, False)
        r_pp, _, _ = problem.evaluate(problem.impose(state, lam, lam + 2.0 * h), lam + 2.0 * h, False)
        return (4.0 * r_p - 3.0 * r_0 - r_pp) / (2.0 * h)
    r_m, _, _ = problem.evaluate(problem.impose(state, lam, lam - h), lam - h, False)
    return (r_p - r_m) / (2.0 * h)


@dataclass
class _Try:
    converged: bool
    state: object = None
    lam: float = 0.0
    du: np.ndarray | None = None     # increment of the unknowns over the step
    iterations: int = 0
    ratio: float = math.inf
    failure: str = ""
    mechanism: MechanismError | None = None
    tangent: object = None           # the tangent at the converged point
    indefinite: bool = False         # some corrector tangent was not positive definite


def _arc_step(problem, state, lam, dl, direction, lam_sign, settings, history, w: float = 0.0) -> _Try:
    """One arc-length step of length ``dl`` from the converged ``(state, lam)``.

    ``direction`` is the previous converged increment (None on the first
    step); ``lam_sign`` the sign of λ growth wanted on the first step;
    ``w`` the weight of the load factor in the constraint
    ``||Δu||² + w² Δλ² = dl²`` (m per unit λ; 0: the cylinder).
    """
    roundoff = float(getattr(problem, "roundoff", 0.0))
    # -- predictor along the tangent, or along the previous step (secant)
    r, ref, K = problem.evaluate(state, lam, True)
    try:
        ut = -problem.solve_linear(K, _load_derivative(problem, state, lam))
        singular = None
    except MechanismError as exc:
        ut, singular = None, exc
    if ut is not None and np.all(np.isfinite(ut)) and float(np.linalg.norm(ut)) > 0.0:
        sign = lam_sign if direction is None else \
            (1.0 if float(direction[0] @ ut) + w * w * direction[1] >= 0.0 else -1.0)
        dlam = sign * dl / math.sqrt(float(ut @ ut) + w * w)
        du = dlam * ut
    else:
        if direction is None:
            if singular is not None:
                return _Try(False, failure="mechanism", mechanism=singular)
            return _Try(False, failure="non-finite")
        # singular tangent exactly at the converged point: the previous
        # increment (unknowns, λ) scaled to the new length is the predictor
        prev_du, prev_dlam = direction
        scale = dl / math.sqrt(float(prev_du @ prev_du) + (w * prev_dlam) ** 2)
        du, dlam = scale * prev_du, scale * prev_dlam
    lam_new = lam + dlam
    trial = problem.impose(problem.advance(state, du), lam, lam_new)
    # -- corrector on the cylinder ||du||² + w² Δλ² = dl²
    indefinite = False
    for it in range(settings.max_iterations + 1):
        r, ref, K = problem.evaluate(trial, lam_new, True)
        ratio = _relative(r, ref)
        history.append(ratio)
        if not math.isfinite(ratio):
            return _Try(False, iterations=it, failure="non-finite")
        if is_converged(ratio * ref, ref, settings.tolerance, roundoff):
            return _Try(True, trial, lam_new, du, it, ratio, tangent=K, indefinite=indefinite)
        if it == settings.max_iterations:
            break
        try:
            ur = -problem.solve_linear(K, r)
            ut = -problem.solve_linear(K, _load_derivative(problem, trial, lam_new))
        except MechanismError as exc:
            return _Try(False, iterations=it, failure="mechanism", mechanism=exc)
        if not (np.all(np.isfinite(ur)) and np.all(np.isfinite(ut))):
            return _Try(False, iterations=it, failure="non-finite")
        indefinite |= indefinite_iterate(problem, K, ur, r)
        # ||du + ur + x ut||² + w² (Δλ + x)² = dl²  ->  a x² + b x + c = 0
        base = du + ur
        D = lam_new - lam
        a = float(ut @ ut) + w * w
        b = 2.0 * (float(ut @ base) + w * w * D)
        c = float(base @ base) + (w * D) ** 2 - dl * dl
        disc = b * b - 4.0 * a * c
        if a == 0.0 or disc < 0.0:
            return _Try(False, iterations=it, failure="complex-roots")
        sq = math.sqrt(disc)
        # the stable form of the two roots (no cancellation in -b ± sq)
        q = -0.5 * (b + math.copysign(sq, b))
        roots = (q / a, c / q) if q != 0.0 else (0.0, 0.0)
        # Crisfield's choice: the new increment closest in angle to the old one
        x = max(roots, key=lambda x: float(du @ (base + x * ut)) + w * w * D * (D + x))
        step = ur + x * ut
        du = du + step
        trial = problem.impose(problem.advance(trial, step), lam_new, lam_new + x)
        lam_new += x
    return _Try(False, iterations=settings.max_iterations, failure="max-iterations")


def follow_arc_length(problem, settings: NewtonSettings = NewtonSettings(), arc_length: float | None = None,
                      max_steps: int = 200, target_load_factor: float = 1.0,
                      progress=None, max_arc_length: float | None = None,
                      keep_states: bool = True, load_weight: float = 0.0) -> ArcLengthOutcome:
    """Trace the equilibrium path by arc length until λ reaches the target.

    Parameters
    ----------
    problem : the load-control driver's problem (see :mod:`cablefe.solvers.newton`)
    settings : NewtonSettings
        ``tolerance`` and ``max_iterations`` as in load control;
        ``max_cuts`` halvings of the arc length in a row are allowed;
        ``increments`` sets the first arc length when ``arc_length`` is None.
    arc_length : float, optional
        First arc length: norm of the unknowns' increment (m, rad for
        rotations).  Default: the length of the linear (tangent) response to
        a load-factor step ``target_load_factor / settings.increments``.
    max_steps : int
        Converged steps allowed before giving up (status "max-steps").
    target_load_factor : float
        Load factor at which to stop, landing on it exactly.
    progress : callable(load_factor, iterations), optional
    max_arc_length : float, optional
        Longest arc length the steps may grow to (same units as
        ``arc_length``).  Default: no fixed cap; instead a step may change
        the load factor by at most ``|target_load_factor| / increments``
        (the next arc length is shortened in proportion to the last step's
        change), so that a long easy stretch does not leap over a limit
        point it should resolve, while a path much longer than the first
        tangent response (a stiff start, a softening structure) is still
        followed in a bounded number of steps.
    keep_states : bool
        Keep every converged state in ``states`` (memory of one state per
        step); False keeps none (``state`` is the last one, ``path`` what
        ``problem.observe`` recorded).
    load_weight : float
        ψ >= 0 (dimensionless): the constraint becomes
        ``||Δu||² + (ψ s)² Δλ² = Δl²`` with ``s = ||K⁻¹ ∂r/∂λ||`` at λ = 0
        (m per unit λ), Crisfield's spherical arc length (from memory).  0
        (default) is the cylinder.  With ψ > 0 a stretch where the
        displacements stand still while λ moves (a shaped structure loaded
        by the very loads it was shaped for goes out and comes back, with
        ``du/dλ = 0`` on the way) is passed; the cylinder cannot pass it.
        The default first arc length grows by ``sqrt(1 + ψ²)``, so that the
        first step still moves λ by about ``target / increments``.

    Returns
    -------
    ArcLengthOutcome
        ``increments`` and ``states`` hold the traced path, starting at λ = 0.
    """
    if not (max_steps >= 1):
        raise ValueError(f"max_steps must be at least 1, got {max_steps}")
    if not math.isfinite(target_load_factor) or target_load_factor == 0.0:
        raise ValueError(f"target_load_factor must be finite and non-zero, got {target_load_factor}")
    if arc_length is not None and not (math.isfinite(arc_length) and arc_length > 0.0):
        raise ValueError(f"arc_length must be a positive length, got {arc_length}")
    if max_arc_length is not None and not (math.isfinite(max_arc_length) and max_arc_length > 0.0):
        raise ValueError(f"max_arc_length must be a positive length, got {max_arc_length}")
    state = problem.initial_state()
    lam = 0.0
    lam_sign = math.copysign(1.0, target_load_factor)
    history: list[float] = []
    lams, states, lengths = [0.0], [state] if keep_states else [], []
    total = 0
    last_ratio = 0.0
    if not (math.isfinite(load_weight) and load_weight >= 0.0):
        raise ValueError(f"load_weight must be a finite number >= 0, got {load_weight}")
    w = 0.0
    if arc_length is None or load_weight > 0.0:
        _, _, K = problem.evaluate(state, lam, True)
        try:
            ut = problem.solve_linear(K, _load_derivative(problem, state, lam))
        except MechanismError as exc:
            return ArcLengthOutcome(state, False, lam, 0, 0.0, "mechanism", str(exc) + "; at load factor 0",
                                    (), tuple(lams), states=tuple(states), arc_lengths=())
        w = load_weight * float(np.linalg.norm(ut))
        if not math.isfinite(w):
            w = 0.0
    if arc_length is None:
        arc_length = abs(target_load_factor) / max(settings.increments, 1) * float(np.linalg.norm(ut)) \
            * math.sqrt(1.0 + load_weight ** 2)
        if not (math.isfinite(arc_length) and arc_length > 0.0):
            # status "no-load": the caller may use load control instead
            return ArcLengthOutcome(state, False, lam, 0, 0.0, "no-load" if arc_length == 0.0 else "non-finite",
                                    "the load does not move the structure; no arc length can be set",
                                    (), tuple(lams), states=tuple(states), arc_lengths=())
    dl_max = math.inf if max_arc_length is None else max_arc_length
    dlam_max = abs(target_load_factor) / max(settings.increments, 1) if max_arc_length is None else math.inf
    dl = min(arc_length, dl_max)
    direction = None
    cuts = 0
    pivots: list = []
    path: list = []
    jumped: list = []

    def finish(converged, status, msg):
        warnings = stability_warnings(lams[1:], pivots, jumped, hasattr(problem, "inertia"),
                                      "the arc-length steps were too long to resolve it")
        for w in warnings:
            log.warning(w)
        return ArcLengthOutcome(state, converged, lam, total, last_ratio, status, msg, tuple(history),
                                tuple(lams), tuple(warnings), tuple(pivots), tuple(path),
                                states=tuple(states), arc_lengths=tuple(lengths))

    def stop(status, msg):
        return finish(False, status, msg + f"; last converged load factor {lam:.4f}")

    def record(step_from, step, tangent, indefinite):
        # the stability of the converged point and what to keep of it
        if indefinite:
            jumped.append((step_from, step[1]))
        pivots.append(negative_pivots(problem, tangent))
        path.append(observe(problem, *step))

    while len(lams) <= max_steps:
        try:
            t = _arc_step(problem, state, lam, dl, direction, lam_sign, settings, history, w)
        except ValueError as exc:
            # an iterate outside the elements' domain (a catenary's weight
            # turned negative as λ < 0, a member length of zero): a failed
            # step, cut like any other
            log.info("arc-length step left the elements' domain: %s", exc)
            t = _Try(False, failure="domain")
        total += t.iterations
        landed = None
        if t.converged and (lam - target_load_factor) * (t.lam - target_load_factor) <= 0.0 \
                and t.lam != lam:
            # crossed the target: Newton at fixed λ from the interpolated state
            s = (target_load_factor - lam) / (t.lam - lam)
            landing_length = s * float(np.linalg.norm(t.du))
            guess = problem.impose(problem.advance(state, s * t.du), lam, target_load_factor)
            landed = newton_increment(problem, guess, target_load_factor, settings)
            total += landed.iterations
            history.extend(landed.history)
            if not landed.converged:
                t = _Try(False, failure=landed.failure or "landing", mechanism=landed.mechanism)
        if not t.converged:
            cuts += 1
            log.info("arc-length step of %.3g from load factor %.4f failed (%s); cutting", dl, lam, t.failure)
            budget = getattr(settings, "max_total_iterations", math.inf)
            if total >= budget:
                # bounded work, as in load control; converged steps are
                # bounded by max_steps
                return stop("budget", f"no convergence beyond load factor {lam:.4f}: the work budget of "
                                      f"{budget} iterations per result is spent ([analysis] "
                                      f"max_total_iterations sets it)")
            if cuts > settings.max_cuts:
                if t.failure == "mechanism":
                    return stop("mechanism", str(t.mechanism))
                if t.failure == "non-finite":
                    return stop("non-finite", "the residual became non-finite")
                return stop("max-cuts", f"no convergence beyond load factor {lam:.4f} after "
                                        f"{settings.max_cuts} arc-length cuts")
            dl *= 0.5
            continue
        if landed is not None:
            lengths.append(landing_length)
            lam_from = lam
            state, lam, last_ratio = landed.state, target_load_factor, landed.ratio
            problem.commit(state)
            lams.append(lam)
            if keep_states:
                states.append(state)
            record(lam_from, (state, lam), landed.tangent, landed.indefinite or t.indefinite)
            if progress is not None:
                progress(lam, total)
            return finish(True, "converged", "converged")
        direction = (t.du, t.lam - lam)
        lam_from = lam
        state, lam, last_ratio = t.state, t.lam, t.ratio
        problem.commit(state)
        record(lam_from, (state, lam), t.tangent, t.indefinite)
        lams.append(lam)
        if keep_states:
            states.append(state)
        lengths.append(dl)
        cuts = 0
        if progress is not None:
            progress(lam, total)
        log.info("arc length %.3g: load factor %.4f in %d iterations", dl, lam, t.iterations)
        grown = dl * min(2.0, math.sqrt(DESIRED_ITERATIONS / max(t.iterations, 1)))
        moved = abs(direction[1])
        if moved > 0.0:
            # at the same rate of λ along the path, at most dlam_max per step
            grown = min(grown, dl * dlam_max / moved)
        dl = min(dl_max, grown)
    return stop("max-steps", f"target load factor {target_load_factor:.4f} not reached in {max_steps} steps")
