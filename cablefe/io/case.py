"""Read and validate a case file (TOML) into a :class:`~cablefe.spec.CaseSpec`.

The case file is described in docs/case-format.md; this module
implements it exactly and adds the extensions listed below.  Every user
mistake raises :class:`~cablefe.errors.CaseError` with the key path of the
offending value and a message that says what was found and what was
expected.  Key paths use 0-based array indices (``members[12].section``,
``loads[3].force[2]``); keys that are not bare TOML keys are quoted
(``shape.force_density."N*"``).  TOML syntax errors have the empty key and
give the line and column.

Values are converted to SI by :mod:`cablefe.io.units` (bare numbers in the
file's ``[units]``, strings with their own unit).

Extensions to the base format
--------------------------------
``[node_table]`` and ``[[member_table]]``
    Compact form for big models, alongside ``[nodes]`` and ``[[members]]``::

        [node_table]            # equal-length arrays; bare numbers, file length unit
        ids = ["N0", "N1", "N2"]
        x = [0.0, 1.0, 2.0]
        y = [0.0, 0.0, 0.0]
        z = [5.0, 5.0, 5.0]

        [[member_table]]        # one group per type and section
        type = "cable"
        section = "net"
        ids = ["E0", "E1"]
        i = ["N0", "N1"]
        j = ["N1", "N2"]
        length0 = [1.0, 1.0]    # optional: one value for all, or one per member
        # pretension = 5.0      # optional, instead of length0
        # tension_only = true   # bar groups only

    Members of a table take no ``divide``, ``up`` or ``interior``; they give
    the same :class:`~cablefe.spec.Member` objects as the long form, with
    key ``member_table[g].ids[k]``.
``interior = [[x, y, z], ...]`` on a divided member
    Coordinates of its ``divide - 1`` interior nodes (written by
    form-finding so that a shaped case reloads in its shape).  Without it the
    analysis starts them on a hanging chain for a cable or bar longer than
    its chord (``length0``), else evenly on the straight chord
    (:func:`cablefe.model.geometry.interior_start`).
``[beam_reference]``
    Stress-free geometry of beams, written by form-finding so that a shaped
    case with bending beams reloads with the bending it was found with::

        [beam_reference]        # one entry per node touched by a beam
        D3 = { position = [20.0, 0.0, 4.0], rotation = [0.0, -0.0012, 0.0] }

    ``position`` (file length unit) is where the node lies when the beams are
    stress-free; ``rotation`` (rad, default zero) is the rotation vector from
    the stress-free orientation of the node to its orientation in
    ``[nodes]``.  Beam frames and lengths come from the positions; the
    analysis starts from ``[nodes]`` with these rotations, and displacements
    are still measured from ``[nodes]``.
``[shape]``: ``fabrication_temperature`` (temperature difference of the
    fabrication state from the analysis state, K) and ``max_iterations``.
``[analysis]``: ``solver`` (one of :data:`SOLVERS`), ``max_cuts``
    (how often an increment may be halved in a row), ``max_total_iterations``
    and ``max_total_cuts`` (the work budget of one result: Newton iterations
    and increment cuts over its whole load path); ``control`` (one of
    :data:`CONTROLS`: load control, or arc length through limit points) and
    ``track`` (node ids whose displacements each converged step records in
    the result's ``path``).
``[design]``, ``[catalogues]``, fy on materials, Wy and Wz on sections
    Design checks and sizing: read by :mod:`cablefe.io.case_design`.
``[report]``
    ``deck = ["D*"]``: node ids or patterns whose largest vertical
    deflection is reported; validated here (unknown keys, patterns that
    match no node) and kept in ``CaseSpec.extra["report"]``.
``[[studies]]``
    Live-load studies: read by :mod:`cablefe.io.case_studies`.
``[modes]``
    Natural modes and the pedestrian check: read by :mod:`cablefe.io.case_modes`.
A table whose feature this version does not have is listed in
:data:`NOT_IMPLEMENTED` (none now) and rejected with a message saying so.

Size limit: a case whose model would have more than :data:`MAX_DOFS`
degrees of freedom or :data:`MAX_ELEMENTS` elements (``divide`` included) is
rejected before anything is allocated; see :data:`MAX_DOFS` for how the
limit follows from the memory a model needs.

Keys that would do nothing are errors: a support ``rx``/``ry``/``rz`` on a
node that has no rotations (joined to no beam; ``"all"`` means every
direction the node has), a load, support movement or shape target on a node
joined to no member, a prescribed rotation of a node without rotations.  (A
support on a node joined to no member is harmless and only logged by the
model: generated grids leave unused corner nodes supported.)

Interior nodes of a divided member are named ``<member id>.<k>``, k = 1 …
divide - 1 from the first node; they are valid wherever a node id is
(supports, loads, paths, targets, ends of *other* members) but they are not
put in ``CaseSpec.nodes``, which holds the declared nodes only: see
:func:`interior_nodes`.

Prescribed displacements: a component on a restrained direction is kept
(``0`` included); a zero on an unrestrained direction becomes ``None`` (not
prescribed); a non-zero one is an error.
"""
from __future__ import annotations

import contextlib
import difflib
import gc
import json
import math
import re
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

try:  # the compiled tomli wheels parse big compact tables ~2.5x faster than tomllib
    import tomli as _toml
except ImportError:  # pragma: no cover - depends on the installation
    import tomllib as _toml

from ..errors import CaseError
from ..patterns import PatternIndex
from ..spec import (
    DIRECTIONS,
    MEMBER_TYPES,
    AdjustGroup,
    AnalysisSettings,
    BeamReference,
    CaseSpec,
    Combination,
    Material,
    Member,
    MemberLoad,
    NodalLoad,
    PatchLoad,
    PrescribedDisplacement,
    Section,
    SelfWeight,
    ShapeSpec,
    TemperatureLoad,
    support_mask,
)
from .units import STANDARD_GRAVITY, Quantities, describe_value, unit_system

__all__ = [
    "read_case",
    "parse_case",
    "interior_node_ids",
    "interior_nodes",
    "match_members",
    "key_join",
    "TOP_LEVEL_KEYS",
    "PASS_THROUGH_KEYS",
    "NOT_IMPLEMENTED",
    "MAX_DOFS",
    "MAX_ELEMENTS",
    "MAX_COORDINATE",
    "SHAPE_METHODS",
    "SOLVERS",
]

TOP_LEVEL_KEYS = ("title", "units", "materials", "sections", "nodes", "supports", "members",
                  "loads", "combinations", "shape", "analysis", "node_table", "member_table",
                  "beam_reference", "design", "catalogues", "studies", "modes")
#: Top-level tables validated here and kept in ``CaseSpec.extra`` for the
#: features that read them.
PASS_THROUGH_KEYS = ("report",)
#: Tables of the case format whose features this version does not have: a
#: case that uses one is rejected (never read and ignored).  A feature that
#: lands removes its entry here (and validates its table in the reader).
NOT_IMPLEMENTED: Mapping[str, str] = {
}
REPORT_KEYS = ("deck",)
MATERIAL_KEYS = ("E", "G", "unit_weight", "density", "alpha", "fy")
SECTION_KEYS = ("material", "area", "weight", "breaking_load", "diameter", "Iy", "Iz", "J", "Wy", "Wz")
MEMBER_KEYS = ("id", "type", "nodes", "section", "length0", "pretension", "tension_only",
               "divide", "up", "interior")
NODE_TABLE_KEYS = ("ids", "x", "y", "z")
_PLAIN_MEMBER_KEYS = frozenset(("id", "type", "nodes", "section", "length0", "pretension", "tension_only"))
MEMBER_TABLE_KEYS = ("type", "section", "tension_only", "length0", "pretension", "ids", "i", "j")
LOAD_KEYS = ("case", "self_weight", "factor", "node", "force", "moment", "displacement",
             "rotation", "members", "per_length", "temperature", "path", "start", "end")
COMBINATION_KEYS = ("name", "factors")
SHAPE_KEYS = ("method", "permanent", "tolerance", "targets", "adjust", "force_density",
              "fabrication_temperature", "max_iterations")
ADJUST_KEYS = ("members", "together")
BEAM_REFERENCE_KEYS = ("position", "rotation")
ANALYSIS_KEYS = ("increments", "tolerance", "max_iterations", "solver", "max_cuts",
                 "max_total_iterations", "max_total_cuts", "control", "track")
CONTROLS = ("load", "arc-length")
SHAPE_METHODS = ("target", "force-density")
SOLVERS = ("auto", "superlu", "splu-default", "pardiso")

LOAD_FORMS = ("self_weight = true [, factor]; node + force and/or moment; "
              "node + displacement [, rotation]; members + per_length; members + temperature; "
              "path + per_length [, start, end]")

#: A member is of zero length when its chord is below this fraction of the
#: model's size: coordinates typed with a few digits differ by far more, so
#: anything closer is a duplicated point, not a short member.
ZERO_LENGTH_FRACTION = 1e-9

#: Largest model accepted, in degrees of freedom (3 per node, 6 at nodes
#: joined to beams).  Memory grows with the DOFs: the cable-net benchmark
#: (benchmarks/README.md) peaked at 6.2 GB for 0.99 million DOFs, about
#: 6 kB per DOF, and sparse factorization fill grows faster than linearly.
#: 10 million DOFs would need 60 GB or more, beyond one ordinary machine; a
#: bigger case is almost always a typing slip (``divide = 100000000``), and
#: is rejected before any array is allocated.
MAX_DOFS = 10_000_000
#: Largest number of elements (members times ``divide``), for the same reason.
MAX_ELEMENTS = 10_000_000
#: Largest coordinate accepted (m).  A double resolves about 2e-6 m at 1e10 m
#: (machine epsilon 2.2e-16 times the value), so beyond this a structure's
#: geometry cannot be told to the micrometre; projected survey grids reach
#: 1e7 m.  Farther values are typing slips (a forgotten unit, 1e308).
MAX_COORDINATE = 1e10

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+\Z")


# ---------------------------------------------------------------------------
# public helpers
# ---------------------------------------------------------------------------

def key_join(parent: str, name: str) -> str:
    """Key path of ``name`` inside ``parent``, quoting non-bare TOML keys."""
    part = name if _BARE_KEY.match(name) else json.dumps(name, ensure_ascii=False)
    return f"{parent}.{part}" if parent else part


def interior_node_ids(member_id: str, divide: int) -> tuple[str, ...]:
    """Ids ``<member id>.<k>``, k = 1 … divide-1, of a divided member's interior nodes."""
    return tuple(f"{member_id}.{k}" for k in range(1, divide))


def interior_nodes(spec: CaseSpec) -> dict[str, tuple[float, float, float]]:
    """Positions (m) of the interior nodes of every divided member.

    Taken from ``Member.interior`` when given, else evenly spaced on the
    straight chord between the member's end nodes (which may themselves be
    interior nodes of other members).

    Raises
    ------
    CaseError
        Dangling end nodes, or divided members whose ends refer to each
        other's interior nodes in a loop.
    """
    owners = {}
    for index, member in enumerate(spec.members):
        for k, nid in enumerate(interior_node_ids(member.id, member.divide), start=1):
            owners[nid] = (index, k)
    positions = _interior_positions(spec.members, owners, spec.nodes)
    return {nid: positions[nid] for nid in owners}


def match_members(patterns: str | Iterable[str], member_ids: Sequence[str]) -> list[str]:
    """Member ids equal to, or matching (shell-style, :mod:`cablefe.patterns`), any pattern.

    Parameters
    ----------
    patterns : str or iterable of str
        Ids or shell-style patterns (``"H*"``, ``"D[0-9]"``).
    member_ids : sequence of str
        All member ids, in case order.

    Returns
    -------
    list of str
        Matching ids in case order.
    """
    index = PatternIndex(member_ids)  # exact ids first: an id may itself contain "[" or "*"
    return [index.ids[k] for k in index.indices(patterns)]


# ---------------------------------------------------------------------------
# entry points
# ---------------------------------------------------------------------------

def read_case(path: str | Path) -> CaseSpec:
    """Read, validate and convert a TOML case file.

    Parameters
    ----------
    path : str or Path
        The case file.

    Returns
    -------
    CaseSpec
        In SI units, with ``source=str(path)`` and ``raw`` the parsed TOML.

    Raises
    ------
    CaseError
        Any problem with the file, with ``file=str(path)``.
    """
    source = str(path)
    try:
        text = Path(path).read_bytes().decode("utf-8-sig")
    except OSError as exc:
        raise CaseError("", f"cannot read the case file ({exc.strerror or exc})", file=source) from None
    except UnicodeDecodeError as exc:
        raise CaseError("", f"not a UTF-8 text file (byte {exc.start}): a TOML case must be UTF-8",
                        file=source) from None
    try:
        data = _toml.loads(text)
    except _toml.TOMLDecodeError as exc:
        raise CaseError("", _syntax_message(exc, text), file=source) from None
    except RecursionError:
        raise CaseError("", "TOML nested too deeply (arrays or tables inside each other beyond "
                        "what the parser handles); a case needs a few levels at most", file=source) from None
    except MemoryError:
        raise CaseError("", "the case file is too big to parse in the memory available", file=source) from None
    except Exception as exc:  # any other parser failure is still a problem of the file
        raise CaseError("", f"cannot parse the file as TOML ({type(exc).__name__}: {exc})",
                        file=source) from None
    return parse_case(data, source)


def parse_case(data: Mapping[str, Any], source: str | None = None) -> CaseSpec:
    """Validate and convert an already parsed case (the dict TOML gives).

    Parameters
    ----------
    data : mapping
        The parsed case; it is not modified, and is kept by reference as
        ``CaseSpec.raw``.
    source : str, optional
        File name for error messages and ``CaseSpec.source``.

    Returns
    -------
    CaseSpec
        In SI units.

    Raises
    ------
    CaseError
        The first problem found, with its key path (and ``file=source``).
    """
    try:
        return _Reader(data, source).read()
    except CaseError as exc:
        if source is not None and exc.file is None:
            raise exc.with_file(source) from None
        raise


def _syntax_message(exc: Exception, text: str) -> str:
    """'TOML syntax error at line L, column C: …' from a TOMLDecodeError."""
    message = str(exc)
    line = getattr(exc, "lineno", None)
    column = getattr(exc, "colno", None)
    detail = getattr(exc, "msg", None)
    found = re.search(r"\s*\(at line (\d+), column (\d+)\)\s*$", message)
    if found:
        detail = detail or message[: found.start()]
        line, column = int(found.group(1)), int(found.group(2))
    detail = detail or message
    hint = ""
    declared = re.match(r"Cannot declare \((.*)\) twice", detail)
    if declared:
        name = ".".join(part.strip().strip("'\"") for part in declared.group(1).split(",") if part.strip())
        hint = f"; [{name}] is already defined above (each table and key may appear once)"
    elif detail.startswith("Cannot overwrite a value") and line is not None:
        lines = text.splitlines()
        if 0 < line <= len(lines) and "=" in lines[line - 1]:
            name = lines[line - 1].split("=", 1)[0].strip()
            hint = f"; key {name} is defined twice in its table (each key, and so each id, may appear once)"
        else:
            hint = "; a key is defined twice in its table (each key, and so each id, may appear once)"
    if line is None:
        return f"TOML syntax error: {detail}{hint}"
    return f"TOML syntax error at line {line}, column {column}: {detail}{hint}"


# ---------------------------------------------------------------------------
# small validators
# ---------------------------------------------------------------------------

def _show(value: Any) -> str:
    """A value as the engineer typed it, for messages."""
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, bool):
        return str(value).lower()
    return repr(value)


def _suggest(name: str, known: Iterable[str], limit: int = 20000, listed: int = 12) -> str:
    """' (known: …)' for a few names, else ' (did you mean "…"?)' when one is close."""
    known = list(known)
    if len(known) <= listed:
        return f' (known: {", ".join(known) or "none"})'
    folded = [k for k in known if k.casefold() == name.casefold()]
    if folded:
        return f' (did you mean "{folded[0]}"?)'
    if len(known) > limit:  # difflib is quadratic-ish; the message can do without
        return ""
    close = difflib.get_close_matches(name, known, n=1)
    return f' (did you mean "{close[0]}"?)' if close else ""


def _check_keys(table: Mapping, key: str, known: Sequence[str]) -> None:
    for name in table:
        if name not in known:
            close = difflib.get_close_matches(name, known, n=1)
            raise CaseError(key_join(key, name), f'unknown key "{name}" (known: {", ".join(known)})'
                            + (f'; did you mean "{close[0]}"?' if close else ""))


def _table(value: Any, key: str, what: str = "a table") -> Mapping:
    if not isinstance(value, Mapping):
        raise CaseError(key, f"expected {what}, found {describe_value(value)}")
    return value


def _string(value: Any, key: str, what: str = "a string") -> str:
    if not isinstance(value, str):
        raise CaseError(key, f"expected {what}, found {describe_value(value)}")
    return value


def _name(value: Any, key: str, what: str) -> str:
    """A non-empty id or name."""
    text = _string(value, key, f"{what} (a string)")
    if not text.strip():
        raise CaseError(key, f"expected {what}, found an empty string")
    return text


def _bool(value: Any, key: str) -> bool:
    if not isinstance(value, bool):
        raise CaseError(key, f"expected true or false, found {describe_value(value)}")
    return value


def _integer(value: Any, key: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        what = "a positive integer" if minimum == 1 else f"an integer >= {minimum}"
        raise CaseError(key, f"expected {what}, found {describe_value(value)}")
    return int(value)


def _require(table: Mapping, name: str, key: str, what: str) -> Any:
    if name not in table:
        raise CaseError(key_join(key, name), f"missing: {what}")
    return table[name]


def _names_list(value: Any, key: str, what: str, allow_single: bool = False) -> tuple[str, ...]:
    if allow_single and isinstance(value, str):
        value = [value]
    if not isinstance(value, list):
        single = " or a single string" if allow_single else ""
        raise CaseError(key, f"expected an array of {what}{single}, found {describe_value(value)}")
    if not value:
        raise CaseError(key, f"expected an array of {what}, found an empty array")
    return tuple(_name(v, f"{key}[{k}]", what) for k, v in enumerate(value))


# ---------------------------------------------------------------------------
# the reader
# ---------------------------------------------------------------------------

class _Reader:
    """One pass over a parsed case; raises at the first problem."""

    def __init__(self, data: Mapping[str, Any], source: str | None):
        self.data = data
        self.source = source

    # -- quantities ---------------------------------------------------------
    def quantity(self, value, kind, key, sign: str | None = None) -> float:
        """SI value; ``sign`` is None, "positive" or "nonnegative"."""
        result = self.q.to_si(value, kind, key)
        if sign == "positive" and not result > 0.0:
            raise CaseError(key, f"expected a positive value, found {_show(value)}")
        if sign == "nonnegative" and result < 0.0:
            raise CaseError(key, f"expected a value >= 0, found {_show(value)}")
        return result

    def optional(self, table, name, kind, key, sign=None, default=None):
        if name not in table:
            return default
        return self.quantity(table[name], kind, key_join(key, name), sign)

    # -- whole case ---------------------------------------------------------
    def read(self) -> CaseSpec:
        data = self.data
        if not isinstance(data, Mapping):
            raise CaseError("", f"expected a table of keys at the top level, found {describe_value(data)}")
        for name, feature in NOT_IMPLEMENTED.items():
            if name in data:
                raise CaseError(name, f"[{name}] ({feature}) is not implemented in this version of cablefe; "
                                "remove the table (it would not be used)")
        _check_keys(data, "", TOP_LEVEL_KEYS + PASS_THROUGH_KEYS)
        title = _string(data.get("title", ""), "title")
        self.units = unit_system(data.get("units"), "units")
        self.q = Quantities(self.units)

        materials = self.materials(data.get("materials", {}))
        sections = self.sections(data.get("sections", {}), materials)
        self.expands = {name: materials[sec.material].alpha != 0.0 for name, sec in sections.items()}
        nodes = self.nodes(data.get("nodes", {}), data.get("node_table"))
        members = self.members(data.get("members", []), data.get("member_table", []),
                               nodes, sections, materials)
        self.member_list = members
        self.member_ids = [m.id for m in members]
        self.member_id_set = set(self.member_ids)
        self.member_index = PatternIndex(self.member_ids)
        supports = self.supports(data.get("supports", {}))
        self.supports_map = supports
        loads = self.loads(data.get("loads", []))
        cases = {load.case for load in loads}
        self.weight_cases = {load.case for load in loads if isinstance(load, SelfWeight)}
        combinations = self.combinations(data.get("combinations", []), cases)
        shape = self.shape(data["shape"], cases) if "shape" in data else None
        analysis = self.analysis(data.get("analysis", {}))
        beam_reference = self.beam_reference(data.get("beam_reference", {}))
        names = [c.name for c in combinations] or list(dict.fromkeys(load.case for load in loads))
        studies = ()
        if "studies" in data:   # validated and used (cablefe.io.case_studies)
            from .case_studies import read_studies
            studies = read_studies(self, data["studies"], names)
        modes = None
        if "modes" in data:   # validated and used (cablefe.io.case_modes)
            from .case_modes import read_modes
            modes = read_modes(self, data["modes"], names)
        extra = {}
        if "report" in data:
            extra["report"] = self.report(data["report"])
        from .case_design import read_design   # [design], [[design.size]], [catalogues.*]
        design, catalogues, data = read_design(data, self.q, materials, self.member_list, self.source)
        return CaseSpec(title=title, units=self.units, materials=materials, sections=sections,
                        nodes=nodes, supports=supports, members=tuple(members), loads=tuple(loads),
                        combinations=tuple(combinations), shape=shape, analysis=analysis,
                        beam_reference=beam_reference, source=self.source, raw=data, extra=extra,
                        design=design, catalogues=catalogues, studies=studies, modes=modes)

    # -- materials and sections ----------------------------------------------
    def materials(self, value) -> dict[str, Material]:
        out = {}
        for name, entry in _table(value, "materials", "a table of materials").items():
            key = key_join("materials", name)
            entry = _table(entry, key, f'a table for material "{name}"')
            _check_keys(entry, key, MATERIAL_KEYS)
            E = self.quantity(_require(entry, "E", key, "the elastic modulus E, e.g. E = \"160 GPa\""),
                              "stress", key_join(key, "E"), "positive")
            G = self.optional(entry, "G", "stress", key, "positive", default=E / 2.6)
            if "unit_weight" in entry and "density" in entry:
                raise CaseError(key_join(key, "density"), "give either unit_weight or density, not both")
            if "density" in entry:
                unit_weight = self.quantity(entry["density"], "density", key_join(key, "density"),
                                            "nonnegative") * STANDARD_GRAVITY
            else:
                unit_weight = self.optional(entry, "unit_weight", "unit_weight", key, "nonnegative", 0.0)
            alpha = self.optional(entry, "alpha", "thermal_expansion", key, default=0.0)
            fy = self.optional(entry, "fy", "stress", key, "positive")
            out[name] = Material(name=name, E=E, G=G, unit_weight=unit_weight, alpha=alpha, fy=fy)
        return out

    def sections(self, value, materials) -> dict[str, Section]:
        out = {}
        for name, entry in _table(value, "sections", "a table of sections").items():
            key = key_join("sections", name)
            entry = _table(entry, key, f'a table for section "{name}"')
            _check_keys(entry, key, SECTION_KEYS)
            material = _name(_require(entry, "material", key, 'the material name, e.g. material = "strand"'),
                             key_join(key, "material"), "a material name")
            if material not in materials:
                raise CaseError(key_join(key, "material"), f'no material named "{material}"'
                                + _suggest(material, materials, listed=1000))
            area = self.quantity(_require(entry, "area", key, 'the metallic area, e.g. area = "1960 mm^2"'),
                                 "area", key_join(key, "area"), "positive")
            section = Section(
                name=name, material=material, area=area,
                weight=self.optional(entry, "weight", "force_per_length", key, "nonnegative"),
                breaking_load=self.optional(entry, "breaking_load", "force", key, "positive"),
                diameter=self.optional(entry, "diameter", "length", key, "positive"),
                Iy=self.optional(entry, "Iy", "second_moment", key, "positive"),
                Iz=self.optional(entry, "Iz", "second_moment", key, "positive"),
                J=self.optional(entry, "J", "second_moment", key, "positive"),
                Wy=self.optional(entry, "Wy", "section_modulus", key, "positive"),
                Wz=self.optional(entry, "Wz", "section_modulus", key, "positive"),
            )
            # products the elements use must stay finite (1e300 GPa times 1e10 m^2 is not)
            mat = materials[material]
            for part, value in (("area", mat.E * area), ("area", mat.unit_weight * area),
                                ("Iy", mat.E * (section.Iy or 0.0)), ("Iz", mat.E * (section.Iz or 0.0)),
                                ("J", mat.G * (section.J or 0.0))):
                if not math.isfinite(value):
                    raise CaseError(key_join(key, part), f"with material \"{material}\" this gives a stiffness "
                                    "or weight too large for a double (overflow); check the values and units")
            out[name] = section
        return out

    # -- nodes ----------------------------------------------------------------
    def nodes(self, long_form, compact) -> dict[str, tuple[float, float, float]]:
        """Declared nodes (m), from [nodes] then [node_table]."""
        nodes: dict[str, tuple[float, float, float]] = {}
        self.table_ids: list[str] = []
        for name, value in _table(long_form, "nodes", "a table of node coordinates").items():
            key = key_join("nodes", name)
            if not name.strip():
                raise CaseError(key, "a node id must not be empty")
            if isinstance(value, Mapping):
                dotted = f"{name}.{next(iter(value), '1')}"
                raise CaseError(key, f'expected [x, y, z], found a table (an id with a dot must be '
                                f'quoted: "{dotted}" = [x, y, z])')
            nodes[name] = self.q.vector(value, "length", key)
        self.long_count = len(nodes)
        self.table_xyz = np.zeros((0, 3))
        if compact is None:
            return nodes
        table = _table(compact, "node_table", "a table with arrays ids, x, y, z")
        _check_keys(table, "node_table", NODE_TABLE_KEYS)
        ids = _string_array(_require(table, "ids", "node_table", "the array of node ids"), "node_table.ids")
        columns = [_number_array(_require(table, c, "node_table", f"the array of {c} coordinates"),
                                 f"node_table.{c}", len(ids), "ids") for c in "xyz"]
        xyz = np.stack(columns, axis=1) * self.q.bare_factor("length")
        _unique(ids, "node_table.ids", "node id", nodes, lambda name: key_join("nodes", name))
        nodes.update(zip(ids, map(tuple, xyz.tolist())))
        self.table_ids, self.table_xyz = ids, xyz
        return nodes

    def node_key(self, name: str) -> str:
        """Key path where a declared node is defined (error path only: linear search)."""
        if len(self.table_ids) and name in self.table_ids:
            return f"node_table.ids[{self.table_ids.index(name)}]"
        return key_join("nodes", name)

    # -- members --------------------------------------------------------------
    def members(self, long_form, compact, nodes, sections, materials) -> list[Member]:
        if not isinstance(long_form, list):
            raise CaseError("members", f"expected an array of tables ([[members]]), found {describe_value(long_form)}")
        records = self.plain_members(long_form, sections)
        if records is None:  # some entry is not plain, or is wrong: the full check names its key
            records = [self.member_entry(entry, f"members[{k}]", sections) for k, entry in enumerate(long_form)]
        if isinstance(compact, Mapping):
            compact = [compact]
        if not isinstance(compact, list):
            raise CaseError("member_table", f"expected an array of tables ([[member_table]]), "
                            f"found {describe_value(compact)}")
        groups = [self.member_group(entry, f"member_table[{g}]", sections) for g, entry in enumerate(compact)]
        if not records and not any(len(group["ids"]) for group in groups):
            raise CaseError("members", "the case has no members ([[members]] or [[member_table]]): "
                            "there is nothing to analyse")
        self.check_size(records, groups, len(nodes))

        # unique member ids over both forms
        first_key: dict[str, str] = {}
        for rec in records:
            if rec["id"] in first_key:
                raise CaseError(f"{rec['key']}.id",
                                f'duplicate member id "{rec["id"]}" (first at {first_key[rec["id"]]})')
            first_key[rec["id"]] = rec["key"]
        seen = set(first_key)
        for g, group in enumerate(groups):
            def where(name, g=g):  # error path only
                if name in first_key:
                    return first_key[name]
                owner = next(h for h in groups[:g] if name in h["ids"])
                return f"{owner['key']}.ids[{owner['ids'].index(name)}]"
            _unique(group["ids"], f"{group['key']}.ids", "member id", seen, where)
            seen.update(group["ids"])

        # interior nodes of divided members
        owners: dict[str, tuple[int, int]] = {}
        for index, rec in enumerate(records):
            for k, nid in enumerate(interior_node_ids(rec["id"], rec["divide"]), start=1):
                if nid in nodes:
                    raise CaseError(self.node_key(nid), f'duplicate node id "{nid}": it is also interior node {k} '
                                    f'of divided member "{rec["id"]}" ({rec["key"]}.divide)')
                owners[nid] = (index, k)
        known = [*nodes, *owners]  # in case order, for suggestions
        # nodes that some element joins: only these carry stiffness
        self.joined: set[str] = set(owners)
        for rec in records:
            self.joined.update(rec["nodes"])
        for group in groups:
            self.joined.update(group["i"])
            self.joined.update(group["j"])
        for rec in records:
            for end, name in enumerate(rec["nodes"]):
                if name not in nodes and name not in owners:
                    raise CaseError(f"{rec['key']}.nodes[{end}]", f'no node named "{name}"'
                                    + _suggest(name, known))
                if name in owners and records[owners[name][0]] is rec:
                    raise CaseError(f"{rec['key']}.nodes[{end}]", f'"{name}" is an interior node of this '
                                    "member itself; a member must end at other nodes")
            if rec["nodes"][0] == rec["nodes"][1]:
                raise CaseError(f"{rec['key']}.nodes", f'both ends are node "{rec["nodes"][0]}"; '
                                "a member needs two different nodes (zero length)")

        self.check_coordinates(nodes, records)
        positions = _interior_positions(records, owners, nodes)
        self.index = {n: k for k, n in enumerate(nodes)}
        self.index.update((n, k) for k, n in enumerate(owners, start=len(nodes)))
        long_part = list(nodes.values())[: self.long_count]
        coords = np.concatenate([np.array(long_part, dtype=float).reshape(-1, 3), self.table_xyz,
                                 np.array([positions[n] for n in owners], dtype=float).reshape(-1, 3)])
        self.coords = coords
        extent = float(np.linalg.norm(np.ptp(coords, axis=0))) if len(coords) else 0.0
        tiny = ZERO_LENGTH_FRACTION * max(extent, 1.0)
        self.rotation_nodes: set[str] = set()

        # end-to-end lengths of all long-form members at once (the zero-length check)
        index = self.index
        ends = np.array([(index[rec["nodes"][0]], index[rec["nodes"][1]]) for rec in records],
                        dtype=np.int64).reshape(-1, 2)
        lengths = np.linalg.norm(coords[ends[:, 1]] - coords[ends[:, 0]], axis=1).tolist()
        members = [self.finish_member(rec, coords, tiny, sections, materials, length)
                   for rec, length in zip(records, lengths)]
        for group in groups:
            members.extend(self.finish_group(group, coords, tiny, sections, materials))
        return members

    def check_coordinates(self, nodes, records) -> None:
        """Every coordinate within :data:`MAX_COORDINATE` of the origin (m)."""
        declared = np.concatenate([np.array(list(nodes.values())[: self.long_count], dtype=float).reshape(-1, 3),
                                   self.table_xyz])
        far = np.flatnonzero(np.abs(declared).max(axis=1, initial=0.0) > MAX_COORDINATE)
        if far.size:
            name = list(nodes)[int(far[0])]
            raise CaseError(self.node_key(name), _far_message(declared[far[0]]))
        for rec in records:
            if rec["interior"] is not None:
                points = np.asarray(rec["interior"], dtype=float)
                far = np.flatnonzero(np.abs(points).max(axis=1) > MAX_COORDINATE)
                if far.size:
                    raise CaseError(f"{rec['key']}.interior[{int(far[0])}]", _far_message(points[far[0]]))

    def check_size(self, records, groups, declared: int) -> None:
        """Reject a model bigger than :data:`MAX_DOFS` / :data:`MAX_ELEMENTS` before building it."""
        interior = sum(rec["divide"] - 1 for rec in records)
        elements = len(records) + interior + sum(len(group["ids"]) for group in groups)
        nodes = declared + interior
        beam_nodes = (sum(rec["divide"] + 1 for rec in records if rec["type"] == "beam")
                      + sum(2 * len(group["ids"]) for group in groups if group["type"] == "beam"))
        dofs = 3 * nodes + 3 * min(beam_nodes, nodes)
        if dofs <= MAX_DOFS and elements <= MAX_ELEMENTS:
            return
        key = "members"
        if records:
            big = max(records, key=lambda rec: rec["divide"])
            if big["divide"] - 1 > nodes // 2:  # one divide makes most of the model
                key = f"{big['key']}.divide"
        raise CaseError(key, f"the model would have {elements:,} elements and about {dofs:,} degrees of "
                        f"freedom; cablefe accepts at most {MAX_ELEMENTS:,} elements and {MAX_DOFS:,} "
                        "degrees of freedom, since each needs about 6 kB of memory while solving (more "
                        "than one machine holds beyond that); check divide and the tables")

    def plain_members(self, long_form, sections) -> list[dict] | None:
        """Records of ``[[members]]`` entries when every one is plain, else None.

        Plain: only the keys id, type, nodes, section, tension_only (bars),
        and length0 or pretension (not beams) as bare numbers, all valid.
        A long-form net has 10^4-10^5 such entries, and the full check
        (:meth:`member_entry`) spends most of its time building key paths
        for errors that do not happen; here the columns are checked first
        and any doubt sends the whole list down the full check, which
        raises the error naming its key.
        """
        types = set(MEMBER_TYPES)
        length_factor = self.q.bare_factor("length")
        force_factor = self.q.bare_factor("force")
        records = []
        append = records.append
        for k, e in enumerate(long_form):
            if type(e) is not dict or not e.keys() <= _PLAIN_MEMBER_KEYS:
                return None
            mid, mtype, ends, section = e.get("id"), e.get("type"), e.get("nodes"), e.get("section")
            if (type(mid) is not str or type(mtype) is not str or mtype not in types or type(ends) is not list
                    or len(ends) != 2 or type(section) is not str or section not in sections):
                return None
            a, b = ends
            if type(a) is not str or type(b) is not str or not (mid.strip() and a.strip() and b.strip()
                                                                 and section.strip()):
                return None
            tension_only = e.get("tension_only", False)
            if type(tension_only) is not bool or ("tension_only" in e and mtype != "bar"):
                return None
            length0 = e.get("length0")
            pretension = e.get("pretension")
            if length0 is not None:
                if pretension is not None or mtype == "beam" or type(length0) not in (int, float):
                    return None
                length0 = float(length0 * length_factor)
                if not (math.isfinite(length0) and length0 > 0.0):
                    return None
            if pretension is not None:
                if mtype == "beam" or type(pretension) not in (int, float):
                    return None
                pretension = float(pretension * force_factor)
                if not math.isfinite(pretension):
                    return None
            append({"key": f"members[{k}]", "id": mid, "type": mtype, "nodes": (a, b), "section": section,
                    "tension_only": tension_only, "length0": length0, "pretension": pretension,
                    "divide": 1, "up": None, "interior": None})
        return records

    def member_entry(self, entry, key, sections) -> dict:
        entry = _table(entry, key)
        _check_keys(entry, key, MEMBER_KEYS)
        rec = {"key": key}
        rec["id"] = _name(_require(entry, "id", key, 'the member id, e.g. id = "M1"'), f"{key}.id", "a member id")
        rec["type"] = _member_type(_require(entry, "type", key, f'the member type ({" | ".join(MEMBER_TYPES)})'),
                                   f"{key}.type")
        ends = _require(entry, "nodes", key, 'the two end nodes, e.g. nodes = ["A", "B"]')
        if not isinstance(ends, list) or len(ends) != 2:
            found = f"{len(ends)} items" if isinstance(ends, list) else describe_value(ends)
            raise CaseError(f"{key}.nodes", f"expected an array of two node ids, found {found}")
        rec["nodes"] = tuple(_name(n, f"{key}.nodes[{k}]", "a node id") for k, n in enumerate(ends))
        rec["section"] = _section_name(_require(entry, "section", key, 'the section name, e.g. section = "main"'),
                                       f"{key}.section", sections)
        _type_specific(entry, key, rec["type"])
        rec["tension_only"] = _bool(entry["tension_only"], f"{key}.tension_only") if "tension_only" in entry else False
        rec["length0"] = self.optional(entry, "length0", "length", key, "positive")
        rec["pretension"] = self.optional(entry, "pretension", "force", key)
        rec["divide"] = _integer(entry["divide"], f"{key}.divide", 1) if "divide" in entry else 1
        rec["up"] = None
        if "up" in entry:
            up = self.q.vector(entry["up"], "dimensionless", f"{key}.up")
            if not any(up):
                raise CaseError(f"{key}.up", "the up vector must not be zero")
            rec["up"] = up
        rec["interior"] = None
        if "interior" in entry:
            rec["interior"] = self.interior_coordinates(entry["interior"], rec["divide"], f"{key}.interior")
        return rec

    def interior_coordinates(self, value, divide, key):
        if divide < 2:
            raise CaseError(key, "interior coordinates need divide >= 2")
        if not isinstance(value, list) or len(value) != divide - 1:
            found = f"{len(value)}" if isinstance(value, list) else describe_value(value)
            raise CaseError(key, f"expected {divide - 1} points [x, y, z] (divide - 1), found {found}")
        return tuple(self.q.vector(p, "length", f"{key}[{k}]") for k, p in enumerate(value))

    def member_group(self, entry, key, sections) -> dict:
        entry = _table(entry, key)
        _check_keys(entry, key, MEMBER_TABLE_KEYS)
        group = {"key": key}
        group["type"] = _member_type(_require(entry, "type", key, f'the member type ({" | ".join(MEMBER_TYPES)})'),
                                     f"{key}.type")
        group["section"] = _section_name(_require(entry, "section", key, "the section name"),
                                         f"{key}.section", sections)
        _type_specific(entry, key, group["type"])
        group["tension_only"] = (_bool(entry["tension_only"], f"{key}.tension_only")
                                 if "tension_only" in entry else False)
        ids = _string_array(_require(entry, "ids", key, "the array of member ids"), f"{key}.ids")
        group["ids"] = ids
        group["i"] = _string_array(_require(entry, "i", key, "the array of first nodes"), f"{key}.i", len(ids))
        group["j"] = _string_array(_require(entry, "j", key, "the array of last nodes"), f"{key}.j", len(ids))
        group["pretension_key"] = ((lambda k: f"{key}.pretension[{k}]") if isinstance(entry.get("pretension"), list)
                                   else (lambda k: f"{key}.pretension"))
        for name, kind, sign in (("length0", "length", "positive"), ("pretension", "force", None)):
            value = entry.get(name)
            if isinstance(value, list):
                values = _number_array(value, f"{key}.{name}", len(ids), "ids") * self.q.bare_factor(kind)
                if sign == "positive" and not (values > 0).all():
                    k = int(np.flatnonzero(~(values > 0))[0])
                    raise CaseError(f"{key}.{name}[{k}]", f"expected a positive value, found {_show(value[k])}")
                group[name] = values
            elif value is not None:
                group[name] = np.full(len(ids), self.quantity(value, kind, f"{key}.{name}", sign))
            else:
                group[name] = None
        return group

    def finish_member(self, rec, coords, tiny, sections, materials, length) -> Member:
        """The member of record ``rec``; ``length`` (m) between its end nodes."""
        key = rec["key"]
        a, b = rec["nodes"]
        if rec["interior"] is not None:  # given interior points: every element needs a length too
            chain = [coords[self.index[a]], *map(np.asarray, rec["interior"]), coords[self.index[b]]]
            pieces = np.linalg.norm(np.diff(np.asarray(chain), axis=0), axis=1)
            if pieces.min() <= tiny:
                raise CaseError(f"{key}.interior", f"two consecutive nodes of member \"{rec['id']}\" coincide "
                                "(zero-length element)")
        if length <= tiny:
            raise CaseError(f"{key}.nodes", f'zero length: nodes "{a}" and "{b}" coincide')
        section = sections[rec["section"]]
        self.check_strength(rec["type"], rec["tension_only"], rec["pretension"], section, materials,
                            key, lambda k: f"{key}.pretension")
        if rec["up"] is not None:
            axis = coords[self.index[b]] - coords[self.index[a]]
            up = np.asarray(rec["up"])
            if np.linalg.norm(np.cross(up, axis)) <= 1e-9 * np.linalg.norm(up) * np.linalg.norm(axis):
                raise CaseError(f"{key}.up", f"up = {list(rec['up'])} is parallel to the member axis "
                                f'"{a}" -> "{b}"; it must fix the direction of the local z axis')
        if rec["type"] == "beam":
            self.rotation_nodes.update((a, b, *interior_node_ids(rec["id"], rec["divide"])))
        return Member(id=rec["id"], type=rec["type"], nodes=(a, b), section=rec["section"], key=key,
                      length0=rec["length0"], pretension=rec["pretension"], tension_only=rec["tension_only"],
                      divide=rec["divide"], up=rec["up"], interior=rec["interior"])

    def check_strength(self, mtype, tension_only, pretension, section, materials, key, pretension_key):
        """Section needs of a member type, and a pretension the member can take.

        ``pretension`` is None, a float or an array (member table);
        ``pretension_key(k)`` is the key path of entry k.
        """
        if mtype == "beam":
            missing = [n for n in ("Iy", "Iz", "J") if getattr(section, n) is None]
            if missing:
                raise CaseError(f"{key}.section", f'section "{section.name}" has no {", ".join(missing)}: '
                                "beam members need Iy, Iz and J on their section")
        if pretension is None:
            return
        EA = materials[section.material].E * section.area
        if isinstance(pretension, float) and pretension >= 0.0 and 1.0 + pretension / EA > 0.0:
            return  # the usual single member, without building arrays (long-form nets have 10^4 of them)
        pretension = np.asarray(pretension, dtype=float)
        if mtype == "cable" or tension_only:
            bad = np.flatnonzero(pretension < 0)
            if bad.size:
                raise CaseError(pretension_key(int(bad[0])),
                                f"a {'cable' if mtype == 'cable' else 'tension-only bar'} cannot be pretensioned "
                                f"in compression, found {pretension.flat[bad[0]]:.6g} N")
        bad = np.flatnonzero(1.0 + pretension / EA <= 0)
        if bad.size:
            raise CaseError(pretension_key(int(bad[0])),
                            f"compression {pretension.flat[bad[0]]:.6g} N reaches EA = {EA:.6g} N: "
                            "no unstressed length gives it")

    def finish_group(self, group, coords, tiny, sections, materials) -> list[Member]:
        key = group["key"]
        rows = []
        for end in ("i", "j"):
            names = group[end]
            try:
                rows.append(np.fromiter(map(self.index.__getitem__, names), dtype=np.int64, count=len(names)))
            except KeyError as exc:
                k = names.index(exc.args[0])
                raise CaseError(f"{key}.{end}[{k}]", f'no node named "{names[k]}"'
                                + _suggest(names[k], self.index)) from None
        lengths = np.linalg.norm(coords[rows[1]] - coords[rows[0]], axis=1)
        bad = np.flatnonzero(lengths <= tiny)
        if bad.size:
            k = int(bad[0])
            a, b = group["i"][k], group["j"][k]
            what = f'both ends are node "{a}"' if a == b else f'nodes "{a}" and "{b}" coincide'
            raise CaseError(f"{key}.ids[{k}]", f'member "{group["ids"][k]}" has zero length: {what}')
        section = sections[group["section"]]
        self.check_strength(group["type"], group["tension_only"], group["pretension"], section, materials,
                            key, group["pretension_key"])
        n = len(group["ids"])
        if group["type"] == "beam":
            self.rotation_nodes.update(group["i"])
            self.rotation_nodes.update(group["j"])
        length0 = group["length0"].tolist() if group["length0"] is not None else [None] * n
        pretension = group["pretension"].tolist() if group["pretension"] is not None else [None] * n
        keys = [f"{key}.ids[{k}]" for k in range(n)]
        mtype, section_name, tension_only = group["type"], group["section"], group["tension_only"]
        with _collector_paused():
            return [Member(mid, mtype, (a, b), section_name, mkey, l0, pt, tension_only)
                    for mid, a, b, mkey, l0, pt in zip(group["ids"], group["i"], group["j"], keys,
                                                       length0, pretension)]

    # -- supports ---------------------------------------------------------------
    def supports(self, value) -> dict[str, tuple[bool, ...]]:
        out = {}
        for name, code in _table(value, "supports", "a table of support codes").items():
            key = key_join("supports", name)
            self.node(name, key)
            if not isinstance(code, str) or support_mask(code) is None:
                found = _show(code) if isinstance(code, str) else describe_value(code)
                raise CaseError(key, f"unknown support code {found} "
                                '(valid: any space-separated set of x y z rx ry rz, or "all", or "pin")')
            mask = support_mask(code)
            rotations = [d for d, on in zip(DIRECTIONS[3:], mask[3:]) if on]
            if rotations and code.split() != ["all"] and name not in self.rotation_nodes:
                raise CaseError(key, f'node "{name}" has no rotations (it is joined to no beam), so '
                                f'{" ".join(rotations)} {"restrains" if len(rotations) == 1 else "restrain"} nothing; '
                                'use "x y z" (or "pin", "all")')
            out[name] = mask
        return out

    def joined_node(self, name: str, key: str, consequence: str) -> None:
        """A node that carries a load, support movement or target must be joined to a member."""
        if name not in self.joined:
            raise CaseError(key, f'node "{name}" is joined to no member: {consequence}; '
                            "join the node to a member or remove the entry")

    def node(self, name, key) -> str:
        """Check that a node id exists (declared or interior)."""
        if not isinstance(name, str):
            raise CaseError(key, f"expected a node id (a string), found {describe_value(name)}")
        if name not in self.index:
            raise CaseError(key, f'no node named "{name}"' + _suggest(name, self.index))
        return name

    # -- loads ------------------------------------------------------------------
    def loads(self, value) -> list:
        if not isinstance(value, list):
            raise CaseError("loads", f"expected an array of tables ([[loads]]), found {describe_value(value)}")
        return [self.load(entry, f"loads[{k}]") for k, entry in enumerate(value)]

    def load(self, entry, key):
        entry = _table(entry, key)
        _check_keys(entry, key, LOAD_KEYS)
        case = _name(_require(entry, "case", key, 'the load case name, e.g. case = "dead"'), f"{key}.case",
                     "a load case name")
        present = set(entry) - {"case"}
        kinds = [k for k in ("self_weight", "node", "members", "path") if k in entry]
        forms = {
            "self_weight": [{"self_weight", "factor"}],
            "node": [{"node", "force", "moment"}, {"node", "displacement", "rotation"}],
            "members": [{"members", "per_length"}, {"members", "temperature"}],
            "path": [{"path", "per_length", "start", "end"}],
        }
        needed = {"node": ({"force", "moment"}, {"displacement", "rotation"}),
                  "members": ({"per_length"}, {"temperature"}), "path": ({"per_length"},)}
        valid = len(kinds) == 1 and any(present <= form for form in forms[kinds[0]])
        if valid and kinds[0] in needed:
            valid = any(present & must for must in needed[kinds[0]])
        if not valid:
            found = ", ".join(sorted(present)) or "nothing but case"
            raise CaseError(key, f"cannot tell what load this is from its keys ({found}); valid forms: {LOAD_FORMS}")
        kind = kinds[0]
        if kind == "self_weight":
            if entry["self_weight"] is not True:
                raise CaseError(f"{key}.self_weight", f"expected true, found {describe_value(entry['self_weight'])} "
                                "(leave the load out instead)")
            factor = self.optional(entry, "factor", "dimensionless", key, default=1.0)
            if not factor > 0.0:
                raise CaseError(f"{key}.factor", f"expected a self-weight factor > 0, found {_show(entry['factor'])} "
                                "(weight acts downwards; leave the load out for none)")
            return SelfWeight(case=case, key=key, factor=factor)
        if kind == "node":
            node = self.node(entry["node"], f"{key}.node")
            self.joined_node(node, f"{key}.node",
                             "a load there acts on no member and would vanish into a reaction"
                             if "displacement" not in entry and "rotation" not in entry
                             else "moving it would move no member")
            if "force" in entry or "moment" in entry:
                force = self.q.vector(entry["force"], "force", f"{key}.force") if "force" in entry else (0.0, 0.0, 0.0)
                moment = None
                if "moment" in entry:
                    moment = self.q.vector(entry["moment"], "moment", f"{key}.moment")
                    if any(moment) and node not in self.rotation_nodes:
                        raise CaseError(f"{key}.moment", f'node "{node}" has no rotations (only nodes joined '
                                        "to beams take moments)")
                return NodalLoad(case=case, node=node, force=force, moment=moment, key=key)
            return self.displacement(entry, case, node, key)
        if kind == "members":
            patterns = self.patterns(entry["members"], f"{key}.members")
            if "per_length" in entry:
                return MemberLoad(case=case, members=patterns, key=key,
                                  per_length=self.q.vector(entry["per_length"], "force_per_length",
                                                           f"{key}.per_length"))
            delta_t = self.quantity(entry["temperature"], "temperature_difference", f"{key}.temperature")
            if not any(self.expands[self.member_list[k].section] for k in self.member_index.indices(patterns)):
                raise CaseError(f"{key}.temperature", "no member it applies to has a thermal expansion "
                                "coefficient (alpha of its material is 0 or missing), so the temperature "
                                "change would do nothing; give the material an alpha")
            return TemperatureLoad(case=case, members=patterns, key=key, delta_t=delta_t)
        return self.patch(entry, case, key)

    def displacement(self, entry, case, node, key) -> PrescribedDisplacement:
        mask = self.supports_map.get(node, (False,) * 6)
        values = []
        for name, kind, offset in (("displacement", "length", 0), ("rotation", "angle", 3)):
            if name not in entry:
                values.append(None)
                continue
            vector = self.q.vector(entry[name], kind, f"{key}.{name}")
            kept = []
            for d, v in enumerate(vector):
                if mask[offset + d]:
                    kept.append(v)
                elif v == 0.0:
                    kept.append(None)
                else:
                    code = " ".join(x for x, m in zip(DIRECTIONS, mask) if m)
                    support = f"its support: {code}" if code else "it has no support"
                    raise CaseError(f"{key}.{name}[{d}]", f'node "{node}" is not restrained in '
                                    f"{DIRECTIONS[offset + d]} ({support}); only restrained "
                                    "directions can be given a movement")
            if name == "rotation" and node not in self.rotation_nodes and any(vector):
                # reached with support "all" only: its rx ry rz stand for no DOF here
                raise CaseError(f"{key}.rotation", f'node "{node}" has no rotations (it is joined to no beam); '
                                "a prescribed rotation would do nothing")
            values.append(tuple(kept))
        displacement = values[0] if values[0] is not None else (None, None, None)
        return PrescribedDisplacement(case=case, node=node, displacement=displacement, rotation=values[1], key=key)

    def patterns(self, value, key) -> tuple[str, ...]:
        patterns = _names_list(value, key, "member ids or patterns", allow_single=True)
        for k in self.member_index.unmatched(patterns):
            where = f"{key}[{k}]" if isinstance(value, list) else key
            raise CaseError(where, f'"{patterns[k]}" matches no member' + _suggest(patterns[k], self.member_ids))
        return patterns

    def joined_pairs(self) -> set[tuple[str, str]]:
        """Node pairs joined by an element (interior chains included), built on first use."""
        if getattr(self, "_pairs", None) is None:
            pairs = set()
            for m in self.member_list:
                chain = (m.nodes[0], *interior_node_ids(m.id, m.divide), m.nodes[1])
                for a, b in zip(chain[:-1], chain[1:]):
                    pairs.add((a, b) if a < b else (b, a))
            self._pairs = pairs
        return self._pairs

    def patch(self, entry, case, key) -> PatchLoad:
        path = _names_list(entry["path"], f"{key}.path", "node ids")
        if len(path) < 2:
            raise CaseError(f"{key}.path", f"a path needs at least two nodes, found {len(path)}")
        for k, name in enumerate(path):
            self.node(name, f"{key}.path[{k}]")
        pairs = self.joined_pairs()
        for k, (a, b) in enumerate(zip(path[:-1], path[1:])):
            if ((a, b) if a < b else (b, a)) not in pairs:
                raise CaseError(f"{key}.path[{k + 1}]", f'nodes "{a}" and "{b}" are not joined by a member '
                                "(consecutive path nodes must be the two ends of one element)")
        points = self.coords[[self.index[n] for n in path]]
        total = float(np.linalg.norm(np.diff(points, axis=0), axis=1).sum())
        start = self.optional(entry, "start", "length", key, default=0.0)
        end = self.optional(entry, "end", "length", key)
        # a path length typed from a drawing may differ from the float sum in the last digits
        slack = 1e-9 * max(total, 1.0)
        if start < 0.0 or (end is None and start >= total):
            raise CaseError(f"{key}.start", f"expected 0 <= start < path length ({total:.6g} m), "
                            f"found {_show(entry['start'])}")
        if end is not None:
            if end <= start:
                raise CaseError(f"{key}.end", f"expected end > start ({start:.6g} m), found {_show(entry['end'])}")
            if end > total + slack:
                raise CaseError(f"{key}.end", f"end = {_show(entry['end'])} is beyond the path length "
                                f"{total:.6g} m")
            end = min(end, total)
        per_length = self.q.vector(entry["per_length"], "force_per_length", f"{key}.per_length")
        return PatchLoad(case=case, path=path, per_length=per_length, start=start, end=end, key=key)

    # -- combinations, shape, analysis -----------------------------------------
    def combinations(self, value, cases) -> list[Combination]:
        if not isinstance(value, list):
            raise CaseError("combinations", f"expected an array of tables ([[combinations]]), "
                            f"found {describe_value(value)}")
        out, seen = [], {}
        for k, entry in enumerate(value):
            key = f"combinations[{k}]"
            entry = _table(entry, key)
            _check_keys(entry, key, COMBINATION_KEYS)
            name = _name(_require(entry, "name", key, "the combination name"), f"{key}.name", "a combination name")
            if name in seen:
                raise CaseError(f"{key}.name", f'duplicate combination name "{name}" (first at {seen[name]})')
            seen[name] = key
            factors_key = f"{key}.factors"
            table = _table(_require(entry, "factors", key, "the factors, e.g. factors = { dead = 1.0 }"),
                           factors_key, "an inline table of load case = factor")
            if not table:
                raise CaseError(factors_key, "expected at least one load case = factor, found an empty table")
            factors = {}
            for case, factor in table.items():
                fkey = key_join(factors_key, case)
                if case not in cases:
                    raise CaseError(fkey, f'no load defines the load case "{case}"'
                                    + _suggest(case, sorted(cases), listed=1000))
                factors[case] = self.quantity(factor, "dimensionless", fkey)
                if factors[case] < 0.0 and case in self.weight_cases:
                    raise CaseError(fkey, f'a negative factor on load case "{case}" would turn its self-weight '
                                    "upwards; weight acts downwards (use a factor >= 0)")
            out.append(Combination(name=name, factors=factors, key=key))
        return out

    def shape(self, value, cases) -> ShapeSpec:
        table = _table(value, "shape")
        _check_keys(table, "shape", SHAPE_KEYS)
        method = _string(table.get("method", "target"), "shape.method")
        if method not in SHAPE_METHODS:
            raise CaseError("shape.method", f'unknown form-finding method "{method}" '
                            f'(known: {", ".join(SHAPE_METHODS)})')
        permanent = ()
        if "permanent" in table:
            raw = table["permanent"]
            permanent = () if raw == [] else _names_list(raw, "shape.permanent", "load case names")
            for k, case in enumerate(permanent):
                if case not in cases:
                    raise CaseError(f"shape.permanent[{k}]", f'no load defines the load case "{case}"'
                                    + _suggest(case, sorted(cases), listed=1000))
        own = {"target": ("targets", "adjust"), "force-density": ("force_density",)}
        for other, keys in own.items():
            for name in keys:
                if other != method and name in table:
                    raise CaseError(f"shape.{name}", f'"{name}" belongs to method "{other}", '
                                    f'but method is "{method}"')
        for name in own[method]:
            if name not in table:
                raise CaseError(f"shape.{name}", f'missing: method "{method}" needs {" and ".join(own[method])}')
        targets, adjust, force_density = {}, [], {}
        if method == "target":
            for name, coords in _table(table["targets"], "shape.targets", "a table node = { x, y, z }").items():
                key = key_join("shape.targets", name)
                self.node(name, key)
                self.joined_node(name, key, "no member length can move it, so the target cannot be reached")
                coords = _table(coords, key, "a table of x, y and/or z, e.g. { z = 0.0 }")
                if not coords:
                    raise CaseError(key, "expected at least one of x, y, z")
                _check_keys(coords, key, ("x", "y", "z"))
                targets[name] = {axis: self.quantity(v, "length", key_join(key, axis)) for axis, v in coords.items()}
            if not targets:
                raise CaseError("shape.targets", "expected at least one target node")
            groups = table["adjust"]
            if isinstance(groups, Mapping):
                groups = [groups]
            if not isinstance(groups, list) or not groups:
                raise CaseError("shape.adjust", "expected one or more [[shape.adjust]] tables, "
                                f"found {describe_value(groups)}")
            for k, group in enumerate(groups):
                key = f"shape.adjust[{k}]"
                group = _table(group, key)
                _check_keys(group, key, ADJUST_KEYS)
                members = self.patterns(_require(group, "members", key, 'member ids or patterns, e.g. members = "H*"'),
                                        f"{key}.members")
                together = _bool(group["together"], f"{key}.together") if "together" in group else False
                adjust.append(AdjustGroup(members=members, together=together, key=key))
        else:
            table_fd = _table(table["force_density"], "shape.force_density", 'a table pattern = force density')
            if not table_fd:
                raise CaseError("shape.force_density", "expected at least one pattern = force density")
            for pattern, density in table_fd.items():
                key = key_join("shape.force_density", pattern)
                self.patterns(pattern, key)
                q = self.quantity(density, "force_per_length", key)
                if q == 0.0:
                    raise CaseError(key, "a force density of 0 removes the members from the net; "
                                    "expected a non-zero value")
                force_density[pattern] = q
        return ShapeSpec(
            method=method, permanent=permanent,
            tolerance=self.optional(table, "tolerance", "length", "shape", "positive", default=ShapeSpec.tolerance),
            targets=targets, adjust=tuple(adjust), force_density=force_density,
            fabrication_temperature=self.optional(table, "fabrication_temperature", "temperature_difference", "shape"),
            max_iterations=(_integer(table["max_iterations"], "shape.max_iterations", 1)
                            if "max_iterations" in table else ShapeSpec.max_iterations),
        )

    def beam_reference(self, value) -> dict[str, BeamReference]:
        """``[beam_reference]``: stress-free position and rotation of beam nodes (m, rad)."""
        out = {}
        for name, entry in _table(value, "beam_reference", "a table of node ids").items():
            key = key_join("beam_reference", name)
            self.node(name, key)
            if name not in self.rotation_nodes:
                raise CaseError(key, f'node "{name}" is joined to no beam; a stress-free geometry is '
                                "given for beam nodes only")
            entry = _table(entry, key, "a table { position = [x, y, z], rotation = [rx, ry, rz] }")
            _check_keys(entry, key, BEAM_REFERENCE_KEYS)
            position = self.q.vector(_require(entry, "position", key, "the stress-free position [x, y, z]"),
                                     "length", f"{key}.position")
            rotation = (self.q.vector(entry["rotation"], "angle", f"{key}.rotation")
                        if "rotation" in entry else (0.0, 0.0, 0.0))
            for part, vector in (("position", position), ("rotation", rotation)):
                bad = [k for k, v in enumerate(vector) if not math.isfinite(v)]
                if bad:
                    raise CaseError(f"{key}.{part}[{bad[0]}]", f"expected a finite number, found {vector[bad[0]]!r}")
            if max(map(abs, position)) > MAX_COORDINATE:
                raise CaseError(f"{key}.position", _far_message(position))
            out[name] = BeamReference(name, position, rotation, key)
        return out

    def analysis(self, value) -> AnalysisSettings:
        table = _table(value, "analysis")
        _check_keys(table, "analysis", ANALYSIS_KEYS)
        defaults = AnalysisSettings()
        solver = _string(table.get("solver", defaults.solver), "analysis.solver")
        if solver not in SOLVERS:
            raise CaseError("analysis.solver", f'unknown linear solver "{solver}" (known: {", ".join(SOLVERS)})')
        problem = solver_unavailable(solver)
        if problem:
            raise CaseError("analysis.solver", problem)
        return AnalysisSettings(
            increments=_integer(table.get("increments", defaults.increments), "analysis.increments", 1),
            tolerance=self.optional(table, "tolerance", "dimensionless", "analysis", "positive",
                                    default=defaults.tolerance),
            max_iterations=_integer(table.get("max_iterations", defaults.max_iterations),
                                    "analysis.max_iterations", 1),
            solver=solver,
            max_cuts=_integer(table.get("max_cuts", defaults.max_cuts), "analysis.max_cuts", 0),
            max_total_iterations=_integer(table.get("max_total_iterations", defaults.max_total_iterations),
                                          "analysis.max_total_iterations", 1),
            max_total_cuts=_integer(table.get("max_total_cuts", defaults.max_total_cuts),
                                    "analysis.max_total_cuts", 0),
            **self.path_control(table),
        )

    def path_control(self, table) -> dict:
        """``[analysis]`` ``control`` and ``track`` as AnalysisSettings fields."""
        control = _string(table.get("control", "load"), "analysis.control")
        if control not in CONTROLS:
            raise CaseError("analysis.control", f'unknown control "{control}"' + _suggest(control, CONTROLS))
        track = table.get("track", [])
        if not isinstance(track, list):
            raise CaseError("analysis.track", f"expected an array of node ids, found {describe_value(track)}")
        names = tuple(self.node(n, f"analysis.track[{k}]") for k, n in enumerate(track))
        seen: dict[str, int] = {}
        for k, n in enumerate(names):
            if n in seen:
                raise CaseError(f"analysis.track[{k}]", f'node "{n}" is tracked twice '
                                f"(first at analysis.track[{seen[n]}])")
            seen[n] = k
        return {"control": control, "track": names}


    def report(self, value) -> dict:
        """``[report]``: ``deck`` node ids or patterns, each matching a node."""
        table = _table(value, "report", 'a table, e.g. [report] deck = ["D*"]')
        _check_keys(table, "report", REPORT_KEYS)
        out = dict(table)
        if "deck" in table:
            deck = _names_list(table["deck"], "report.deck", "node ids or patterns", allow_single=True)
            index = PatternIndex(list(self.index))
            for k in index.unmatched(deck):
                where = f"report.deck[{k}]" if isinstance(table["deck"], list) else "report.deck"
                raise CaseError(where, f'"{deck[k]}" matches no node' + _suggest(deck[k], index.ids))
            out["deck"] = list(deck)
        return out


def solver_unavailable(name: str) -> str:
    """Why the linear solver ``name`` cannot be used here ('' when it can).

    Only the optional PARDISO backend can be missing; asking for it by name
    on a machine without it is an input error, found before any solving.
    """
    if name != "pardiso":
        return ""
    from ..solvers.linear import available_backends

    if "pardiso" in available_backends():
        return ""
    return ('the "pardiso" solver needs the optional package pypardiso, which is not installed or '
            "does not load here (pip install -e '.[fast]'); use \"auto\" or \"superlu\"")


# ---------------------------------------------------------------------------
# helpers of the reader
# ---------------------------------------------------------------------------

def _far_message(point) -> str:
    shown = ", ".join(f"{v:.6g}" for v in point)
    return (f"coordinates [{shown}] m lie beyond {MAX_COORDINATE:.0e} m from the origin, where a double "
            "cannot resolve a structure's geometry; check the units and the value")


@contextlib.contextmanager
def _collector_paused():
    """Pause Python's cyclic garbage collector while creating many objects.

    Tens of thousands of new Member objects in a row set off repeated
    collections, the older-generation ones walking the whole parsed case as
    well; they free nothing here (no reference cycles are made) and cost
    about as much as the creation itself (measured on an 80k-member table:
    0.35 s -> 0.2 s for the whole validation).
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


def _member_type(value, key) -> str:
    mtype = _string(value, key, f'a member type ({" | ".join(MEMBER_TYPES)})')
    if mtype not in MEMBER_TYPES:
        raise CaseError(key, f'unknown member type "{mtype}"' + _suggest(mtype, MEMBER_TYPES))
    return mtype


def _section_name(value, key, sections) -> str:
    name = _name(value, key, "a section name")
    if name not in sections:
        raise CaseError(key, f'no section named "{name}"' + _suggest(name, sections, listed=1000))
    return name


def _type_specific(entry, key, mtype) -> None:
    """Keys that only some member types take."""
    if "tension_only" in entry and mtype != "bar":
        why = " (a cable never takes compression anyway)" if mtype == "cable" else ""
        raise CaseError(f"{key}.tension_only", f"tension_only applies to bar members only, this is a {mtype}{why}")
    if "up" in entry and mtype != "beam":
        raise CaseError(f"{key}.up", f"up applies to beam members only, this is a {mtype}")
    for name in ("length0", "pretension"):
        if name in entry and mtype == "beam":
            raise CaseError(f"{key}.{name}", f"{name} applies to cable and bar members, this is a beam")
    if "length0" in entry and "pretension" in entry:
        raise CaseError(f"{key}.pretension", "give either length0 or pretension, not both")


def _string_array(value, key, length: int | None = None) -> list[str]:
    if not isinstance(value, list):
        raise CaseError(key, f"expected an array of strings, found {describe_value(value)}")
    if length is not None and len(value) != length:
        raise CaseError(key, f"expected {length} entries (as many as ids), found {len(value)}")
    if not set(map(type, value)) <= {str}:
        k = next(k for k, v in enumerate(value) if type(v) is not str)
        raise CaseError(f"{key}[{k}]", f"expected a string, found {describe_value(value[k])}")
    return value


def _number_array(value, key, length: int, against: str) -> np.ndarray:
    """Bare numbers of a compact table as floats (no unit strings: speed)."""
    if not isinstance(value, list):
        raise CaseError(key, f"expected an array of numbers, found {describe_value(value)}")
    if len(value) != length:
        raise CaseError(key, f"expected {length} numbers (as many as {against}), found {len(value)}")
    if not set(map(type, value)) <= {int, float}:
        k = next(k for k, v in enumerate(value) if type(v) not in (int, float))
        raise CaseError(f"{key}[{k}]", f"expected a number (compact tables take bare numbers in the "
                        f"file's units), found {describe_value(value[k])}")
    try:
        array = np.array(value, dtype=float)
    except OverflowError:
        array = np.array([float(v) if abs(v) < 1e308 else math.inf for v in value])
    bad = np.flatnonzero(~np.isfinite(array))
    if bad.size:
        k = int(bad[0])
        raise CaseError(f"{key}[{k}]", f"expected a finite number, found {value[k]!r}")
    return array


def _unique(ids: list[str], key: str, what: str, earlier, where) -> None:
    """Ids of a compact table must be non-empty, unique and not in ``earlier``.

    ``where(name)`` gives the key path of an earlier id (called on error only).
    """
    distinct = set(ids)
    if len(distinct) != len(ids) or not distinct.isdisjoint(earlier):
        seen = {}
        for k, name in enumerate(ids):
            if name in earlier:
                raise CaseError(f"{key}[{k}]", f'duplicate {what} "{name}" (first at {where(name)})')
            if name in seen:
                raise CaseError(f"{key}[{k}]", f'duplicate {what} "{name}" (first at {key}[{seen[name]}])')
            seen[name] = k
    if not all(map(str.strip, distinct)):
        k = next(k for k, name in enumerate(ids) if not name.strip())
        raise CaseError(f"{key}[{k}]", f"expected a {what}, found an empty string")


def _interior_positions(members, owners, nodes) -> dict[str, tuple[float, float, float]]:
    """Positions of interior nodes; ends may be interior nodes of other members.

    ``members`` are :class:`Member` objects or reader records (dicts);
    ``owners`` maps interior id -> (member index, k).
    """
    def field(m, name):
        return m[name] if isinstance(m, dict) else getattr(m, name)

    done: set[int] = set()             # indices of members whose interior nodes are placed
    positions: dict[str, tuple[float, float, float]] = {}

    def end_position(name):
        if name in nodes:
            return np.asarray(nodes[name], dtype=float)
        if name in positions:
            return np.asarray(positions[name])
        raise KeyError(name)

    for start in range(len(members)):
        if field(members[start], "divide") < 2 or start in done:
            continue
        stack, active = [start], {start}
        while stack:
            index = stack[-1]
            member = members[index]
            waiting = None
            given = field(member, "interior")
            for name in field(member, "nodes") if given is None else ():
                if name not in nodes and name not in positions:
                    if name not in owners:
                        key = field(member, "key") or f"members[{index}]"
                        raise CaseError(f"{key}.nodes", f'no node named "{name}"')
                    waiting = owners[name][0]
                    break
            if waiting is None:
                n = field(member, "divide")
                if given is not None:
                    placed = [tuple(p) for p in given]
                else:
                    a, b = (end_position(name) for name in field(member, "nodes"))
                    placed = [tuple((a + (b - a) * k / n).tolist()) for k in range(1, n)]
                positions.update(zip(interior_node_ids(field(member, "id"), n), placed))
                done.add(index)
                stack.pop()
                active.discard(index)
            elif waiting in active:
                loop = " -> ".join(f'"{field(members[i], "id")}"' for i in stack[stack.index(waiting):] + [waiting])
                key = field(member, "key") or f"members[{index}]"
                raise CaseError(f"{key}.nodes", f"divided members end on each other's interior nodes in a loop "
                                f"({loop}); their positions cannot be found")
            else:
                stack.append(waiting)
                active.add(waiting)
    return positions
