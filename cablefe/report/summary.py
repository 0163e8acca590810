"""The terminal summary of solved results (lines of text; the CLI prints them)."""
from __future__ import annotations

import math

import numpy as np

from ..design.checks import bearing_supports, UPLIFT_NOISE
from .groups import member_groups, structure_nodes


def _f(x, unit, digits=4):
    return f"{x:.{digits}g} {unit}"


def stability_words(outcome) -> str:
    """The stability of the last converged state (negative pivots of the tangent), in words."""
    n = outcome.negative_pivots[-1] if outcome.negative_pivots else None
    if n is None:
        return "not determined"
    if n == 0:
        return "stable (no negative pivot of the tangent stiffness)"
    return f"UNSTABLE ({n} negative pivot(s) of the tangent stiffness)"


def summary_lines(results, design=None) -> list[str]:
    """Per result: status, warnings, largest displacement of the deck or structure,
    tension extremes per member group with slack members, uplifted bearings,
    and (after design checks) the governing utilization."""
    m = results.model
    u = m.spec.units
    L, F = u.length_scale, u.force_scale
    nodes, what = structure_nodes(m)
    groups = member_groups(m)
    bearings = bearing_supports(m)
    lines = []
    for res in results.items:
        o = res.outcome
        flag = "converged" if o.converged else f"NOT CONVERGED ({o.message})"
        lines.append(f"  {res.name}: {flag}; load factor {o.load_factor:.3f}, {o.iterations} iterations")
        lines.append(f"    stability: {stability_words(o)}")
        lines += [f"    WARNING: {w}" for w in res.warnings]
        eq = res.equilibrium
        if eq:   # every result's equilibrium check: reactions against the applied loads
            at = eq.get("unbalanced_at")
            lines.append(f"    equilibrium: largest unbalanced force {_f(eq['largest_unbalanced_force'] / F, u.force)}"
                         + (f" at {at[0]} {at[1]}" if at else "")
                         + "; reactions + loads = [" + ", ".join(f"{v / F:.3g}" for v in eq["reactions_plus_loads"])
                         + f"] {u.force}; total load [" + ", ".join(f"{v / F:.4g}" for v in eq["total_load"])
                         + f"] {u.force}")
        disp = results.displacements(res.name)
        if len(nodes):
            d = np.linalg.norm(disp[nodes], axis=1)
            k = int(nodes[int(np.argmax(d))])
            size = float(np.ptp(m.coordinates, axis=0).max())
            if d.max() <= 1e-9 * size:   # round-off, not a movement
                lines.append(f"    largest displacement of the {what}: none beyond round-off ({d.max() / L:.1e} {u.length})")
            else:
                lines.append(f"    largest displacement of the {what} {_f(float(d.max()) / L, u.length)} at node "
                             f"{m.node_ids[k]}")
        deck = results.deck_deflection(res.name)
        if deck is not None:
            lines.append(f"    largest deck deflection {abs(deck['vertical']) / L:.3f} {u.length} "
                         f"({'down' if deck['vertical'] < 0 else 'up'}) at node {deck['node']}, "
                         f"x = {deck['x'] / L:.1f} {u.length}")
        mf = results.member_forces(res.name)
        for g, ks in groups.items():
            ks = np.asarray(ks)
            hi = ks[int(np.argmax(mf.max_tension[ks]))]
            lo = ks[int(np.argmin(mf.min_tension[ks]))]
            loose = [m.members[k].id for k in ks if mf.slack[k]]
            lines.append(f"    {g} ({len(ks)}): tension {_f(mf.max_tension[hi] / F, u.force)} ({m.members[hi].id}) "
                         f"to {_f(mf.min_tension[lo] / F, u.force)} ({m.members[lo].id})"
                         + (f"; slack: {', '.join(loose[:10])}{' …' if len(loose) > 10 else ''}" if loose else ""))
        reac = results.reactions(res.name)
        scale = max((float(np.abs(r).max()) for r in reac.values()), default=0.0)
        up = [n for n in bearings if reac[n][2] < -UPLIFT_NOISE * scale]
        if up:
            lines.append("    UPLIFT at bearing(s): " + ", ".join(f"{n} (Rz = {_f(reac[n][2] / F, u.force)})"
                                                               for n in up))
        if design is not None:
            mine = [c for c in design.outcome.checks if c.result == res.name and not c.check.startswith("deflection")]
            if mine:
                c = max(mine, key=lambda c: c.utilization)
                text = "slack" if not math.isfinite(c.utilization) else f"{c.utilization:.3f}"
                lines.append(f"    governing utilization {text} ({c.check}) in {c.item}")
    if design is not None:
        o = design.outcome
        worst = o.largest
        lines.append("design checks: " + (f"governing utilization {'slack' if not math.isfinite(worst.utilization) else f'{worst.utilization:.3f}'} "
                                          f"({worst.check}) in {worst.item}, result {worst.result}" if worst else "no member checked")
                     + f"; {sum(1 for c in o.governing.values() if not c.utilization <= 1)} member(s) fail"
                     + f"; {sum(1 for c in o.checks if c.check.startswith('deflection') and not c.utilization <= 1)}"
                       " deck deflection check(s) fail")
        if o.placeholders:
            lines.append("  PLACEHOLDER factors (defaults, set them from the governing code): "
                         + ", ".join(f"{k} = {o.factors[k]:g}" for k in o.placeholders))
        if o.sizing is not None:
            lines.append(f"  sizing: {o.sizing.get('message', '')}")
    return lines
