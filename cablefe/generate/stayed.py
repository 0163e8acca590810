"""Cable-stayed footbridge: fan or harp stays from one or two pylons to a deck.

One pylon stands at midspan; two pylons stand at the quarter points (side
spans of half the main span), so that every pylon carries mirror-image stays
and its top is balanced horizontally.  Along each half-width h of a pylon
the stays meet the deck every s = h / n; the outermost stay of each side
ends at a deck bearing (side span) or at midspan (main span, shared with the
other pylon), where it carries half a panel.  Each stay is pretensioned so
that its vertical component carries the permanent load of its deck panel:
T = P / sin(angle of the stay).
"""
from __future__ import annotations

import numpy as np

from . import Family, Param
from . import _case as c
from ._case import KN

PARAMS = (
    Param("span", "length", "60 m", "total deck length between the end bearings"),
    Param("pylons", "choice", "1", "1 (at midspan) or 2 (at the quarter points)", choices=("1", "2")),
    Param("arrangement", "choice", "fan", "fan (all stays from the pylon top) or harp (parallel stays)",
          choices=("fan", "harp")),
    Param("stays", "int", 4, "stays per side of each pylon (per plane)", minimum=1),
    Param("pylon_height", "length", "14 m", "height of the pylon top above the deck"),
    Param("pylon", "choice", "beams", "pylons as beams fixed at the base, or fixed anchor points",
          choices=("beams", "fixed")),
    *c.bridge_params(Param, deck_choice=False),
    Param("stay_area", "area", "400 mm^2", "metallic area of one stay"),
)


def build(values, command: str) -> str:
    L = values["span"]
    planes = int(values["planes"])
    pylons = int(values["pylons"])
    n = int(values["stays"])
    harp = values["arrangement"] == "harp"
    beams_pylon = values["pylon"] == "beams"
    zd, hp = values["deck_level"], values["pylon_height"]
    half = L / (2 * pylons)                       # reach of one side of a pylon, m
    s = half / n
    stations = int(round(L / s))
    x = np.linspace(0.0, L, stations + 1)
    pylon_x = [half * (2 * k + 1) for k in range(pylons)]
    pylon_station = [int(round(px / s)) for px in pylon_x]
    layout = c.deck_layout(planes, values["plane_spacing"], stations + 1)
    girder = values["deck_weight"] / planes
    superimposed = values["superimposed"] / planes
    cross = c.steel_weight(c.CROSS_BEAM["area"]) * values["plane_spacing"] / 2.0 if planes == 2 else 0.0
    panel = (girder + superimposed) * s + cross   # permanent load of one deck station, N
    gamma = c.strand_weight(values["stay_area"])

    def anchor_height(k):                         # pylon anchorage of stay k above the deck, m
        return hp * k / n if harp else hp

    case = c.CaseText()
    c.header(case, command, f"Cable-stayed footbridge, {L:g} m, {pylons} pylon(s), {values['arrangement']} "
             "(generated layout)",
             f"A cable-stayed footbridge laid out by `cablefe new stayed`: a {L:g} m deck of beams at "
             f"z = {zd:g} m, {pylons} pylon(s) {hp:g} m high above the deck "
             f"({'beams fixed at the base' if beams_pylon else 'as fixed anchor points'}), "
             f"{n} {values['arrangement']} stays per side and plane meeting the deck every {s:.4g} m. "
             "Each stay is pretensioned so that its vertical component carries the permanent load of its "
             "deck panel (T = P / sin angle), so solving from this geometry starts near equilibrium.",
             values, PARAMS)
    c.materials(case)
    c.cable_section(case, "stay", values["stay_area"], "Stays.")
    c.beam_section(case, "deck", "Deck girder, one per plane; weight = deck weight / planes.",
                   values["deck_area"], values["deck_iy"], values["deck_iz"], values["deck_j"],
                   weight=values["deck_weight"] / planes)
    if planes == 2:
        c.beam_section(case, "cross", "Cross beams between the girders at every stay station.",
                       **c.CROSS_BEAM)
    if beams_pylon:
        c.beam_section(case, "pylon", "Pylon legs, fixed at the base (placeholder section).", **c.TOWER)

    heights = sorted({anchor_height(k) for k in range(1, n + 1)})
    case.table("nodes", "Deck nodes D<plane><i>; pylon anchorages P<pylon><plane>A<k> (k counts up "
               "the pylon)" + ("; pylon bases P<pylon><plane>B at the ground (the leg passes the deck "
                              "bearing without a node there: the deck rests on its own bearing)."
                              if beams_pylon else "."))
    c.deck_nodes(case, x, zd, layout)
    for p, px in enumerate(pylon_x, start=1):
        for tag, y in c.sides(planes, values["plane_spacing"]):
            if beams_pylon:
                c.node(case, f"P{p}{tag}B", (px, y, 0.0))
            for k, h in enumerate(heights, start=1):
                c.node(case, f"P{p}{tag}A{k}", (px, y, zd + h))

    def anchorage(p, tag, k):
        return f"P{p}{tag}A{heights.index(anchor_height(k)) + 1}"

    case.table("supports", "Deck bearings at both ends and on every pylon (x held at the first pylon)"
               + ("; pylons fixed at the base." if beams_pylon else "; stay anchorages fixed."))
    c.deck_supports(case, layout, (0, *pylon_station, stations), True, fixed=pylon_station[0])
    for p in range(1, pylons + 1):
        for tag, _ in c.sides(planes, values["plane_spacing"]):
            if beams_pylon:
                case.kv(f"P{p}{tag}B", "all")
            else:
                for k in range(1, len(heights) + 1):
                    case.kv(f"P{p}{tag}A{k}", "pin")

    case.blank()
    case.comment("Stays S<pylon><plane><W|E><k>: catenary elements from deck station to pylon, "
                 "pretension = panel load / sin(angle); the outermost stay of a side carries half a panel.")
    stay_ids = {}
    for p, (px, ps) in enumerate(zip(pylon_x, pylon_station), start=1):
        for tag, _ in c.sides(planes, values["plane_spacing"]):
            for side, sign in (("W", -1), ("E", 1)):
                for k in range(1, n + 1):
                    i = ps + sign * k
                    h = anchor_height(k)
                    length = float(np.hypot(k * s, h))
                    share = 0.5 if k == n else 1.0
                    # the stay's own weight: half of it hangs on the deck end
                    vertical = share * panel + 0.5 * gamma * length
                    mid = f"S{p}{tag}{side}{k}"
                    stay_ids.setdefault((tag, i), []).append(mid)
                    c.member(case, mid, "cable", layout["nodes"][tag][i], anchorage(p, tag, k), "stay",
                             pretension=vertical * length / h)
    case.blank()
    case.comment("Deck girders D<plane><i>-<i+1>" + (" and cross beams X<i>." if planes == 2 else "."))
    c.deck_members(case, layout, True)
    if beams_pylon:
        case.blank()
        case.comment("Pylon legs P<pylon><plane>-<j> (beams) from the base past the deck to the top.")
        for p in range(1, pylons + 1):
            for tag, _ in c.sides(planes, values["plane_spacing"]):
                chain = [f"P{p}{tag}B"] + [f"P{p}{tag}A{k}" for k in range(1, len(heights) + 1)]
                for j in range(1, len(chain)):
                    c.member(case, f"P{p}{tag}-{j}", "beam", chain[j - 1], chain[j], "pylon")

    c.bridge_loads(case, layout, L, values, ["S*"], watch_members=["S*{tag}*"])

    supported = {0, stations, *pylon_station}
    case.table("shape", "Form-finding (`cablefe shape`, and `cablefe run` first): find the stay lengths "
               "that hold the deck level under the permanent loads.")
    case.kv("method", "target")
    case.kv("permanent", ["dead", "deck"])
    case.kv("tolerance", 1e-4)
    case.table("shape.targets", "Every deck node held by stays stays at deck level.")
    groups = []
    for (tag, i), ids in stay_ids.items():
        if i in supported:
            continue  # a stay ending on a bearing keeps its pretension
        case.kv(layout["nodes"][tag][i], f"{{ z = {c.num(zd)} }}", raw=True)
        groups.append(ids)
    for ids in groups:
        case.adjust(ids)
    c.modes(case, layout, values)
    c.analysis(case)
    return case.text()


FAMILY = Family(
    name="stayed",
    summary="cable-stayed footbridge: fan or harp stays, one or two pylons, deck girder(s) as beams",
    params=PARAMS,
    build=build,
    examples=("cablefe new stayed -o stayed.toml",
              'cablefe new stayed --pylons 2 --arrangement harp --stays 5 --span "90 m" -o s.toml',
              "cablefe new stayed --pylon fixed --planes 1 -o s.toml"),
    notes="Stays are pretensioned with the permanent load of their deck panel: T = P / sin(angle).",
)
