"""Prestressed cable net: a grid on a saddle edge, or a radial net inside a ring.

The net is drawn in its force-density shape (Schek 1974, The force density
method for form finding and computation of general networks, Comput.
Methods Appl. Mech. Eng. 3, 115-134, eq. 8): with C the branch-node
incidence matrix and Q the diagonal matrix of force densities q (tension per
length, N/m), the free nodes solve

    C_N^T Q C_N x_N = p_N - C_N^T Q C_F x_F

for each coordinate, p the nodal permanent load.  Each member then carries
T = q * length, which the case writes as its pretension, and the case's
``[shape] method = "force-density"`` asks form-finding for the same shape.
With equal force densities both ways, a square grid inside a hyperbolic
paraboloid edge z = c x y reproduces the paraboloid (its second differences
vanish along both grid directions).
"""
from __future__ import annotations

import numpy as np

from . import Family, Param
from . import _case as c
from ._case import KN

PARAMS = (
    Param("layout", "choice", "saddle", "saddle: rectangular grid on a saddle edge; radial: net in a ring",
          choices=("saddle", "radial")),
    Param("span_x", "length", "12 m", "saddle: plan length in x"),
    Param("span_y", "length", "12 m", "saddle: plan length in y"),
    Param("spacing", "length", "2 m", "saddle: grid spacing (rounded to divide both spans)"),
    Param("diameter", "length", "16 m", "radial: diameter of the ring"),
    Param("rings", "int", 4, "radial: number of rings, the supported ring included", minimum=2),
    Param("radials", "int", 16, "radial: number of radial cables", minimum=3),
    Param("rise", "length", "1.5 m", "height of the edge above/below z = 0 (saddle corners, ring high points)",
          positive=False, minimum=0.0),
    Param("q_main", "force_per_length", "12 kN/m", "force density of the x (saddle) or radial cables"),
    Param("q_cross", "force_per_length", "12 kN/m", "force density of the y (saddle) or ring cables"),
    Param("cable_area", "area", "150 mm^2", "metallic area of one net cable"),
    Param("cladding", "stress", "0.3 kN/m^2", "permanent covering load per plan area"),
    Param("snow", "stress", "0.6 kN/m^2", "snow (or maintenance) load per plan area"),
    Param("delta_t", "temperature_difference", "25 K", "uniform temperature change of the cables, +/-"),
)


def force_density_shape(xyz: np.ndarray, fixed: np.ndarray, ends: np.ndarray, q: np.ndarray,
                        loads: np.ndarray) -> np.ndarray:
    """Equilibrium coordinates of a net by the force density method.

    Parameters
    ----------
    xyz : (nn, 3) float
        Node coordinates, m; rows of fixed nodes are kept.
    fixed : (nn,) bool
        Supported nodes.
    ends : (m, 2) int
        Node indices of each branch.
    q : (m,) float
        Force densities, N/m (positive: tension).
    loads : (nn, 3) float
        Nodal loads, N.

    Returns
    -------
    (nn, 3) float
        New coordinates: free nodes from Schek 1974, eq. 8; fixed ones kept.
    """
    import scipy.sparse as sp  # here, not at import: `cablefe --help` builds the registry
    import scipy.sparse.linalg as spla

    nn, m = len(xyz), len(ends)
    rows = np.repeat(np.arange(m), 2)
    C = sp.csr_matrix((np.tile([1.0, -1.0], m), (rows, ends.ravel())), shape=(m, nn))
    D = (C.T @ sp.diags(q) @ C).tocsc()
    free = np.flatnonzero(~fixed)
    held = np.flatnonzero(fixed)
    out = np.array(xyz, dtype=float, copy=True)
    rhs = loads[free] - D[free][:, held] @ out[held]
    out[free] = spla.spsolve(D[free][:, free], rhs).reshape(len(free), 3)
    return out


def _saddle(values):
    lx, ly, a = values["span_x"], values["span_y"], values["spacing"]
    nx, ny = max(2, int(round(lx / a))), max(2, int(round(ly / a)))
    cxy = values["rise"] / (lx / 2.0 * ly / 2.0)
    ids, xyz, fixed, index = [], [], [], {}
    for i in range(nx + 1):
        for j in range(ny + 1):
            edge_i, edge_j = i in (0, nx), j in (0, ny)
            if edge_i and edge_j:
                continue  # corners join no cable
            x, y = -lx / 2 + lx * i / nx, -ly / 2 + ly * j / ny
            index[i, j] = len(ids)
            ids.append(f"N{i}_{j}")
            xyz.append((x, y, cxy * x * y))
            fixed.append(edge_i or edge_j)
    members, q = [], []
    for j in range(1, ny):
        for i in range(nx):
            members.append((f"X{i}_{j}", index[i, j], index[i + 1, j]))
            q.append(values["q_main"])
    for i in range(1, nx):
        for j in range(ny):
            members.append((f"Y{i}_{j}", index[i, j], index[i, j + 1]))
            q.append(values["q_cross"])
    return ids, np.array(xyz), np.array(fixed), members, np.array(q), lx * ly, ("X*", "Y*")


def _radial(values):
    R, m, nr = values["diameter"] / 2.0, int(values["rings"]), int(values["radials"])
    ids, xyz, fixed, index = ["N0"], [(0.0, 0.0, 0.0)], [False], {}
    for k in range(1, m + 1):
        for j in range(nr):
            t = 2.0 * np.pi * j / nr
            r = R * k / m
            index[k, j] = len(ids)
            ids.append(f"N{k}_{j}")
            # the ring is a saddle: z = rise cos 2t, a hyperbolic paraboloid on the circle
            xyz.append((r * np.cos(t), r * np.sin(t), values["rise"] * np.cos(2 * t) * (k / m) ** 2))
            fixed.append(k == m)
    members, q = [], []
    for k in range(1, m + 1):
        for j in range(nr):
            inner = 0 if k == 1 else index[k - 1, j]
            members.append((f"R{k}_{j}", inner, index[k, j]))
            q.append(values["q_main"])
    for k in range(1, m):
        for j in range(nr):
            members.append((f"C{k}_{j}", index[k, j], index[k, (j + 1) % nr]))
            q.append(values["q_cross"])
    return ids, np.array(xyz), np.array(fixed), members, np.array(q), np.pi * R**2, ("R*", "C*")


def _lane(values, saddle: bool) -> list[str]:
    """Node ids of a line of cables across the middle, from edge to edge."""
    if saddle:
        nx = max(2, int(round(values["span_x"] / values["spacing"])))
        ny = max(2, int(round(values["span_y"] / values["spacing"])))
        return [f"N{i}_{ny // 2}" for i in range(nx + 1)]
    m, nr = int(values["rings"]), int(values["radials"])
    west = [f"N{k}_{0}" for k in range(m, 0, -1)]
    east = [f"N{k}_{nr // 2}" for k in range(1, m + 1)] if nr % 2 == 0 else []
    return west + ["N0"] + east


def build(values, command: str) -> str:
    saddle = values["layout"] == "saddle"
    ids, xyz, fixed, members, q, plan_area, patterns = (_saddle if saddle else _radial)(values)
    ends = np.array([(a, b) for _, a, b in members])
    weight = c.strand_weight(values["cable_area"])
    # cladding spread evenly over the cables (N per m of cable): the nodal
    # loads of the permanent state depend on the lengths, so iterate the shape
    for _ in range(4):
        lengths = np.linalg.norm(xyz[ends[:, 1]] - xyz[ends[:, 0]], axis=1)
        cladding = values["cladding"] * plan_area / lengths.sum()
        half = 0.5 * (weight + cladding) * lengths
        loads = np.zeros_like(xyz)
        loads[:, 2] -= np.bincount(ends[:, 0], half, len(xyz)) + np.bincount(ends[:, 1], half, len(xyz))
        xyz = force_density_shape(xyz, fixed, ends, q, loads)
    lengths = np.linalg.norm(xyz[ends[:, 1]] - xyz[ends[:, 0]], axis=1)
    cladding = values["cladding"] * plan_area / lengths.sum()
    snow = values["snow"] * plan_area / lengths.sum()
    tension = q * lengths

    case = c.CaseText()
    what = (f"a {values['span_x']:g} m x {values['span_y']:g} m grid of cables X… (along x) and Y… "
            "(along y) held by a saddle-shaped edge frame (z = c x y)") if saddle else (
           f"a radial net of {int(values['radials'])} radial cables R… and rings C… inside a saddle-shaped "
           f"ring of {values['diameter']:g} m diameter")
    c.header(case, command, f"Cable net, {values['layout']} layout (generated layout)",
             f"A prestressed cable net laid out by `cablefe new net`: {what}. Edge nodes are supported. "
             "The net is drawn in its force-density shape under the permanent loads (Schek 1974, eq. 8) "
             "and every cable is pretensioned with T = q x length, so solving from this geometry starts "
             "near equilibrium.", values, PARAMS)
    case.table("materials.strand", "Cable steel (spiral strand).")
    case.kv("E", "150 GPa")
    case.kv("unit_weight", "78.5 kN/m^3")
    case.kv("alpha", 1.2e-5, "1/K")
    c.cable_section(case, "net", values["cable_area"], "Net cables.")
    case.table("nodes", "Net nodes N…; the edge nodes sit on the supporting frame or ring.")
    for nid, p in zip(ids, xyz):
        c.node(case, nid, p)
    case.table("supports", "Edge nodes held by the frame / ring (pinned).")
    for nid, f in zip(ids, fixed):
        if f:
            case.kv(nid, "pin")
    case.blank()
    case.comment("Net cables: catenary elements pretensioned with T = q x length (force density q of "
                 "their family).")
    for (mid, a, b), t in zip(members, tension):
        c.member(case, mid, "cable", ids[a], ids[b], "net", pretension=t)

    west = [mid for (mid, a, b) in members if xyz[a, 0] + xyz[b, 0] < -1e-9]
    case.table("loads", "Permanent: self-weight of the cables.", array=True)
    case.kv("case", "dead")
    case.kv("self_weight", True)
    case.table("loads", f"Permanent: covering, {c.num(values['cladding'] / KN, 4)} kN/m^2 of plan "
               "spread evenly over the cable length.", array=True)
    case.kv("case", "cladding")
    case.kv("members", ["*"])
    case.kv("per_length", f"[0, 0, {c.num(-cladding / KN, 6)}]", raw=True)
    case.table("loads", f"Snow on the whole net, {c.num(values['snow'] / KN, 4)} kN/m^2 of plan.", array=True)
    case.kv("case", "snow-full")
    case.kv("members", ["*"])
    case.kv("per_length", f"[0, 0, {c.num(-snow / KN, 6)}]", raw=True)
    case.table("loads", "Snow on the west half (x < 0).", array=True)
    case.kv("case", "snow-half")
    case.kv("members", west)
    case.kv("per_length", f"[0, 0, {c.num(-snow / KN, 6)}]", raw=True)
    case.table("loads", "Temperature of the cables, a uniform change from the permanent state.", array=True)
    case.kv("case", "cold")
    case.kv("members", ["*"])
    case.kv("temperature", -float(values["delta_t"]))
    case.table("loads", array=True)
    case.kv("case", "warm")
    case.kv("members", ["*"])
    case.kv("temperature", float(values["delta_t"]))
    c.combinations(case, "dead", "cladding", live=("snow-full", "snow-half"))
    lane = _lane(values, saddle)
    on_lane = set(lane)
    lane_members = [mid for (mid, a, b) in members if ids[a] in on_lane and ids[b] in on_lane]
    c.live_study(case, "snow", "Worst snow patches along a line of cables across the middle of the net "
                 "(drifts, partial clearing): the lane's cables carry the snow-full load per length, placed "
                 "where each watched deflection or tension is most adverse.",
                 lane, f"[0, 0, {c.num(-snow / KN, 6)}]", [*lane, *lane_members])

    case.table("shape", "Form-finding (`cablefe shape`, and `cablefe run` first) by force density: "
               "each cable family keeps its force density; supported nodes stay put.")
    case.kv("method", "force-density")
    case.kv("permanent", ["dead", "cladding"])
    case.kv("force_density", f"{{ \"{patterns[0]}\" = {c.num(values['q_main'] / KN)}, "
            f"\"{patterns[1]}\" = {c.num(values['q_cross'] / KN)} }}", "kN/m", raw=True)
    c.analysis(case)
    return case.text()


FAMILY = Family(
    name="net",
    summary="prestressed cable net: grid on a saddle edge, or radial net in a ring, by force density",
    params=PARAMS,
    build=build,
    examples=("cablefe new net -o net.toml",
              'cablefe new net --layout radial --diameter "20 m" --rings 5 --radials 20 -o ring.toml',
              'cablefe new net --span-x "16 m" --rise "2 m" --q-cross "8 kN/m" -o saddle.toml'),
    notes="Drawn in its force-density shape (Schek 1974); pretension T = q x length.",
)
