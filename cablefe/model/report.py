"""Report helpers on a built model: plausibility warnings and the deck
nodes a report draws its lines through.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np

from ..errors import CaseError
from ..patterns import match_indices
from .tables import Model


COINCIDENT = 1e-9
#: a section area above this (m^2) in a file whose lengths are in metres is
#: most likely a value in mm^2 or cm^2 typed as m^2 (common practice: the
#: largest bridge cables and girders have areas well below 1 m^2)
PLAUSIBLE_AREA = 1.0


# Offsets to the 13 neighbouring cells "after" a cell, plus the cell itself:
# each unordered pair of neighbouring cells is visited once.
_HALF_NEIGHBOURS = np.array([(i, j, k) for i in (-1, 0, 1) for j in (-1, 0, 1) for k in (-1, 0, 1)
                             if (i, j, k) > (0, 0, 0)] + [(0, 0, 0)], dtype=np.int64)


def close_pairs(points: np.ndarray, tol: float) -> np.ndarray:
    """All index pairs (i < j) of points at most ``tol`` apart, shape (m, 2).

    Cell hashing: points are binned in cubes of side ``tol``, so two points
    within ``tol`` of each other lie in the same or neighbouring cubes;
    candidates from those cubes are then kept by their exact distance. The
    cost is linear in the number of points (plus the pairs found), with
    numpy only: importing a spatial-tree library for this one warning cost
    more than the check.
    """
    n = len(points)
    if n < 2 or not tol > 0.0:
        return np.empty((0, 2), dtype=np.int64)
    cells = np.floor((points - points.min(axis=0)) / tol).astype(np.int64)

    def key(c):
        # any mixing will do: a collision only adds candidates, which the
        # distance test removes (integer overflow wraps, harmlessly)
        with np.errstate(over="ignore"):
            return c[:, 0] * np.int64(73856093) ^ c[:, 1] * np.int64(19349663) ^ c[:, 2] * np.int64(83492791)

    own = key(cells)
    order = np.argsort(own, kind="stable")
    sorted_keys = own[order]
    found = []
    for offset in _HALF_NEIGHBOURS:
        target = key(cells + offset)
        lo = np.searchsorted(sorted_keys, target, side="left")
        hi = np.searchsorted(sorted_keys, target, side="right")
        count = hi - lo
        if not count.any():
            continue
        i = np.repeat(np.arange(n), count)
        start = np.repeat(lo - np.concatenate(([0], np.cumsum(count)[:-1])), count)
        j = order[np.arange(len(i)) + start]
        keep = i != j
        i, j = i[keep], j[keep]
        near = np.einsum("ij,ij->i", points[i] - points[j], points[i] - points[j]) <= tol * tol
        found.append(np.column_stack((np.minimum(i, j), np.maximum(i, j)))[near])
    pairs = np.concatenate(found) if found else np.empty((0, 2), dtype=np.int64)
    return np.unique(pairs, axis=0) if len(pairs) else pairs


def model_warnings(model: Model) -> list[str]:
    """Warnings about the model as built (not errors): coincident nodes, implausible sections."""
    notes = []
    X = model.coordinates
    if len(X) > 1:
        tol = COINCIDENT * max(model.size, np.finfo(float).tiny)
        pairs = close_pairs(X, tol)
        if len(pairs):
            shown = ", ".join(f"{model.node_ids[a]} and {model.node_ids[b]}" for a, b in pairs[:5].tolist())
            more = f" and {len(pairs) - 5} more pairs" if len(pairs) > 5 else ""
            notes.append(f"nodes at the same position (within {COINCIDENT:g} of the model's size): "
                         f"{shown}{more}; they are not joined unless a member joins them")
    spec = model.spec
    if spec.units.length == "m":
        used = {m.section for m in spec.members}
        big = [(name, sec.area) for name, sec in spec.sections.items()
               if name in used and sec.area > PLAUSIBLE_AREA]
        for name, area in big:
            notes.append(f'section "{name}": area {area:g} m^2 is above {PLAUSIBLE_AREA:g} m^2; '
                         "mm^2 or cm^2 typed as m^2? (a bare number is in the file's units, here m)")
    return notes


def report_deck_nodes(model: Model) -> np.ndarray | None:
    """Node indices named by ``[report] deck`` (extension), or None.

    ``deck`` is a node id pattern or a list of them (shell-style, interior
    nodes ``<member>.<k>`` included); the run reports the largest vertical
    deflection among these nodes.

    Raises
    ------
    CaseError
        ``report.deck`` is not a list of strings or matches no node.
    """
    report = model.spec.extra.get("report")
    if not isinstance(report, Mapping) or "deck" not in report:
        return None
    patterns = report["deck"]
    if isinstance(patterns, str):
        patterns = [patterns]
    if not isinstance(patterns, (list, tuple)) or not patterns or \
            not all(isinstance(p, str) for p in patterns):
        raise CaseError("report.deck", f"expected a list of node id patterns such as [\"D*\"], "
                        f"found {patterns!r}")
    hit = match_indices(patterns, model.node_ids)
    if not hit:
        raise CaseError("report.deck", f"no node matches {list(patterns)}")
    return np.asarray(hit, dtype=np.int64)
