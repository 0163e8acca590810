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
from pathlib import Path

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


def cutting_csv_text(table, units) -> str:
    """CSV text of a :class:`cablefe.solvers.formfind.CuttingTable` in the case's units.

    Columns ``member, unstressed_length_<L>, tension_<F>, loaded_length_<L>``
    and, with a fabrication temperature, ``fabrication_length_<L>``.
    """
    L, F = units.length, units.force
    header = ["member", f"unstressed_length_{L}", f"tension_{F}", f"loaded_length_{L}"]
    columns = [table.unstressed_length / units.length_scale, table.tension / units.force_scale,
               table.loaded_length / units.length_scale]
    if table.fabrication_length is not None:
        header.append(f"fabrication_length_{L}")
        columns.append(table.fabrication_length / units.length_scale)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    for k, mid in enumerate(table.member):
        writer.writerow([mid] + [repr(float(c[k])) for c in columns])
    return buf.getvalue()


def write_shape_outputs(path, spec: CaseSpec, table, header: str = "") -> tuple[Path, Path]:
    """Write the shaped case and its cutting table beside it, both atomically.

    Neither file appears under its final name unless both were written.
    """
    path = Path(path)
    csv_path = cutting_path(path)
    comment = "".join(f"# {line}\n" for line in header.splitlines())
    text = tomli_w.dumps(shaped_case_dict(spec))
    rows = cutting_csv_text(table, spec.units)
    # temporaries of a killed earlier run beside these two files
    clean_stale_temporaries(path.parent, (path.name, csv_path.name))
    with atomic_path(path) as tmp_case, atomic_path(csv_path) as tmp_csv:
        tmp_case.write_text(comment + text, encoding="utf-8")
        tmp_csv.write_text(rows, encoding="utf-8")
    return path, csv_path
