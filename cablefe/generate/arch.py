"""Tied-arch footbridge: parabolic arch(es) and deck tie as beams, tension-only hangers.

The arch springs from the ends of the deck girder, which ties it; the deck
hangs from the arch on vertical hangers, or on inclined hangers that cross
each other (a network: each deck node hangs from the arch nodes ``offset``
stations ahead and behind).  Hangers are pretensioned so that their
vertical components carry the permanent load of their deck panel; arch and
tie are drawn unstressed (beams take no pretension) and pick up their thrust
and tie force H = w L^2 / (8 f) as the load comes on.
"""
from __future__ import annotations

import numpy as np

from . import Family, Param
from . import _case as c
from ._case import KN

PARAMS = (
    Param("span", "length", "40 m", "span between the springings (deck bearings)"),
    Param("rise", "length", "6 m", "rise of the arch above the deck at midspan"),
    Param("hangers", "choice", "vertical", "vertical or network (inclined, crossing) hangers",
          choices=("vertical", "network")),
    Param("panels", "int", 10, "number of deck panels (hanger stations + 1)", minimum=4),
    Param("network_offset", "int", 2, "network: stations between the deck and arch ends of a hanger",
          minimum=1),
    *c.bridge_params(Param, deck_choice=False),
    Param("arch_area", "area", "15000 mm^2", "area of one arch rib"),
    Param("arch_iy", "second_moment", "4e8 mm^4", "arch rib second moment, in-plane bending"),
    Param("arch_iz", "second_moment", "6e8 mm^4", "arch rib second moment, out-of-plane bending"),
    Param("arch_j", "second_moment", "8e8 mm^4", "arch rib torsion constant"),
    Param("hanger_area", "area", "150 mm^2", "metallic area of one hanger"),
)


def build(values, command: str) -> str:
    L, f = values["span"], values["rise"]
    n = int(values["panels"])
    planes = int(values["planes"])
    network = values["hangers"] == "network"
    k_off = int(values["network_offset"])
    if network and k_off > n // 2 - 1:
        raise ValueError(f"--network-offset: {k_off} is too large for {n} panels "
                         f"(at most {n // 2 - 1}: a hanger must end on the arch, not at a springing)")
    zd = values["deck_level"]
    s = L / n
    x = np.linspace(0.0, L, n + 1)
    za = zd + 4.0 * f * x * (L - x) / L**2     # parabola: the funicular of the deck load
    layout = c.deck_layout(planes, values["plane_spacing"], n + 1)
    girder = values["deck_weight"] / planes
    superimposed = values["superimposed"] / planes
    cross = c.steel_weight(c.CROSS_BEAM["area"]) * values["plane_spacing"] / 2.0 if planes == 2 else 0.0
    panel = (girder + superimposed) * s + cross
    gamma = c.strand_weight(values["hanger_area"])

    hangers = []   # (id, deck station, arch station)
    for i in range(1, n):
        if not network:
            hangers.append((f"{i}", i, i))
            continue
        for j in (i - k_off, i + k_off):
            if 1 <= j <= n - 1:
                hangers.append((f"{i}-{j}", i, j))

    case = c.CaseText()
    c.header(case, command, f"Tied-arch footbridge, {L:g} m span, rise {f:g} m, {values['hangers']} hangers "
             "(generated layout)",
             f"A tied-arch footbridge laid out by `cablefe new arch`: {planes} parabolic arch rib(s) of rise "
             f"{f:g} m springing from the ends of a {L:g} m deck girder (the tie) at z = {zd:g} m, "
             f"{values['hangers']} tension-only hangers at {s:.4g} m. Hangers are pretensioned so that they "
             "carry the permanent load of their deck panel; arch and tie are beams drawn unstressed and "
             f"take their thrust and tie force (H = w L^2 / 8f) as the load comes on.",
             values, PARAMS)
    c.materials(case)
    c.cable_section(case, "hanger", values["hanger_area"], "Hangers (tension-only bars).")
    c.beam_section(case, "arch", "Arch rib, one per plane.", values["arch_area"], values["arch_iy"],
                   values["arch_iz"], values["arch_j"])
    c.beam_section(case, "deck", "Deck girder = tie, one per plane; weight = deck weight / planes.",
                   values["deck_area"], values["deck_iy"], values["deck_iz"], values["deck_j"],
                   weight=values["deck_weight"] / planes)
    if planes == 2:
        c.beam_section(case, "cross", "Cross beams between the girders at every station.", **c.CROSS_BEAM)

    case.table("nodes", "Deck nodes D<plane><i>; arch nodes A<plane><i> (the arch springs from the deck "
               "end nodes).")
    c.deck_nodes(case, x, zd, layout)
    for tag, y in c.sides(planes, values["plane_spacing"]):
        for i in range(1, n):
            c.node(case, f"A{tag}{i}", (x[i], y, za[i]))

    case.table("supports", "Deck bearings at both ends (x held at the west end).")
    c.deck_supports(case, layout, (0, n), True)

    case.blank()
    case.comment("Arch ribs A<plane><i>-<i+1> (beams, rigidly joined to the tie at the springings).")
    for tag, _ in c.sides(planes, values["plane_spacing"]):
        chain = [f"D{tag}0"] + [f"A{tag}{i}" for i in range(1, n)] + [f"D{tag}{n}"]
        for i in range(n):
            c.member(case, f"A{tag}{i}-{i + 1}", "beam", chain[i], chain[i + 1], "arch")
    case.blank()
    case.comment("Hangers H<plane><deck station>[-<arch station>]: tension-only bars, pretension = "
                 "vertical share of the deck panel load / cos(inclination).")
    count = {i: sum(1 for _, d, _ in hangers if d == i) for i in range(1, n)}
    groups = []
    for tag, _ in c.sides(planes, values["plane_spacing"]):
        by_station = {}
        for name, i, j in hangers:
            dx, dz = (j - i) * s, za[j] - zd
            length = float(np.hypot(dx, dz))
            vertical = panel / count[i] + 0.5 * gamma * length
            mid = f"H{tag}{name}"
            by_station.setdefault(i, []).append(mid)
            c.member(case, mid, "bar", f"D{tag}{i}", f"A{tag}{j}", "hanger", tension_only=True,
                     pretension=vertical * length / dz)
        groups += list(by_station.values())
    case.blank()
    case.comment("Deck girders (ties) D<plane><i>-<i+1>" + (" and cross beams X<i>." if planes == 2 else "."))
    c.deck_members(case, layout, True)

    c.bridge_loads(case, layout, L, values, ["H*"], watch_members=["H{tag}*"])

    case.table("shape", "Form-finding (`cablefe shape`, and `cablefe run` first): find the hanger lengths "
               "that hold the deck level under the permanent loads.")
    case.kv("method", "target")
    case.kv("permanent", ["dead", "deck"])
    case.kv("tolerance", 1e-4)
    case.table("shape.targets", "Every hung deck node at deck level.")
    for tag, ids in layout["nodes"].items():
        for i in range(1, n):
            case.kv(ids[i], f"{{ z = {c.num(zd)} }}", raw=True)
    if not network:
        case.table("shape.adjust", "Each hanger's length is its own unknown.", array=True)
        case.kv("members", "H*")
    else:
        for k, ids in enumerate(groups):
            case.adjust(ids, "The hangers of one deck node are scaled together." if k == 0 else None)
    c.modes(case, layout, values)
    c.analysis(case)
    return case.text()


FAMILY = Family(
    name="arch",
    summary="tied-arch footbridge: parabolic arch rib(s) and tie as beams, vertical or network hangers",
    params=PARAMS,
    build=build,
    examples=("cablefe new arch -o arch.toml",
              'cablefe new arch --hangers network --panels 12 --span "48 m" --rise "7 m" -o a.toml'),
    notes="Arch and tie are unstressed beams in the drawn geometry; hangers carry their deck panel.",
)
