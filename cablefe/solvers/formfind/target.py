"""Form-finding by targets: Newton steps, limited by a trust region, on the
sensitivity of target coordinates to the adjusted unstressed lengths.  SI units."""
from __future__ import annotations

import logging
from dataclasses import replace
from types import MappingProxyType

import numpy as np

from ...assembly import Assembler, State
from ...elements.catenary.kernel import horizontal_unit, in_plane_stiffness
from ...elements.catenary.profile import catenary_flexibility
from ...errors import CaseError, MechanismError
from ...model import LoadVectors, Model, build_model, match_members
from ...spec import ShapeSpec
from .. import linear


log = logging.getLogger(__name__)
from .common import (AXES, SETTLE_FRACTION, ShapeError, TargetReport, member_lengths, model_size, shaped_case,
    _equilibrium, _movement, _has_beams, _format_length)

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
            F = catenary_flexibility(H[k], V[k], L0e[k], w[k], EA[k])
            K_ll, K_lh, K_hh = in_plane_stiffness(F[:, 0, 0], F[:, 0, 1], F[:, 1, 1])
            s = 1.0 / EA[k] + 1.0 / Ta[k]
            dl, dh = H[k] * s, Va[k] * s
            dH[k] = -(K_ll * dl + K_lh * dh)
            dV[k] = -(K_lh * dl + K_hh * dh)
        d = state.positions[t.nodes[:, 1]] - state.positions[t.nodes[:, 0]]
        eh = horizontal_unit(d)
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
