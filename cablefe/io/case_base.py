"""Shared base of the case readers: key lists, limits, key paths and the small
validators every table reader uses.  Every failure is a CaseError naming its key."""
from __future__ import annotations

import contextlib
import difflib
import gc
import json
import math
import re
from typing import Any, Iterable, Mapping, Sequence

import numpy as np


from ..errors import CaseError
from ..spec import MEMBER_TYPES
from .units import describe_value


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


def checked_sign(value: float, sign: str | None, key: str, shown: str) -> float:
    """``value`` when it has the ``sign`` asked for (None, "positive" or
    "nonnegative"), else a CaseError at ``key`` showing the input ``shown``."""
    if sign == "positive" and not value > 0.0:
        raise CaseError(key, f"expected a positive value, found {shown}")
    if sign == "nonnegative" and value < 0.0:
        raise CaseError(key, f"expected a value >= 0, found {shown}")
    return value


def result_reference(table: Mapping, name: str, key: str, results: Sequence[str], what: str) -> str | None:
    """``table[name]`` when it names one of ``results`` (None when absent)."""
    if name not in table:
        return None
    value = table[name]
    if not isinstance(value, str) or value not in results:
        raise CaseError(key_join(key, name), f"expected the name of {what} "
                        f"(known: {', '.join(results) or 'none'}), found {describe_value(value)}")
    return value


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


def key_join(parent: str, name: str) -> str:
    """Key path of ``name`` inside ``parent``, quoting non-bare TOML keys."""
    part = name if _BARE_KEY.match(name) else json.dumps(name, ensure_ascii=False)
    return f"{parent}.{part}" if parent else part


def interior_node_ids(member_id: str, divide: int) -> tuple[str, ...]:
    """Ids ``<member id>.<k>``, k = 1 … divide-1, of a divided member's interior nodes."""
    return tuple(f"{member_id}.{k}" for k in range(1, divide))
