"""Writing a commented case file, and the parts the bridge families share.

Numbers are written in m and kN (the case's ``[units]``); section data carry
their own units (``"1600 mm^2"``) so that they read like a drawing.
"""
from __future__ import annotations

import json
import re
import textwrap
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from .. import CAUTION

KN = 1000.0  # N per kN: the generated files use kN for bare forces

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+\Z")


def num(x: float, digits: int = 10) -> str:
    """A float as TOML text with ``digits`` significant digits (no ``-0``)."""
    x = float(x)
    if x == 0.0:
        return "0.0"
    text = format(x, f".{digits}g")
    if "e" not in text and "." not in text and "inf" not in text and "nan" not in text:
        text += ".0"
    return text


def value(v: Any) -> str:
    """A Python value as TOML text (str, bool, int, float, list, dict)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        return num(v)
    if isinstance(v, Mapping):
        return "{ " + ", ".join(f"{key(k)} = {value(x)}" for k, x in v.items()) + " }"
    return "[" + ", ".join(value(x) for x in v) + "]"


def key(name: str) -> str:
    return name if _BARE_KEY.match(name) else json.dumps(name)


def unit(x: float, scale: float, unit_text: str, digits: int = 6) -> str:
    """A quantity as a TOML string with its unit: ``unit(0.0016, 1e-6, "mm^2")`` -> ``"1600 mm^2"``."""
    return json.dumps(f"{format(float(x) / scale, f'.{digits}g')} {unit_text}")


class CaseText:
    """Accumulates the lines of a case file."""

    def __init__(self):
        self.lines: list[str] = []

    def text(self) -> str:
        return "\n".join(self.lines).rstrip() + "\n"

    def comment(self, text: str) -> None:
        for paragraph in text.strip().split("\n"):
            wrapped = textwrap.wrap(paragraph, 76) or [""]
            self.lines += [("# " + w).rstrip() for w in wrapped]

    def blank(self) -> None:
        if self.lines and self.lines[-1] != "":
            self.lines.append("")

    def table(self, name: str, comment: str | None = None, array: bool = False) -> None:
        self.blank()
        if comment:
            self.comment(comment)
        self.lines.append(f"[[{name}]]" if array else f"[{name}]")

    def kv(self, name: str, v: Any, comment: str | None = None, raw: bool = False) -> None:
        text = f"{key(name)} = {v if raw else value(v)}"
        self.lines.append(text + (f"    # {comment}" if comment else ""))

    def adjust(self, members, comment: str | None = None) -> None:
        """One ``[[shape.adjust]]`` group; several ids are scaled together."""
        self.table("shape.adjust", comment, array=True)
        self.kv("members", members)
        if not isinstance(members, str) and len(members) > 1:
            self.kv("together", True)


def header(case: CaseText, command: str, title: str, description: str,
           values: Mapping[str, Any], params: Sequence) -> None:
    """Command line, description, caution and the parameter values used."""
    case.lines.append(f"# {command}")
    case.comment(description)
    case.comment("")
    case.comment("CAUTION: every number in this file (sections, materials, loads, load factors) "
                 "is a placeholder from a layout generator, to be replaced and checked by the "
                 "designer. " + CAUTION)
    case.comment("")
    case.comment("Parameters (SI units; the command line above reproduces this file):")
    for p in params:
        v = values[p.name]
        if v is None:
            shown = "derived from the others"
        elif isinstance(v, (str, int)):
            shown = str(v)
        else:
            from ..io.units import KINDS
            shown = f"{format(v, '.6g')} {KINDS[p.kind].si.replace('**', '^')}"
        case.lines.append(f"#   {p.option} = {shown}")
    case.blank()
    case.kv("title", title)
    case.table("units", "Bare numbers below are in these units; any value may carry its own unit.")
    case.kv("length", "m")
    case.kv("force", "kN")


# ---------------------------------------------------------------------------
# bridge decks (suspension, stayed, arch)
# ---------------------------------------------------------------------------

def sides(planes: int, spacing: float) -> list[tuple[str, float]]:
    """(tag, y) of each cable plane: one central plane, or L (+y) and R (-y)."""
    if planes == 1:
        return [("", 0.0)]
    return [("L", spacing / 2.0), ("R", -spacing / 2.0)]


DECK_PARAMS_HELP = {
    "deck_weight": "self-weight of the deck girder(s), whole deck",
    "superimposed": "superimposed permanent deck load (surfacing, parapets), whole deck",
}


def bridge_params(Param, deck_choice: bool) -> tuple:
    """Parameters shared by the bridge families."""
    out = [
        Param("deck_level", "length", "4 m", "deck level z above the ground (z = 0)", positive=False,
              minimum=0.0),
        Param("planes", "choice", "2", "cable planes / girders: 1 (central) or 2", choices=("1", "2")),
        Param("plane_spacing", "length", "3.5 m", "distance between the two planes (2 planes only)"),
        Param("width", "length", "3 m", "walkway width, for the crowd load"),
        Param("deck_weight", "force_per_length", "3 kN/m", DECK_PARAMS_HELP["deck_weight"]),
        Param("superimposed", "force_per_length", "1.5 kN/m", DECK_PARAMS_HELP["superimposed"]),
        Param("crowd", "stress", "4 kN/m^2", "crowd load on the walkway, per area"),
        Param("delta_t", "temperature_difference", "25 K", "uniform temperature change of the cables, +/-"),
    ]
    if deck_choice:
        out.append(Param("deck", "choice", "beams", "deck girder as beams (bending, torsion) or bars",
                         choices=("beams", "bars")))
    out += [
        Param("deck_area", "area", "12000 mm^2", "area of one deck girder"),
        Param("deck_iy", "second_moment", "3e8 mm^4", "girder second moment, vertical bending (beams)"),
        Param("deck_iz", "second_moment", "8e8 mm^4", "girder second moment, lateral bending (beams)"),
        Param("deck_j", "second_moment", "4e8 mm^4", "girder torsion constant (beams)"),
    ]
    return tuple(out)


def materials(case: CaseText) -> None:
    case.table("materials.strand", "Cable steel (spiral strand): modulus of the rope, not of the wire.")
    case.kv("E", "160 GPa")
    case.kv("unit_weight", "78.5 kN/m^3")
    case.kv("alpha", 1.2e-5, "1/K")
    case.table("materials.steel", "Structural steel of deck, towers and cross beams.")
    case.kv("E", "210 GPa")
    case.kv("unit_weight", "78.5 kN/m^3")
    case.kv("alpha", 1.2e-5, "1/K")


def cable_section(case: CaseText, name: str, area: float, comment: str) -> None:
    case.table(f"sections.{name}", comment)
    case.kv("material", "strand")
    case.kv("area", unit(area, 1e-6, "mm^2"), raw=True)
    # a placeholder minimum breaking force: 1570 MPa on the metallic area
    case.kv("breaking_load", unit(1.57e9 * area, 1e3, "kN", 4), "placeholder: 1570 MPa x area", raw=True)


def beam_section(case: CaseText, name: str, comment: str, area: float, Iy: float, Iz: float, J: float,
                 weight: float | None = None, beams: bool = True) -> None:
    case.table(f"sections.{name}", comment)
    case.kv("material", "steel")
    case.kv("area", unit(area, 1e-6, "mm^2"), raw=True)
    if weight is not None:
        case.kv("weight", unit(weight, 1e3, "kN/m"), "overrides area x unit weight", raw=True)
    if beams:
        case.kv("Iy", unit(Iy, 1e-12, "mm^4"), "vertical bending (local z is up)", raw=True)
        case.kv("Iz", unit(Iz, 1e-12, "mm^4"), "lateral bending", raw=True)
        case.kv("J", unit(J, 1e-12, "mm^4"), "torsion", raw=True)


CROSS_BEAM = dict(area=6.0e-3, Iy=6.0e-5, Iz=6.0e-5, J=1.0e-5)  # m^2, m^4: a placeholder I-section
TOWER = dict(area=2.5e-2, Iy=7.0e-4, Iz=7.0e-4, J=1.4e-3)      # a 500 mm tube, 16 mm wall


def steel_weight(area: float) -> float:
    """N/m of a steel section (78.5 kN/m^3), matching the material above."""
    return 78.5e3 * area


def strand_weight(area: float) -> float:
    return 78.5e3 * area


def node(case: CaseText, nid: str, xyz: Iterable[float]) -> None:
    # Coordinates are rounded to a nanometre: below that the digits are
    # round-off of the layout arithmetic and differ between BLAS builds,
    # which would make the written file depend on the machine.
    case.lines.append(f"{key(nid)} = [{', '.join(num(round(float(c), 9)) for c in xyz)}]")


def member(case: CaseText, mid: str, mtype: str, a: str, b: str, section: str, **extra) -> None:
    case.blank()
    case.lines.append("[[members]]")
    case.kv("id", mid)
    case.kv("type", mtype)
    case.kv("nodes", [a, b])
    case.kv("section", section)
    for name, v in extra.items():
        if v is None:
            continue
        if name == "pretension":
            case.kv(name, num(v / KN, 8), raw=True)
        else:
            case.kv(name, v)


def deck_layout(planes: int, spacing: float, stations: int) -> dict:
    """Ids of the deck nodes: ``{"nodes": {tag: [ids]}, "y": {tag: y}}``.

    Node ids ``D<tag><i>``; :func:`deck_members` writes girder members
    ``D<tag><i>-<i+1>``, cross beams ``X<i>`` (plus deck bracing ``XD<i>``
    when the deck is made of bars).
    """
    out = {"nodes": {}, "y": {}}
    for tag, y in sides(planes, spacing):
        out["nodes"][tag] = [f"D{tag}{i}" for i in range(stations)]
        out["y"][tag] = y
    return out


def deck_nodes(case: CaseText, x: np.ndarray, z: float, layout: dict) -> None:
    for tag, ids in layout["nodes"].items():
        for nid, xi in zip(ids, x):
            node(case, nid, (xi, layout["y"][tag], z))


def deck_members(case: CaseText, layout: dict, beams: bool) -> None:
    mtype = "beam" if beams else "bar"
    for tag, ids in layout["nodes"].items():
        for i in range(len(ids) - 1):
            member(case, f"D{tag}{i}-{i + 1}", mtype, ids[i], ids[i + 1], "deck")
    if len(layout["nodes"]) == 2:
        left, right = layout["nodes"]["L"], layout["nodes"]["R"]
        for i in range(len(left)):
            member(case, f"X{i}", mtype, left[i], right[i], "cross")
        if not beams:  # a deck of bars needs bracing to keep its plan shape
            for i in range(len(left) - 1):
                member(case, f"XD{i}", "bar", left[i], right[i + 1], "cross")


def deck_supports(case: CaseText, layout: dict, ends: Sequence[int], beams: bool,
                  fixed: int | None = None) -> None:
    """Bearings at deck stations ``ends``; station ``fixed`` also holds x.

    One plane: every bearing holds y, z (and rx, twisting, for beams).
    Two planes: the L girder holds y, both hold z; x at the fixed station.
    """
    fixed = ends[0] if fixed is None else fixed
    tags = list(layout["nodes"])
    for i in ends:
        for tag in tags:
            dirs = []
            if i == fixed:
                dirs.append("x")
            if tag in ("", "L"):
                dirs.append("y")
            dirs.append("z")
            if tag == "" and beams:
                dirs.append("rx")
            case.kv(layout["nodes"][tag][i], " ".join(dirs))


def bridge_loads(case: CaseText, layout: dict, span: float, values: Mapping[str, Any],
                 temperature_members: Sequence[str], deck_word: str = "deck",
                 watch_members: Sequence[str] = ()) -> None:
    """Load cases, combinations and the crowd study shared by the bridge families.

    ``watch_members``: patterns of the members (hangers, stays) whose
    tension envelope the crowd study finds; ``{tag}`` stands for the
    first plane's tag.
    """
    planes = len(layout["nodes"])
    ws = values["superimposed"] / planes
    crowd = values["crowd"] * values["width"] / planes
    dt = values["delta_t"]
    case.table("loads", "Permanent: the self-weight of every member (section weights).", array=True)
    case.kv("case", "dead")
    case.kv("self_weight", True)
    case.table("loads", f"Permanent: superimposed {deck_word} load (surfacing, parapets), "
               f"{num(values['superimposed'] / KN, 4)} kN/m shared by {planes} girder(s).", array=True)
    case.kv("case", "deck")
    case.kv("members", ["D*"])
    case.kv("per_length", f"[0, 0, {num(-ws / KN, 6)}]", raw=True)
    case.table("loads", f"Crowd on the full span: {num(values['crowd'] / KN, 4)} kN/m^2 on a "
               f"{num(values['width'], 4)} m walkway.", array=True)
    case.kv("case", "crowd-full")
    case.kv("members", ["D*"])
    case.kv("per_length", f"[0, 0, {num(-crowd / KN, 6)}]", raw=True)
    for tag, ids in layout["nodes"].items():
        case.table("loads", "Crowd on the west half of the span (a patch along the girder)."
                   if tag in ("", "L") else None, array=True)
        case.kv("case", "crowd-half")
        case.kv("path", list(ids))
        case.kv("start", 0.0)
        case.kv("end", num(span / 2.0), raw=True)
        case.kv("per_length", f"[0, 0, {num(-crowd / KN, 6)}]", raw=True)
    case.table("loads", "Temperature of the cables, a uniform change from the permanent state.", array=True)
    case.kv("case", "cold")
    case.kv("members", list(temperature_members))
    case.kv("temperature", -float(dt))
    case.table("loads", array=True)
    case.kv("case", "warm")
    case.kv("members", list(temperature_members))
    case.kv("temperature", float(dt))
    combinations(case, "dead", "deck")
    tag, lane = next(iter(layout["nodes"].items()))
    walkway = values["crowd"] * values["width"]
    live_study(case, "crowd", "Worst crowd patches: where must the crowd stand for the largest deflection, "
               "tension or slackening? Each watched response gets its own patch from its influence line. "
               + ("The whole walkway's crowd is put on the first plane's girder (the lane): an eccentric "
                  "crowd, conservative for that plane's members, which stand for the other plane by symmetry."
                  if planes > 1 else ""),
               lane, f"[0, 0, {num(-walkway / KN, 6)}]", [*lane, *(p.format(tag=tag) for p in watch_members)])


def live_study(case: CaseText, name: str, comment: str, lane: Sequence[str], load: str,
               watch: Sequence[str]) -> None:
    """A ``[[studies]]`` patch study along ``lane`` from the permanent state."""
    case.table("studies", comment, array=True)
    case.kv("name", name)
    case.kv("kind", "patch")
    case.kv("base", "permanent")
    case.kv("path", list(lane))
    case.kv("load", load, raw=True)
    case.kv("watch", list(watch))


def combinations(case: CaseText, dead: str, superimposed: str, live=("crowd-full", "crowd-half"),
                 temperature=("cold", "warm")) -> None:
    case.table("combinations", "Service combinations, all factors 1.0: placeholders; the designer sets "
               "the factors of the governing code.", array=True)
    case.kv("name", "permanent")
    case.kv("factors", f"{{ {dead} = 1.0, {superimposed} = 1.0 }}", raw=True)
    for name in (*live, *temperature):
        case.table("combinations", array=True)
        case.kv("name", name)
        case.kv("factors", f"{{ {dead} = 1.0, {superimposed} = 1.0, {name} = 1.0 }}", raw=True)


def analysis(case: CaseText, increments: int = 4) -> None:
    case.table("analysis", "Load increments are cut automatically when an increment fails.")
    case.kv("increments", increments)
    case.kv("tolerance", 1e-8)
    case.kv("max_iterations", 30)


def parabola(x: np.ndarray, span: float, z_west: float, z_east: float, sag: float) -> np.ndarray:
    """z of a parabola through both ends with ``sag`` below the chord at midspan, m.

    The funicular of a load uniform per horizontal length (Irvine 1981,
    Cable Structures, ch. 2).
    """
    return z_west + (z_east - z_west) * x / span - 4.0 * sag * x * (span - x) / span**2


def modes(case: CaseText, layout: dict, values: Mapping[str, Any]) -> None:
    """``[modes]`` about the permanent state with the pedestrian check of the walkway."""
    planes = len(layout["nodes"])
    g = 9.80665
    case.table("modes", "Natural modes about the permanent state (`cablefe modes`, and `cablefe run` "
               "after solving): the members' own mass plus the superimposed deck load as mass. "
               "Add a share of the crowd's mass here if the design situation asks for it.")
    case.kv("about", "permanent")
    case.kv("count", 12)
    case.kv("masses", f'[{{ members = "D*", per_length = '
                      f'"{num(values["superimposed"] / planes / g, 6)} kg/m" }}]', raw=True)
    case.table("modes.pedestrians", "Comfort of the walkway under a stream of pedestrians (a first "
               "estimate by the JRC-ECCS footbridge guideline's method; every constant of the method "
               "may be set here, see the docs). Density and damping are placeholders for the designer: "
               "the density of the design situation, the damping of the built structure.")
    case.kv("lane", "D*", "the deck girders walked on")
    case.kv("width", num(values["width"] / planes, 6), f"walkway width carried by each of the "
            f"{planes} girder line(s), m", raw=True)
    case.kv("density", 0.5, "pedestrians per m^2 (placeholder)")
    case.kv("damping", 0.005, "damping ratio (placeholder)")
