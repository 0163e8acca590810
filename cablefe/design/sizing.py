"""Catalogue sizing: each ``[[design.size]]`` group gets the smallest section that passes every check.

Catalogues are ordered smallest first (by area, then breaking load), the
order of capacity and stiffness.  Two kinds of check decide:

* strength (the cable check, cable_factor x largest tension / breaking
  load, and for beams the elastic stress check) is evaluated with the
  forces of the last analysis for every catalogue section from the
  smallest up (:func:`select`);
* stiffness (slack margin, deck deflection, support uplift) changes with a
  section only through the analysis: a failing one steps its group(s) one
  section up, after one probe analysis with the largest sections has shown
  that some catalogue section can make it pass.  A check that no section
  passes is said so (``no_section_passes`` in ``design.json``, the message
  in the CLI and the report) and does not drive the choice.

A new section changes the stiffness and the weight, so the loads move
between members: the case is analysed again (shaped again first when it
has ``[shape]``) and the selection repeated until no group changes.  When a
choice comes back (the selection cycles between sections) the larger
section of the cycle is taken for each group, analysed once more, and the
sizing reports that the choice oscillates.
"""
from __future__ import annotations

import copy
import logging
import math
from dataclasses import dataclass, replace

import numpy as np

from ..errors import CaseError
from ..spec import CaseSpec, Section
from .checks import cable_utilization, run_checks, select_targets, stress_utilization

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class SizingRun:
    """Outcome of sizing: the sized case, its results and the history (for ``design.json``)."""

    spec: CaseSpec
    results: object
    settled: bool
    history: dict
    cutting: object = None       # cutting table of the re-shaped sized case, or None


def group_members(spec: CaseSpec) -> list[list[str]]:
    """Member ids of each size group, in case order."""
    from ..patterns import PatternIndex
    index = PatternIndex([m.id for m in spec.members])
    return [[index.ids[k] for k in index.indices(g.members)] for g in spec.design.size]


def apply_sections(spec: CaseSpec, choice: list[int]) -> CaseSpec:
    """A new case whose size groups carry the chosen catalogue sections (index per group).

    ``raw`` is changed alike (sections written in the file's units), so the
    case writes out as a complete sized case.
    """
    groups = group_members(spec)
    sections = dict(spec.sections)
    raw = copy.deepcopy(dict(spec.raw)) if spec.raw is not None else None
    new_section: dict[str, str] = {}
    u = spec.units
    for g, (grp, members) in enumerate(zip(spec.design.size, groups)):
        cat = spec.catalogues[grp.catalogue]
        cs = cat.sections[choice[g]]
        sec = Section(name=cs.name, material=cat.material, area=cs.area, weight=cs.weight,
                      breaking_load=cs.breaking_load, diameter=cs.diameter, Iy=cs.Iy, Iz=cs.Iz, J=cs.J,
                      Wy=cs.Wy, Wz=cs.Wz)
        old = spec.sections.get(cs.name)
        if old is not None and old != sec and cs.name not in new_section.values():
            raise CaseError(f"{grp.key}.catalogue", f"catalogue section {cs.name} has the name of a different "
                                                    "section of the case: rename one of them")
        sections[cs.name] = sec
        for mid in members:
            new_section[mid] = cs.name
        if raw is not None:
            L, F = u.length_scale, u.force_scale
            entry = {"material": cat.material, "area": cs.area / L ** 2}
            for name, value, scale in (("weight", cs.weight, F / L), ("breaking_load", cs.breaking_load, F),
                                       ("diameter", cs.diameter, L), ("Iy", cs.Iy, L ** 4), ("Iz", cs.Iz, L ** 4),
                                       ("J", cs.J, L ** 4), ("Wy", cs.Wy, L ** 3), ("Wz", cs.Wz, L ** 3)):
                if value is not None:
                    entry[name] = value / scale
            raw.setdefault("sections", {})[cs.name] = entry
    members = tuple(replace(m, section=new_section[m.id]) if m.id in new_section else m for m in spec.members)
    if raw is not None:
        for entry in raw.get("members", []):
            if entry.get("id") in new_section:
                entry["section"] = new_section[entry["id"]]
        tables = raw.get("member_table", [])
        for t in [tables] if isinstance(tables, dict) else tables:
            hit = [new_section[i] for i in t.get("ids", []) if i in new_section]
            if hit:
                t["section"] = hit[0]
    return replace(spec, sections=sections, members=members, raw=raw)


def _analyse(spec: CaseSpec, names, linear_solver=None, progress=None):
    """Shape (when the case has [shape]) and solve; returns (spec, Results, cutting table or None)."""
    from .. import build_model, solve
    cutting = None
    if spec.shape is not None:
        from ..solvers.formfind import find_shape
        found = find_shape(spec, linear_solver=linear_solver)
        spec, cutting = found.spec, found.cutting
    model = build_model(spec)
    return spec, solve(model, names=names, progress=progress, linear_solver=linear_solver), cutting


def select(spec: CaseSpec, results) -> tuple[list[int], list[bool]]:
    """For each group, the smallest catalogue section passing the strength checks with these forces.

    Returns (section index per group, whether it passes); the largest section
    when none passes.
    """
    design = spec.design
    names, _ = select_targets(design, results.names, [])
    model = results.model
    forces = [results.member_forces(n) for n in names]
    choice, passes = [], []
    for grp, members in zip(design.size, group_members(spec)):
        cat = spec.catalogues[grp.catalogue]
        fy = spec.materials[cat.material].fy
        idx = np.array([model.member_index[m] for m in members])
        kinds = {model.members[k].type for k in idx}
        tmax = max((float(f.max_tension[idx].max()) for f in forces), default=0.0)
        beams = [k for k in idx if model.members[k].type == "beam"]
        for s, cs in enumerate(cat.sections):
            u = 0.0
            if kinds - {"beam"} and cs.breaking_load is not None:
                u = max(u, float(cable_utilization(tmax, cs.breaking_load, design.cable_factor)))
            if beams and None not in (cs.Wy, cs.Wz, fy):
                # stress with the forces of the last analysis, this section's A and W
                u = max([u] + [stress_utilization(f.beam_end_forces[k], cs.area, cs.Wy, cs.Wz, fy,
                                                  design.yield_factor)[0] for f in forces for k in beams])
            if u <= 1.0:
                choice.append(s)
                passes.append(True)
                break
        else:
            choice.append(len(cat.sections) - 1)
            passes.append(False)
    return choice, passes


#: checks that a section changes only through the stiffness it gives the
#: structure: they are read from an analysis with the section, not evaluated
#: with the forces of another one
STIFFNESS_CHECKS = ("slack", "deflection-down", "deflection-up", "uplift")


def stiffness_failures(spec: CaseSpec, results) -> dict[tuple[str, int | None], tuple[tuple[int, ...], float]]:
    """The failing stiffness-driven checks of an analysed design, and the groups they point at.

    Returns ``(check, group or None) -> (groups that can change it, worst
    utilization)``: a slack margin points at the group of its member; a deck
    deflection or a support uplift at every group (the whole structure
    carries the deck).  Uplift's "utilization" is the largest uplift, N.
    """
    groups = group_members(spec)
    group_of = {m: g for g, members in enumerate(groups) for m in members}
    every = tuple(range(len(groups)))
    outcome = run_checks(spec.design, results)
    out: dict = {}
    for c in outcome.checks:
        if c.utilization <= 1.0 or c.check not in STIFFNESS_CHECKS:
            continue
        if c.check == "slack":
            if c.item not in group_of:
                continue
            key, gs = ("slack", group_of[c.item]), (group_of[c.item],)
        else:
            key, gs = (c.check, None), every
        u = max(out.get(key, (gs, -math.inf))[1], c.utilization)
        out[key] = (gs, u)
    up = [-v for per in outcome.uplift.values() for v in per.values()]
    if up:
        out[("uplift", None)] = (every, max(up))
    return out


def _check_label(key, labels) -> str:
    check, g = key
    return f"{check} of {labels[g]}" if g is not None else check


def size_members(spec: CaseSpec, results, envelopes=None, linear_solver=None, progress=None) -> SizingRun:
    """Iterate analysis and selection until no group changes.

    Each analysed choice is checked in full.  Strength (cable, stress) gives
    per group the smallest passing section with the forces of that analysis
    (:func:`select`).  A failing stiffness check (slack margin, deck
    deflection, uplift: :data:`STIFFNESS_CHECKS`) raises a floor under the
    groups it points at: first one probe analysis with those groups at their
    largest section tells whether any catalogue section can make it pass;
    if not, the check is reported as one that no section passes and it does
    not drive the choice; if so, the group is stepped one section up (of
    several groups, the one whose step lowers the check most, by one probe
    analysis each).  The choice is the larger of strength and floor; floors
    only rise, so a group stepped for stiffness stays at least there.
    """
    design = spec.design
    labels = [", ".join(g.members) for g in design.size]
    tops = [len(spec.catalogues[g.catalogue].sections) - 1 for g in design.size]
    names = results.names
    history: list[list[int]] = []
    settled, message = False, ""
    current_spec, current, cutting = spec, results, None
    floor = [0] * len(labels)
    fixable: set = set()
    unfixable: dict = {}        # key -> (groups, utilization with the largest sections)
    probes = 0

    def sec_name(g, c):
        return spec.catalogues[design.size[g].catalogue].sections[c].name

    def probe(choice):
        nonlocal probes
        probes += 1
        s, r, _ = _analyse(apply_sections(spec, choice), names, linear_solver, progress)
        return stiffness_failures(s, r) if r.all_converged else None

    def stiffness_steps(choice):
        """Raise ``floor`` for the failing stiffness checks of the analysed ``choice``."""
        for key, (gs, u) in stiffness_failures(current_spec, current).items():
            if key in unfixable:
                continue
            below = [g for g in gs if choice[g] < tops[g]]
            if key not in fixable:
                if not below:
                    unfixable[key] = (gs, u)
                    continue
                top = [tops[g] if g in gs else c for g, c in enumerate(choice)]
                found = probe(top)
                if found is not None and key in found:
                    unfixable[key] = (gs, found[key][1])
                    continue
                fixable.add(key)
            if not below:
                continue
            if len(below) == 1:
                g = below[0]
            else:
                # the group whose one-step-up lowers this check most; ties: the cheaper step
                def after(g):
                    found = probe([c + 1 if h == g else c for h, c in enumerate(choice)])
                    return math.inf if found is None else found.get(key, (gs, 0.0))[1]
                cats = [spec.catalogues[design.size[g].catalogue].sections for g in below]
                g = min(below, key=lambda g, _c=dict(zip(below, cats)): (
                    after(g), _c[g][choice[g] + 1].area - _c[g][choice[g]].area))
            floor[g] = max(floor[g], choice[g] + 1)

    if not results.all_converged:
        info = {"settled": False, "message": "a result of the case as given did not converge: no sizing",
                "groups": labels, "history": [], "final": {}, "analyses": 0}
        return SizingRun(spec, results, False, info)
    choice, passes = select(spec, results)
    for it in range(design.max_sizing_iterations):
        if history and choice == history[-1]:
            settled, message = True, f"settled after {len(history)} analysis(es): no group changes"
            break
        if choice in history:
            cycle = history[history.index(choice):]
            choice = [max(c[g] for c in cycle) for g in range(len(choice))]
            message = ("the choice oscillates between " + "; ".join(
                f"{lab}: {', '.join(sorted({spec.catalogues[design.size[g].catalogue].sections[c[g]].name for c in cycle}))}"
                for g, lab in enumerate(labels)) + ": the larger section of each group is taken")
            history.append(choice)
            current_spec, current, cutting = _analyse(apply_sections(spec, choice), names, linear_solver, progress)
            _, passes = select(current_spec, current)
            break
        history.append(choice)
        log.info("sizing iteration %d: %s", it + 1, choice)
        current_spec, current, cutting = _analyse(apply_sections(spec, choice), names, linear_solver, progress)
        if not current.all_converged:
            message = (f"the analysis with {', '.join(sec_name(g, c) for g, c in enumerate(choice))} did not "
                       "converge: sizing stopped")
            break
        strength, passes = select(current_spec, current)
        stiffness_steps(choice)
        choice = [max(a, b) for a, b in zip(strength, floor)]
    else:
        message = f"no settled choice after {design.max_sizing_iterations} analyses ([design] max_sizing_iterations)"
    final = history[-1] if history else choice
    hist = [{lab: sec_name(g, c[g]) for g, lab in enumerate(labels)} for c in history]
    # does the last analysed choice pass the strength checks of its own forces?
    own, own_pass = select(current_spec, current)
    final_info = {lab: {"section": sec_name(g, final[g]), "catalogue": design.size[g].catalogue,
                        "passes": bool(own_pass[g] and own[g] <= final[g]),
                        "no_section_passes": sorted(k[0] for k in unfixable if g in unfixable[k][0])}
                  for g, lab in enumerate(labels)}
    strength_fail = [k for k, v in final_info.items() if not (own_pass[labels.index(k)])]
    if strength_fail:
        message += "; no catalogue section passes the strength check for " + ", ".join(strength_fail)
    F = spec.units
    if unfixable:
        def says(k, gs, u):
            largest = " with the largest section" + ("s" if len(gs) > 1 else "")
            if k[0] == "uplift":
                return f"no catalogue section removes the support uplift ({u / F.force_scale:.4g} {F.force}{largest})"
            return (f"no catalogue section makes {_check_label(k, labels)} pass ("
                    + ("slack" if not math.isfinite(u) else f"u = {u:.3g}") + largest + ")")
        message += "; " + "; ".join(says(k, gs, u) for k, (gs, u) in unfixable.items()) + (
            ": " + ("it does" if len(unfixable) == 1 else "they do") + " not drive the choice")
    if envelopes:
        message += "; study envelopes are those of the case before sizing (run the studies on sized.toml)"
    info = {"settled": settled, "message": message, "groups": labels, "history": hist, "final": final_info,
            "analyses": len(history) + probes, "probe_analyses": probes,
            "no_section_passes": [
                {"check": k[0], "group": labels[k[1]] if k[1] is not None else None, "groups": [labels[g] for g in gs],
                 # uplift: the largest uplift (case force unit); a slack member: null
                 "utilization_with_largest": (u if math.isfinite(u) and k[0] != "uplift" else None),
                 **({"largest_uplift": u / F.force_scale} if k[0] == "uplift" else {})}
                for k, (gs, u) in unfixable.items()]}
    return SizingRun(current_spec, current, settled, info, cutting)


def with_final_checks(info: dict, outcome, spec: CaseSpec) -> dict:
    """The sizing history with each group's ``passes`` from every check of its members.

    A group whose members still fail a check is marked (``checks_failing``)
    and named in the message: a check that no catalogue section passes was
    found so during sizing (``no_section_passes``); any other failing check
    means sizing stopped before it was met (oscillation, iteration limit).
    """
    info = {**info, "final": {k: dict(v) for k, v in info.get("final", {}).items()}}
    failing = []
    for lab, members in zip(info.get("groups", []), group_members(spec)):
        bad = [outcome.governing[m] for m in members if m in outcome.governing
               and not outcome.governing[m].utilization <= 1.0]
        if lab in info["final"]:
            info["final"][lab]["passes"] = info["final"][lab]["passes"] and not bad
            info["final"][lab]["checks_failing"] = sorted({c.check for c in bad})
        known = set(info["final"].get(lab, {}).get("no_section_passes", []))
        other = sorted({c.check for c in bad} - known)
        if other:
            failing.append(f"{lab} ({', '.join(other)} in {len(bad)} member(s))")
    if failing:
        info["message"] += "; members of " + "; ".join(failing) + " still fail a check after sizing"
    known = {e.get("check") for e in info.get("no_section_passes", [])}
    deck = sorted({c.check for c in outcome.checks if c.check.startswith("deflection")
                   and not c.utilization <= 1.0 and c.check not in known})
    if deck:
        info["message"] += f"; the deck still fails {', '.join(deck)} after sizing"
    return info


def write_sized_case(path, spec: CaseSpec, case_path, caution: str, cutting=None):
    """Write the complete sized case (shaped again when the case has [shape]).

    A re-shaped case gets its cutting table beside it (``sized-cutting.csv``).
    """
    from ..io.case_writer import write_shape_outputs, write_shaped_case
    header = (f"Sized by cablefe from {case_path}: each [[design.size]] group carries the catalogue section\n"
              "chosen by the design checks" + (", and the case is shaped again with it.\n" if spec.shape else ".\n")
              + caution)
    if cutting is not None:
        return write_shape_outputs(path, spec, cutting, header)[0]
    return write_shaped_case(path, spec, header)
