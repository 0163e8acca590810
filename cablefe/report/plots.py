"""Plots for ``cablefe run`` (matplotlib, Agg backend: no screen needed).

Each plot chooses its view from the structure: the plan for a net (two
long plan dimensions, no beams), the vertical plane of largest sway for a
mast (taller than wide), and the elevation along the longer plan direction
for a bridge.  Deformed shapes are magnified by a round factor chosen from
the displacement of the structure (not of a guy's sag node); a displacement
below ``NEGLIGIBLE`` of the model size (round-off) is not drawn magnified.
Members are labelled by id when there are few enough to read.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..io.atomic import atomic_path
from .groups import structure_nodes

#: a largest displacement below this share of the model's size (8 mm on an
#: 80 m span) is not magnified: magnifying it thousands of times would show
#: round-off or settling noise as if it were a deformation; the plot states it
NEGLIGIBLE = 1e-4
MAX_LABELS = 60


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


def choose_view(model, displacement=None) -> tuple[tuple[int, int], str, str]:
    """((horizontal axis, vertical axis), kind, description) for drawing a model.

    kind is "plan", "mast" or "elevation".
    """
    c = model.coordinates
    ext = np.ptp(c, axis=0) if len(c) else np.zeros(3)
    plan = max(ext[0], ext[1])
    has_beams = any(m.type == "beam" for m in model.members)
    if ext[2] > plan:   # taller than wide: a mast, seen in the plane of its largest sway
        if displacement is not None and len(displacement):
            sway = np.abs(displacement[:, :2]).max(axis=0)
            h = 0 if sway[0] >= sway[1] else 1
        else:
            h = 0 if ext[0] >= ext[1] else 1
        return (h, 2), "mast", f"elevation in the {'xy'[h]}z plane (largest sway)"
    if not has_beams and min(ext[0], ext[1]) > 0.3 * plan:
        return (0, 1), "plan", "plan (xy)"
    h = 0 if ext[0] >= ext[1] else 1
    return (h, 2), "elevation", f"elevation ({'xy'[h]}z)"


def magnification(model, positions) -> tuple[float, float]:
    """(scale, largest structural displacement m): a round factor showing it as about 5 % of the model."""
    nodes, _ = structure_nodes(model)
    disp = np.linalg.norm(positions[nodes] - model.coordinates[nodes], axis=1)
    biggest = float(disp.max()) if len(disp) else 0.0
    size = float(np.ptp(model.coordinates, axis=0).max()) if len(model.coordinates) else 1.0
    if biggest <= NEGLIGIBLE * size:
        return 0.0, biggest
    raw = 0.05 * size / biggest
    if raw <= 1.0:
        return 1.0, biggest
    p = 10.0 ** math.floor(math.log10(raw))
    nice = max(v * p for v in (1, 2, 5, 10) if v * p <= raw)
    return float(nice), biggest


def _label(ax, model, pts, axes):
    if len(model.members) > MAX_LABELS:
        return
    for mem in model.members:
        idx = [model.node_index[n] for n in mem.node_ids]
        mid = pts[idx][len(idx) // 2] if len(idx) > 2 else pts[idx].mean(axis=0)
        ax.annotate(mem.id, (mid[axes[0]], mid[axes[1]]), fontsize=6, color="0.25",
                    ha="center", va="bottom", xytext=(0, 2), textcoords="offset points")


def plot_result(results, name: str, path) -> Path:
    """Undeformed and deformed structure of one result, members coloured by tension and labelled."""
    from matplotlib.collections import LineCollection
    plt = _pyplot()
    m = results.model
    u = m.spec.units
    L = u.length_scale
    res = results[name]
    pos_si = res.state.positions
    # the sway of the structure, not of a guy's sag nodes, picks a mast's plane
    axes, kind, view = choose_view(m, (pos_si - m.coordinates)[structure_nodes(m)[0]])
    base = m.site_coordinates / L   # drawn in site coordinates; movements from the local ones
    pos = base + (pos_si - m.coordinates) / L
    scale, biggest = magnification(m, pos_si)
    drawn = base + scale * (pos - base)
    segs0, segs1, tens = [], [], []
    mf = results.member_forces(name)
    for k, mem in enumerate(m.members):
        idx = [m.node_index[n] for n in mem.node_ids]
        segs0.append(base[idx][:, list(axes)])
        segs1.append(drawn[idx][:, list(axes)])
        tens.append(mf.max_tension[k] / u.force_scale)
    fig, ax = plt.subplots(figsize=(10, 4.8 if kind != "mast" else 7), dpi=100)
    if scale > 0:
        ax.add_collection(LineCollection(segs0, colors="0.75", linewidths=0.8, linestyles="--"))
    lc = LineCollection(segs1 if scale > 0 else segs0, array=np.asarray(tens), cmap="viridis", linewidths=1.8)
    ax.add_collection(lc)
    fig.colorbar(lc, ax=ax, label=f"largest tension [{u.force}]")
    _label(ax, m, drawn if scale > 0 else base, axes)
    ax.autoscale()
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel(f"{'xyz'[axes[0]]} [{u.length}]")
    ax.set_ylabel(f"{'xyz'[axes[1]]} [{u.length}]")
    state = "converged" if res.converged else f"NOT converged (load factor {res.outcome.load_factor:.3f})"
    if scale > 0:
        shown = f"displacements × {scale:g} (largest {biggest / L:.3g} {u.length})"
    else:
        shown = f"largest displacement {biggest / L:.2g} {u.length}, too small to draw: case geometry"
    ax.set_title(f"{name}, {view}: {shown}; {state}", fontsize=10)
    ax.grid(True, alpha=0.3)
    fig.tight_layout()
    return _save(fig, path)


def tension_envelope(results):
    """(largest, smallest) tension of every member over all results, N."""
    hi = np.full(len(results.model.members), -np.inf)
    lo = np.full(len(results.model.members), np.inf)
    for name in results.names:
        mf = results.member_forces(name)
        hi = np.maximum(hi, mf.max_tension)
        lo = np.minimum(lo, mf.min_tension)
    return hi, lo


def plot_tension_envelope(results, path) -> Path:
    """Largest and smallest tension of every member over all results."""
    plt = _pyplot()
    m = results.model
    F = m.spec.units.force_scale
    hi, lo = tension_envelope(results)
    order = np.arange(len(m.members))
    fig, ax = plt.subplots(figsize=(10, 4), dpi=100)
    ax.vlines(order, lo / F, hi / F, color="tab:blue", linewidth=2)
    ax.axhline(0.0, color="0.4", linewidth=0.8)
    if len(order) <= MAX_LABELS:
        ax.set_xticks(order, [mm.id for mm in m.members], rotation=90, fontsize=7)
    else:
        ax.set_xlabel("member (in case order)")
    ax.set_ylabel(f"tension [{m.spec.units.force}]")
    ax.set_title("tension envelope over all results (bar: smallest to largest)")
    ax.grid(True, axis="y", alpha=0.3)
    fig.tight_layout()
    return _save(fig, path)


def plot_utilization(outcome, path, limit: int = 40) -> Path:
    """Bars of the governing utilization of the most used members."""
    plt = _pyplot()
    rows = sorted(outcome.governing.values(), key=lambda c: -c.utilization)[:limit]
    fig, ax = plt.subplots(figsize=(10, 4), dpi=100)
    vals = [min(c.utilization, 2.0) for c in rows]
    colors = ["tab:red" if c.utilization > 1 else "tab:blue" for c in rows]
    ax.bar(range(len(rows)), vals, color=colors)
    ax.axhline(1.0, color="k", linewidth=1)
    ax.set_xticks(range(len(rows)), [f"{c.item} ({c.check})" for c in rows], rotation=90, fontsize=7)
    ax.set_ylabel("utilization (cut at 2)")
    ax.set_title(f"governing utilization, {len(rows)} most used members")
    fig.tight_layout()
    return _save(fig, path)
