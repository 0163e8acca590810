"""The run report: a Markdown summary with plots, written by ``cablefe run``.

Plots are drawn with matplotlib (Agg backend, no screen needed).  Every
number carries its unit; the report opens with the engineer's caution.
"""
from __future__ import annotations

import datetime as _dt
from pathlib import Path

import numpy as np

from .atomic import atomic_path, write_text
from .results_io import safe_name

MAX_MEMBER_ROWS = 60     # the full tables are in results.json


def _elevation_axes(coords: np.ndarray) -> tuple[int, str]:
    """The horizontal axis (0 = x, 1 = y) along which the model is longest."""
    span = np.ptp(coords[:, :2], axis=0) if len(coords) else np.zeros(2)
    return (0, "x") if span[0] >= span[1] else (1, "y")


def _pyplot():
    """matplotlib's pyplot on the Agg backend (no screen needed)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _save(fig, path) -> Path:
    """Write a figure atomically as PNG and free it."""
    path = Path(path)
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png")
    _pyplot().close(fig)
    return path


def plot_result(results, name: str, path) -> Path:
    """Elevation of the undeformed and deformed structure, displacements magnified."""
    from matplotlib.collections import LineCollection
    plt = _pyplot()

    m = results.model
    u = m.spec.units
    L = u.length_scale
    res = results[name]
    axis, label = _elevation_axes(m.coordinates)
    base = m.coordinates / L
    pos = res.state.positions / L
    disp = np.linalg.norm(pos - base, axis=1)
    size = float(np.ptp(base, axis=0).max()) or 1.0
    biggest = float(disp.max()) if len(disp) else 0.0
    # magnify so that the largest movement shows as about 5 % of the model size
    scale = 1.0 if biggest == 0.0 else max(1.0, round(0.05 * size / biggest))
    drawn = base + scale * (pos - base)
    segs0, segs1, tens = [], [], []
    mf = results.member_forces(name)
    for k, mem in enumerate(m.members):
        idx = [m.node_index[n] for n in mem.node_ids]
        segs0.append(base[idx][:, [axis, 2]])
        segs1.append(drawn[idx][:, [axis, 2]])
        tens.append(mf.max_tension[k] / u.force_scale)
    fig, ax = plt.subplots(figsize=(10, 4.5), dpi=110)
    ax.add_collection(LineCollection(segs0, colors="0.75", linewidths=0.8, linestyles="--"))
    lc = LineCollection(segs1, array=np.asarray(tens), cmap="viridis", linewidths=1.8)
    ax.add_collection(lc)
    fig.colorbar(lc, ax=ax, label=f"largest tension [{u.force}]")
    ax.autoscale()
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel(f"{label} [{u.length}]")
    ax.set_ylabel(f"z [{u.length}]")
    state = "converged" if res.converged else f"NOT converged (load factor {res.outcome.load_factor:.3f})"
    ax.set_title(f"{name}: deformed shape, displacements × {scale:g} ({state})")
    ax.grid(True, alpha=0.3)
    fig.tight_layout()
    return _save(fig, path)


def plot_tension_envelope(results, path) -> Path:
    """Largest and smallest tension of every member over all results."""
    plt = _pyplot()

    m = results.model
    F = m.spec.units.force_scale
    hi, lo = _envelope(results)
    order = np.arange(len(m.members))
    fig, ax = plt.subplots(figsize=(10, 4), dpi=110)
    ax.vlines(order, lo / F, hi / F, color="tab:blue", linewidth=2)
    ax.axhline(0.0, color="0.4", linewidth=0.8)
    if len(order) <= 40:
        ax.set_xticks(order, [mm.id for mm in m.members], rotation=90, fontsize=7)
    else:
        ax.set_xlabel("member (in case order)")
    ax.set_ylabel(f"tension [{m.spec.units.force}]")
    ax.set_title("tension envelope over all results (bar: smallest to largest)")
    ax.grid(True, axis="y", alpha=0.3)
    fig.tight_layout()
    return _save(fig, path)


def _envelope(results):
    hi = np.full(len(results.model.members), -np.inf)
    lo = np.full(len(results.model.members), np.inf)
    for name in results.names:
        mf = results.member_forces(name)
        hi = np.maximum(hi, mf.max_tension)
        lo = np.minimum(lo, mf.min_tension)
    return hi, lo


def _fmt(x: float, unit: str, digits: int = 4) -> str:
    return f"{x:.{digits}g} {unit}"


def report_text(results, case_path, caution: str, figures: dict, shape_note: str = "") -> str:
    """The Markdown report."""
    from .. import __version__
    m = results.model
    spec = m.spec
    u = spec.units
    L, F = u.length_scale, u.force_scale
    lines = [f"# cablefe report: {spec.title or Path(str(case_path)).stem}", "",
             f"Case `{case_path}`, cablefe {__version__}, "
             f"{_dt.datetime.now().strftime('%Y-%m-%d %H:%M')}.", "",
             f"> **Caution.** {caution}", ""]
    counts: dict[str, int] = {}
    for mem in m.members:
        counts[mem.type] = counts.get(mem.type, 0) + 1
    weight = m.self_weight()
    lines += ["## Model", "",
              f"- nodes: {len(m.node_ids)}; members: "
              + ", ".join(f"{n} {t}" for t, n in counts.items())
              + f"; elements: {sum(len(t) for t in m.families.values())}",
              f"- degrees of freedom: {m.ndof} ({int((~m.restrained).sum())} free)",
              f"- total self-weight: {_fmt(weight / F, u.force)}",
              f"- supports: {len(spec.supports)}", ""]
    if shape_note:
        lines += ["## Form-finding", "", shape_note, ""]
    lines += ["## Results", "",
              f"| result | converged | load factor | iterations | largest displacement [{u.length}] | at node "
              f"| largest tension [{u.force}] | in member | slack members |",
              "| --- | --- | --- | --- | --- | --- | --- | --- | --- |"]
    for res in results.items:
        disp = np.linalg.norm(res.state.positions - m.coordinates, axis=1)
        k = int(np.argmax(disp)) if len(disp) else 0
        mf = results.member_forces(res.name)
        j = int(np.argmax(mf.max_tension)) if len(mf.max_tension) else 0
        lines.append(f"| {res.name} | {'yes' if res.converged else '**no**'} | {res.outcome.load_factor:.3f} "
                     f"| {res.outcome.iterations} | {disp[k] / L:.4g} | {m.node_ids[k]} "
                     f"| {mf.max_tension[j] / F:.4g} | {m.members[j].id} | {int(mf.slack.sum())} |")
    lines.append("")
    for r in results.items:
        n = r.outcome.negative_pivots[-1] if r.outcome.negative_pivots else None
        state = ("not determined" if n is None else "stable" if n == 0
                 else f"**unstable** ({n} negative pivot(s) of the tangent stiffness)")
        lines.append(f"- {r.name}: stability at load factor {r.outcome.load_factor:.3f}: {state}")
    lines.append("")
    for r in results.items:
        for w in r.outcome.warnings:
            lines += [f"**Warning, {r.name}**: {w}.", ""]
    not_conv = [r for r in results.items if not r.converged]
    for r in not_conv:
        lines += [f"**{r.name} did not converge**: {r.outcome.message}. Its values are those of the "
                  f"last converged load factor and must not be used for design.", ""]
    for res in results.items:
        deck = results.deck_deflection(res.name)
        if deck is not None:
            lines.append(f"- {res.name}: largest deck deflection {abs(deck['vertical']) / L:.4g} {u.length} "
                         f"({'down' if deck['vertical'] < 0 else 'up'}) at node {deck['node']}, "
                         f"x = {deck['x'] / L:.4g} {u.length}")
    lines += ["", "### Support reactions", "",
              "| result | support | Rx | Ry | Rz |".replace("Rx", f"Rx [{u.force}]").replace(
                  "Ry", f"Ry [{u.force}]").replace("Rz", f"Rz [{u.force}]"),
              "| --- | --- | --- | --- | --- |"]
    for res in results.items:
        for nid, r in results.reactions(res.name).items():
            lines.append(f"| {res.name} | {nid} | {r[0] / F:.4g} | {r[1] / F:.4g} | {r[2] / F:.4g} |")
    hi, lo = _envelope(results)
    lines += ["", "### Tension envelope", "",
              f"Largest and smallest tension of each member over all results"
              + (f" (first {MAX_MEMBER_ROWS} members; all are in `results.json`)"
                 if len(m.members) > MAX_MEMBER_ROWS else "") + ".", "",
              f"| member | type | largest [{u.force}] | smallest [{u.force}] | minimum breaking load [{u.force}] |",
              "| --- | --- | --- | --- | --- |"]
    for k, mem in enumerate(m.members[:MAX_MEMBER_ROWS]):
        sec = spec.sections.get(mem.section)
        mbl = "" if sec is None or sec.breaking_load is None else f"{sec.breaking_load / F:.4g}"
        lines.append(f"| {mem.id} | {mem.type} | {hi[k] / F:.4g} | {lo[k] / F:.4g} | {mbl} |")
    lines += ["", "Breaking loads are listed for orientation only; the resistance check with "
              "safety factors set by the engineer is not part of this report.", "", "## Figures", ""]
    for title, fig in figures.items():
        lines += [f"![{title}]({fig.name})", ""]
    lines += [f"> **Caution.** {caution}", ""]
    return "\n".join(lines)


def write_report(results, folder, case_path, caution: str, shape_note: str = "") -> list[Path]:
    """Plots and ``report.md`` in ``folder``; returns the paths written."""
    folder = Path(folder)
    figures = {}
    for name in results.names:
        figures[f"deformed shape, {name}"] = plot_result(results, name, folder / f"plot-{safe_name(name)}.png")
    figures["tension envelope"] = plot_tension_envelope(results, folder / "tension-envelope.png")
    text = report_text(results, case_path, caution, figures, shape_note)
    write_text(folder / "report.md", text)
    return list(figures.values()) + [folder / "report.md"]
