"""Generators of big benchmark cases, written in the compact case form.

Invented structures for speed measurements only (not design examples):

* :func:`saddle_net` - a prestressed N x N cable net on a hyperbolic
  paraboloid ``z = c x y`` with its boundary pinned, tension-only members,
  under a uniform load on every member;
* :func:`suspension_bridge` - a long suspension bridge: two main cables as
  divided catenary cables, tension-only hangers, a deck of bars with
  cross beams and diagonal bracing, self-weight plus a deck load.

Both return the case text (TOML) and a small dict of what was generated.
The compact ``[node_table]`` / ``[[member_table]]`` form keeps a case with
10^5 members at a few MB and fast to parse.
"""
from __future__ import annotations

import json
import os

from pathlib import Path

import numpy as np

__all__ = ["saddle_net", "suspension_bridge", "net_arrays"]


def cli_environment(root: Path) -> dict:
    """The environment for timing ``python -m cablefe`` in a fresh process.

    With cablefe importable from ``root``, and Python's compiled bytecode
    kept (in ``benchmarks/results/pycache``, outside the package): an
    installation has it (pip compiles the modules it installs), while a
    session with ``PYTHONDONTWRITEBYTECODE`` set would recompile every
    module at every start (measured: about 0.1 s of the command).  Run the
    command once before timing it, so that the cache is written.
    """
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["PYTHONPATH"] = str(root)
    env["PYTHONPYCACHEPREFIX"] = str(root / "benchmarks" / "results" / "pycache")
    return env


def _array(values) -> str:
    """A TOML array (JSON syntax is valid TOML for numbers and plain strings)."""
    if isinstance(values, np.ndarray):
        values = values.tolist()
    return json.dumps(values, separators=(",", ""))


def net_arrays(N: int, spacing: float = 1.0, rise: float = 0.1):
    """Geometry of the saddle net.

    Parameters
    ----------
    N : int
        Nodes per side (>= 3).
    spacing : float
        Grid spacing in plan, m.
    rise : float
        Corner height over half the side: ``z = c x y`` with ``c = 4 rise / S``
        (S the side), so the corners rise by ``rise * S`` (dimensionless).

    Returns
    -------
    xyz : (N*N, 3) node coordinates, m
    members : (2 N (N-1), 2) node indices of the members (along x, then along y)
    boundary : (N*N,) bool, boundary nodes (pinned)
    """
    if N < 3:
        raise ValueError(f"N must be >= 3, got {N}")
    side = (N - 1) * spacing
    c = 4.0 * rise / side
    t = (np.arange(N) - (N - 1) / 2.0) * spacing
    x, y = np.meshgrid(t, t, indexing="ij")
    xyz = np.stack([x.ravel(), y.ravel(), (c * x * y).ravel()], axis=1)
    idx = np.arange(N * N).reshape(N, N)
    members = np.concatenate([
        np.stack([idx[:-1, :].ravel(), idx[1:, :].ravel()], axis=1),    # along x
        np.stack([idx[:, :-1].ravel(), idx[:, 1:].ravel()], axis=1),    # along y
    ])
    edge = np.zeros((N, N), dtype=bool)
    edge[0, :] = edge[-1, :] = edge[:, 0] = edge[:, -1] = True
    return xyz, members, edge.ravel()


def saddle_net(N: int, *, member_type: str = "bar", pretension: float | None = None,
               load: float = -0.5, increments: int | None = 1, tolerance: float | None = 1e-8,
               solver: str | None = "auto", form: str = "compact") -> tuple[str, dict]:
    """Case text of a prestressed saddle net (kN, m).

    Parameters
    ----------
    N : int
        Nodes per side.
    member_type : "bar" | "cable"
        Tension-only bars, or catenary cables (weightless here: the load is
        lumped at the nodes, so both give the same answer).
    pretension : float, optional
        Initial tension of every member, kN (its unstressed length follows).
        Default ``1 kN/m`` times the side: together with a section whose
        ``EA`` is 1000 times the pretension this keeps the deflection over
        span and the strains the same for every N, so that the Newton
        iteration count measures the solver and not a more nonlinear
        problem.
    load : float
        Uniform load per member length in z, kN/m (negative: down).
    increments, tolerance, solver
        The ``[analysis]`` settings; None leaves the key out (its default).
    form : "compact" | "ordinary"
        ``[node_table]`` / ``[[member_table]]``, or the ordinary ``[nodes]``
        table and one ``[[members]]`` table per member (as people write
        cases; a 100 x 100 net is then about 3.5 MB).
    """
    xyz, members, boundary = net_arrays(N)
    if pretension is None:
        pretension = 1.0 * (N - 1)
    area_mm2 = 1000.0 * pretension * 1e3 / 150e9 * 1e6      # EA = 1000 T with E = 150 GPa
    ids = [f"N{k}" for k in range(N * N)]
    nx = N * (N - 1)
    mids = [f"X{k}" for k in range(nx)] + [f"Y{k}" for k in range(nx)]
    tension_only = "tension_only = true\n" if member_type == "bar" else ""
    supports = "\n".join(f'{ids[k]} = "pin"' for k in np.flatnonzero(boundary))
    if form == "ordinary":
        nodes = "[nodes]\n" + "\n".join(f"{ids[k]} = [{p[0]!r}, {p[1]!r}, {p[2]!r}]"
                                         for k, p in enumerate(xyz.tolist()))
        table = "\n".join(f'[[members]]\nid = "{m}"\ntype = "{member_type}"\nnodes = ["{ids[a]}", "{ids[b]}"]\n'
                          f'section = "net"\n{tension_only}pretension = {pretension!r}\n'
                          for m, (a, b) in zip(mids, members.tolist()))
    elif form == "compact":
        nodes = f"""[node_table]
ids = {_array(ids)}
x = {_array(xyz[:, 0])}
y = {_array(xyz[:, 1])}
z = {_array(xyz[:, 2])}"""
        table = f"""[[member_table]]
type = "{member_type}"
section = "net"
{tension_only}pretension = {pretension!r}
ids = {_array(mids)}
i = {_array([ids[a] for a in members[:, 0]])}
j = {_array([ids[b] for b in members[:, 1]])}"""
    else:
        raise ValueError(f"form must be 'compact' or 'ordinary', got {form!r}")
    analysis = "\n".join(f"{k} = {v!r}".replace("'", '"') for k, v in
                          (("increments", increments), ("tolerance", tolerance), ("solver", solver))
                          if v is not None)
    text = f"""# generated by benchmarks/cases.py: saddle net {N} x {N}
title = "Benchmark saddle net {N} x {N}"

[units]
length = "m"
force = "kN"

[materials.strand]
E = "150 GPa"
unit_weight = "78.5 kN/m^3"

[sections.net]
material = "strand"
area = "{area_mm2:.6g} mm^2"
breaking_load = "{3.0 * pretension:.6g} kN"

{nodes}

{table}

[supports]
{supports}

[[loads]]
case = "snow"
members = ["X*", "Y*"]
per_length = [0.0, 0.0, {load!r}]

[analysis]
{analysis}
"""
    info = {"N": N, "nodes": N * N, "members": len(members), "member_type": member_type,
            "free_dofs": 3 * int((~boundary).sum()), "pretension_kN": pretension, "load_kN_per_m": load}
    return text, info


def suspension_bridge(panels: int = 400, *, panel: float = 2.5, sag_ratio: float = 0.1,
                      cable_divide: int = 1, tolerance: float = 1e-8,
                      solver: str = "auto") -> tuple[str, dict]:
    """Case text of a long suspension bridge (kN, m).

    Two main cables (x along the span, at y = +-b) hang between towers at
    x = 0 and x = span, their nodes over every deck panel point on the
    parabola of a uniformly loaded cable (Irvine 1981, Cable Structures,
    ch. 2); a tension-only hanger runs from each interior cable node down to
    the deck.  The deck is two edge chords of bars, a cross bar at every
    panel point and a diagonal in every panel (a plane truss in plan), with
    small vertical stiffness from the hangers only; deck ends are pinned.
    Cable segments between panel points are catenary elements (optionally
    divided).  Loads: self-weight, and a deck load on every panel.

    Parameters
    ----------
    panels : int
        Deck panels; hangers per side = panels - 1.
    panel : float
        Panel length, m.
    sag_ratio : float
        Cable sag over span.
    cable_divide : int
        ``divide`` of each main-cable segment (>= 1).
    """
    span = panels * panel
    b = 6.0
    x = np.arange(panels + 1) * panel
    sag = sag_ratio * span
    deck_z = 0.0
    tower = sag + 4.0
    cable_z = tower - 4.0 * sag * x / span * (1.0 - x / span)
    ids, xs, ys, zs = [], [], [], []

    def node(name, p):
        ids.append(name)
        xs.append(float(p[0]))
        ys.append(float(p[1]))
        zs.append(float(p[2]))

    for side, y in (("L", -b), ("R", b)):
        for k in range(panels + 1):
            node(f"C{side}{k}", (x[k], y, cable_z[k]))
            node(f"D{side}{k}", (x[k], y, deck_z))
    cables, hangers, chords, cross, diag = [], [], [], [], []
    for side in "LR":
        cables += [(f"M{side}{k}", f"C{side}{k}", f"C{side}{k + 1}") for k in range(panels)]
        hangers += [(f"H{side}{k}", f"C{side}{k}", f"D{side}{k}") for k in range(1, panels)]
        chords += [(f"E{side}{k}", f"D{side}{k}", f"D{side}{k + 1}") for k in range(panels)]
    cross += [(f"T{k}", f"DL{k}", f"DR{k}") for k in range(panels + 1)]
    diag += [(f"G{k}", f"DL{k}" if k % 2 else f"DR{k}", f"DR{k + 1}" if k % 2 else f"DL{k + 1}")
             for k in range(panels)]

    def group(kind, section, rows, extra=""):
        return (f'[[member_table]]\ntype = "{kind}"\nsection = "{section}"\n{extra}'
                f"ids = {_array([r[0] for r in rows])}\ni = {_array([r[1] for r in rows])}\n"
                f"j = {_array([r[2] for r in rows])}\n")

    supports = []
    for side in "LR":
        supports += [f'C{side}0 = "pin"', f'C{side}{panels} = "pin"',
                     f'D{side}0 = "pin"', f'D{side}{panels} = "pin"']
    # the cable and hangers are pretensioned to carry about the deck weight
    w_deck = 60.0   # kN/m for the whole deck
    H = w_deck * span ** 2 / (8.0 * sag) / 2.0       # per cable, Irvine 1981 ch. 2
    hanger_force = w_deck * panel / 2.0
    # long form for the main cables: they need divide
    long_members = ""
    if cable_divide > 1:
        cable_rows = cables
        cables = []
        long_members = "\n".join(
            f'[[members]]\nid = "{r[0]}"\ntype = "cable"\nnodes = ["{r[1]}", "{r[2]}"]\n'
            f'section = "main"\npretension = {H!r}\ndivide = {cable_divide}\n' for r in cable_rows)
    support_lines = "\n".join(supports)
    tables = "\n".join([
        group("cable", "main", cables, f"pretension = {H!r}\n") if cables else "",
        long_members,
        group("bar", "hanger", hangers, f"tension_only = true\npretension = {hanger_force!r}\n"),
        group("bar", "chord", chords),
        group("bar", "cross", cross + diag)])
    text = f"""# generated by benchmarks/cases.py: suspension bridge, {panels} panels
title = "Benchmark suspension bridge, span {span:g} m"

[units]
length = "m"
force = "kN"

[materials.strand]
E = "160 GPa"
unit_weight = "78.5 kN/m^3"

[materials.steel]
E = "210 GPa"
unit_weight = "78.5 kN/m^3"

[sections.main]
material = "strand"
area = "0.12 m^2"

[sections.hanger]
material = "strand"
area = "3000 mm^2"

[sections.chord]
material = "steel"
area = "0.08 m^2"

[sections.cross]
material = "steel"
area = "0.02 m^2"

[node_table]
ids = {_array(ids)}
x = {_array(xs)}
y = {_array(ys)}
z = {_array(zs)}

{tables}

[supports]
{support_lines}

[[loads]]
case = "dead"
self_weight = true

[[loads]]
case = "deck"
members = ["E*"]
per_length = [0.0, 0.0, {-w_deck / 2.0!r}]

[[loads]]
case = "traffic"
members = ["EL*"]
per_length = [0.0, 0.0, -10.0]

[[combinations]]
name = "service"
factors = {{ dead = 1.0, deck = 1.0, traffic = 1.0 }}

[analysis]
increments = 2
tolerance = {tolerance!r}
solver = "{solver}"
"""
    info = {"panels": panels, "span_m": span, "hangers": len(hangers), "main_cable_elements":
            2 * panels * cable_divide, "members": len(cables) + len(hangers) + len(chords)
            + len(cross) + len(diag) + (2 * panels if cable_divide > 1 else 0)}
    return text, info
