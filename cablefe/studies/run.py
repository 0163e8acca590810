"""Run one study of a case: prepare its tasks, run them, gather the envelope.

The kinds (contract v2, "Studies"):

``influence``
    influence lines only (:mod:`.influence`), no nonlinear solve;
``patch``
    for every watched response and sense, the lane segments where the
    influence line is adverse are loaded (possibly several intervals);
    identical patches are solved once, nonlinearly from the base state;
    the envelope keeps the nonlinear values and their governing patch;
``sweep``
    a patch of ``length`` (or a point force) in ``steps`` positions;
``tolerance``
    Monte Carlo of unstressed-length errors, ``samples`` solves.
"""
from __future__ import annotations

import logging
import uuid
from dataclasses import dataclass, field

import numpy as np

from ..errors import CaseError
from ..model import Model
from ..patterns import match_indices
from ..results import Results
from ..solvers.newton import NewtonSettings
from .base import (STUDY_INCREMENTS, StudyContext, TaskResult, Watch, forget_session, member_extremes,
                   session_for)
from .influence import InfluenceLines, influence_lines
from .lane import Lane
from .runner import Runner
from .tasks import LengthErrorTask, PatchTask, PointTask

log = logging.getLogger(__name__)

#: a patch's nonlinear change of a response is flagged when it differs from
#: the linear prediction by more than this fraction (common practice: a few
#: percent is where second-order effects start to matter for design)
NONLINEAR_FLAG = 0.05
#: ... but not for responses a patch barely moves: differences below this
#: fraction of the study's largest change of that kind are not flagged
NEGLIGIBLE_CHANGE = 0.01
#: segment contributions below this fraction of the largest are not loaded
#: (round-off of the influence line, not an adverse part)
NEGLIGIBLE = 1e-9


@dataclass
class StudyOutcome:
    """Everything a study found (SI units); :mod:`cablefe.io.studies_io` writes it.

    Governing loads ``G`` are dicts in SI: ``{"intervals": [[a, b], ...]}``,
    ``{"start": a, "end": b}``, ``{"position": s}`` or ``{"sample": i}``.
    """

    study: object
    base: str
    solves: int
    lane: Lane | None
    node_ids: list
    member_ids: list
    max_displacement: np.ndarray        # (nw, 3) m
    min_displacement: np.ndarray
    governing_node: dict                # {"max": [[G, G, G], ...], "min": ...}
    max_tension: np.ndarray             # (mw,) N
    min_tension: np.ndarray
    slack: np.ndarray
    governing_member: dict              # {"max": [G, ...], "min": [...]}
    failures: list = field(default_factory=list)
    influence: InfluenceLines | None = None
    node_extra: dict = field(default_factory=dict)     # node id -> extra JSON fields (SI)
    member_extra: dict = field(default_factory=dict)
    samples: dict | None = None          # tolerance: arrays of every sample
    statistics: dict | None = None

    @property
    def converged(self) -> bool:
        return not self.failures


def _watch(model: Model, patterns) -> Watch:
    if patterns is None:
        return Watch(np.arange(len(model.node_ids)), np.arange(len(model.members)))
    nodes = match_indices(patterns, model.node_ids)
    return Watch(np.asarray(nodes, dtype=np.int64), np.asarray(model.member_ids_matching(patterns), dtype=np.int64))


def make_context(results: Results, study, solver: str | None = None) -> StudyContext:
    """The picklable context of ``study`` on the solved ``results``.

    Raises CaseError when the base result is missing or did not converge.
    """
    model = results.model
    base = study.base or model.results_to_run()[0][0]
    try:
        res = results[base]
    except KeyError:
        raise CaseError(f"{study.key}.base", f'the base result "{base}" was not solved') from None
    if not res.converged:
        raise CaseError(f"{study.key}.base", f'the base result "{base}" did not converge: {res.outcome.message}')
    a = model.spec.analysis
    newton = NewtonSettings(STUDY_INCREMENTS, a.tolerance, a.max_iterations, a.max_cuts,
                            max_total_iterations=a.max_total_iterations, max_total_cuts=a.max_total_cuts)
    return StudyContext(uuid.uuid4().hex, model.spec, dict(res.factors), res.state.positions.copy(),
                        None if res.state.rotations is None else res.state.rotations.copy(),
                        _watch(model, study.watch), study, solver or a.solver, newton)


def run_study(results: Results, study, runner: Runner | None = None, solver: str | None = None) -> StudyOutcome:
    """Run one ``[[studies]]`` entry on solved results."""
    runner = runner or Runner(workers=1)
    ctx = make_context(results, study, solver)
    session = session_for(ctx)       # the main process's own: lane, base values, influence
    model = session.model
    w = ctx.watch
    base_result = _base_result(session)
    kind = study.kind
    influence = None
    labels: list = []
    tasks: list = []
    if kind in ("influence", "patch"):
        influence = influence_lines(session, session.lane, study.load)
    if kind == "patch":
        tasks, labels, own = _patch_tasks(session, influence, study.load)
    elif kind == "sweep":
        tasks, labels = _sweep_tasks(session.lane, study)
    elif kind == "tolerance":
        tasks, labels = _tolerance_tasks(model, study)
    log.info("study %s: %d solve(s) on %s", study.name, len(tasks), runner.description)
    got = runner.map(ctx, tasks) if tasks else []
    failures = [{**labels[r.index], "message": r.message} for r in got if not r.converged]
    pool = list(got)
    pool_labels = [labels[r.index] for r in got]
    if kind in ("influence", "patch"):
        pool = [base_result] + pool
        pool_labels = [{"intervals": []}] + pool_labels
    env = _envelope(pool, pool_labels, len(w.nodes), len(w.members))
    out = StudyOutcome(study, study.base or model.results_to_run()[0][0], len(tasks),
                       session.lane, [model.node_ids[n] for n in w.nodes], [model.members[k].id for k in w.members],
                       *env, failures=failures, influence=influence)
    if kind == "patch":
        _flag_nonlinear(out, influence, own, got, base_result)
    if kind == "tolerance":
        _statistics(out, got)
    forget_session(ctx.token)   # the model, pattern and factorization are not needed any more
    return out


def _base_result(session) -> TaskResult:
    m = session.model
    w = session.ctx.watch
    mx, mn, slack = member_extremes(m, session.base_responses, session.base_loads.beam_loads)
    disp = session.base_state.positions[w.nodes] - m.coordinates[w.nodes]
    return TaskResult(-1, True, "base state", 0, disp, mx[w.members], mn[w.members], slack[w.members])


def _envelope(results: list, labels: list, nw: int, mw: int):
    ok = [r for r in results if r.converged]
    lab = [g for r, g in zip(results, labels) if r.converged]
    if not ok:
        nan3 = np.full((nw, 3), np.nan)
        nan = np.full(mw, np.nan)
        none3 = [[None] * 3 for _ in range(nw)]
        return (nan3, nan3.copy(), {"max": none3, "min": none3}, nan, nan.copy(), np.zeros(mw, bool),
                {"max": [None] * mw, "min": [None] * mw})
    D = np.stack([r.displacements for r in ok])          # (n, nw, 3)
    Tmax = np.stack([r.max_tension for r in ok])         # (n, mw)
    Tmin = np.stack([r.min_tension for r in ok])
    slack = np.stack([r.slack for r in ok]).any(axis=0)
    imax, imin = D.argmax(axis=0), D.argmin(axis=0)      # first of equal values: the earliest load
    jmax, jmin = Tmax.argmax(axis=0), Tmin.argmin(axis=0)
    gov_node = {"max": [[lab[i] for i in row] for row in imax.tolist()],
                "min": [[lab[i] for i in row] for row in imin.tolist()]}
    gov_member = {"max": [lab[i] for i in jmax.tolist()], "min": [lab[i] for i in jmin.tolist()]}
    return (D.max(axis=0), D.min(axis=0), gov_node, Tmax.max(axis=0), Tmin.min(axis=0), slack, gov_member)


# -- patch -----------------------------------------------------------------------

def _runs(mask: np.ndarray, s: np.ndarray) -> list:
    """Intervals [start, end] (m) of consecutive loaded segments."""
    edges = np.diff(np.r_[0, mask.astype(np.int8), 0])
    first, last = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    return [[float(s[a]), float(s[b])] for a, b in zip(first, last)]


def segment_contributions(influence: InfluenceLines, magnitude: float) -> np.ndarray:
    """(n_responses, n_segments) linear change of each response when one
    lane segment carries the patch load (trapezoidal rule: exact for the
    lever-rule sharing of a load between the segment's end points)."""
    eta = influence.values
    ds = np.diff(influence.s)
    return 0.5 * (eta[:, 1:] + eta[:, :-1]) * ds * magnitude


def _patch_tasks(session, influence: InfluenceLines, load):
    """Distinct critical patches; ``own[(r, sense)] = (task index or -1, linear value)``."""
    p = float(np.linalg.norm(load))
    contrib = segment_contributions(influence, p)
    s = influence.s
    tasks, labels, seen, own = [], [], {}, {}
    for r, kind in enumerate(influence.kind):
        if kind == "reaction":
            continue
        c = contrib[r]
        floor = NEGLIGIBLE * float(np.max(np.abs(c), initial=0.0))
        for sense, mask in (("max", c > floor), ("min", c < -floor)):
            linear = influence.base[r] + float(c[mask].sum())
            if not mask.any():
                own[(r, sense)] = (-1, linear)
                continue
            key = mask.tobytes()
            if key not in seen:
                seen[key] = len(tasks)
                intervals = _runs(mask, s)
                tasks.append(PatchTask(len(tasks), tuple(map(tuple, intervals)), tuple(load)))
                labels.append({"intervals": intervals})
            own[(r, sense)] = (seen[key], linear)
    return tasks, labels, own


def _flag_nonlinear(out: StudyOutcome, infl: InfluenceLines, own: dict, got: list, base: TaskResult) -> None:
    """Linear predictions of each response's own critical patch, and where
    the nonlinear solve differs from them by more than NONLINEAR_FLAG."""
    node_pos = {n: k for k, n in enumerate(out.node_ids)}
    member_pos = {m: k for k, m in enumerate(out.member_ids)}
    by_index = {r.index: r for r in got}
    changes = {"displacement": [], "tension": []}
    rows = []
    for (r, sense), (task, linear) in own.items():
        res = base if task < 0 else by_index[task]
        kind = infl.kind[r]
        if kind == "displacement":
            value = float(res.displacements[node_pos[infl.owner[r]], infl.direction[r]])
        else:
            value = float(res.max_tension[member_pos[infl.owner[r]]])
        ok = res.converged
        changes[kind].append(max(abs(linear - infl.base[r]), abs(value - infl.base[r]) if ok else 0.0))
        rows.append((r, sense, kind, linear, value, ok))
    scale = {k: max(v, default=0.0) for k, v in changes.items()}
    for r, sense, kind, linear, value, ok in rows:
        d_lin, d_nl = linear - infl.base[r], value - infl.base[r]
        flagged = bool(ok and abs(d_nl - d_lin) > NONLINEAR_FLAG * max(abs(d_lin), abs(d_nl))
                       and abs(d_nl - d_lin) > NEGLIGIBLE_CHANGE * scale[kind])
        name = infl.owner[r]
        if not ok:   # the critical patch of this response did not converge
            e = out.node_extra if kind == "displacement" else out.member_extra
            e.setdefault(name, {"linear": {"max": [None] * 3, "min": [None] * 3} if kind == "displacement"
                                else {}, "nonlinear": {"max": [False] * 3, "min": [False] * 3}
                                if kind == "displacement" else {}})
            e[name].setdefault("failed", {})[sense] = True
        if kind == "displacement":
            e = out.node_extra.setdefault(name, {"linear": {"max": [None] * 3, "min": [None] * 3},
                                                 "nonlinear": {"max": [False] * 3, "min": [False] * 3}})
            e["linear"][sense][infl.direction[r]] = linear
            e["nonlinear"][sense][infl.direction[r]] = flagged
        else:
            e = out.member_extra.setdefault(name, {"linear": {}, "nonlinear": {}})
            e["linear"][sense] = linear
            e["nonlinear"][sense] = flagged


# -- sweep -------------------------------------------------------------------------

def sweep_positions(lane_length: float, steps: int, length: float | None) -> np.ndarray:
    """Patch starts ``k (L - length) / (steps - 1)``, or point positions ``k L / (steps - 1)``."""
    span = lane_length - (length or 0.0)
    return np.arange(steps) * span / (steps - 1)


def _sweep_tasks(lane: Lane, study):
    starts = sweep_positions(lane.length, study.steps, study.length)
    tasks, labels = [], []
    for k, a in enumerate(starts.tolist()):
        if study.length is not None:
            b = min(a + study.length, lane.length)
            tasks.append(PatchTask(k, ((a, b),), tuple(study.load)))
            labels.append({"start": a, "end": b})
        else:
            tasks.append(PointTask(k, a, tuple(study.load)))
            labels.append({"position": a})
    return tasks, labels


# -- tolerance ---------------------------------------------------------------------

def length_errors(model: Model, study) -> np.ndarray:
    """(samples, n_members) unstressed-length errors, m (0 for beams).

    All samples are drawn up front from one generator seeded with ``seed``,
    so a sample's errors do not depend on how the solves are distributed.
    """
    rng = np.random.default_rng(study.seed)
    nm = len(model.members)
    takes = np.array([m.family in ("cable", "bar") for m in model.members], dtype=bool)
    L0 = np.zeros(nm)
    for f in ("cable", "bar"):
        t = model.families[f]
        if len(t):
            L0 += np.bincount(t.member, weights=t.props["unstressed_length"], minlength=nm)
    n = int(takes.sum())
    if study.sigma is not None:
        draws = rng.standard_normal((study.samples, n)) * study.sigma
    else:
        draws = rng.uniform(-study.range, study.range, (study.samples, n))
    out = np.zeros((study.samples, nm))
    out[:, takes] = draws * L0[takes] if study.relative else draws
    return out


def _tolerance_tasks(model: Model, study):
    errors = length_errors(model, study)
    return ([LengthErrorTask(i, errors[i]) for i in range(study.samples)],
            [{"sample": i} for i in range(study.samples)])


def _statistics(out: StudyOutcome, got: list) -> None:
    ok = [r for r in got if r.converged]
    out.samples = {"index": np.array([r.index for r in got]), "converged": np.array([r.converged for r in got]),
                   "tension": np.stack([r.max_tension for r in got]) if got else None,
                   "displacement": np.stack([r.displacements for r in got]) if got else None}
    if len(ok) < 2:
        return
    T = np.stack([r.max_tension for r in ok])
    D = np.stack([r.displacements for r in ok])
    out.statistics = {"mean_tension": T.mean(axis=0), "std_tension": T.std(axis=0, ddof=1),
                      "p05_tension": np.percentile(T, 5, axis=0), "p95_tension": np.percentile(T, 95, axis=0),
                      "mean_displacement": D.mean(axis=0), "std_displacement": D.std(axis=0, ddof=1),
                      "samples": len(ok)}
