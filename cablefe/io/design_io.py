"""Writers of the design checks: ``design.json`` and ``design.csv``, in the case's units.

``design.json``::

    {"caution": "...", "units": {...},
     "factors": {"cable_factor": 2.2, ...}, "placeholders": ["cable_factor", ...],
     "permanent": "permanent",
     "members": {"H5": {"utilization": 0.41, "check": "cable", "result": "full",
                        "section": "HS-200", "checks": {"cable": {...}, "slack": {...}}}},
     "unchecked": {"D1": "compression bar: ..."},
     "deck": {"crowd": {"deflection-down": {...}, "deflection-up": {...}}},
     "slack": {"crowd": ["H3"]}, "uplift": {"crowd": {"D0": -3.1}},
     "notes": [...], "sizing": {...}}

A slack member's utilization is infinite: it is written as ``null`` with
``"slack": true``.  ``design.csv`` has one row per check.
"""
from __future__ import annotations

import csv
import io
import math
from pathlib import Path

from .atomic import write_text
from .results_io import dumps_readable

FACTOR_MEANING = {
    "cable_factor": "required breaking load / design tension of cables and tension-only members",
    "min_tension": "tension-only members: smallest tension / permanent tension must reach this",
    "deflection_limit": "deck: largest live deflection <= span / this",
    "yield_factor": "beams: elastic stress <= fy / this",
}


def _scale(quantity, units):
    return {"force": units.force_scale, "length": units.length_scale,
            "stress": units.force_scale / units.length_scale ** 2}[quantity]


def _unit(quantity, units):
    return {"force": units.force, "length": units.length, "stress": f"{units.force}/{units.length}^2"}[quantity]


def _u(value):
    return None if not math.isfinite(value) else value


def _entry(c, units):
    s = _scale(c.quantity, units)
    e = {"utilization": _u(c.utilization), "result": c.result, "demand": c.demand / s,
         "capacity": c.capacity / s, "unit": _unit(c.quantity, units)}
    if not math.isfinite(c.utilization):
        e["slack"] = True
    if c.note:
        e["note"] = c.note
    return e


def design_dict(outcome, units, caution: str) -> dict:
    """The content of ``design.json``."""
    members = {}
    per_member: dict[str, dict] = {}
    for c in outcome.checks:
        if c.check.startswith("deflection"):
            continue
        row = per_member.setdefault(c.item, {})
        if c.check not in row or c.utilization > row[c.check].utilization:
            row[c.check] = c
    for mid, g in sorted(outcome.governing.items(), key=lambda kv: -kv[1].utilization):
        e = {"utilization": _u(g.utilization), "check": g.check, "result": g.result, "section": g.section}
        if not math.isfinite(g.utilization):
            e["slack"] = True
        e["checks"] = {name: _entry(c, units) for name, c in per_member.get(mid, {}).items()}
        members[mid] = e
    deck: dict[str, dict] = {}
    for c in outcome.checks:
        if c.check.startswith("deflection"):
            deck.setdefault(c.result, {})[c.check] = {"node": c.item, **_entry(c, units)}
    F = units.force_scale
    out = {
        "caution": caution,
        "units": {"length": units.length, "force": units.force},
        "factors": dict(outcome.factors),
        "placeholders": list(outcome.placeholders),
        "factor_meaning": {k: FACTOR_MEANING[k] + (" (PLACEHOLDER default: set it from the governing code)"
                                                   if k in outcome.placeholders else "")
                           for k in outcome.factors},
        "permanent": outcome.permanent,
        "results": list(outcome.results),
        "members": members,
        "unchecked": dict(outcome.unchecked),
        "deck": deck,
        "slack": {k: list(v) for k, v in outcome.slack.items()},
        "uplift": {r: {n: v / F for n, v in d.items()} for r, d in outcome.uplift.items()},
        "notes": list(outcome.notes),
    }
    if outcome.sizing is not None:
        out["sizing"] = outcome.sizing
    return out


def design_csv_text(outcome, units) -> str:
    """One row per check: item, check, result, section, demand, capacity, unit, utilization, note."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["item", "check", "result", "section", "demand", "capacity", "unit", "utilization", "note"])
    for c in sorted(outcome.checks, key=lambda c: -c.utilization):
        s = _scale(c.quantity, units)
        w.writerow([c.item, c.check, c.result, c.section, repr(float(c.demand) / s), repr(float(c.capacity) / s),
                    _unit(c.quantity, units), "inf" if not math.isfinite(c.utilization) else repr(float(c.utilization)),
                    c.note])
    return buf.getvalue()


def write_design(outcome, folder, units, caution: str) -> list[Path]:
    """Write ``design.json`` and ``design.csv`` atomically; returns their paths."""
    folder = Path(folder)
    write_text(folder / "design.json", dumps_readable(design_dict(outcome, units, caution)) + "\n")
    write_text(folder / "design.csv", design_csv_text(outcome, units))
    return [folder / "design.json", folder / "design.csv"]


def read_envelopes(folder) -> dict[str, dict]:
    """Study name -> ``envelope.json`` content, for every ``folder/studies/*/envelope.json``."""
    import json
    out = {}
    for path in sorted(Path(folder).glob("studies/*/envelope.json")):
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if isinstance(data, dict):
            out[str(data.get("name", path.parent.name))] = data
    return out
