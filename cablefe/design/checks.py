"""Design checks over solved results and study envelopes.

Every check gives a utilization u (u <= 1 passes), in SI units inside:

``cable``  (cables and tension-only bars with a ``breaking_load``)
    u = cable_factor * T_max / breaking_load, T_max the largest tension
    along the member.
``slack``  (cables and tension-only bars)
    the smallest tension T_min against a share of the permanent tension:
    u = min_tension * T_perm / T_min, and u = inf when the member is slack
    (T_min <= 0).  Slackening is always reported, whatever the factor.
``stress`` (beams whose section has ``Wy``, ``Wz`` and material ``fy``)
    elastic extreme-fibre stress from the axial force and both bending
    moments at every element end, sigma = |N|/A + |My|/Wy + |Mz|/Wz (the
    largest of N/A +- My/Wy +- Mz/Wz over the four corners of a doubly
    symmetric section); u = yield_factor * sigma / fy.
``deflection-down`` / ``deflection-up`` (deck nodes)
    the largest downward and upward live deflection (vertical displacement
    from the permanent state) against span / deflection_limit.

Supports that bear the structure (a beam or a compression bar meets them)
are flagged for uplift when their vertical reaction pulls down.  Every
factor is a placeholder default unless the case sets it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from ..model import Model, report_deck_nodes
from ..patterns import match_ids, match_indices
from ..spec import DesignSpec

#: vertical reactions smaller than this share of the largest reaction of a
#: result are round-off, not uplift
UPLIFT_NOISE = 1e-6


@dataclass(frozen=True)
class Check:
    """One check of one member (or deck node) in one result or envelope.

    ``demand`` and ``capacity`` are SI (N, Pa or m by ``quantity``);
    ``utilization`` is demand over capacity with the factor applied (inf
    for a slack member).
    """

    item: str
    check: str
    result: str
    utilization: float
    demand: float
    capacity: float
    quantity: str            # "force" | "stress" | "length"
    section: str = ""
    note: str = ""


@dataclass(frozen=True)
class ResultData:
    """What the checks need from one result or study envelope, SI units.

    max_tension, min_tension, slack : (nm,) per member (NaN where absent)
    beam_ends : member index -> (count, 12) local end forces, or {} for an envelope
    uz_max, uz_min : (nn,) vertical displacement extremes from the case's coordinates
    reactions : node id -> (3,) N, or {} for an envelope
    base : name of the result that live deflections are measured from, or None
    lane : node indices of the study lane (envelopes), or None
    """

    name: str
    kind: str                # "result" | "envelope"
    max_tension: np.ndarray
    min_tension: np.ndarray
    slack: np.ndarray
    beam_ends: Mapping[int, np.ndarray]
    uz_max: np.ndarray
    uz_min: np.ndarray
    reactions: Mapping[str, np.ndarray]
    converged: bool = True
    base: str | None = None
    lane: np.ndarray | None = None


@dataclass(frozen=True)
class DesignOutcome:
    """All checks of a design, with the governing one per member."""

    factors: Mapping[str, float]
    placeholders: tuple[str, ...]
    checks: tuple[Check, ...]
    governing: Mapping[str, Check]
    unchecked: Mapping[str, str]
    sections: Mapping[str, str]
    slack: Mapping[str, tuple[str, ...]]
    uplift: Mapping[str, Mapping[str, float]]
    permanent: str | None
    span: float | None
    results: tuple[str, ...]
    notes: tuple[str, ...] = ()
    sizing: Mapping | None = field(default=None)

    @property
    def largest(self) -> Check | None:
        return max(self.governing.values(), key=lambda c: c.utilization, default=None)

    def utilization_by_result(self) -> dict[str, dict[str, float]]:
        """result -> member id -> largest utilization in that result (for the meshes)."""
        out: dict[str, dict[str, float]] = {}
        for c in self.checks:
            if c.check.startswith("deflection"):
                continue
            row = out.setdefault(c.result, {})
            row[c.item] = max(row.get(c.item, -math.inf), c.utilization)
        return out


def result_data(results, name: str) -> ResultData:
    """The check data of one solved result."""
    mf = results.member_forces(name)
    uz = results.displacements(name)[:, 2]
    return ResultData(name=name, kind="result", max_tension=mf.max_tension, min_tension=mf.min_tension,
                      slack=mf.slack, beam_ends=mf.beam_end_forces, uz_max=uz, uz_min=uz,
                      reactions=results.reactions(name), converged=results[name].converged)


def envelope_data(model: Model, envelope: Mapping, units, lane: np.ndarray | None) -> ResultData:
    """The check data of a study envelope (``envelope.json``, in the case's units)."""
    L, F = units.length_scale, units.force_scale
    nm, nn = len(model.members), len(model.node_ids)
    hi, lo = np.full(nm, np.nan), np.full(nm, np.nan)
    slack = np.zeros(nm, bool)
    for mid, e in envelope.get("members", {}).items():
        k = model.member_index.get(mid)
        if k is None:
            continue
        hi[k] = float(e.get("max_tension", np.nan)) * F
        lo[k] = float(e.get("min_tension", np.nan)) * F
        slack[k] = bool(e.get("slack", False)) or lo[k] <= 0.0
    up, down = np.full(nn, np.nan), np.full(nn, np.nan)
    for nid, e in envelope.get("nodes", {}).items():
        k = model.node_index.get(nid)
        if k is None:
            continue
        up[k] = float(e["max_displacement"][2]) * L
        down[k] = float(e["min_displacement"][2]) * L
    return ResultData(name=str(envelope.get("name", "")), kind="envelope", max_tension=hi, min_tension=lo,
                      slack=slack, beam_ends={}, uz_max=up, uz_min=down, reactions={},
                      base=envelope.get("base"), lane=lane)


def permanent_result(design: DesignSpec, model: Model, names) -> str | None:
    """The result holding the permanent state.

    ``[design] permanent``, else a result named ``permanent``, else the
    result whose factors are exactly the ``[shape] permanent`` load cases at
    1.0; None when none is found.
    """
    if design.permanent is not None:
        return design.permanent
    if "permanent" in names:
        return "permanent"
    shape = model.spec.shape
    if shape is not None and shape.permanent:
        want = {c: 1.0 for c in shape.permanent}
        for n, factors in model.results_to_run():
            if n in names and {c: float(f) for c, f in factors.items() if f} == want:
                return n
    return None


def lane_nodes(model: Model, study: Mapping) -> np.ndarray | None:
    """Node indices of a study's lane (``path``: node ids, or a member pattern)."""
    path = study.get("path")
    if isinstance(path, str):
        path = [path]
    if not isinstance(path, list):
        return None
    idx: list[int] = []
    for p in path:
        if not isinstance(p, str):
            return None
        if p in model.node_index:
            idx.append(model.node_index[p])
            continue
        for k in match_indices(p, [mem.id for mem in model.members]):
            idx.extend(model.node_index[n] for n in model.members[k].node_ids)
    return np.unique(np.asarray(idx, dtype=np.int64)) if idx else None


def deck_span(model: Model, nodes: np.ndarray) -> float:
    """Horizontal extent of the deck nodes along their longer plan direction, m."""
    xy = model.coordinates[nodes, :2]
    return float(np.ptp(xy, axis=0).max()) if len(nodes) else 0.0


def bearing_supports(model: Model) -> list[str]:
    """Supported nodes with a vertical restraint met by a beam or a compression-capable bar."""
    bearing = set()
    spec = model.spec
    for mem in spec.members:
        if mem.type == "beam" or (mem.type == "bar" and not mem.tension_only):
            bearing.update(mem.nodes)
    return [n for n, mask in spec.supports.items() if mask[2] and n in bearing]


def _member_props(model: Model):
    """Per member: section, material, breaking load, A, Wy, Wz, fy, tension-only flag."""
    spec = model.spec
    out = []
    by_id = {m.id: m for m in spec.members}
    for mem in model.members:
        sec = spec.sections[mem.section]
        mat = spec.materials[sec.material]
        m = by_id[mem.id]
        out.append((sec, mat, mem.type == "cable" or (mem.type == "bar" and m.tension_only)))
    return out


def cable_utilization(max_tension, breaking_load, cable_factor):
    """u = cable_factor * max(T_max, 0) / breaking_load (common practice form; the factor is the user's)."""
    return cable_factor * np.maximum(max_tension, 0.0) / breaking_load


def stress_utilization(ends: np.ndarray, area, Wy, Wz, fy, yield_factor) -> tuple[float, float]:
    """(u, sigma): largest |N|/A + |My|/Wy + |Mz|/Wz over the element ends (local end forces, N, N m)."""
    N = np.concatenate([ends[:, 0], ends[:, 6]])
    My = np.concatenate([ends[:, 4], ends[:, 10]])
    Mz = np.concatenate([ends[:, 5], ends[:, 11]])
    sigma = float(np.max(np.abs(N) / area + np.abs(My) / Wy + np.abs(Mz) / Wz))
    return yield_factor * sigma / fy, sigma


def check_design(design: DesignSpec, model: Model, data: list[ResultData], permanent: ResultData | None,
                 deck: np.ndarray | None = None) -> DesignOutcome:
    """Run every check over the given results and envelopes.

    Parameters
    ----------
    design : DesignSpec
    model : Model
    data : list of ResultData
        The results and envelopes to check (already chosen by ``design.results``).
    permanent : ResultData or None
        The permanent state: the reference of slack margins and of live
        deflections (None: deflections from the case's coordinates, no slack margin).
    deck : node indices, optional
        Deck nodes (``[report] deck``); an envelope with a lane uses its lane
        when this is None.
    """
    ids = [m.id for m in model.members]
    checked = match_indices(design.members, ids)
    props = _member_props(model)
    checks: list[Check] = []
    unchecked: dict[str, str] = {}
    notes: list[str] = []
    t_perm = permanent.min_tension if permanent is not None else None
    if permanent is None:
        notes.append("no permanent result (set [design] permanent): slack margins are not checked and "
                     "deflections are measured from the case's coordinates")
    tension_only = np.array([p[2] for p in props], dtype=bool)
    cables = [k for k in checked if props[k][2]]
    beams = [k for k in checked if model.members[k].type == "beam"]
    for k in checked:
        sec, mat, tension_only = props[k]
        mid = ids[k]
        if tension_only and sec.breaking_load is None:
            unchecked[mid] = f"section {sec.name} has no breaking_load: strength not checked"
        elif model.members[k].type == "beam" and (sec.Wy is None or sec.Wz is None or mat.fy is None):
            missing = [n for n, v in (("Wy", sec.Wy), ("Wz", sec.Wz)) if v is None]
            missing += [f"fy on material {mat.name}"] if mat.fy is None else []
            unchecked[mid] = f"section {sec.name} lacks {', '.join(missing)}: stress not checked"
        elif not tension_only and model.members[k].type == "bar":
            unchecked[mid] = "compression bar: no check (buckling is for the engineer)"
    slack: dict[str, tuple[str, ...]] = {}
    uplift: dict[str, dict[str, float]] = {}
    bearings = bearing_supports(model)
    deck_checks = 0
    for d in data:
        ok = np.isfinite(d.max_tension)
        # cables and tension-only bars: strength
        for k in cables:
            sec = props[k][0]
            if sec.breaking_load is None or not ok[k]:
                continue
            u = float(cable_utilization(d.max_tension[k], sec.breaking_load, design.cable_factor))
            checks.append(Check(ids[k], "cable", d.name, u, design.cable_factor * max(d.max_tension[k], 0.0),
                                sec.breaking_load, "force", sec.name))
        # tension-only: slack margin, and slackening always reported
        # every tension-only member, checked or not
        gone = ok & (d.slack | (d.min_tension <= 0.0)) & tension_only
        slack[d.name] = tuple(ids[k] for k in np.flatnonzero(gone))
        if t_perm is not None:
            for k in cables:
                if not ok[k] or not np.isfinite(d.min_tension[k]):
                    continue
                need = design.min_tension * max(float(t_perm[k]), 0.0)
                tmin = float(d.min_tension[k])
                slack_now = d.slack[k] or tmin <= 0.0
                u = math.inf if slack_now or t_perm[k] <= 0.0 else need / tmin
                note = "slack" if slack_now else ("slack under the permanent load" if t_perm[k] <= 0 else "")
                checks.append(Check(ids[k], "slack", d.name, u, tmin, need, "force", props[k][0].name, note))
        # beams: elastic stress
        for k in beams:
            sec, mat, _ = props[k]
            if ids[k] in unchecked or k not in d.beam_ends:
                continue
            u, sigma = stress_utilization(d.beam_ends[k], sec.area, sec.Wy, sec.Wz, mat.fy, design.yield_factor)
            checks.append(Check(ids[k], "stress", d.name, u, design.yield_factor * sigma, mat.fy, "stress", sec.name))
        # deck: live deflection
        nodes = deck if deck is not None else d.lane
        if nodes is not None and len(nodes) and d.name != (permanent.name if permanent else None):
            span = design.span or deck_span(model, nodes)
            ref = None
            if d.kind == "envelope" and d.base is not None and permanent is not None and d.base != permanent.name:
                notes.append(f"{d.name}: live deflection measured from the permanent result {permanent.name}, "
                             f"not from the study's base {d.base}")
            if permanent is not None:
                ref = permanent.uz_min
            base = ref[nodes] if ref is not None else np.zeros(len(nodes))
            down = -(d.uz_min[nodes] - base)
            up = d.uz_max[nodes] - base
            limit = span / design.deflection_limit if span > 0 else math.nan
            for which, values in (("deflection-down", down), ("deflection-up", up)):
                if not np.isfinite(values).any() or not limit > 0:
                    continue
                j = int(np.nanargmax(values))
                value = max(float(values[j]), 0.0)
                checks.append(Check(model.node_ids[int(nodes[j])], which, d.name, value / limit, value, limit,
                                    "length", note=f"span {span:.6g} m"))
                deck_checks += 1
        # bearings: uplift
        if d.reactions:
            scale = max((float(np.abs(r).max()) for r in d.reactions.values()), default=0.0)
            up_here = {n: float(d.reactions[n][2]) for n in bearings
                       if n in d.reactions and d.reactions[n][2] < -UPLIFT_NOISE * scale}
            if up_here:
                uplift[d.name] = up_here
    if deck is None and not any(d.lane is not None for d in data):
        notes.append("no deck nodes ([report] deck) and no study lane: deflections not checked")
    governing: dict[str, Check] = {}
    for c in checks:
        if c.check.startswith("deflection"):
            continue
        g = governing.get(c.item)
        if g is None or c.utilization > g.utilization:
            governing[c.item] = c
    sections = {ids[k]: model.members[k].section for k in checked}
    return DesignOutcome(
        factors={"cable_factor": design.cable_factor, "min_tension": design.min_tension,
                 "deflection_limit": design.deflection_limit, "yield_factor": design.yield_factor},
        placeholders=design.placeholders, checks=tuple(checks), governing=governing, unchecked=unchecked,
        sections=sections, slack=slack, uplift=uplift,
        permanent=permanent.name if permanent is not None else None, span=design.span,
        results=tuple(d.name for d in data), notes=tuple(dict.fromkeys(notes)))


def select_targets(design: DesignSpec, names, study_names) -> tuple[list[str], list[str]]:
    """The results and the study envelopes matched by ``design.results``."""
    return match_ids(design.results, list(names)), match_ids(design.results, list(study_names))


def run_checks(design: DesignSpec, results, envelopes: Mapping[str, Mapping] | None = None) -> DesignOutcome:
    """Check a solved model: the results and study envelopes named in ``design.results``.

    Parameters
    ----------
    design : DesignSpec
    results : cablefe.Results
    envelopes : study name -> envelope dict (``envelope.json`` content, case units), optional
    """
    model = results.model
    envelopes = envelopes or {}
    names, studies = select_targets(design, results.names, list(envelopes))
    perm_name = permanent_result(design, model, results.names)
    if perm_name is not None and not results[perm_name].converged:
        perm_name = None     # a state that was not reached is no reference (check_design notes it)
    permanent = result_data(results, perm_name) if perm_name is not None else None
    raw_studies = (model.spec.raw or {}).get("studies", [])
    if isinstance(raw_studies, Mapping):
        raw_studies = [raw_studies]
    lanes = {s.get("name"): lane_nodes(model, s) for s in raw_studies if isinstance(s, Mapping)}
    deck = report_deck_nodes(model)
    wanted = [s.get("name") for s in raw_studies if isinstance(s, Mapping) and isinstance(s.get("name"), str)]
    _, named = select_targets(design, [], wanted)
    missing = [s for s in named if s not in envelopes]
    skipped = [n for n in names if not results[n].converged]
    data = [result_data(results, n) for n in names if n not in skipped]
    data += [envelope_data(model, {**envelopes[s], "name": s}, model.spec.units, lanes.get(s)) for s in studies]
    if deck is None:
        lane = next((v for v in lanes.values() if v is not None), None)
        if lane is not None:
            deck = lane   # the study lane is the deck of every result
    outcome = check_design(design, model, data, permanent, deck)
    extra = tuple(f"{n} did not converge: not checked" for n in skipped)
    extra += tuple(f"study {s}: no envelope.json found, not checked" for s in missing)
    if extra:
        from dataclasses import replace
        outcome = replace(outcome, notes=outcome.notes + extra)
    return outcome
