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

import math
import re
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

try:  # the compiled tomli wheels parse big compact tables ~2.5x faster than tomllib
    import tomli as _toml
except ImportError:  # pragma: no cover - depends on the installation
    import tomllib as _toml
try:  # a parser compiled from Rust reads a big case 2.5-3x faster again (2.8 MB: 0.11 s against 0.3 s)
    import rtoml as _fast_toml
except ImportError:  # pragma: no cover - depends on the installation
    _fast_toml = None

from ..errors import CaseError
from ..patterns import PatternIndex
from ..spec import CaseSpec, Material, Section, SelfWeight
from .units import STANDARD_GRAVITY, Quantities, describe_value, unit_system
# the base names other readers and tests take from here are re-exported too
from .case_base import (checked_sign, CONTROLS, interior_node_ids, key_join, MATERIAL_KEYS, MAX_COORDINATE, MAX_DOFS,
                        MAX_ELEMENTS, NODE_TABLE_KEYS, NOT_IMPLEMENTED, PASS_THROUGH_KEYS, SECTION_KEYS,
                        SHAPE_METHODS, solver_unavailable, SOLVERS, TOP_LEVEL_KEYS, _check_keys, _integer,
                        _interior_positions, _name, _number_array, _require, _show, _string, _string_array,
                        _suggest, _table, _unique)
from .case_loads import LoadTables
from .case_members import MemberTables

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


# ---------------------------------------------------------------------------
# public helpers
# ---------------------------------------------------------------------------

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
    data = _fast_parse(text)
    try:
        if data is None:
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


def _fast_parse(text: str) -> dict | None:
    """The parsed TOML by the compiled parser, or None when it is not
    installed or finds anything wrong: tomli then parses the text again and
    reports the error, so every message about a file's syntax comes from one
    parser.  Both follow the same TOML version (tests/test_case_input.py
    compares them on every shipped case and on edge cases of the syntax)."""
    if _fast_toml is None:
        return None
    try:
        return _fast_toml.loads(text)
    except Exception:   # any failure: the reference parser decides and explains
        return None


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
# the reader
# ---------------------------------------------------------------------------

class _Reader(MemberTables, LoadTables):
    """One pass over a parsed case; raises at the first problem."""

    def __init__(self, data: Mapping[str, Any], source: str | None):
        self.data = data
        self.source = source

    # -- quantities ---------------------------------------------------------
    def quantity(self, value, kind, key, sign: str | None = None) -> float:
        """SI value; ``sign`` is None, "positive" or "nonnegative"."""
        return checked_sign(self.q.to_si(value, kind, key), sign, key, _show(value))

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

