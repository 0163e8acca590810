"""Reader of the ``[[studies]]`` tables of a case (live-load studies).

Called by :mod:`cablefe.io.case` once nodes, members, loads and combinations
are read; every key is checked here, with its key path
(``studies[2].length``), and values are turned to SI units.  A key that does
not apply to the study's kind is rejected rather than ignored.
"""
from __future__ import annotations

import re
from typing import Any, Mapping, Sequence

import numpy as np

from ..errors import CaseError
from ..patterns import is_pattern, match_indices
from ..spec import StudySpec
from .case_base import _integer, _require, result_reference
from .units import describe_value

KINDS = ("influence", "patch", "sweep", "tolerance")
COMMON_KEYS = ("name", "kind", "base", "watch")
KIND_KEYS = {
    "influence": ("path", "load"),
    "patch": ("path", "load"),
    "sweep": ("path", "load", "length", "steps"),
    "tolerance": ("sigma", "range", "samples", "seed"),
}
ALL_KEYS = COMMON_KEYS + tuple(dict.fromkeys(k for keys in KIND_KEYS.values() for k in keys))
_NAME = re.compile(r"[A-Za-z0-9_.-]+\Z")


def read_studies(reader, value: Any, results: Sequence[str]) -> tuple[StudySpec, ...]:
    """Validate ``[[studies]]``.

    Parameters
    ----------
    reader : the case reader (``cablefe.io.case._Reader``) after loads and
        combinations: its quantities, node and member ids are used.
    value : the parsed ``studies`` value
    results : names of the results the case solves (combinations, or load
        cases when there are none), the possible ``base`` values.
    """
    if not isinstance(value, list) or not all(isinstance(v, Mapping) for v in value):
        raise CaseError("studies", f"expected an array of tables ([[studies]]), found {describe_value(value)}")
    out, seen = [], {}
    for k, entry in enumerate(value):
        study = _study(reader, entry, f"studies[{k}]", results)
        if study.name in seen:
            raise CaseError(f"studies[{k}].name", f'duplicate study name "{study.name}" (first at {seen[study.name]})')
        seen[study.name] = f"studies[{k}]"
        out.append(study)
    return tuple(out)


def _study(reader, entry: Mapping, key: str, results: Sequence[str]) -> StudySpec:
    for name in entry:
        if name not in ALL_KEYS:
            raise CaseError(f"{key}.{name}", f'unknown key "{name}" (known: {", ".join(ALL_KEYS)})')
    if "name" not in entry:
        raise CaseError(f"{key}.name", "missing: the study name (its output folder OUT/studies/<name>/)")
    name = entry["name"]
    if not isinstance(name, str) or not _NAME.match(name) or name in (".", ".."):
        raise CaseError(f"{key}.name", "expected a name of letters, digits, '_', '-' or '.' "
                        f"(it names a folder), found {describe_value(name)}")
    if "kind" not in entry:
        raise CaseError(f"{key}.kind", f"missing: the kind of study ({' | '.join(KINDS)})")
    kind = entry["kind"]
    if kind not in KINDS:
        raise CaseError(f"{key}.kind", f"expected one of {', '.join(KINDS)}, found {describe_value(kind)}")
    allowed = COMMON_KEYS + KIND_KEYS[kind]
    for name_ in entry:
        if name_ not in allowed:
            owners = [k for k, keys in KIND_KEYS.items() if name_ in keys]
            raise CaseError(f"{key}.{name_}", f'"{name_}" does not apply to kind "{kind}" '
                            f"(only to {', '.join(owners)})")
    base = result_reference(entry, "base", key, results, "a result the case solves")
    if base is None and not results:
        raise CaseError(f"{key}.base", "the case solves no result to start the study from (add loads)")
    watch = _watch(reader, entry["watch"], f"{key}.watch") if "watch" in entry else None
    fields: dict[str, Any] = {}
    if kind != "tolerance":
        if "path" not in entry:
            raise CaseError(f"{key}.path", 'missing: the lane, a list of node ids or a member pattern like "D*"')
        fields["path"], fields["path_pattern"] = _path(reader, entry["path"], f"{key}.path")
    if kind == "influence":
        load = (0.0, 0.0, -1.0)
        if "load" in entry:
            load = reader.q.vector(entry["load"], "force", f"{key}.load")
        fields["load"] = _nonzero(load, f"{key}.load", entry.get("load"))
    elif kind in ("patch", "sweep"):
        if "load" not in entry:
            raise CaseError(f"{key}.load", "missing: the live load, e.g. [0, 0, -5] "
                            + ("per length of lane" if kind == "patch" else
                               "per length (with length) or a point force (without)"))
        unit = "force_per_length" if kind == "patch" or "length" in entry else "force"
        fields["load"] = _nonzero(reader.q.vector(entry["load"], unit, f"{key}.load"), f"{key}.load",
                                  entry["load"])
    if kind == "sweep":
        fields["steps"] = _integer(_require(entry, "steps", key, "the number of positions along the lane (>= 2)"),
                                   f"{key}.steps", 2)
        if "length" in entry:
            length = reader.quantity(entry["length"], "length", f"{key}.length", "positive")
            total = _lane_length(reader, fields["path"], fields["path_pattern"])
            if total is not None and length > total * (1 + 1e-9):
                raise CaseError(f"{key}.length", f"the patch ({length:.6g} m) is longer than the lane "
                                f"({total:.6g} m)")
            fields["length"] = length
    if kind == "tolerance":
        given = [n for n in ("sigma", "range") if n in entry]
        if len(given) != 1:
            raise CaseError(f"{key}.sigma", "give exactly one of sigma (normal errors) or range "
                            "(uniform errors within +-range)" + (", not both" if given else ""))
        value, relative = _length_or_ratio(reader, entry[given[0]], f"{key}.{given[0]}")
        fields[given[0]] = value
        fields["relative"] = relative
        fields["samples"] = _integer(_require(entry, "samples", key, "the number of Monte Carlo samples (>= 2)"),
                                     f"{key}.samples", 2)
        seed = entry.get("seed", 0)
        if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
            raise CaseError(f"{key}.seed", f"expected an integer >= 0, found {describe_value(seed)}")
        fields["seed"] = seed
    return StudySpec(name=name, kind=kind, base=base, watch=watch, key=key, **fields)


def _nonzero(load, key, raw):
    if not np.any(np.asarray(load)):
        raise CaseError(key, f"expected a nonzero load, found {describe_value(raw)}")
    return tuple(float(v) for v in load)


def _length_or_ratio(reader, value, key) -> tuple[float, bool]:
    """A length (bare number: file units) or, written with a unit like "%", a ratio."""
    if isinstance(value, str):
        try:
            ratio = reader.q.to_si(value, "dimensionless", key)
        except CaseError:
            pass
        else:
            if not ratio > 0.0:
                raise CaseError(key, f"expected a positive value, found {describe_value(value)}")
            return float(ratio), True
    return reader.quantity(value, "length", key, "positive"), False


def _path(reader, value, key) -> tuple[tuple[str, ...], bool]:
    if isinstance(value, str):
        ids = reader.member_ids
        if value in reader.member_id_set or (is_pattern(value) and match_indices(value, ids)):
            return (value,), True
        raise CaseError(key, f'"{value}" matches no member (a lane is a list of node ids or one member '
                        'pattern like "D*")')
    if not isinstance(value, list) or len(value) < 2:
        raise CaseError(key, f"expected a list of at least two node ids or a member pattern, found "
                        f"{describe_value(value)}")
    for k, name in enumerate(value):
        reader.node(name, f"{key}[{k}]")
    pairs = reader.joined_pairs()
    for k, (a, b) in enumerate(zip(value[:-1], value[1:])):
        if ((a, b) if a < b else (b, a)) not in pairs:
            raise CaseError(f"{key}[{k + 1}]", f'nodes "{a}" and "{b}" are not joined by a member '
                            "(consecutive lane nodes must be the two ends of one element)")
    return tuple(value), False


def _lane_length(reader, path, pattern) -> float | None:
    """Lane length (m) as drawn for a node list; None for a member pattern (checked later)."""
    if pattern:
        return None
    points = reader.coords[[reader.index[n] for n in path]]
    return float(np.linalg.norm(np.diff(points, axis=0), axis=1).sum())


def _watch(reader, value, key) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not value:
        raise CaseError(key, f"expected a list of node or member ids or patterns, found {describe_value(value)}")
    nodes = list(reader.index)
    for k, pattern in enumerate(value):
        where = f"{key}[{k}]"
        if not isinstance(pattern, str) or not pattern.strip():
            raise CaseError(where, f"expected a node or member id or pattern, found {describe_value(pattern)}")
        if pattern in reader.index or pattern in reader.member_id_set:
            continue
        if is_pattern(pattern) and (match_indices(pattern, reader.member_ids) or match_indices(pattern, nodes)):
            continue
        raise CaseError(where, f'"{pattern}" matches no node and no member')
    return tuple(value)
