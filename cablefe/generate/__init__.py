"""Parametric layout generators: a complete, commented case file from a few numbers.

``cablefe new FAMILY --name VALUE ... -o CASE.toml`` calls :func:`generate`.
Each family (one module here) declares its parameters as :class:`Param`
records with defaults written the way an engineer types them (``"60 m"``);
values given by the user may carry any unit of the right dimension
(``"80 m"`` and ``"80000 mm"`` are the same span).  Bare numbers are in m and
kN (kN/m, kN/m^2, ...), like the bare numbers of a case file.

The generated geometry is drawn close to equilibrium under the permanent
loads (a parabolic main cable with the horizontal tension of a uniformly
loaded cable, hangers and stays pretensioned with their tributary weight,
nets in their force-density shape), so ``cablefe solve`` converges from it
and form-finding starts near its answer.

Example
-------
>>> from cablefe.generate import generate
>>> text = generate("suspension", {"span": "80 m", "planes": "1"})
>>> text.splitlines()[0]
'# cablefe new suspension --span "80 m" --planes 1'
"""
from __future__ import annotations

import math
import shlex
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

from ..errors import CaseError
from ..io.units import KINDS, Quantities
from ..spec import UnitSystem

__all__ = ["Param", "Family", "FAMILIES", "family", "parse_parameters", "generate", "command_line",
           "parameter_help"]

#: Kinds of parameter besides the quantity kinds of :mod:`cablefe.io.units`.
PLAIN_KINDS = ("int", "choice")

# bare numbers of generator parameters are in m and kN, like a default case file
_QUANTITIES = Quantities(UnitSystem(length="m", force="kN", length_scale=1.0, force_scale=1000.0))

#: How the help shows the unit of a bare number of each kind.
BARE_UNITS = {"length": "m", "force": "kN", "area": "m^2", "stress": "kN/m^2",
              "force_per_length": "kN/m", "second_moment": "m^4", "temperature_difference": "K",
              "angle": "rad"}


@dataclass(frozen=True)
class Param:
    """One parameter of a layout family.

    Attributes
    ----------
    name : str
        Name with underscores; the option is ``--`` plus the name with dashes.
    kind : str
        A quantity kind of :mod:`cablefe.io.units` (``"length"``,
        ``"force_per_length"``, ``"stress"`` for loads per area, ...),
        ``"int"`` or ``"choice"``.
    default : str, int or None
        As typed on the command line (``"60 m"``); None: derived from other
        parameters (the help says how).
    help : str
        One line for ``--help``.
    choices : tuple of str
        For kind ``"choice"``.
    minimum : float
        Smallest accepted value (SI units for quantities); values must be
        strictly above it for quantities with ``positive=True``.
    positive : bool
        Quantities: the value must be > 0.
    """

    name: str
    kind: str
    default: Any
    help: str
    choices: tuple[str, ...] = ()
    minimum: float | None = None
    positive: bool = True

    @property
    def option(self) -> str:
        return "--" + self.name.replace("_", "-")

    def default_text(self) -> str:
        return "derived" if self.default is None else str(self.default)


@dataclass(frozen=True)
class Family:
    """A layout family: its parameters and the function that writes the case.

    ``build(values, command)`` gets the parsed values (SI floats, ints, choice
    strings; None for derived defaults) and the command line to record, and
    returns the case text.
    """

    name: str
    summary: str
    params: tuple[Param, ...]
    build: Callable[[Mapping[str, Any], str], str]
    examples: tuple[str, ...] = ()
    notes: str = ""
    by_name: Mapping[str, Param] = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        object.__setattr__(self, "by_name", {p.name: p for p in self.params})


def _registry() -> dict[str, Family]:
    from . import arch, net, stayed, suspension
    return {f.name: f for f in (suspension.FAMILY, stayed.FAMILY, net.FAMILY, arch.FAMILY)}


#: The families by name, in the order the help lists them.
FAMILIES: Mapping[str, Family] = {}


def family(name: str) -> Family:
    """The family called ``name``; ValueError listing the known ones otherwise."""
    if not FAMILIES:
        FAMILIES.update(_registry())
    try:
        return FAMILIES[name]
    except KeyError:
        raise ValueError(f'unknown layout family "{name}" (known: {", ".join(FAMILIES)})') from None


def families() -> Mapping[str, Family]:
    """All families by name."""
    family(next(iter(FAMILIES), "suspension"))
    return FAMILIES


def _parse_one(param: Param, value: Any) -> Any:
    """SI value (quantities), int or choice string of one parameter; ValueError names the option."""
    if param.kind == "choice":
        text = str(value).strip()
        if text not in param.choices:
            raise ValueError(f'{param.option}: expected one of {", ".join(param.choices)}, found "{value}"')
        return text
    if param.kind == "int":
        try:
            number = int(str(value).strip())
        except ValueError:
            raise ValueError(f'{param.option}: expected a whole number, found "{value}"') from None
        if param.minimum is not None and number < param.minimum:
            raise ValueError(f"{param.option}: expected a whole number >= {int(param.minimum)}, found {number}")
        return number
    text = value.strip() if isinstance(value, str) else value
    if isinstance(text, str):
        try:  # a bare number typed on the command line is in the default units
            text = float(text)
        except ValueError:
            pass
    try:
        result = _QUANTITIES.to_si(text, param.kind, param.option)
    except CaseError as exc:
        unit = BARE_UNITS.get(param.kind)
        hint = f" (a bare number is in {unit})" if unit else ""
        raise ValueError(f"{param.option}: {exc.message}{hint}") from None
    if param.positive and not result > 0.0:
        raise ValueError(f'{param.option}: expected a positive value, found "{value}"')
    if param.minimum is not None and result < param.minimum:
        raise ValueError(f'{param.option}: expected at least {param.minimum:g} '
                         f'({KINDS[param.kind].si}), found "{value}"')
    return result


def parse_parameters(name: str, given: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """Parse the parameters of a family, filling in defaults.

    Parameters
    ----------
    name : str
        Family name.
    given : mapping, optional
        Parameter name (underscores or dashes) -> value as typed
        (``"80 m"``, ``"80000 mm"``, ``80``, ``"2"``, ``"fan"``).

    Returns
    -------
    dict
        Quantities in SI units (m, N, N/m, Pa, m^2, m^4, K, rad), ints and
        choice strings; None for a derived default not given.

    Raises
    ------
    ValueError
        Unknown parameter or bad value; the message starts with the option
        (``--span: ...``).
    """
    fam = family(name)
    given = {k.replace("-", "_"): v for k, v in (given or {}).items()}
    for key in given:
        if key not in fam.by_name:
            known = ", ".join(p.option for p in fam.params)
            raise ValueError(f'--{key.replace("_", "-")}: not a parameter of family {name} (known: {known})')
    values = {}
    for param in fam.params:
        raw = given.get(param.name, param.default)
        values[param.name] = None if raw is None else _parse_one(param, raw)
    return values


def command_line(name: str, given: Mapping[str, Any] | None = None) -> str:
    """The ``cablefe new`` command (without ``-o``) that reproduces a case."""
    fam = family(name)
    given = {k.replace("-", "_"): v for k, v in (given or {}).items()}
    words = ["cablefe", "new", name]
    for param in fam.params:  # family order, so the same case gives the same line
        if param.name in given:
            text = str(given[param.name])
            quoted = shlex.quote(text)
            words += [param.option, f'"{text}"' if quoted != text and '"' not in text else quoted]
    return " ".join(words)


def generate(name: str, given: Mapping[str, Any] | None = None) -> str:
    """The complete case text of a family for the given parameters.

    Parameters
    ----------
    name : str
        Family name (see :data:`FAMILIES`).
    given : mapping, optional
        Parameters as typed, see :func:`parse_parameters`.

    Returns
    -------
    str
        TOML text, starting with the command line that reproduces it.

    Raises
    ------
    ValueError
        Bad parameters (the message names the option) or a layout that
        cannot be built from them.
    """
    values = parse_parameters(name, given)
    return family(name).build(values, command_line(name, given))


def parameter_help(fam: Family) -> str:
    """Lines ``--name (default ...): help`` for a family's parameters."""
    return "\n".join(f"  {p.option} ({p.default_text()}): {p.help}" for p in fam.params)


def finite(value: float, what: str) -> float:
    """Guard for derived quantities (a layout that makes no sense gives nan)."""
    if not math.isfinite(value):
        raise ValueError(f"{what}: the parameters give no finite value; check them")
    return value
