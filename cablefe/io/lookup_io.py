"""``members.csv``: the lookup from the meshes' cell data ``member`` (index) to member id,
type, section name and the section's diameter."""
from __future__ import annotations

import csv
import io
from pathlib import Path

from .atomic import write_text


def write_member_lookup(model, folder) -> Path:
    """Write ``folder/members.csv``: index, id, type, section, first node,
    last node and ``diameter_<length unit>`` (the section's ``diameter``,
    empty where none is given: for the drawings and for tubes in a viewer)."""
    units = model.spec.units
    sections = model.spec.sections
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["index", "member", "type", "section", "first_node", "last_node", f"diameter_{units.length}"])
    for k, m in enumerate(model.members):
        d = sections[m.section].diameter if m.section in sections else None
        w.writerow([k, m.id, m.type, m.section, m.node_ids[0], m.node_ids[-1],
                    "" if d is None else f"{d / units.length_scale:.6g}"])
    path = Path(folder) / "members.csv"
    write_text(path, buf.getvalue())
    return path
