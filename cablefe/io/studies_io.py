"""Writers of a study's outputs in ``OUT/studies/<name>/`` (case units).

``envelope.json``, ``envelope.csv``, ``envelope.vtu``, ``influence.csv``
(influence and patch studies), ``samples.csv`` (tolerance) and PNG plots;
and the summary that goes into ``results.json`` under ``"studies"``.
Every file is written atomically.
"""
from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import meshio
import numpy as np

from .atomic import atomic_path, write_text


def _num(x):
    """A float for JSON: None for NaN (a response no solve produced)."""
    x = float(x)
    return None if not np.isfinite(x) else x


def _governing(g, L):
    """A governing-load description in the file's length unit."""
    if g is None:
        return None
    out = {}
    for k, v in g.items():
        if k == "intervals":
            out[k] = [[a / L, b / L] for a, b in v]
        elif k in ("start", "end", "position"):
            out[k] = v / L
        elif k == "message":
            out[k] = v
        else:
            out[k] = v
    return out


def envelope_dict(outcome, units) -> dict:
    """The content of ``envelope.json`` (contract v2, "Studies")."""
    L, F = units.length_scale, units.force_scale
    st = outcome.study
    data = {"name": st.name, "kind": st.kind, "base": outcome.base, "solves": outcome.solves,
            "converged": outcome.converged, "units": {"length": units.length, "force": units.force}}
    if outcome.lane is not None:
        data["lane"] = {"length": outcome.lane.length / L}   # nodes: added by write_study
    if st.kind in ("patch", "sweep"):
        data["load"] = [v / (F / L if (st.kind == "patch" or st.length is not None) else F) for v in st.load]
        data["load_unit"] = f"{units.force}/{units.length}" if (st.kind == "patch" or st.length is not None) \
            else units.force
    if st.kind == "sweep":
        data["steps"] = st.steps
        if st.length is not None:
            data["length"] = st.length / L
    if st.kind == "tolerance":
        data.update({"samples": st.samples, "seed": st.seed,
                     "distribution": "normal" if st.sigma is not None else "uniform"})
        value = st.sigma if st.sigma is not None else st.range
        data["sigma" if st.sigma is not None else "range"] = value if st.relative else value / L
        data["relative"] = st.relative
    data["failures"] = [_governing(g, L) for g in outcome.failures]
    nodes = {}
    stats = outcome.statistics
    for k, nid in enumerate(outcome.node_ids):
        e = {"max_displacement": [_num(v / L) for v in outcome.max_displacement[k]],
             "min_displacement": [_num(v / L) for v in outcome.min_displacement[k]],
             "governing": {s: [_governing(g, L) for g in outcome.governing_node[s][k]] for s in ("max", "min")}}
        extra = outcome.node_extra.get(nid)
        if extra:
            e["linear"] = {s: [None if v is None else v / L for v in extra["linear"][s]] for s in ("max", "min")}
            e["nonlinear"] = extra["nonlinear"]
            if "failed" in extra:   # its own critical patch did not converge
                e["failed"] = extra["failed"]
        if stats is not None:
            e["mean_displacement"] = [v / L for v in stats["mean_displacement"][k]]
            e["std_displacement"] = [v / L for v in stats["std_displacement"][k]]
        nodes[nid] = e
    members = {}
    for k, mid in enumerate(outcome.member_ids):
        e = {"max_tension": _num(outcome.max_tension[k] / F), "min_tension": _num(outcome.min_tension[k] / F),
             "slack": bool(outcome.slack[k]),
             "governing": {s: _governing(outcome.governing_member[s][k], L) for s in ("max", "min")}}
        extra = outcome.member_extra.get(mid)
        if extra:
            e["linear"] = {s: v / F for s, v in extra["linear"].items()}
            e["nonlinear"] = extra["nonlinear"]
            if "failed" in extra:
                e["failed"] = extra["failed"]
        if stats is not None:
            for name in ("mean_tension", "std_tension", "p05_tension", "p95_tension"):
                e[name] = float(stats[name][k] / F)
        members[mid] = e
    data["nodes"] = nodes
    data["members"] = members
    return data


def summary(outcome, units) -> dict:
    """The study's entry under ``"studies"`` in results.json."""
    L, F = units.length_scale, units.force_scale
    out = {"kind": outcome.study.kind, "base": outcome.base, "solves": outcome.solves,
           "converged": outcome.converged, "failed": len(outcome.failures),
           "folder": f"studies/{outcome.study.name}"}
    if len(outcome.node_ids):
        dz_min = outcome.min_displacement[:, 2]
        if np.isfinite(dz_min).any():
            k = int(np.nanargmin(dz_min))
            out["largest_downward_displacement"] = {"node": outcome.node_ids[k], "value": float(dz_min[k] / L)}
    if len(outcome.member_ids) and np.isfinite(outcome.max_tension).any():
        k = int(np.nanargmax(outcome.max_tension))
        out["largest_tension"] = {"member": outcome.member_ids[k], "value": float(outcome.max_tension[k] / F)}
        out["slack_members"] = [m for m, s in zip(outcome.member_ids, outcome.slack.tolist()) if s]
    flagged = [n for n, e in {**outcome.node_extra, **outcome.member_extra}.items()
               if any(np.any(v) for v in e.get("nonlinear", {}).values())]
    if flagged:
        out["nonlinear_responses"] = flagged
    return out


def _csv_text(header, rows) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    return buf.getvalue()


def _f(x) -> str:
    return "" if x is None or not np.isfinite(x) else repr(float(x))


def write_study(outcome, model, folder) -> list[Path]:
    """Write every output of one study into ``folder``; returns the paths."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    units = model.spec.units
    L, F = units.length_scale, units.force_scale
    written = []
    data = envelope_dict(outcome, units)
    if outcome.lane is not None:
        data["lane"]["nodes"] = [model.node_ids[n] for n in outcome.lane.nodes.tolist()]
    path = folder / "envelope.json"
    write_text(path, json.dumps(data, indent=1, allow_nan=False) + "\n")
    written.append(path)

    rows = []
    for k, nid in enumerate(outcome.node_ids):
        rows.append(["node", nid, *map(_f, outcome.max_displacement[k] / L), *map(_f, outcome.min_displacement[k] / L),
                     "", "", ""])
    for k, mid in enumerate(outcome.member_ids):
        rows.append(["member", mid, "", "", "", "", "", "", _f(outcome.max_tension[k] / F),
                     _f(outcome.min_tension[k] / F), str(bool(outcome.slack[k])).lower()])
    header = ["type", "id", "max_dx", "max_dy", "max_dz", "min_dx", "min_dy", "min_dz", "max_tension",
              "min_tension", "slack"]
    path = folder / "envelope.csv"
    write_text(path, _csv_text(header, rows))
    written.append(path)

    written.append(_write_vtu(outcome, model, folder / "envelope.vtu"))
    infl = outcome.influence
    if infl is not None:
        scale = np.array([F / L if k == "displacement" else 1.0 for k in infl.kind])
        table = np.column_stack([infl.s / L, (infl.values * scale[:, None]).T])
        path = folder / "influence.csv"
        write_text(path, _csv_text(["position"] + infl.names, [[repr(float(v)) for v in row] for row in table]))
        written.append(path)
    if outcome.samples is not None:
        smp = outcome.samples
        header = ["sample", "converged"] + [f"{m} tension" for m in outcome.member_ids] + \
            [f"{n} u{a}" for n in outcome.node_ids for a in "xyz"]
        rows = []
        for i in range(len(smp["index"])):
            rows.append([str(int(smp["index"][i])), str(bool(smp["converged"][i])).lower()]
                        + [repr(float(v)) for v in smp["tension"][i] / F]
                        + [repr(float(v)) for v in (smp["displacement"][i] / L).ravel()])
        path = folder / "samples.csv"
        write_text(path, _csv_text(header, rows))
        written.append(path)
    written += _plots(outcome, model, folder)
    return written


def _write_vtu(outcome, model, path) -> Path:
    nn = len(model.node_ids)
    L, F = model.spec.units.length_scale, model.spec.units.force_scale
    dmax = np.full((nn, 3), np.nan)
    dmin = np.full((nn, 3), np.nan)
    idx = [model.node_index[n] for n in outcome.node_ids]
    dmax[idx] = outcome.max_displacement / L
    dmin[idx] = outcome.min_displacement / L
    cells, owner = [], []
    for t in model.families.values():
        if len(t):
            cells.append(t.nodes)
            owner.append(t.member)
    lines = np.concatenate(cells) if cells else np.zeros((0, 2), dtype=np.int64)
    owner = np.concatenate(owner) if owner else np.zeros(0, dtype=np.int64)
    tmax = np.full(len(model.members), np.nan)
    tmin = np.full(len(model.members), np.nan)
    midx = [model.member_index[m] for m in outcome.member_ids]
    tmax[midx] = outcome.max_tension / F
    tmin[midx] = outcome.min_tension / F
    mesh = meshio.Mesh(model.coordinates / L, [("line", lines)],
                       point_data={"max_displacement": dmax, "min_displacement": dmin},
                       cell_data={"max_tension": [tmax[owner]], "min_tension": [tmin[owner]]})
    with atomic_path(path) as tmp:
        meshio.write(tmp, mesh, file_format="vtu", compression=None)
    return path


def _pyplot():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _save(fig, path) -> Path:
    with atomic_path(path) as tmp:
        fig.savefig(tmp, dpi=110, format="png")
    fig.clf()
    return Path(path)


def _plots(outcome, model, folder) -> list[Path]:
    plt = _pyplot()
    u = model.spec.units
    L, F = u.length_scale, u.force_scale
    out = []
    lane = outcome.lane
    name = outcome.study.name
    if lane is not None:
        pos = {nid: k for k, nid in enumerate(outcome.node_ids)}
        on_lane = [(s, pos[model.node_ids[n]]) for s, n in zip(lane.s.tolist(), lane.nodes.tolist())
                   if model.node_ids[n] in pos]
        lane_xyz = model.coordinates[lane.nodes]
        fig, axes = plt.subplots(2, 1, figsize=(8, 6.5), sharex=True)
        if on_lane:
            s = np.array([a for a, _ in on_lane]) / L
            k = [b for _, b in on_lane]
            axes[0].plot(s, outcome.max_displacement[k, 2] / L, "-o", ms=3, label="max (up)")
            axes[0].plot(s, outcome.min_displacement[k, 2] / L, "-o", ms=3, label="min (down)")
            axes[0].legend()
        axes[0].set_ylabel(f"vertical displacement ({u.length})")
        axes[0].set_title(f"study {name}: envelope along the lane")
        axes[0].grid(alpha=0.3)
        if len(outcome.member_ids):
            mids = []
            for m in outcome.member_ids:
                mi = model.members[model.member_index[m]]
                mid = 0.5 * (model.coordinates[model.node_index[mi.node_ids[0]]]
                             + model.coordinates[model.node_index[mi.node_ids[-1]]])
                near = int(np.argmin(np.linalg.norm((lane_xyz - mid)[:, :2], axis=1)))
                mids.append(lane.s[near] / L)
            axes[1].plot(mids, outcome.max_tension / F, "v", ms=4, label="max tension")
            axes[1].plot(mids, outcome.min_tension / F, "^", ms=4, label="min tension")
            axes[1].legend()
        axes[1].set_ylabel(f"tension ({u.force})")
        axes[1].set_xlabel(f"position along the lane ({u.length}); members at their nearest lane point")
        axes[1].grid(alpha=0.3)
        out.append(_save(fig, folder / "envelope.png"))
        plt.close(fig)
    elif outcome.statistics is not None and len(outcome.member_ids):
        st = outcome.statistics
        fig, ax = plt.subplots(figsize=(8, 4))
        x = np.arange(len(outcome.member_ids))
        ax.errorbar(x, st["mean_tension"] / F, yerr=st["std_tension"] / F, fmt="o", ms=3, label="mean ± std")
        ax.plot(x, st["p05_tension"] / F, "_", label="5th percentile")
        ax.plot(x, st["p95_tension"] / F, "_", label="95th percentile")
        ax.set_xlabel("watched member (in case order)")
        ax.set_ylabel(f"tension ({u.force})")
        ax.set_title(f"study {name}: tension scatter from length errors")
        ax.legend()
        ax.grid(alpha=0.3)
        out.append(_save(fig, folder / "tension_scatter.png"))
        plt.close(fig)
    infl = outcome.influence
    if infl is not None and len(infl.names):
        fig, axes = plt.subplots(2, 1, figsize=(8, 6.5), sharex=True)
        for ax, kind, unit, scale in ((axes[0], "displacement", f"{u.length}/{u.force}", F / L),
                                      (axes[1], "tension", f"{u.force}/{u.force}", 1.0)):
            rows = [r for r, k in enumerate(infl.kind) if k == kind]
            if kind == "displacement":
                rows = [r for r in rows if infl.direction[r] == 2]
            peak = sorted(rows, key=lambda r: -float(np.max(np.abs(infl.values[r]))))[:5]
            for r in peak:
                ax.plot(infl.s / L, infl.values[r] * scale, label=infl.names[r])
            if peak:
                ax.legend(fontsize=8)
            ax.axhline(0.0, color="k", lw=0.5)
            ax.set_ylabel(f"influence ({unit})")
            ax.grid(alpha=0.3)
        axes[0].set_title(f"study {name}: influence lines of a unit force (largest shown)")
        axes[1].set_xlabel(f"position of the unit force along the lane ({u.length})")
        out.append(_save(fig, folder / "influence.png"))
        plt.close(fig)
    return out
