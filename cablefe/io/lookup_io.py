"""``members.csv``: the lookup from the meshes' cell data ``member`` (index) to member id,
type and section name."""
from __future__ import annotations

import csv
import io
from pathlib import Path

from .atomic import write_text


def write_member_lookup(model, folder) -> Path:
    """Write ``folder/members.csv`` (index, id, type, section, first node, last node)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["index", "member", "type", "section", "first_node", "last_node"])
    for k, m in enumerate(model.members):
        w.writerow([k, m.id, m.type, m.section, m.node_ids[0], m.node_ids[-1]])
    path = Path(folder) / "members.csv"
    write_text(path, buf.getvalue())
    return path
