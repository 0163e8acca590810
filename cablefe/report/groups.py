"""Member groups, structure nodes and rounding shared by the summary, the plots and the report."""
from __future__ import annotations

import math
import re

import numpy as np

from ..model import report_deck_nodes


def member_groups(model) -> dict[str, list[int]]:
    """Members grouped by section name (case order), e.g. ``{"hanger": [3, 4, ...]}``."""
    groups: dict[str, list[int]] = {}
    for k, mem in enumerate(model.members):
        groups.setdefault(mem.section, []).append(k)
    return groups


def id_prefix(member_id: str) -> str:
    """The letters an id starts with (``MC12`` -> ``MC``), or the whole id."""
    m = re.match(r"[A-Za-z_-]+", member_id)
    return m.group(0).rstrip("_-") if m else member_id


def structure_nodes(model) -> tuple[np.ndarray, str]:
    """Nodes whose displacement describes the structure, and what they are.

    The ``[report] deck`` nodes when given; otherwise every node except the
    interior nodes of cables (a guy's sag node moves far more than the
    structure it holds and would hide the structure's own displacement),
    unless only supported nodes would be left (a cable between two anchors).
    """
    deck = report_deck_nodes(model)
    if deck is not None:
        return deck, "deck"
    inner = set()
    for mem in model.members:
        if mem.type == "cable":
            inner.update(mem.node_ids[1:-1])
    keep = np.array([k for k, n in enumerate(model.node_ids) if n not in inner], dtype=np.int64)
    supported = model.spec.supports
    if not len(keep) or all(model.node_ids[k] in supported for k in keep):
        # cables between supports only (a single span, a net on a rigid
        # edge): their interior nodes are the structure
        keep = np.arange(len(model.node_ids))
    return keep, "structure"


def round_relative(values, scale: float | None = None, digits: int = 6) -> np.ndarray:
    """Values rounded to ``digits`` significant digits of the largest one.

    Reactions and forces computed in floating point carry round-off of about
    1e-12 of the largest value; rounding relative to the largest removes it
    (a 1e-13 kN "reaction" beside 300 kN reads as 0).
    """
    a = np.asarray(values, dtype=float)
    big = float(np.nanmax(np.abs(a))) if scale is None and a.size else (scale or 0.0)
    if not big or not math.isfinite(big):
        return a
    quantum = 10.0 ** (math.floor(math.log10(big)) - digits + 1)
    out = np.round(a / quantum) * quantum
    out[out == 0] = 0.0     # no "-0"
    return out


def fmt(x: float, digits: int = 4) -> str:
    """A number for a table: ``digits`` significant digits, no exponent for usual sizes."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "inf" if x is not None and x > 0 else "–"
    if x == 0:
        return "0"
    text = f"{x:.{digits}g}"
    return text
