"""Writers of the modes: ``modes.json``, ``modes.vtu`` + ``modes.pvd`` and a plot.

``modes.json`` is self-describing (units, definitions, the comfort method
and its constants with their sources), so that the report and other tools
read it without recomputing anything.  Masses are in kg, frequencies in Hz,
accelerations in m/s² whatever the case's units; lengths in the case's
length unit.  Every file is written atomically.
"""
from __future__ import annotations

from pathlib import Path
from xml.sax.saxutils import quoteattr

import meshio
import numpy as np

from ..dynamics import pedestrians as ped
from ..solvers.modes import CABLE_DIVISION_NOTE, ModesResult
from .atomic import atomic_path, write_text
from .results_io import dumps_readable

PLOTTED_MODES = 6

DEFINITIONS = {
    "frequency": "natural frequency f = omega / (2 pi), Hz, of K phi = omega^2 M phi with K the tangent "
                 "stiffness at the 'about' state (geometric stiffness included, slack members left out)",
    "period": "1 / frequency, s",
    "generalised_mass": "phi^T M phi, kg, for the shape scaled so that its largest nodal translation is 1",
    "effective_mass_ratio": "(phi^T M r_d)^2 / (phi^T M phi) divided by the mobile mass in d = x, y, z "
                            "(r_d a rigid unit translation of the free DOFs); summed over all modes "
                            "of the model it is 1",
    "kind": "the largest share of the mode's kinetic energy: longitudinal or lateral horizontal motion "
            "(along or across the structure's longest horizontal axis), vertical motion of a "
            "station as a whole (vertical) or of its parts against each other (torsional)",
    "energy": "shares of the kinetic energy by kind (lumped nodal masses)",
    "shapes": "modes.vtu point data mode_1 ... mode_n: mass-normalised translations "
              "(phi^T M phi = 1 kg), in length units per sqrt(kg)",
}


def modes_dict(result: ModesResult, units) -> dict:
    """The content of ``modes.json`` (may hold numpy scalars; see :func:`write_modes_json`)."""
    L = units.length_scale
    out = {
        "about": result.about,
        "units": {"length": units.length, "mass": "kg", "frequency": "Hz", "period": "s",
                  "acceleration": "m/s^2", "force": "N"},
        "total_mass": result.total_mass,
        "own_mass": result.own_mass,
        "self_weight_mass": result.self_weight_mass,
        "added_mass": result.added_mass,
        "mobile_mass": result.mobile_mass.tolist(),
        "mass_matrix": result.mass_matrix,
        "method": result.method,
        "shift": result.shift,
        "solves": result.solves,
        "orthogonality": result.orthogonality,
        "axes": {"longitudinal": result.axes[0].tolist(), "lateral": result.axes[1].tolist()},
        "definitions": DEFINITIONS,
        "cables": CABLE_DIVISION_NOTE,
        "warnings": list(result.warnings),
        "modes": [],
    }
    for m in result.modes:
        entry = {"number": m.number, "frequency": m.frequency, "period": m.period,
                 "generalised_mass": m.generalised_mass,
                 "effective_mass_ratio": m.effective_mass_ratio.tolist(),
                 "effective_mass": m.effective_mass.tolist(), "kind": m.kind,
                 "energy": {k: float(v) for k, v in m.energy.items()}}
        if m.pedestrians is not None:
            c = m.pedestrians
            entry["pedestrians"] = {"critical": c.critical, "acceleration": c.acceleration,
                                    "comfort_class": c.comfort_class, "direction": c.direction,
                                    "psi": c.psi, "load": c.load, "modal_force": c.modal_force,
                                    "modal_mass": c.modal_mass}
            if c.lock_in is not None:
                entry["pedestrians"]["lock_in"] = c.lock_in
        out["modes"].append(entry)
    if result.pedestrians is not None:
        p = result.pedestrians
        checked = [m for m in result.modes if m.pedestrians is not None and m.pedestrians.critical]
        worst = max(checked, key=lambda m: m.pedestrians.comfort_class * 1e9 + m.pedestrians.acceleration,
                    default=None)
        out["pedestrians"] = {
            "method": ped.CAVEAT,
            "source": ped.SOURCE,
            "lane": p["lane"], "width": p["width"] / L, "density": p["density"], "damping": p["damping"],
            "lane_length": p["lane_length"] / L, "area_m2": p["area"],
            "pedestrians": p["pedestrians"], "equivalent_pedestrians_per_m2": p["equivalent_pedestrians"],
            "critical_modes": [m.number for m in checked],
            "worst": None if worst is None else {"mode": worst.number,
                                                 "acceleration": worst.pedestrians.acceleration,
                                                 "comfort_class": worst.pedestrians.comfort_class,
                                                 "direction": worst.pedestrians.direction},
            "comfort_classes": {"1": "maximum", "2": "medium", "3": "minimum", "4": "unacceptable"},
            "constants": {name: {"value": p["constants"][name], "unit": c.unit, "meaning": c.meaning,
                                 "source": "set in the case" if name in p["overridden"] else c.source}
                          for name, c in ped.CONSTANTS.items()},
        }
    return out


def _plain(value):
    """Numpy scalars and arrays to Python numbers and lists, recursively; non-finite -> None."""
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist())
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None    # JSON has no infinity (e.g. the modal mass of a mode the lane does not feel)
    return value


def write_modes_json(result: ModesResult, units, path) -> Path:
    with atomic_path(path) as tmp:
        tmp.write_text(dumps_readable(_plain(modes_dict(result, units))), encoding="utf-8")
    return Path(path)


def modes_mesh(model, result: ModesResult) -> meshio.Mesh:
    """The structure at the ``about`` state with point data ``mode_1 … mode_n``."""
    L = model.spec.units.length_scale
    cells = [t.nodes for t in model.families.values() if len(t)]
    lines = np.concatenate(cells) if cells else np.zeros((0, 2), dtype=np.int64)
    data = {f"mode_{m.number}": result.shapes[k][:, :3] / L for k, m in enumerate(result.modes)}
    return meshio.Mesh(result.positions / L, [("line", lines.astype(np.int64))], point_data=data)


def write_modes_mesh(model, result: ModesResult, folder) -> list[Path]:
    """``modes.vtu`` and ``modes.pvd`` (one collection entry per mode, all in modes.vtu)."""
    folder = Path(folder)
    path = folder / "modes.vtu"
    with atomic_path(path) as tmp:
        meshio.write(tmp, modes_mesh(model, result), file_format="vtu", compression=None)
    entries = [f'    <DataSet timestep="{m.number}" part="0" '
               f'name={quoteattr(f"mode_{m.number} ({m.frequency:.4g} Hz, {m.kind})")} file="modes.vtu"/>'
               for m in result.modes]
    pvd = ('<?xml version="1.0"?>\n<VTKFile type="Collection" version="0.1">\n  <Collection>\n'
           + "\n".join(entries) + "\n  </Collection>\n</VTKFile>\n")
    write_text(folder / "modes.pvd", pvd)
    return [path, folder / "modes.pvd"]


def plot_modes(model, result: ModesResult, path, count: int = PLOTTED_MODES) -> Path:
    """The lowest shapes: elevation for vertical, torsional and longitudinal modes, plan for lateral ones."""
    from ..report.plots import _pyplot, _save
    from matplotlib.collections import LineCollection
    plt = _pyplot()
    L = model.spec.units.length_scale
    shown = result.modes[:count]
    rows = max(1, (len(shown) + 1) // 2)
    fig, axs = plt.subplots(rows, 2 if len(shown) > 1 else 1, figsize=(11, 2.6 * rows), squeeze=False)
    pos = result.positions
    cells = [t.nodes for t in model.families.values() if len(t)]
    lines = np.concatenate(cells) if cells else np.zeros((0, 2), dtype=np.int64)
    s = pos @ result.axes[0]
    extent = max(float(np.ptp(pos, axis=0).max()) if len(pos) else 1.0, 1e-12)
    for ax, (k, m) in zip(axs.ravel(), enumerate(shown)):
        u = result.shapes[k][:, :3]
        amp = float(np.max(np.linalg.norm(u, axis=1))) or 1.0
        u = u * (0.08 * extent / amp)
        plan = m.kind == "lateral"
        h = pos @ result.axes[1] if plan else pos[:, 2]
        du_s, du_h = u @ result.axes[0], (u @ result.axes[1] if plan else u[:, 2])
        base = np.stack([np.c_[s, h][lines[:, 0]], np.c_[s, h][lines[:, 1]]], axis=1) / L
        moved = np.stack([np.c_[s + du_s, h + du_h][lines[:, 0]],
                          np.c_[s + du_s, h + du_h][lines[:, 1]]], axis=1) / L
        ax.add_collection(LineCollection(base, colors="0.75", linewidths=0.6))
        ax.add_collection(LineCollection(moved, colors="C0", linewidths=1.0))
        ax.autoscale()
        ax.set_aspect("equal", adjustable="datalim")
        ax.set_title(f"mode {m.number}: {m.frequency:.3g} Hz, {m.kind}", fontsize=9)
        ax.set_xlabel(f"along the structure ({model.spec.units.length})", fontsize=8)
        ax.set_ylabel(("across" if plan else "z") + f" ({model.spec.units.length})", fontsize=8)
        ax.tick_params(labelsize=7)
    for ax in axs.ravel()[len(shown):]:
        ax.axis("off")
    fig.suptitle(f"lowest modes about {result.about} (shapes magnified, plan view for lateral modes)",
                 fontsize=10)
    fig.tight_layout()
    return _save(fig, path)


def write_modes(model, result: ModesResult, folder) -> list[Path]:
    """``modes.json``, ``modes.vtu``, ``modes.pvd`` and ``modes.png`` in ``folder``."""
    folder = Path(folder)
    written = [write_modes_json(result, model.spec.units, folder / "modes.json")]
    written += write_modes_mesh(model, result, folder)
    if result.modes:
        written.append(plot_modes(model, result, folder / "modes.png"))
    return written


def frequency_table(result: ModesResult) -> list[str]:
    """Lines of the CLI's frequency table."""
    lines = [f"modes about {result.about}: total mass {result.total_mass:.6g} kg "
             f"(members {result.own_mass:.6g} kg = self-weight / g {result.self_weight_mass:.6g} kg"
             f"; added {result.added_mass:.6g} kg)"]
    head = f"  {'mode':>4} {'f [Hz]':>10} {'T [s]':>9} {'kind':<12} {'M* [kg]':>11} {'eff. mass x/y/z [%]':>22}"
    if result.pedestrians is not None:
        head += f"  {'a [m/s^2]':>10} {'class':>5}"
    lines.append(head)
    for m in result.modes:
        r = 100 * m.effective_mass_ratio
        row = (f"  {m.number:>4} {m.frequency:>10.4g} {m.period:>9.4g} {m.kind:<12} {m.generalised_mass:>11.4g} "
               f"{r[0]:>6.1f} {r[1]:>6.1f} {r[2]:>6.1f}   ")
        if m.pedestrians is not None:
            c = m.pedestrians
            row += (f"  {c.acceleration:>10.3g} {c.comfort_class:>5}" + (" critical" if c.critical else "")
                    + (" LOCK-IN RISK" if c.lock_in else ""))
        lines.append(row)
    if result.pedestrians is not None:
        lines.append("  pedestrians: " + ped.CAVEAT)
    for w in result.warnings:
        lines.append(f"  WARNING: {w}")
    return lines
