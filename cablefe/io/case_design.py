"""Reader of ``[design]``, ``[[design.size]]`` and ``[catalogues.*]``.

Called by :mod:`cablefe.io.case` once materials and members are known.
Everything is validated here; a mistake is a :class:`CaseError` naming its
key path (``design.size[0].catalogue``).

A catalogue is a ``[catalogues.NAME]`` table or a CSV file ``NAME.csv``
beside the case, whose header gives each column's unit in brackets::

    name,area [mm^2],breaking_load [kN],weight [kN/m],diameter [mm]
    HS-100,100,160,0.009,13

Columns: ``name`` and ``area`` (required), ``breaking_load``, ``weight``,
``diameter``, and for beams ``Iy``, ``Iz``, ``J``, ``Wy``, ``Wz``; a
``material`` column names the material (the same on every row).  A header without a unit means the file's units.  A catalogue read
from CSV is put into the returned raw tables as ``[catalogues.NAME]`` (values
with their units), so a case written from them (``shaped.toml``,
``sized.toml``) reads back without the CSV beside it.
"""
from __future__ import annotations

import copy
import csv
import re
from pathlib import Path
from typing import Any, Mapping, Sequence

from ..errors import CaseError
from ..patterns import match_ids
from ..spec import Catalogue, CatalogueSection, DesignSpec, DESIGN_DEFAULTS, Material, Member, SizeGroup
from .case_base import _check_keys as _keys, _table, result_reference
from .units import Quantities, describe_value

DESIGN_KEYS = ("results", "members", "cable_factor", "min_tension", "deflection_limit", "yield_factor",
               "permanent", "span", "size", "max_sizing_iterations")
SIZE_KEYS = ("members", "catalogue")
CATALOGUE_KEYS = ("material", "sections")
CATALOGUE_SECTION_KEYS = ("name", "area", "breaking_load", "weight", "diameter", "Iy", "Iz", "J", "Wy", "Wz")
_KINDS = {"area": "area", "breaking_load": "force", "weight": "force_per_length", "diameter": "length",
          "Iy": "second_moment", "Iz": "second_moment", "J": "second_moment",
          "Wy": "section_modulus", "Wz": "section_modulus"}
_HEADER = re.compile(r"\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:\[(.*)\])?\s*\Z")


def _patterns(value, key) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not value or not all(isinstance(v, str) and v for v in value):
        raise CaseError(key, f"expected an array of names or patterns such as [\"H*\"], found {describe_value(value)}")
    return tuple(value)


def _matches(pattern: str, names: Sequence[str]) -> list[str]:
    return match_ids(pattern, list(names))


def _factor(design, name, key, q: Quantities, minimum_exclusive=True) -> float:
    value = q.to_si(design[name], "dimensionless", f"{key}.{name}")
    if minimum_exclusive and not value > 0.0 or not minimum_exclusive and value < 0.0:
        raise CaseError(f"{key}.{name}", f"expected a {'positive' if minimum_exclusive else 'non-negative'} "
                                         f"number, found {design[name]!r}")
    return value


def result_names(data: Mapping) -> list[str]:
    """Names of the results a case solves: its combinations, else its load cases alone."""
    combos = data.get("combinations", [])
    names = [c.get("name") for c in combos if isinstance(c, Mapping)]
    if names:
        return [str(n) for n in names]
    seen: dict[str, None] = {}
    for load in data.get("loads", []):
        if isinstance(load, Mapping) and isinstance(load.get("case"), str):
            seen.setdefault(load["case"], None)
    return list(seen)


def study_names(data: Mapping) -> list[str]:
    studies = data.get("studies", [])
    if isinstance(studies, Mapping):
        studies = [studies]
    return [str(s["name"]) for s in studies if isinstance(s, Mapping) and "name" in s]


def read_design(data: Mapping[str, Any], q: Quantities, materials: Mapping[str, Material],
                members: Sequence[Member], source: str | None):
    """Validate ``[design]`` and ``[catalogues]``.

    Returns
    -------
    design : DesignSpec or None
    catalogues : dict name -> Catalogue (tables and the CSV files used)
    raw : the parsed case, with CSV catalogues put in as tables (a copy when changed)
    """
    catalogues = {}
    if "catalogues" in data:
        for name, entry in _table(data["catalogues"], "catalogues", "a table of catalogues").items():
            catalogues[name] = _catalogue_table(name, entry, q, materials)
    if "design" not in data:
        return None, catalogues, data
    key = "design"
    design = _table(data["design"], key)
    _keys(design, key, DESIGN_KEYS)
    names = result_names(data)
    targets = names + study_names(data)
    results = _patterns(design.get("results", ["*"]), f"{key}.results")
    for k, p in enumerate(results):
        if not _matches(p, targets):
            raise CaseError(f"{key}.results[{k}]", f'"{p}" matches no result or study (known: '
                                                   f'{", ".join(targets) or "none"})')
    ids = [m.id for m in members]
    checked = _patterns(design.get("members", ["*"]), f"{key}.members")
    for k, p in enumerate(checked):
        if not _matches(p, ids):
            raise CaseError(f"{key}.members[{k}]", f'"{p}" matches no member')
    values = {}
    for name in DESIGN_DEFAULTS:
        if name in design:
            values[name] = _factor(design, name, key, q, minimum_exclusive=(name != "min_tension"))
    if "yield_factor" in values and values["yield_factor"] < 1.0 or "cable_factor" in values and values["cable_factor"] < 1.0:
        bad = "yield_factor" if values.get("yield_factor", 1.0) < 1.0 else "cable_factor"
        raise CaseError(f"{key}.{bad}", f"expected a factor >= 1, found {design[bad]!r}")
    placeholders = tuple(n for n in DESIGN_DEFAULTS if n not in values)
    permanent = result_reference(design, "permanent", key, names, "a result holding the permanent state")
    span = None
    if "span" in design:
        span = q.to_si(design["span"], "length", f"{key}.span")
        if not span > 0:
            raise CaseError(f"{key}.span", f"expected a positive length, found {design['span']!r}")
    iterations = 10
    if "max_sizing_iterations" in design:
        iterations = design["max_sizing_iterations"]
        if type(iterations) is not int or iterations < 1:
            raise CaseError(f"{key}.max_sizing_iterations", f"expected a whole number >= 1, found "
                                                            f"{describe_value(iterations)}")
    groups, raw_catalogues = [], {}
    size = design.get("size", [])
    if isinstance(size, Mapping):
        size = [size]
    if not isinstance(size, list):
        raise CaseError(f"{key}.size", f"expected an array of tables [[design.size]], found {describe_value(size)}")
    owner: dict[str, int] = {}
    by_id = {m.id: m for m in members}
    for g, entry in enumerate(size):
        gkey = f"{key}.size[{g}]"
        entry = _table(entry, gkey)
        _keys(entry, gkey, SIZE_KEYS)
        if "members" not in entry or "catalogue" not in entry:
            raise CaseError(gkey, 'expected members = "H*" and catalogue = "NAME"')
        pats = _patterns(entry["members"], f"{gkey}.members")
        matched = [i for p in pats for i in _matches(p, ids)]
        if not matched:
            raise CaseError(f"{gkey}.members", f"{list(pats)} matches no member")
        for mid in matched:
            if mid in owner and owner[mid] != g:
                raise CaseError(f"{gkey}.members", f"member {mid} is already sized by design.size[{owner[mid]}]")
            owner[mid] = g
        cname = entry["catalogue"]
        if not isinstance(cname, str) or not cname:
            raise CaseError(f"{gkey}.catalogue", f"expected a catalogue name, found {describe_value(cname)}")
        if cname not in catalogues:
            catalogues[cname], raw_catalogues[cname] = _catalogue_csv(cname, source, q, materials,
                                                                      f"{gkey}.catalogue")
        cat = catalogues[cname]
        types = {by_id[m].type for m in matched}
        if "beam" in types:
            for s in cat.sections:
                if s.Iy is None or s.Iz is None or s.J is None:
                    raise CaseError(f"{gkey}.catalogue", f"section {s.name} of catalogue {cname} has no Iy, Iz "
                                                         f"and J, which beams ({', '.join(m for m in matched if by_id[m].type == 'beam')[:60]}) need")
        _whole_table_groups(data, set(matched), gkey)
        groups.append(SizeGroup(members=pats, catalogue=cname, key=gkey))
    spec = DesignSpec(results=results, members=checked, placeholders=placeholders, permanent=permanent,
                      span=span, size=tuple(groups), max_sizing_iterations=iterations, **values)
    if raw_catalogues:
        data = copy.copy(dict(data))
        data["catalogues"] = {**dict(data.get("catalogues", {})), **raw_catalogues}
    return spec, catalogues, data


def _whole_table_groups(data, matched: set, key) -> None:
    tables = data.get("member_table", [])
    for g, t in enumerate([tables] if isinstance(tables, Mapping) else tables):
        tids = set(t.get("ids", [])) if isinstance(t, Mapping) else set()
        if tids & matched and not tids <= matched:
            raise CaseError(f"{key}.members", f"matches part of member_table[{g}], whose members share one "
                                              "section: size whole member_table groups")


def _section(entry: Mapping, key: str, q: Quantities) -> CatalogueSection:
    _keys(entry, key, CATALOGUE_SECTION_KEYS)
    name = entry.get("name")
    if not isinstance(name, str) or not name:
        raise CaseError(f"{key}.name", f"expected a section name, found {describe_value(name)}")
    if "area" not in entry:
        raise CaseError(key, 'expected the metallic area, e.g. area = "100 mm^2"')
    vals = {}
    for field, kind in _KINDS.items():
        if field in entry:
            v = q.to_si(entry[field], kind, f"{key}.{field}")
            if not v > 0:
                raise CaseError(f"{key}.{field}", f"expected a positive value, found {entry[field]!r}")
            vals[field] = v
    return CatalogueSection(name=name, **vals)


def _ordered(name, sections, key) -> tuple[CatalogueSection, ...]:
    seen = set()
    for s in sections:
        if s.name in seen:
            raise CaseError(key, f"section name {s.name} appears twice")
        seen.add(s.name)
    # smallest first: sizing walks up the catalogue
    return tuple(sorted(sections, key=lambda s: (s.area, s.breaking_load or 0.0)))


def _catalogue_table(name, entry, q, materials) -> Catalogue:
    key = f"catalogues.{name}"
    entry = _table(entry, key)
    _keys(entry, key, CATALOGUE_KEYS)
    material = entry.get("material")
    if not isinstance(material, str) or material not in materials:
        raise CaseError(f"{key}.material", f"expected the name of a material (known: {', '.join(materials)}), "
                                           f"found {describe_value(material)}")
    rows = entry.get("sections")
    if not isinstance(rows, list) or not rows:
        raise CaseError(f"{key}.sections", f"expected a non-empty array of sections, found {describe_value(rows)}")
    sections = [_section(_table(r, f"{key}.sections[{k}]"), f"{key}.sections[{k}]", q) for k, r in enumerate(rows)]
    return Catalogue(name=name, material=material, sections=_ordered(name, sections, f"{key}.sections"),
                     source=key, key=key)


def _catalogue_csv(name, source, q, materials, key):
    if source is None:
        raise CaseError(key, f'no [catalogues.{name}] table (a case built in code has no folder for "{name}.csv")')
    path = Path(source).parent / f"{name}.csv"
    if not path.is_file():
        raise CaseError(key, f'no [catalogues.{name}] table and no file {path}')
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise CaseError(key, f"cannot read {path}: {exc}") from None
    rows = [r for r in rows if r and any(c.strip() for c in r) and not r[0].lstrip().startswith("#")]
    if len(rows) < 2:
        raise CaseError(key, f"{path}: expected a header line and at least one section")
    columns = []
    for c, text in enumerate(rows[0]):
        m = _HEADER.match(text)
        if not m or m.group(1) not in CATALOGUE_SECTION_KEYS + ("material",):
            raise CaseError(key, f"{path}: column {c + 1} header {text!r}: expected one of "
                                 f"{', '.join(CATALOGUE_SECTION_KEYS + ('material',))}, with its unit as 'area [mm^2]'")
        columns.append((m.group(1), (m.group(2) or "").strip()))
    if "name" not in [c for c, _ in columns] or "area" not in [c for c, _ in columns]:
        raise CaseError(key, f"{path}: the header needs the columns name and area")
    sections, raw_rows, mats = [], [], set()
    for r, row in enumerate(rows[1:], start=2):
        if len(row) != len(columns):
            raise CaseError(key, f"{path}, line {r}: expected {len(columns)} values, found {len(row)}")
        entry = {}
        for (col, unit), cell in zip(columns, row):
            cell = cell.strip()
            if col == "material":
                mats.add(cell)
                continue
            if col == "name" or cell == "":
                if cell:
                    entry[col] = cell
                continue
            try:
                float(cell)
            except ValueError:
                raise CaseError(key, f"{path}, line {r}, {col}: expected a number, found {cell!r}") from None
            entry[col] = f"{cell} {unit}" if unit else float(cell)
        try:
            sections.append(_section(entry, f"{path.name}:{r}", q))
        except CaseError as exc:
            raise CaseError(key, f"{path}, line {r}: {exc.key}: {exc.message}") from None
        raw_rows.append(entry)
    if len(mats) != 1:
        raise CaseError(key, f"{path}: expected a 'material' column naming one material for every row")
    material = mats.pop()
    if material not in materials:
        raise CaseError(key, f'{path}: no material named "{material}" (known: {", ".join(materials)})')
    cat = Catalogue(name=name, material=material, sections=_ordered(name, sections, key), source=str(path), key=key)
    return cat, {"material": material, "sections": raw_rows}
