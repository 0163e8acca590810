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


def model_warnings(model: Model) -> list[str]:
    """Warnings about the model as built (not errors): coincident nodes, implausible sections."""
    notes = []
    X = model.coordinates
    if len(X) > 1:
        from scipy.spatial import cKDTree
        tol = COINCIDENT * max(model.size, np.finfo(float).tiny)
        pairs = cKDTree(X).query_pairs(tol, output_type="ndarray")
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
