"""Suspension footbridge: main cable(s) between two towers, hangers, deck.

Geometry and pretension are those of a parabolic cable under a load uniform
per horizontal length w (N/m): z(x) through both tower tops with the sag d
below the chord at midspan and horizontal tension H = w L^2 / (8 d)
(Irvine 1981, Cable Structures, ch. 2).  w collects, per cable plane, the
deck girder, superimposed load, cross beams, hangers (as panel loads) and
the cable's own weight.  Hangers carry the deck load of their panel; the
panel loads of a uniform load give the same moments at the panel points as
the uniform load, so the polygon through the parabola's points is exactly
funicular for them.
"""
from __future__ import annotations

import numpy as np

from . import Family, Param
from . import _case as c
from ._case import KN

#: Shortest hanger the layout accepts, m: below this the cable meets the deck.
MIN_HANGER = 0.5


PARAMS = (
    Param("span", "length", "60 m", "distance between the tower tops"),
    Param("sag", "length", "6 m", "main cable sag below the chord at midspan"),
    Param("tower_height", "length", "12 m", "height of the west tower top above the ground"),
    Param("tower_height_east", "length", None, "height of the east tower top (default: same as west)"),
    Param("hanger_spacing", "length", "5 m", "hanger spacing (rounded to divide the span evenly)"),
    *c.bridge_params(Param, deck_choice=True),
    Param("cable_area", "area", "1600 mm^2", "metallic area of one main cable"),
    Param("hanger_area", "area", "200 mm^2", "metallic area of one hanger"),
    Param("backstays", "choice", "no", "yes: towers as beams held by backstays; no: cable ends fixed",
          choices=("yes", "no")),
    Param("backstay_span", "length", "10 m", "horizontal distance from a tower to its backstay anchor"),
)


def hanger_stations(span: float, spacing: float) -> int:
    """Number of panels n (n - 1 hangers per plane) for a spacing, >= 2."""
    return max(2, int(round(span / spacing)))


def horizontal_tension(values) -> dict:
    """Loads per cable plane and the parabola's horizontal tension.

    Returns
    -------
    dict
        ``w`` (N/m per horizontal length), ``H`` (N), ``x``, ``z`` (m) of the
        cable nodes, ``n`` panels, and the parts of ``w``.
    """
    L, d = values["span"], values["sag"]
    n = hanger_stations(L, values["hanger_spacing"])
    s = L / n
    planes = int(values["planes"])
    z_w = values["tower_height"]
    z_e = values["tower_height_east"] if values["tower_height_east"] is not None else z_w
    x = np.linspace(0.0, L, n + 1)
    z = c.parabola(x, L, z_w, z_e, d)
    hangers = z[1:-1] - values["deck_level"]
    girder = values["deck_weight"] / planes
    superimposed = values["superimposed"] / planes
    cross = c.steel_weight(c.CROSS_BEAM["area"]) * values["plane_spacing"] / 2.0 if planes == 2 else 0.0
    hanger_weight = c.strand_weight(values["hanger_area"]) * hangers
    chords = np.hypot(np.diff(x), np.diff(z))
    cable = c.strand_weight(values["cable_area"]) * chords.sum() / L
    # panel loads P_i = w s at the n - 1 hanger points stand for w over the span
    w = girder + superimposed + cross / s + hanger_weight.sum() / ((n - 1) * s) + cable
    return {"w": w, "H": w * L**2 / (8.0 * d), "x": x, "z": z, "n": n, "s": s, "hangers": hangers,
            "panel": (girder + superimposed) * s + cross, "hanger_weight": hanger_weight,
            "chords": chords, "z_west": z_w, "z_east": z_e}


def build(values, command: str) -> str:
    L, d = values["span"], values["sag"]
    planes = int(values["planes"])
    beams = values["deck"] == "beams"
    backstays = values["backstays"] == "yes"
    zd = values["deck_level"]
    g = horizontal_tension(values)
    n, x, z = g["n"], g["x"], g["z"]
    if g["hangers"].min() < MIN_HANGER:
        raise ValueError(f"--sag: the cable comes within {g['hangers'].min():.3g} m of the deck "
                         f"(towers {g['z_west']:.4g} m / {g['z_east']:.4g} m, deck at {zd:.4g} m); "
                         f"reduce the sag or raise the towers (shortest hanger {MIN_HANGER} m)")
    layout = c.deck_layout(planes, values["plane_spacing"], n + 1)
    H = g["H"]
    tension = H * g["chords"] / g["s"]   # along each chord, horizontal component H
    hanger_force = g["panel"] + g["hanger_weight"] / 2.0  # constant along a bar; half its weight below

    case = c.CaseText()
    c.header(case, command, f"Suspension footbridge, {L:g} m span, sag {d:g} m (generated layout)",
             f"A suspension footbridge laid out by `cablefe new suspension`: {planes} main cable(s) "
             f"hung between tower tops {L:g} m apart with a sag of {d:g} m, {n - 1} hangers per plane "
             f"at {g['s']:.4g} m, a deck of {'beams' if beams else 'bars'} at z = {zd:g} m on bearings "
             f"at both ends{', towers held by backstays' if backstays else ', cable ends on fixed anchors'}."
             f" The cable is drawn as the parabola of the permanent load (w = {g['w'] / KN:.4g} kN/m per "
             f"plane, H = w L^2 / 8d = {H / KN:.5g} kN; Irvine 1981, Cable Structures, ch. 2), so "
             "solving from this geometry starts near equilibrium.",
             values, PARAMS)
    c.materials(case)
    c.cable_section(case, "main", values["cable_area"], "Main cable, one per plane.")
    c.cable_section(case, "hanger", values["hanger_area"], "Hangers.")
    c.beam_section(case, "deck", "Deck girder, one per plane; weight = deck weight / planes.",
                   values["deck_area"], values["deck_iy"], values["deck_iz"], values["deck_j"],
                   weight=values["deck_weight"] / planes, beams=beams)
    if planes == 2:
        c.beam_section(case, "cross", "Cross beams between the girders at every hanger station.",
                       beams=beams, **c.CROSS_BEAM)
    if backstays:
        c.beam_section(case, "tower", "Towers: steel tubes fixed at the base (placeholder section).",
                       **c.TOWER)

    case.table("nodes", "Main cable nodes C<plane><i> on the parabola (C…0 and C…n are the tower tops), "
               "deck nodes D<plane><i>" + (", tower bases TB…, backstay anchors A…" if backstays else "") + ".")
    for tag, y in c.sides(planes, values["plane_spacing"]):
        for i in range(n + 1):
            c.node(case, f"C{tag}{i}", (x[i], y, z[i]))
    c.deck_nodes(case, x, zd, layout)
    if backstays:
        for tag, y in c.sides(planes, values["plane_spacing"]):
            c.node(case, f"TB{tag}W", (0.0, y, 0.0))
            c.node(case, f"TB{tag}E", (L, y, 0.0))
            c.node(case, f"A{tag}W", (-values["backstay_span"], y, 0.0))
            c.node(case, f"A{tag}E", (L + values["backstay_span"], y, 0.0))

    case.table("supports", "Deck bearings at both ends" + (
        "; towers fixed at the base; backstay anchors pinned." if backstays else
        "; main cable ends on fixed anchor points at the tower tops (towers not modelled)."))
    c.deck_supports(case, layout, (0, n), beams)
    for tag, _ in c.sides(planes, values["plane_spacing"]):
        if backstays:
            for end in "WE":
                case.kv(f"TB{tag}{end}", "all")
                case.kv(f"A{tag}{end}", "pin")
        else:
            case.kv(f"C{tag}0", "pin")
            case.kv(f"C{tag}{n}", "pin")

    case.blank()
    case.comment("Main cables MC<plane><i>: catenary elements, pretension H / cos(angle of the chord) "
                 f"with H = {H / KN:.5g} kN.")
    for tag, _ in c.sides(planes, values["plane_spacing"]):
        for i in range(1, n + 1):
            c.member(case, f"MC{tag}{i}", "cable", f"C{tag}{i - 1}", f"C{tag}{i}", "main",
                     pretension=tension[i - 1])
    case.blank()
    case.comment("Hangers H<plane><i>: tension-only bars pretensioned with the permanent load of "
                 "their deck panel (girder, superimposed load, cross beam, half their own weight).")
    for tag, _ in c.sides(planes, values["plane_spacing"]):
        for i in range(1, n):
            c.member(case, f"H{tag}{i}", "bar", f"C{tag}{i}", f"D{tag}{i}", "hanger",
                     tension_only=True, pretension=hanger_force[i - 1])
    case.blank()
    case.comment("Deck girders D<plane><i>-<i+1>" + (" and cross beams X<i>." if planes == 2 else "."))
    c.deck_members(case, layout, beams)
    temperature = ["MC*", "H*"]
    if backstays:
        case.blank()
        case.comment("Towers T<plane><end> (beams) and backstays BS<plane><end>, pretensioned so that "
                     "their horizontal pull balances H at the tower top.")
        for tag, _ in c.sides(planes, values["plane_spacing"]):
            for end, top, xa, zt in (("W", f"C{tag}0", -values["backstay_span"], g["z_west"]),
                                     ("E", f"C{tag}{n}", L + values["backstay_span"], g["z_east"])):
                c.member(case, f"T{tag}{end}", "beam", f"TB{tag}{end}", top, "tower", divide=2)
                chord = float(np.hypot(values["backstay_span"], zt))
                c.member(case, f"BS{tag}{end}", "cable", f"A{tag}{end}", top, "main",
                         pretension=H * chord / values["backstay_span"])
        temperature.append("BS*")

    c.bridge_loads(case, layout, L, values, temperature, watch_members=["H{tag}*"])

    mid = [n // 2] if n % 2 == 0 else [n // 2, n // 2 + 1]
    case.table("shape", "Form-finding (`cablefe shape`, and `cablefe run` first): find the unstressed "
               "lengths that put the deck level and the cable at its sag under the permanent loads.")
    case.kv("method", "target")
    case.kv("permanent", ["dead", "deck"])
    case.kv("tolerance", 1e-4)
    case.table("shape.targets", "Deck nodes at deck level; main cable low point at the sag"
               + ("; tower tops plumb." if backstays else "."))
    for tag, ids in layout["nodes"].items():
        for i in range(1, n):
            case.kv(ids[i], f"{{ z = {c.num(zd)} }}", raw=True)
        for i in mid:
            case.kv(f"C{tag}{i}", f"{{ z = {c.num(z[i])} }}", raw=True)
        if backstays:
            case.kv(f"C{tag}0", "{ x = 0.0 }", raw=True)
            case.kv(f"C{tag}{n}", f"{{ x = {c.num(L)} }}", raw=True)
    case.table("shape.adjust", "Each hanger's length is its own unknown.", array=True)
    case.kv("members", "H*")
    for tag in layout["nodes"]:
        case.table("shape.adjust", "The main cable of a plane is scaled as a whole.", array=True)
        case.kv("members", f"MC{tag}*")
        case.kv("together", True)
    if backstays:
        case.table("shape.adjust", "Each backstay's length is its own unknown.", array=True)
        case.kv("members", "BS*")
    c.modes(case, layout, values)
    c.analysis(case)
    return case.text()


FAMILY = Family(
    name="suspension",
    summary="suspension footbridge: parabolic main cable(s), hangers, deck girder(s), optional backstays",
    params=PARAMS,
    build=build,
    examples=('cablefe new suspension -o bridge.toml',
              'cablefe new suspension --span "80 m" --sag "8 m" --tower-height "14 m" --planes 1 -o b.toml',
              'cablefe new suspension --deck bars --backstays yes --hanger-spacing "4 m" -o b.toml'),
    notes="The cable is drawn as the parabola of the permanent load with H = w L^2 / (8 d).",
)
