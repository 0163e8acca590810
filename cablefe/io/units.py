"""Units of the values in a case file, and their conversion to SI.

Every numeric value in a case file is either a bare number, read in the file's
units (``[units]``: ``length``, default ``"m"``; ``force``, default ``"kN"``),
or a string with its own unit (``"45 mm"``, ``"160 GPa"``), parsed by one
shared `pint <https://pint.readthedocs.io>`_ registry.  Inside cablefe
everything is SI; this module is the only place where unit text is read.

What a bare number means depends on the kind of quantity the key holds:

======================  =====================  ===========================
kind                    SI unit                bare number is in
======================  =====================  ===========================
length                  m                      L
force                   N                      F
area                    m^2                    L^2
stress (= modulus)      Pa                     F / L^2
force_per_length        N/m                    F / L
unit_weight             N/m^3                  F / L^3
density                 kg/m^3                 kg/m^3 (always)
moment                  N m                    F L
second_moment           m^4                    L^4
temperature_difference  K                      K (always)
thermal_expansion       1/K                    1/K (always)
angle                   rad                    rad (always)
dimensionless           1                      1
======================  =====================  ===========================

(L, F: the file's length and force units.)  A density is a mass per volume;
the case reader turns it into a unit weight with the standard acceleration
of gravity :data:`STANDARD_GRAVITY`.  A temperature change must be written as
a difference (``"-25 K"``, ``"-25 delta_degC"``); ``"-25 degC"`` is an
absolute temperature and is refused rather than silently read as 248.15 K.

Speed: pint needs about 0.1-0.2 ms to parse a unit, and a big model has tens
of thousands of values, so bare numbers are converted with one float factor
per kind and each distinct unit text is parsed once (cached).  Importing
pint and building its registry costs about 0.4 s, so unit text made only of
the common SI units in :data:`FAST_UNITS` (m, mm, kN, MPa, ... with powers,
``*`` and ``/``) is read without pint; pint is loaded for anything else.
"""
from __future__ import annotations

import functools
import math
import numbers
import re
from dataclasses import dataclass
from typing import Any, Mapping

from ..errors import CaseError
from ..spec import UnitSystem

__all__ = [
    "STANDARD_GRAVITY",
    "KINDS",
    "FAST_UNITS",
    "Kind",
    "Quantities",
    "registry",
    "unit_system",
    "describe_value",
]

#: Standard acceleration of gravity, m/s^2.
#: source: 3rd CGPM 1901, Comptes rendus p. 70 (declaration on the unit of
#: mass and the definition of weight; conventional value of g_n).
STANDARD_GRAVITY = 9.80665


@dataclass(frozen=True)
class Kind:
    """One kind of quantity found in a case file.

    Attributes
    ----------
    name : str
        Kind name used by the reader (``"length"``, ``"stress"`` ...).
    si : str
        SI unit, as pint text.
    length_power, force_power : int or None
        Exponents of the file's length and force units that give the unit of
        a bare number; None when a bare number is always in ``si``.
    words : str
        How messages name the kind ("a length").
    example : str
        An example value with a unit, for messages.
    """

    name: str
    si: str
    length_power: int | None
    force_power: int | None
    words: str
    example: str


_KIND_LIST = (
    Kind("length", "m", 1, 0, "a length", '"45 mm"'),
    Kind("force", "N", 0, 1, "a force", '"300 kN"'),
    Kind("area", "m**2", 2, 0, "an area", '"1960 mm^2"'),
    Kind("stress", "Pa", -2, 1, "a stress or modulus", '"160 GPa"'),
    Kind("force_per_length", "N/m", -1, 1, "a force per length", '"4.5 kN/m"'),
    Kind("unit_weight", "N/m**3", -3, 1, "a unit weight (force per volume)", '"78.5 kN/m^3"'),
    Kind("density", "kg/m**3", None, None, "a density (mass per volume)", '"7850 kg/m^3"'),
    Kind("moment", "N*m", 1, 1, "a moment", '"25 kN*m"'),
    Kind("second_moment", "m**4", 4, 0, "a second moment of area", '"3.2e8 mm^4"'),
    Kind("section_modulus", "m**3", 3, 0, "a section modulus", '"2.4e6 mm^3"'),
    Kind("temperature_difference", "K", None, None, "a temperature difference",
         '"-25 delta_degC" or "-25 K"'),
    Kind("thermal_expansion", "1/K", None, None, "a thermal expansion coefficient",
         '"1.2e-5 1/K"'),
    Kind("angle", "rad", None, None, "an angle", '"0.5 deg"'),
    Kind("dimensionless", "dimensionless", None, None, "a plain number", '"5 %"'),
)

#: All kinds by name; ``"modulus"`` is another name for ``"stress"``.
KINDS: Mapping[str, Kind] = {k.name: k for k in _KIND_LIST} | {"modulus": _KIND_LIST[3]}


@functools.lru_cache(maxsize=1)
def registry():
    """The shared pint UnitRegistry, created on first use.

    Importing pint and building its registry takes about 0.4 s, most of a
    small run; it happens only for unit text outside :data:`FAST_UNITS`.
    """
    import pint

    return pint.UnitRegistry()


#: Units read without pint: name -> (power of ten of the SI factor, SI
#: dimensions).  Only units whose factor is an exact power of ten are here,
#: so the factor ``float("1e<k>")`` is the correctly rounded value; the test
#: suite checks every entry, and compounds of them, against pint itself.
FAST_UNITS: Mapping[str, tuple[int, Mapping[str, int]]] = {
    "m": (0, {"[length]": 1}), "mm": (-3, {"[length]": 1}),
    "cm": (-2, {"[length]": 1}), "km": (3, {"[length]": 1}),
    "N": (0, {"[length]": 1, "[mass]": 1, "[time]": -2}),
    "kN": (3, {"[length]": 1, "[mass]": 1, "[time]": -2}),
    "MN": (6, {"[length]": 1, "[mass]": 1, "[time]": -2}),
    "Pa": (0, {"[length]": -1, "[mass]": 1, "[time]": -2}),
    "kPa": (3, {"[length]": -1, "[mass]": 1, "[time]": -2}),
    "MPa": (6, {"[length]": -1, "[mass]": 1, "[time]": -2}),
    "GPa": (9, {"[length]": -1, "[mass]": 1, "[time]": -2}),
    "kg": (0, {"[mass]": 1}), "t": (3, {"[mass]": 1}),
    "s": (0, {"[time]": 1}), "K": (0, {"[temperature]": 1}),
    "rad": (0, {}), "1": (0, {}),
}

# one factor of a product: a unit name (or 1) and an optional integer power;
# factors are joined by * or /, evaluated left to right as pint does
_FAST_FACTOR = re.compile(r"\s*([A-Za-z]+|1)\s*(?:(?:\^|\*\*)\s*([+-]?\d+))?\s*")


def _fast_unit_info(text: str) -> tuple[float, tuple] | None:
    """SI factor and dimensions of ``text`` built only from :data:`FAST_UNITS`.

    Returns None for anything else (other units, spaces as products,
    parentheses ...), which then goes to pint.
    """
    power, dims, op, pos = 0, {}, 1, 0
    while True:
        match = _FAST_FACTOR.match(text, pos)
        if match is None or match.group(1) not in FAST_UNITS:
            return None
        k, unit_dims = FAST_UNITS[match.group(1)]
        exponent = op * (int(match.group(2)) if match.group(2) else 1)
        power += k * exponent
        for name, e in unit_dims.items():
            dims[name] = dims.get(name, 0) + e * exponent
        pos = match.end()
        if pos == len(text):
            break
        if text[pos] not in "*/" or text.startswith("**", pos):
            return None
        op = 1 if text[pos] == "*" else -1
        pos += 1
    return float(f"1e{power}"), tuple(sorted((n, e) for n, e in dims.items() if e))


def _dimension_key(dimensionality) -> tuple:
    """A pint dimensionality as a sorted tuple of (dimension, exponent)."""
    return tuple(sorted((str(n), e) for n, e in dict(dimensionality).items() if e))


@functools.lru_cache(maxsize=None)
def _kind_dimensionality(name: str) -> tuple:
    """Dimensions of a kind as a sorted tuple of (``"[length]"``, exponent)."""
    if name == "dimensionless":
        return ()
    return _unit_info(KINDS[name].si)[1]


def _dimension_words(dimensionality: tuple) -> str:
    """Name dimensions in words when they are one of our kinds."""
    for kind in _KIND_LIST:
        if _kind_dimensionality(kind.name) == dimensionality:
            return kind.words
    text = " * ".join(n if e == 1 else f"{n} ** {e}" for n, e in dimensionality)
    return f"of dimension {text or 'dimensionless'}"


# a leading number (TOML-like float syntax, plus inf/nan so that they can be
# reported as non-finite rather than as unreadable), then the unit text
_NUMBER_UNIT = re.compile(
    r"\s*([+-]?(?:(?:\d[\d_]*\.?[\d_]*|\.\d[\d_]*)(?:[eE][+-]?\d+)?|inf|nan))\s*(.*?)\s*\Z",
    re.IGNORECASE,
)
_HAS_UNIT_SYMBOL = re.compile(r"[^\W\d_]|%|°|µ")


class _UnitTextError(ValueError):
    """Unit text that pint cannot read; the message is for the engineer."""


@functools.lru_cache(maxsize=4096)
def _unit_info(text: str) -> tuple[float, tuple]:
    """SI factor and dimensions of a unit text such as ``"kN/m^3"``.

    Text made only of :data:`FAST_UNITS` is read without pint; anything else
    is parsed by pint, once per distinct text (cached).  The dimensions are a
    sorted tuple of (``"[length]"``, exponent) pairs.

    Raises
    ------
    _UnitTextError
        Unknown unit, unreadable text or an offset unit (``degC``).
    """
    if not _HAS_UNIT_SYMBOL.search(text):
        raise _UnitTextError(f'"{text}" is not a unit')
    fast = _fast_unit_info(text)
    if fast is not None:
        return fast
    import pint

    ureg = registry()
    try:
        quantity = ureg.parse_expression(text)
    except pint.errors.UndefinedUnitError as exc:
        names = ", ".join(f'"{n}"' for n in getattr(exc, "unit_names", ()) or ()) or f'"{text}"'
        raise _UnitTextError(f"unknown unit {names}") from None
    except pint.errors.OffsetUnitCalculusError:
        raise _UnitTextError(
            f'"{text}" combines a temperature with an offset (degC, degF); '
            "use delta_degC, delta_degF or K"
        ) from None
    except Exception:  # pint's tokenizer raises several plain exception types
        raise _UnitTextError(f'cannot read the unit "{text}"') from None
    if not isinstance(quantity, ureg.Quantity):
        raise _UnitTextError(f'"{text}" is not a unit')
    try:
        # an offset unit (degC, degF) maps 0 to a non-zero absolute value
        zero = ureg.Quantity(0.0, quantity.units).to_base_units().magnitude
        factor = float(quantity.to_base_units().magnitude)
    except pint.errors.PintError as exc:
        raise _UnitTextError(f'cannot convert "{text}" to SI ({exc})') from None
    if zero != 0.0:
        raise _UnitTextError(
            f'"{text}" is an absolute temperature scale; a temperature change is '
            'written with delta_degC, delta_degF or K (e.g. "-25 delta_degC")'
        )
    # base units of pint's default registry (m, kg, s, K, rad -> 1) are the
    # SI units of every kind in KINDS, so the base magnitude is the SI value
    return factor, _dimension_key(quantity.dimensionality)


def describe_value(value: Any) -> str:
    """Describe a parsed TOML value for an error message."""
    if isinstance(value, bool):
        return f"the boolean {str(value).lower()}"
    if isinstance(value, numbers.Number):
        return f"the number {value!r}"
    if isinstance(value, str):
        return f'the string "{value}"'
    if isinstance(value, Mapping):
        return "a table"
    if isinstance(value, (list, tuple)):
        return f"an array of {len(value)} item{'s' if len(value) != 1 else ''}"
    return f"a {type(value).__name__}"


class Quantities:
    """Converts case-file values of a given kind to SI floats.

    Parameters
    ----------
    units : UnitSystem
        Units of bare numbers.

    Examples
    --------
    >>> q = Quantities(UnitSystem(length="mm", force="kN", length_scale=1e-3,
    ...                           force_scale=1e3))
    >>> q.to_si(2.0, "area", "sections.main.area")      # 2 mm^2
    2e-06
    >>> q.to_si("160 GPa", "stress", "materials.steel.E")
    160000000000.0
    """

    def __init__(self, units: UnitSystem):
        self.units = units
        self._bare: dict[str, float] = {}
        for name, kind in KINDS.items():
            if kind.length_power is None:
                self._bare[name] = 1.0
            else:
                self._bare[name] = units.length_scale ** kind.length_power * units.force_scale ** kind.force_power

    def bare_factor(self, kind: str) -> float:
        """SI value of a bare number 1 of this kind (e.g. m per file length unit)."""
        return self._bare[kind]

    def to_si(self, value: Any, kind: str, key: str) -> float:
        """Convert one value of the given kind to SI.

        Parameters
        ----------
        value : int, float or str
            A bare number in file units or a string with its own unit.
        kind : str
            One of :data:`KINDS`.
        key : str
            Key path, for error messages.

        Returns
        -------
        float
            The value in the kind's SI unit.

        Raises
        ------
        CaseError
            Not a number, not finite, unknown unit or wrong dimension.
        """
        cls = type(value)
        if cls is float or cls is int:
            try:
                result = value * self._bare[kind]
            except OverflowError:
                result = math.inf
        elif cls is str:
            result = self._parse(value, kind, key)
        elif cls is not bool and isinstance(value, numbers.Real):
            result = float(value) * self._bare[kind]
        else:
            raise CaseError(key, f"expected {KINDS[kind].words} (a number, or a string with a unit "
                                 f"like {KINDS[kind].example}), found {describe_value(value)}")
        if not math.isfinite(result):
            raise CaseError(key, f"expected a finite number, found {_show(value)}")
        return float(result)

    def vector(self, value: Any, kind: str, key: str, n: int = 3) -> tuple[float, ...]:
        """Convert an array of ``n`` values of one kind to a tuple of SI floats."""
        if not isinstance(value, (list, tuple)):
            raise CaseError(key, f"expected an array of {n} numbers, found {describe_value(value)}")
        if len(value) != n:
            raise CaseError(key, f"expected an array of {n} numbers, found {len(value)}")
        # bare numbers (the usual coordinates): as to_si, without a key per entry
        factor = self._bare[kind]
        if all(type(v) is float or type(v) is int for v in value):
            try:
                out = tuple(float(v * factor) for v in value)
            except OverflowError:
                out = ()
            if out and all(map(math.isfinite, out)):
                return out
        return tuple(self.to_si(v, kind, f"{key}[{i}]") for i, v in enumerate(value))

    def _parse(self, text: str, kind: str, key: str) -> float:
        match = _NUMBER_UNIT.match(text)
        if match is None:
            raise CaseError(key, f'cannot read "{text}": expected a number followed by a unit, '
                                 f"like {KINDS[kind].example}")
        magnitude = float(match.group(1).replace("_", ""))
        unit_text = match.group(2)
        if not unit_text:
            if kind == "dimensionless":
                return magnitude
            raise CaseError(key, f'"{text}" has no unit; expected {KINDS[kind].words}: write a bare '
                                 f"number for the file's units, or a unit like {KINDS[kind].example}")
        if unit_text.startswith("/"):  # "1.2e-5/K": the number divides by the unit
            unit_text = "1" + unit_text
        try:
            factor, dimensionality = _unit_info(unit_text)
        except _UnitTextError as exc:
            raise CaseError(key, f'cannot read "{text}": {exc}') from None
        if dimensionality != _kind_dimensionality(kind):
            found = _dimension_words(dimensionality)
            message = (f'"{text}" is {found}, expected {KINDS[kind].words} '
                       f"(e.g. {KINDS[kind].example})")
            if kind == "unit_weight" and dimensionality == _kind_dimensionality("density"):
                message += '; a mass per volume belongs under the key "density"'
            raise CaseError(key, message)
        return magnitude * factor


def _show(value: Any) -> str:
    return f'"{value}"' if isinstance(value, str) else repr(value)


@functools.lru_cache(maxsize=64)
def _unit_scale(text: str, kind: str) -> float:
    """SI value of one ``text`` unit of the given kind; raises _UnitTextError."""
    if _NUMBER_UNIT.match(text):
        raise _UnitTextError(f'expected a unit name such as "mm", found "{text}"')
    factor, dimensionality = _unit_info(text)
    if dimensionality != _kind_dimensionality(kind):
        raise _UnitTextError(f'"{text}" is {_dimension_words(dimensionality)}, '
                             f"expected {KINDS[kind].words}")
    return factor


def unit_system(table: Any = None, key: str = "units") -> UnitSystem:
    """Build the :class:`UnitSystem` of a case from its ``[units]`` table.

    Parameters
    ----------
    table : mapping or None
        ``{"length": "mm", "force": "N"}``; missing entries default to
        ``"m"`` and ``"kN"``.
    key : str
        Key path of the table, for error messages.

    Returns
    -------
    UnitSystem
        With ``length_scale`` in m per length unit and ``force_scale`` in N
        per force unit.

    Raises
    ------
    CaseError
        Unknown keys, unknown units, or a unit of the wrong dimension.
    """
    if table is None:
        table = {}
    if not isinstance(table, Mapping):
        raise CaseError(key, f"expected a table with length and force, found {describe_value(table)}")
    for name in table:
        if name not in ("length", "force"):
            raise CaseError(f"{key}.{name}", f'unknown key "{name}" (known: length, force)')
    texts = {"length": table.get("length", "m"), "force": table.get("force", "kN")}
    scales = {}
    for name, text in texts.items():
        if not isinstance(text, str):
            raise CaseError(f"{key}.{name}", f'expected a unit name such as "{"mm" if name == "length" else "kN"}", '
                                             f"found {describe_value(text)}")
        try:
            scales[name] = _unit_scale(text.strip(), name)
        except _UnitTextError as exc:
            raise CaseError(f"{key}.{name}", str(exc)) from None
    return UnitSystem(length=texts["length"].strip(), force=texts["force"].strip(),
                      length_scale=scales["length"], force_scale=scales["force"])

