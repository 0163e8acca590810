"""Write a shaped case (TOML) and its cutting table (CSV), atomically.

The shaped case is the input file as parsed (``CaseSpec.raw``) with three
kinds of change, all in the file's own units:

* node coordinates (``[nodes]`` and ``[node_table]``) set to the found shape;
* ``length0`` on every cable and bar (``[[members]]`` and the arrays of
  ``[[member_table]]``), ``pretension`` removed;
* ``interior = [[x, y, z], ...]`` on every divided member, so that its
  interior nodes are read back in the found shape;
* ``[beam_reference]`` from ``CaseSpec.beam_reference`` (stress-free
  position, file length unit, and rotation vector, rad, of every beam node),
  so that beams reload with the bending they were found with; the table is
  dropped when the spec has none.

Everything else, ``[shape]`` included, is kept as it was read.
"""
from __future__ import annotations

import copy
import csv
import io
import math
import re
from pathlib import Path

import numpy as np
import tomli_w

from ..spec import CaseSpec
from .atomic import atomic_path, clean_stale_temporaries


def cutting_path(shaped_path) -> Path:
    """``out/bridge.toml`` -> ``out/bridge-cutting.csv``."""
    p = Path(shaped_path)
    return p.with_name(f"{p.stem}-cutting.csv")


def shaped_case_dict(spec: CaseSpec) -> dict:
    """The TOML tables of a shaped case.

    Parameters
    ----------
    spec : CaseSpec
        The shaped case (SI coordinates and lengths, as made by
        :func:`cablefe.solvers.formfind.shaped_case`) whose ``raw`` is the
        parsed input file.

    Returns
    -------
    dict
        A new dict; ``spec.raw`` is not modified.

    Raises
    ------
    ValueError
        The case was not read from a file (no ``raw`` to start from).
    """
    if spec.raw is None:
        raise ValueError("a shaped case is written from the parsed input file (CaseSpec.raw); "
                         "this case was built in code")
    raw = copy.deepcopy(dict(spec.raw))
    scale = spec.units.length_scale

    def length(v):
        return float(v) / scale

    def point(p):
        return [length(v) for v in p]

    if "nodes" in raw:
        raw["nodes"] = {name: point(spec.nodes[name]) if name in spec.nodes else value
                        for name, value in raw["nodes"].items()}
    if "node_table" in raw:
        table = raw["node_table"]
        ids = table["ids"]
        for k, axis in enumerate("xyz"):
            table[axis] = [length(spec.nodes[n][k]) for n in ids]

    members = {m.id: m for m in spec.members}
    for entry in raw.get("members", []):
        mem = members[entry["id"]]
        if mem.type in ("cable", "bar") and mem.length0 is not None:
            entry.pop("pretension", None)
            entry["length0"] = length(mem.length0)
        if mem.interior is not None:
            entry["interior"] = [point(p) for p in mem.interior]
    if spec.beam_reference:
        raw["beam_reference"] = {name: {"position": point(ref.position),
                                        "rotation": [float(v) for v in ref.rotation]}
                                 for name, ref in spec.beam_reference.items()}
    else:
        raw.pop("beam_reference", None)
    groups = raw.get("member_table", [])
    for entry in [groups] if isinstance(groups, dict) else groups:
        if entry.get("type") in ("cable", "bar"):
            lengths = [members[mid].length0 for mid in entry["ids"]]
            if all(v is not None for v in lengths):
                entry.pop("pretension", None)
                entry["length0"] = [length(v) for v in lengths]
    return raw


def write_shaped_case(path, spec: CaseSpec, header: str = "") -> Path:
    """Write the shaped case atomically; returns the path.

    ``header`` lines are written as TOML comments at the top.
    """
    text = tomli_w.dumps(shaped_case_dict(spec))
    comment = "".join(f"# {line}\n" for line in header.splitlines())
    path = Path(path)
    with atomic_path(path) as tmp:
        tmp.write_text(comment + text, encoding="utf-8")
    return path


def cutting_totals_path(shaped_path) -> Path:
    """``out/bridge.toml`` -> ``out/bridge-cutting-totals.csv``."""
    p = Path(shaped_path)
    return p.with_name(f"{p.stem}-cutting-totals.csv")


#: fabrication precision of cutting lengths, m
FABRICATION_PRECISION = 1e-4


def fabrication_decimals(length_scale: float) -> int:
    """Decimals that give lengths at 0.1 mm or finer in a unit of ``length_scale`` m.

    m -> 4, mm -> 1, ft -> 4 (0.03 mm), in -> 3.
    """
    # the small allowance keeps m at 4 decimals against round-off in log10
    return max(0, math.ceil(-math.log10(FABRICATION_PRECISION / length_scale) - 1e-9))


def _cutting_columns(table, units):
    L, F = units.length, units.force
    header = ["member", f"unstressed_length_{L}", f"tension_{F}", f"loaded_length_{L}"]
    columns = [table.unstressed_length / units.length_scale, table.tension / units.force_scale,
               table.loaded_length / units.length_scale]
    if table.fabrication_length is not None:
        header.append(f"fabrication_length_{L}")
        columns.append(table.fabrication_length / units.length_scale)
    digits = fabrication_decimals(units.length_scale)
    # lengths at fabrication precision; tension to 6 significant digits (it is no cutting dimension)
    rounded = [np.round(np.asarray(c, float), digits) if "length" in h else c
               for h, c in zip(header[1:], columns)]
    return header, rounded, digits


def _fmt_length(v: float, digits: int) -> str:
    return f"{v:.{digits}f}"


def cutting_csv_text(table, units) -> str:
    """CSV text of a :class:`cablefe.solvers.formfind.CuttingTable` in the case's units.

    Columns ``member, unstressed_length_<L>, tension_<F>, loaded_length_<L>``
    and, with a fabrication temperature, ``fabrication_length_<L>``; one row
    per member (a divided member is one cable, one row).  Lengths are
    rounded to fabrication precision, 0.1 mm (4 decimals in m, 1 in mm);
    tensions carry 6 significant digits.
    """
    header, columns, digits = _cutting_columns(table, units)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    for k, mid in enumerate(table.member):
        writer.writerow([mid] + [_fmt_length(c[k], digits) if "length" in h else f"{float(c[k]):.6g}"
                                 for h, c in zip(header[1:], columns)])
    return buf.getvalue()


def cutting_totals_csv_text(table, units, sections=None) -> str:
    """CSV text of the cutting totals: ``kind, name, members`` and the summed lengths.

    Rows of ``kind`` ``group`` (members whose ids share their leading
    letters, ``H1``, ``H2`` -> ``H``), ``section`` (members of one section,
    when ``sections`` maps member id -> section name) and one ``all`` row.
    The totals are the sums of the rounded lengths of the cutting table, so
    they add up exactly to what the table shows.
    """
    header, columns, digits = _cutting_columns(table, units)
    lengths = [(h, c) for h, c in zip(header[1:], columns) if "length" in h]
    keys: dict[tuple[str, str], list[int]] = {}
    for k, mid in enumerate(table.member):
        keys.setdefault(("group", _id_group(str(mid))), []).append(k)
    if sections:
        for k, mid in enumerate(table.member):
            if mid in sections:
                keys.setdefault(("section", sections[mid]), []).append(k)
    keys[("all", "")] = list(range(len(table.member)))
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["kind", "name", "members"] + [f"total_{h}" for h, _ in lengths])
    for (kind, name), rows in keys.items():
        writer.writerow([kind, name, len(rows)]
                        + [_fmt_length(round(float(np.sum(c[rows])), digits), digits) for _, c in lengths])
    return buf.getvalue()


def _id_group(member_id: str) -> str:
    """The letters an id starts with (``MC12`` -> ``MC``), or the whole id."""
    m = re.match(r"[A-Za-z_-]+", member_id)
    return m.group(0).rstrip("_-") if m else member_id


def write_shape_outputs(path, spec: CaseSpec, table, header: str = "") -> tuple[Path, Path, Path]:
    """Write the shaped case, its cutting table and the cutting totals beside it, atomically.

    Returns (case, ``…-cutting.csv``, ``…-cutting-totals.csv``); none of the
    files appears under its final name unless all were written.
    """
    path = Path(path)
    csv_path = cutting_path(path)
    totals_path = cutting_totals_path(path)
    comment = "".join(f"# {line}\n" for line in header.splitlines())
    text = tomli_w.dumps(shaped_case_dict(spec))
    rows = cutting_csv_text(table, spec.units)
    totals = cutting_totals_csv_text(table, spec.units, {m.id: m.section for m in spec.members})
    # temporaries of a killed earlier run beside these files
    clean_stale_temporaries(path.parent, (path.name, csv_path.name, totals_path.name))
    with atomic_path(path) as tmp_case, atomic_path(csv_path) as tmp_csv, atomic_path(totals_path) as tmp_tot:
        tmp_case.write_text(comment + text, encoding="utf-8")
        tmp_csv.write_text(rows, encoding="utf-8")
        tmp_tot.write_text(totals, encoding="utf-8")
    return path, csv_path, totals_path
