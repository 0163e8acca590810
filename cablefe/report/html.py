"""``OUT/report.html``: one self-contained file an engineer can hand on.

The report reads what the run wrote (``results.json``, ``design.json``,
``shaped-cutting.csv``, ``studies/*/envelope.json`` and their plots,
``modes.json`` and its plots) and never recomputes a result; the plots it
embeds (as ``data:`` URIs) are drawn from the solved results.  No external
reference: no script, no style sheet, no font and no image from elsewhere, so
it opens in any browser without a network.

Sections (each an ``<section id=...>``): ``summary``, ``caution``,
``form-finding``, ``results``, ``studies``, ``modes``, ``design``,
``sizing``.  A section with nothing to show says so.
"""
from __future__ import annotations

import base64
import csv
import datetime as _dt
import html
import json
import math
from pathlib import Path

import numpy as np

from ..io.atomic import write_text
from ..io.results_io import safe_name
from .groups import fmt, id_prefix, member_groups, round_relative, structure_nodes
from .plots import plot_result, plot_tension_envelope, plot_utilization

#: displacements below this share of the model's size are round-off
ROUND_OFF = 1e-9

SECTIONS = ("summary", "caution", "form-finding", "results", "studies", "modes", "design", "sizing")

STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',Roboto,Helvetica,Arial,sans-serif;margin:0;color:#1d232a;background:#f6f7f9}
main{max-width:1100px;margin:0 auto;padding:1.5rem 2rem 3rem;background:#fff}
h1{font-size:1.6rem;margin:.2rem 0}h2{border-bottom:2px solid #d5dae0;padding-bottom:.2rem;margin-top:2.2rem}
h3{margin-top:1.4rem}nav a{margin-right:.9rem}
table{border-collapse:collapse;margin:.5rem 0 1rem;font-size:.88rem}
th,td{border:1px solid #d5dae0;padding:.2rem .5rem;text-align:right}th{background:#eef1f4}
td.l,th.l{text-align:left}
.caution{border-left:6px solid #c0392b;background:#fdf2f0;padding:.6rem 1rem;margin:1rem 0}
.warn{color:#a04000;font-weight:600}.fail{color:#b00020;font-weight:700}.ok{color:#1e7b34}
.placeholder{background:#fff3cd;padding:0 .3rem;border-radius:3px}
img{max-width:100%;height:auto;border:1px solid #e3e6ea;margin:.4rem 0}
details{margin:.5rem 0}summary{cursor:pointer;font-weight:600}
.muted{color:#5b6570}
"""


def _e(x) -> str:
    return html.escape(str(x), quote=True)


def _img(path: Path, alt: str) -> str:
    """An image embedded as a data URI."""
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    mime = "image/svg+xml" if path.suffix.lower() == ".svg" else "image/png"
    return f'<img alt="{_e(alt)}" src="data:{mime};base64,{data}">'


def _table(header, rows, left=1) -> str:
    """HTML table; the first ``left`` columns (or the columns in the set ``left``) are left-aligned text."""
    lefts = set(range(left)) if isinstance(left, int) else set(left)
    h = "".join(f'<th class="{"l" if k in lefts else ""}">{_e(c)}</th>' for k, c in enumerate(header))
    body = "".join("<tr>" + "".join(f'<td class="{"l" if k in lefts else ""}">{c}</td>' for k, c in enumerate(r))
                   + "</tr>" for r in rows)
    return f"<table><thead><tr>{h}</tr></thead><tbody>{body}</tbody></table>"


def _read_json(path: Path):
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None


def _short(v):
    """Numbers to 4 significant digits (lists too); other values as JSON text."""
    if isinstance(v, bool) or v is None:
        return json.dumps(v)
    if isinstance(v, (int, float)):
        return f"{v:.4g}"
    if isinstance(v, list) and all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v):
        return "[" + ", ".join(f"{x:.4g}" for x in v) + "]"
    return json.dumps(v) if isinstance(v, (dict, list)) else str(v)


def _kv(value, units=None) -> str:
    """A small dict from results.json as a definition table, with units where known."""
    if isinstance(value, dict):
        def unit(key):
            if units is None:
                return ""
            if "moment" in key:
                return f" [{units.force}·{units.length}]"
            if "force" in key or "load" in key:
                return f" [{units.force}]"
            return ""
        return _table(["key", "value"], [[_e(k + unit(k)), _e(_short(v))] for k, v in value.items()], left=2)
    return _e(json.dumps(value))


# ---------------------------------------------------------------------------
# sections
# ---------------------------------------------------------------------------

def _summary(results, case_path, data) -> str:
    m = results.model
    spec = m.spec
    u = spec.units
    counts: dict[str, int] = {}
    for mem in m.members:
        counts[mem.type] = counts.get(mem.type, 0) + 1
    groups = member_groups(m)
    rows = [["case file", _e(case_path)], ["units", f"length {_e(u.length)}, force {_e(u.force)}"],
            ["nodes", f"{len(m.node_ids)} ({len(spec.nodes)} declared)"],
            ["members", _e(", ".join(f"{n} {t}" for t, n in counts.items()))],
            ["member groups (by section)", _e(", ".join(f"{g} ({len(k)})" for g, k in groups.items()))],
            ["degrees of freedom", f"{m.ndof} ({int((~m.restrained).sum())} free)"],
            ["total self-weight", f"{fmt(m.self_weight() / u.force_scale)} {_e(u.force)}"],
            ["supports", _e(", ".join(spec.supports))],
            ["load cases", _e(", ".join(m.load_cases) or "none")],
            ["results", _e(", ".join(data.get("results", {})) or "none")]]
    return _table(["", ""], rows, left=2)


def _cutting(out: Path, units) -> str:
    path = out / "sized-cutting.csv"
    shaped = "sized.toml" if path.is_file() else "shaped.toml"
    if not path.is_file():
        path = out / "shaped-cutting.csv"
    if not path.is_file():
        return '<p class="muted">The case has no [shape] table: no form-finding in this run.</p>'
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    if len(rows) < 2:
        return "<p>The cutting table is empty.</p>"
    header, body = rows[0], rows[1:]
    lengths = [k for k, h in enumerate(header) if "length" in h]
    # fabrication precision: 0.1 mm
    digits = max(0, round(-math.log10(1e-4 / units.length_scale)))
    out_rows, totals = [], {}
    for r in body:
        cells = [_e(r[0])]
        for k in range(1, len(header)):
            v = float(r[k])
            cells.append(f"{v:.{digits}f}" if k in lengths else fmt(v, 5))
        out_rows.append(cells)
        fam = id_prefix(r[0])
        t = totals.setdefault(fam, [0, np.zeros(len(header))])
        t[0] += 1
        t[1] += np.array([0.0] + [float(x) for x in r[1:]])
    tot_rows = [[_e(fam), str(n)] + [f"{v[k]:.{digits}f}" for k in lengths] for fam, (n, v) in totals.items()]
    text = (f"<p>Shaped case: <code>{shaped}</code>; lengths rounded to 0.1 mm "
            f"(fabrication precision), tension in {_e(units.force)}, as in <code>{path.name}</code>; "
            f"totals per member group, section and in all in <code>{path.stem}-totals.csv</code>.</p>")
    text += "<h3>Totals per cable family (id prefix)</h3>" + _table(
        ["family", "members"] + [header[k] for k in lengths], tot_rows, left=1)
    text += (f"<details><summary>Cutting lengths of all {len(body)} members</summary>"
             + _table(header, out_rows) + "</details>")
    return text


def _result_section(results, name, entry, units, figure) -> str:
    m = results.model
    L = units.length_scale
    parts = [f'<h3 id="result-{_e(safe_name(name))}">{_e(name)}</h3>']
    conv = entry.get("converged", False)
    parts.append(f"<p>{'<span class=ok>converged</span>' if conv else '<span class=fail>NOT CONVERGED</span>'}"
                 f"; load factor {fmt(entry.get('load_factor', float('nan')))}, {entry.get('iterations', '–')} "
                 f"iterations, residual {entry.get('residual', float('nan')):.2e}."
                 + ("" if conv else " Its values are those of the last converged load factor and must not be "
                    "used for design.") + "</p>")
    stab = entry.get("stability") or {}
    n = stab.get("negative_pivots")
    parts.append("<p>Stability at the last converged state: "
                 + ("not determined" if n is None else "stable" if n == 0
                    else f"<span class=fail>unstable</span> ({n} negative pivot(s) of the tangent stiffness)")
                 + ".</p>")
    for w in entry.get("warnings", []):
        parts.append(f'<p class="warn">Warning: {_e(w)}</p>')
    eq = entry.get("equilibrium")
    if eq:   # already in the file's force unit
        at = eq.get("unbalanced_at")
        parts.append(f"<p>Equilibrium check: largest unbalanced force {eq['largest_unbalanced_force']:.3g} "
                     f"{_e(units.force)}" + (f" at {_e(at[0])} {_e(at[1])}" if at else "")
                     + "; total load [" + ", ".join(f"{v:.4g}" for v in eq["total_load"])
                     + f"] {_e(units.force)}; reactions plus loads ["
                     + ", ".join(f"{v:.3g}" for v in eq["reactions_plus_loads"]) + f"] {_e(units.force)}.</p>")
    nodes = entry.get("nodes", {})
    # largest displacement of the deck or the structure (not of a guy's sag node)
    idx, what = structure_nodes(m)
    best, where = -1.0, None
    for k in idx:
        nid = m.node_ids[int(k)]
        d = nodes.get(nid, {}).get("displacement")
        if d is not None:
            v = math.sqrt(sum(x * x for x in d))
            if v > best:
                best, where = v, (nid, d)
    size = float(np.ptp(m.coordinates, axis=0).max()) / L if len(m.coordinates) else 0.0
    if where and best <= ROUND_OFF * size:
        parts.append(f"<p>Largest displacement of the {what}: none beyond round-off "
                     f"({best:.1e} {_e(units.length)}, below {ROUND_OFF:g} of the model's size).</p>")
    elif where:
        shown = round_relative(np.asarray(where[1]), digits=4)
        parts.append(f"<p>Largest displacement of the {what}: <b>{fmt(best)} {_e(units.length)}</b> at node "
                     f"{_e(where[0])} (ux, uy, uz = {', '.join(fmt(x) for x in shown)} {_e(units.length)}).</p>")
    if "deck" in entry:
        dk = entry["deck"]
        parts.append(f"<p>Largest deck deflection {fmt(abs(dk['vertical']))} {_e(units.length)} "
                     f"({'down' if dk['vertical'] < 0 else 'up'}) at node {_e(dk['node'])}.</p>")
    members = entry.get("members", {})
    rows, slack_all = [], []
    for g, ks in member_groups(m).items():
        vals = [(members[m.members[k].id]["max_tension"], members[m.members[k].id]["min_tension"], m.members[k].id)
                for k in ks if m.members[k].id in members]
        if not vals:
            continue
        hi = max(vals, key=lambda v: v[0])
        lo = min(vals, key=lambda v: v[1])
        slack = [m.members[k].id for k in ks if members.get(m.members[k].id, {}).get("slack")]
        slack_all += slack
        rows.append([_e(g), str(len(ks)), f"{fmt(hi[0])} ({_e(hi[2])})", f"{fmt(lo[1])} ({_e(lo[2])})",
                     _e(", ".join(slack[:20]) + (f" … ({len(slack)})" if len(slack) > 20 else "")) or "none"])
    parts.append(_table(["group (section)", "members", f"largest tension [{units.force}]",
                         f"smallest tension [{units.force}]", "slack members"], rows, left=1))
    if slack_all:
        parts.append(f'<p class="warn">Slack members: {_e(", ".join(slack_all))}.</p>')
    reac = [(nid, nodes[nid]["reaction"]) for nid in m.spec.supports if "reaction" in nodes.get(nid, {})]
    if reac:
        vals = round_relative(np.array([r for _, r in reac]))
        up = [nid for (nid, r), v in zip(reac, vals) if v[2] < 0]
        head = ["support", f"Rx [{units.force}]", f"Ry [{units.force}]", f"Rz [{units.force}]"]
        rows = [[_e(nid)] + [fmt(x, 6) for x in v] for (nid, _), v in zip(reac, vals) if np.any(v)]
        zero = [nid for (nid, _), v in zip(reac, vals) if not np.any(v)]
        parts.append("<h4>Support reactions</h4>" + _table(head, rows))
        if zero:
            parts.append(f"<p class=muted>Zero reaction (to the rounding of the largest): {_e(', '.join(zero))}.</p>")
        if up:
            parts.append(f"<p>Supports pulling down (hold-down or uplift): {_e(', '.join(up))}.</p>")
    for key, title in (("equilibrium", "Equilibrium check"), ("stability", "Stability")):
        if key in entry:
            parts.append(f"<h4>{title}</h4>" + _kv(entry[key], units if key == "equilibrium" else None))
    if entry.get("path"):
        path = entry["path"]
        show = path if len(path) <= 30 else path[:: max(1, len(path) // 30)] + [path[-1]]
        cols = list(show[-1].get("displacements", {}))[:4]
        parts.append(f"<details><summary>Load path ({len(path)} steps)</summary>" + _table(
            ["load factor"] + [f"{c} [{units.length}]" for c in cols],
            [[fmt(p.get("load_factor"))] + [_e(", ".join(fmt(x) for x in p.get("displacements", {}).get(c, [])))
                                            for c in cols] for p in show]) + "</details>")
    if figure is not None and Path(figure).is_file():
        parts.append(_img(Path(figure), f"deformed shape, {name}"))
    return "\n".join(parts)


def _studies(out: Path, units) -> str:
    folders = sorted(p for p in (out / "studies").glob("*") if p.is_dir()) if (out / "studies").is_dir() else []
    if not folders:
        return '<p class="muted">The case configures no study (or none ran).</p>'
    parts = []
    for f in folders:
        env = _read_json(f / "envelope.json")
        parts.append(f"<h3>{_e(f.name)}</h3>")
        if not isinstance(env, dict):
            parts.append("<p class=warn>No readable envelope.json.</p>")
            continue
        parts.append(f"<p>kind {_e(env.get('kind', '?'))}, base {_e(env.get('base', '?'))}, "
                     f"{_e(env.get('solves', '?'))} solves.</p>")
        mem = env.get("members", {})
        if mem:
            rows = sorted(mem.items(), key=lambda kv: -(kv[1].get("max_tension") or 0))
            body = [[_e(k), fmt(v.get("max_tension")), fmt(v.get("min_tension")),
                     "yes" if v.get("slack") else "no",
                     _e(json.dumps(v.get("governing", {})))] for k, v in rows]
            parts.append(f"<details><summary>Member tension envelope ({len(rows)} members)</summary>" + _table(
                ["member", f"max tension [{units.force}]", f"min tension [{units.force}]", "slack", "governing"],
                body) + "</details>")
        nod = env.get("nodes", {})
        if nod:
            rows = sorted(nod.items(), key=lambda kv: (kv[1].get("min_displacement") or [0, 0, 0])[2])
            body = [[_e(k), fmt((v.get("min_displacement") or [None] * 3)[2]),
                     fmt((v.get("max_displacement") or [None] * 3)[2])] for k, v in rows]
            parts.append(f"<details><summary>Node displacement envelope ({len(rows)} nodes)</summary>" + _table(
                ["node", f"min uz [{units.length}]", f"max uz [{units.length}]"], body) + "</details>")
        for png in sorted(f.glob("*.png")):
            parts.append(_img(png, f"{f.name}: {png.stem}"))
    return "\n".join(parts)


def _modes(out: Path) -> str:
    data = _read_json(out / "modes.json")
    if not isinstance(data, dict):
        return '<p class="muted">The case has no [modes] table (or the modes were not computed).</p>'
    parts = [f"<p>About {_e(data.get('about', '?'))}; total mass {fmt(data.get('total_mass'))} kg.</p>"]
    rows = []
    ped_any = False
    for mo in data.get("modes", []):
        ped = mo.get("pedestrians")
        ped_any |= ped is not None
        rows.append([str(mo.get("number")), fmt(mo.get("frequency")), fmt(mo.get("period")), _e(mo.get("kind", "")),
                     _e(", ".join(fmt(x, 3) for x in mo.get("effective_mass_ratio", []))),
                     "" if ped is None else ((('<span class=warn>critical</span>, ' if ped.get("critical") else "")
                                              + f"a = {fmt(ped.get('acceleration'))} m/s², class "
                                              f"{_e(ped.get('comfort_class', '–'))}"))])
    parts.append(_table(["mode", "frequency [Hz]", "period [s]", "kind", "effective mass ratio x, y, z",
                         "pedestrian comfort" if ped_any else ""], rows, left=0))
    for png in sorted(out.glob("mode*.png")):
        parts.append(_img(png, png.stem))
    return "\n".join(parts)


def _design(out: Path, design_data, figure) -> str:
    if not isinstance(design_data, dict):
        return '<p class="muted">The case has no [design] table: no design checks in this run.</p>'
    units = design_data.get("units", {})
    parts = []
    ph = set(design_data.get("placeholders", []))
    rows = [[_e(k), fmt(v), ('<span class="placeholder">placeholder default</span>' if k in ph else "set in the case"),
             _e(design_data.get("factor_meaning", {}).get(k, "").split(" (PLACEHOLDER")[0])]
            for k, v in design_data.get("factors", {}).items()]
    parts.append(_table(["factor", "value", "origin", "meaning"], rows, left={0, 2, 3}))
    if ph:
        parts.append('<p class="caution">Factors marked <span class="placeholder">placeholder default</span> are '
                     "not design values: set them from the governing code; the results must be checked by a "
                     "licensed engineer.</p>")
    parts.append(f"<p>Permanent state: {_e(design_data.get('permanent') or 'none found')}; checked: "
                 f"{_e(', '.join(design_data.get('results', [])))}.</p>")
    for n in design_data.get("notes", []):
        parts.append(f"<p class=warn>{_e(n)}</p>")
    members = design_data.get("members", {})

    def ukey(kv):
        u = kv[1].get("utilization")
        return -(math.inf if u is None else u)
    ordered = sorted(members.items(), key=ukey)
    fails = [k for k, v in ordered if v.get("utilization") is None or v["utilization"] > 1]

    def row(k, v):
        u = v.get("utilization")
        cls = "fail" if u is None or u > 1 else "ok"
        text = "slack (∞)" if u is None else f"{u:.3f}"
        return [_e(k), f'<span class="{cls}">{text}</span>', _e(v.get("check")), _e(v.get("result")),
                _e(v.get("section"))]
    header = ["member", "utilization", "governing check", "result", "section"]
    deck_fail = sum(1 for d in design_data.get("deck", {}).values() for c in d.values()
                    if c.get("utilization") is None or c["utilization"] > 1)
    parts.append(f"<p><b>{len(members)}</b> members checked; <b class={'fail' if fails else 'ok'}>{len(fails)}</b> "
                 f"do not pass (utilization above 1 or slack)"
                 + (f"; <b class=fail>{deck_fail}</b> deck deflection check(s) above 1" if deck_fail else "") + ".</p>")
    parts.append("<h3>Governing members</h3>" + _table(header, [row(k, v) for k, v in ordered[:15]], left={0, 2, 3, 4}))
    parts.append(f"<details><summary>All {len(ordered)} checked members, sorted by utilization</summary>"
                 + _table(header, [row(k, v) for k, v in ordered], left={0, 2, 3, 4}) + "</details>")
    if figure is not None and Path(figure).is_file():
        parts.append(_img(Path(figure), "governing utilization"))
    deck = design_data.get("deck", {})
    if deck:
        rows = []
        for res, d in deck.items():
            for which, c in d.items():
                u = c.get("utilization")
                rows.append([_e(res), _e(which), _e(c.get("node")), fmt(c.get("demand")), fmt(c.get("capacity")),
                             f'<span class="{"fail" if u is None or u > 1 else "ok"}">{fmt(u, 3)}</span>'])
        parts.append("<h3>Deck deflection (live, from the permanent state)</h3>" + _table(
            ["result", "direction", "node", f"deflection [{units.get('length', '')}]",
             f"limit [{units.get('length', '')}]", "utilization"], rows, left=3))
    slack = {k: v for k, v in design_data.get("slack", {}).items() if v}
    parts.append("<h3>Slack tension-only members</h3>" + (
        _table(["result", "slack members"], [[_e(k), _e(", ".join(v))] for k, v in slack.items()], left=2)
        if slack else "<p class=ok>No tension-only member goes slack in the checked results.</p>"))
    uplift = {k: v for k, v in design_data.get("uplift", {}).items() if v}
    parts.append("<h3>Bearing uplift</h3>" + (
        _table(["result", "support", f"Rz [{units.get('force', '')}]"],
               [[_e(r), _e(n), fmt(z)] for r, d in uplift.items() for n, z in d.items()], left=2)
        if uplift else "<p class=ok>No bearing lifts off in the checked results.</p>"))
    unchecked = design_data.get("unchecked", {})
    if unchecked:
        parts.append(f"<details><summary>{len(unchecked)} members not checked</summary>" + _table(
            ["member", "why"], [[_e(k), _e(v)] for k, v in unchecked.items()], left=2) + "</details>")
    return "\n".join(parts)


def _sizing(design_data, units) -> str:
    sizing = design_data.get("sizing") if isinstance(design_data, dict) else None
    if not sizing:
        return '<p class="muted">No [[design.size]] groups: no sizing in this run.</p>'
    parts = [f"<p>{_e(sizing.get('message', ''))}</p>"]
    groups = sizing.get("groups", [])
    hist = sizing.get("history", [])
    rows = [[str(k)] + [_e(step.get(g, "")) for g in groups] for k, step in enumerate(hist)]
    parts.append(_table(["iteration"] + groups, rows, left=0))
    final = sizing.get("final", {})
    if final:
        parts.append(_table(["group", "section", "passes", "no catalogue section passes"],
                            [[_e(g), _e(v.get("section")), "yes" if v.get("passes") else "<span class=fail>no</span>",
                              ("<span class=fail>" + _e(", ".join(v["no_section_passes"])) + "</span>")
                              if v.get("no_section_passes") else "—"]
                             for g, v in final.items()], left=2))
    if sizing.get("no_section_passes"):
        parts.append("<p>Checks that no catalogue section makes pass (they did not drive the choice; "
                     "the engineer must change the scheme, the loads or the catalogue):</p>" + _table(
                         ["check", "groups", "utilization with the largest section(s)"],
                         [[_e(e.get("check")), _e(", ".join(e.get("groups", []))),
                           "slack" if e.get("utilization_with_largest") is None and e.get("check") == "slack"
                           else fmt(e["utilization_with_largest"], 4) if e.get("utilization_with_largest") is not None
                           else f"uplift {fmt(e['largest_uplift'], 4)} {_e(units.force)}" if "largest_uplift" in e
                           else "—"] for e in sizing["no_section_passes"]], left=2))
    return "\n".join(parts)


# ---------------------------------------------------------------------------
# the file
# ---------------------------------------------------------------------------

def report_html(results, out, case_path, caution: str, figures: dict) -> str:
    """The HTML text of the report, from the files in ``out``."""
    from .. import __version__
    out = Path(out)
    m = results.model
    spec = m.spec
    units = spec.units
    data = _read_json(out / "results.json") or {"results": {}}
    design_data = _read_json(out / "design.json")
    title = spec.title or Path(str(case_path)).stem
    body = [f"<h1>cablefe report: {_e(title)}</h1>",
            f"<p class=muted>Case <code>{_e(case_path)}</code>, cablefe {_e(__version__)}, "
            f"{_dt.datetime.now().strftime('%Y-%m-%d %H:%M')}.</p>",
            "<nav>" + "".join(f'<a href="#{s}">{s}</a>' for s in SECTIONS) + "</nav>"]

    def section(sid, heading, content):
        body.append(f'<section id="{sid}"><h2>{_e(heading)}</h2>{content}</section>')

    section("summary", "Case summary", _summary(results, case_path, data))
    section("caution", "Caution", f'<p class="caution"><b>Caution.</b> {_e(caution)}</p>')
    section("form-finding", "Form-finding and cutting lengths", _cutting(out, units))
    res_parts = []
    if isinstance(design_data, dict) and design_data.get("sizing"):
        res_parts.append("<p><b>These are the results of the sized case</b> (<code>sized.toml</code>): every "
                         "[[design.size]] group carries its chosen catalogue section.</p>")
    for name, entry in data.get("results", {}).items():
        res_parts.append(_result_section(results, name, entry, units, figures.get(name)))
    if figures.get("__envelope__"):
        res_parts.append("<h3>Tension envelope over all results</h3>" + _img(figures["__envelope__"], "tension envelope"))
    section("results", "Results", "\n".join(res_parts) or "<p>No result.</p>")
    section("studies", "Study envelopes", _studies(out, units))
    section("modes", "Modes and pedestrian comfort", _modes(out))
    section("design", "Design checks", _design(out, design_data, figures.get("__utilization__")))
    section("sizing", "Sizing", _sizing(design_data, units))
    body.append(f'<p class="caution"><b>Caution.</b> {_e(caution)}</p>')
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{_e(title)}</title>"
            f"<style>{STYLE}</style></head><body><main>\n" + "\n".join(body) + "\n</main></body></html>\n")


def write_report(results, out, case_path, caution: str, design=None) -> list[Path]:
    """Plots (PNG) and ``report.html`` in ``out``; returns the paths written."""
    out = Path(out)
    figures: dict = {}
    for name in results.names:
        figures[name] = plot_result(results, name, out / f"plot-{safe_name(name)}.png")
    if len(results.model.members):
        figures["__envelope__"] = plot_tension_envelope(results, out / "tension-envelope.png")
    if design is not None and design.outcome.governing:
        figures["__utilization__"] = plot_utilization(design.outcome, out / "utilization.png")
    from ..io.lookup_io import write_member_lookup
    lookup = write_member_lookup(results.model, out)
    write_text(out / "report.html", report_html(results, out, case_path, caution, figures))
    return list(figures.values()) + [lookup, out / "report.html"]
