"""Reader of the ``[modes]`` and ``[modes.pedestrians]`` tables.

Called by :mod:`cablefe.io.case` with its reader (units, nodes, members and
results already read).  Quantities without a kind in
:mod:`cablefe.io.units` are read here; their bare numbers are always in the
SI unit, like a density:

==================  ===============================  =========================
key                 meaning                          bare number is in
==================  ===============================  =========================
masses[].mass       mass on a node                   kg (e.g. ``"2 t"``)
masses[].per_length mass per length of members       kg/m (e.g. ``"0.3 t/m"``)
density             pedestrians per area             1/m² (e.g. ``"0.5 1/m^2"``)
frequencies         ``critical_*``, ``psi_*``        Hz
accelerations       ``comfort_*``, ``lock_in_*``     m/s²
==================  ===============================  =========================

Lengths (``width``) and forces (``force_*``) follow the file's ``[units]``
as everywhere else.
"""
from __future__ import annotations

import math
from typing import Any, Mapping

from ..dynamics.pedestrians import CONSTANTS
from ..errors import CaseError
from ..spec import AddedMass, ModesSpec, PedestrianSpec
from .case_base import _check_keys as _base_check_keys, checked_sign
from .units import _NUMBER_UNIT, _UnitTextError, _unit_info, describe_value

MODES_KEYS = ("about", "count", "masses", "mass_matrix", "pedestrians")
MASS_KEYS = ("node", "mass", "members", "per_length")
PEDESTRIAN_KEYS = ("lane", "width", "density", "damping") + tuple(CONSTANTS)
MASS_MATRICES = ("consistent", "lumped")

# kind -> (SI unit text, words, example)
_SI_KINDS = {
    "mass": ("kg", "a mass", '"2 t"'),
    "mass_per_length": ("kg/m", "a mass per length", '"0.3 t/m"'),
    "per_area": ("1/m**2", "a number per area", '"0.5 1/m^2"'),
    "frequency": ("Hz", "a frequency", '"1.8 Hz"'),
    "acceleration": ("m/s**2", "an acceleration", '"0.5 m/s^2"'),
}

# how each guideline constant is read: (kind, shape); shape "scalar",
# "limits" (3 increasing), "ranges" ([[lo, hi], ...]), "corners" ([[f, psi], ...])
_CONSTANT_FORMS = {
    "force_vertical": ("force", "scalar"), "force_longitudinal": ("force", "scalar"),
    "force_lateral": ("force", "scalar"),
    "sparse_coefficient": ("dimensionless", "scalar"), "dense_coefficient": ("dimensionless", "scalar"),
    "dense_density": ("per_area", "scalar"),
    "critical_vertical": ("frequency", "ranges"), "critical_longitudinal": ("frequency", "ranges"),
    "critical_lateral": ("frequency", "ranges"),
    "psi_vertical": ("frequency", "corners"), "psi_longitudinal": ("frequency", "corners"),
    "psi_lateral": ("frequency", "corners"),
    "comfort_vertical": ("acceleration", "limits"), "comfort_lateral": ("acceleration", "limits"),
    "comfort_longitudinal": ("acceleration", "limits"), "lock_in_lateral": ("acceleration", "scalar"),
}


def _check_keys(table: Mapping, key: str, known) -> None:
    _base_check_keys(table, key, tuple(known))


def si_value(value: Any, kind: str, key: str) -> float:
    """A value of one of this module's kinds in SI (bare numbers are SI)."""
    unit, words, example = _SI_KINDS[kind]
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise CaseError(key, f"expected {words} (a number, or a string with a unit like {example}), "
                             f"found {describe_value(value)}")
    if isinstance(value, str):
        match = _NUMBER_UNIT.match(value)
        if match is None or not match.group(2):
            raise CaseError(key, f'cannot read "{value}": expected a number followed by a unit, '
                                 f"like {example}")
        text = match.group(2)
        if text.startswith("/"):
            text = "1" + text
        try:
            factor, dims = _unit_info(text)
        except _UnitTextError as exc:
            raise CaseError(key, f'cannot read "{value}": {exc}') from None
        if dims != _unit_info(unit)[1]:
            raise CaseError(key, f'"{value}" is not {words} (expected a unit like {example})')
        result = float(match.group(1).replace("_", "")) * factor
    else:
        result = float(value)
    if not math.isfinite(result):
        raise CaseError(key, f"expected a finite number, found {value!r}")
    return result


class ModesReader:
    """Reads ``[modes]`` with the case reader ``r`` (its units, nodes, members, results)."""

    def __init__(self, r, result_names):
        self.r = r
        self.result_names = tuple(result_names)

    def number(self, value, kind, key, sign=None) -> float:
        if kind in _SI_KINDS:
            x = si_value(value, kind, key)
        else:
            x = self.r.quantity(value, kind, key)
        return checked_sign(x, sign, key, repr(value))

    def read(self, value) -> ModesSpec:
        from .case import _integer, _string, _table
        table = _table(value, "modes", "a table ([modes])")
        _check_keys(table, "modes", MODES_KEYS)
        about = None
        if "about" in table:
            about = _string(table["about"], "modes.about", "a result name (a string)")
            if about not in self.result_names:
                raise CaseError("modes.about", f'no result named "{about}" (known: '
                                f'{", ".join(self.result_names) or "none"})')
        elif not self.result_names:
            raise CaseError("modes", "the case has no load case or combination to take the modes about")
        count = _integer(table.get("count", 12), "modes.count", 1)
        mass_matrix = _string(table.get("mass_matrix", "consistent"), "modes.mass_matrix")
        if mass_matrix not in MASS_MATRICES:
            raise CaseError("modes.mass_matrix", f'unknown mass matrix "{mass_matrix}" '
                            f'(known: {", ".join(MASS_MATRICES)})')
        masses = self.masses(table.get("masses", []))
        pedestrians = self.pedestrians(table["pedestrians"]) if "pedestrians" in table else None
        return ModesSpec(about=about, count=count, masses=masses, mass_matrix=mass_matrix,
                         pedestrians=pedestrians)

    def masses(self, value) -> tuple[AddedMass, ...]:
        from .case import _table
        if isinstance(value, Mapping):
            value = [value]
        if not isinstance(value, list):
            raise CaseError("modes.masses", f"expected an array of tables, found {describe_value(value)}")
        out = []
        for k, entry in enumerate(value):
            key = f"modes.masses[{k}]"
            entry = _table(entry, key)
            _check_keys(entry, key, MASS_KEYS)
            if "node" in entry:
                if "members" in entry or "per_length" in entry:
                    raise CaseError(key, "give either node and mass, or members and per_length")
                if "mass" not in entry:
                    raise CaseError(f"{key}.mass", "missing: the mass on the node (kg, or with a unit)")
                node = self.r.node(entry["node"], f"{key}.node")
                out.append(AddedMass(node=node, mass=self.number(entry["mass"], "mass", f"{key}.mass",
                                                                 "nonnegative"), key=key))
            elif "members" in entry:
                if "mass" in entry:
                    raise CaseError(f"{key}.mass", "members take per_length (mass per length); "
                                    "mass is for a node")
                if "per_length" not in entry:
                    raise CaseError(f"{key}.per_length", "missing: the mass per length (kg/m, or with a unit)")
                members = self.r.patterns(entry["members"], f"{key}.members")
                out.append(AddedMass(members=members,
                                     per_length=self.number(entry["per_length"], "mass_per_length",
                                                            f"{key}.per_length", "nonnegative"), key=key))
            else:
                raise CaseError(key, "expected node with mass, or members with per_length")
        return tuple(out)

    def pedestrians(self, value) -> PedestrianSpec:
        from .case import _require, _table
        key = "modes.pedestrians"
        table = _table(value, key, "a table ([modes.pedestrians])")
        _check_keys(table, key, PEDESTRIAN_KEYS)
        lane = self.r.patterns(_require(table, "lane", key, "the deck members walked on (ids or patterns)"),
                               f"{key}.lane")
        width = self.r.quantity(_require(table, "width", key, "the walkway width"), "length", f"{key}.width")
        if not width > 0:
            raise CaseError(f"{key}.width", f"expected a positive width, found {table['width']!r}")
        density = self.number(_require(table, "density", key, "pedestrians per m²"), "per_area",
                              f"{key}.density", "positive")
        damping = self.number(_require(table, "damping", key, "the damping ratio (e.g. 0.01)"),
                              "dimensionless", f"{key}.damping", "positive")
        if not damping < 1.0:
            raise CaseError(f"{key}.damping", f"expected a damping ratio below 1, found {table['damping']!r}")
        constants = {name: self.constant(table[name], name, f"{key}.{name}")
                     for name in CONSTANTS if name in table}
        return PedestrianSpec(lane=lane, width=width, density=density, damping=damping,
                              constants=constants, key=key)

    def constant(self, value, name, key):
        kind, form = _CONSTANT_FORMS[name]
        if form == "scalar":
            return self.number(value, kind, key, "positive")
        if not isinstance(value, list) or not value:
            raise CaseError(key, f"expected a non-empty array, found {describe_value(value)}")
        if form == "limits":
            if len(value) != 3:
                raise CaseError(key, "expected the upper limits of comfort classes 1, 2 and 3 "
                                     f"(3 values), found {len(value)}")
            limits = [self.number(v, kind, f"{key}[{k}]", "positive") for k, v in enumerate(value)]
            if not limits[0] < limits[1] < limits[2]:
                raise CaseError(key, "the three limits must increase")
            return limits
        rows = []
        for k, row in enumerate(value):
            if not isinstance(row, list) or len(row) != 2:
                what = "[low, high] in Hz" if form == "ranges" else "[frequency, psi]"
                raise CaseError(f"{key}[{k}]", f"expected a pair {what}, found {describe_value(row)}")
            f0 = self.number(row[0], kind, f"{key}[{k}][0]", "nonnegative")
            if form == "ranges":
                f1 = self.number(row[1], kind, f"{key}[{k}][1]", "nonnegative")
                if not f1 > f0:
                    raise CaseError(f"{key}[{k}]", "the range's high frequency must exceed its low one")
                rows.append([f0, f1])
            else:
                psi = self.number(row[1], "dimensionless", f"{key}[{k}][1]", "nonnegative")
                if psi > 1.0:
                    raise CaseError(f"{key}[{k}][1]", f"psi is a reduction between 0 and 1, found {row[1]!r}")
                if rows and not f0 > rows[-1][0]:
                    raise CaseError(f"{key}[{k}][0]", "the corner frequencies must increase")
                rows.append([f0, psi])
        return rows


def read_modes(reader, value, result_names) -> ModesSpec:
    """The validated ``[modes]`` table (see :class:`ModesReader`)."""
    return ModesReader(reader, result_names).read(value)
