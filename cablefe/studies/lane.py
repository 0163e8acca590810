"""The lane of a study and the live loads placed on it.

A lane is a chain of elements between consecutive nodes (the interior
nodes of divided members included), measured along the undeformed
elements as the case's ``path`` patch loads are.  Loads on the lane are
built by the model's own patch-load code, so a study's patch is exactly
the load a ``[[loads]]`` table with the same ``path``, ``start`` and
``end`` would give.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CaseError
from ..model import LoadVectors, Model, PathChain, _LoadBuilder, add_path_load, path_chain
from ..spec import StudySpec


@dataclass(frozen=True)
class Lane:
    """Lane of a study.

    Attributes
    ----------
    path : node ids handed to patch loads (declared nodes, ends of members)
    nodes : (m + 1,) node indices of the lane points in order
    s : (m + 1,) distance of each lane point from the start, m
    chain : the elements along the lane (what patch loads are put on)
    """

    path: tuple[str, ...]
    nodes: np.ndarray
    s: np.ndarray
    chain: PathChain

    @property
    def length(self) -> float:
        return float(self.s[-1])


def build_lane(model: Model, study: StudySpec) -> Lane:
    """The lane of ``study`` in ``model``; CaseError at ``<study>.path`` if not a chain."""
    key = f"{study.key}.path"
    path = _member_chain(model, study.path[0], key) if study.path_pattern else tuple(study.path)
    chain = path_chain(model, path, key)
    s = np.concatenate([[0.0], np.cumsum(chain.length)])
    return Lane(path, chain.nodes, s, chain)


def _member_chain(model: Model, pattern: str, key: str) -> tuple[str, ...]:
    """Declared end nodes of the members matching ``pattern``, chained in case order."""
    hit = model.member_ids_matching(pattern)
    if not hit:
        raise CaseError(key, f'"{pattern}" matches no member')
    ends = [(model.members[k].node_ids[0], model.members[k].node_ids[-1]) for k in hit]
    if len(ends) == 1:
        return ends[0]
    a, b = ends[0]
    c, d = ends[1]
    path = [b, a] if a in (c, d) else [a, b]
    for k, (c, d) in enumerate(ends[1:], start=1):
        if c == path[-1]:
            path.append(d)
        elif d == path[-1]:
            path.append(c)
        else:
            raise CaseError(key, f'members matching "{pattern}" do not form a lane in case order: '
                            f'"{model.members[hit[k]].id}" does not start where '
                            f'"{model.members[hit[k - 1]].id}" ends')
    if len(set(path)) != len(path):
        raise CaseError(key, f'the members matching "{pattern}" pass a node twice')
    return tuple(path)


def patch_loads(model: Model, lane: Lane, intervals, per_length) -> LoadVectors:
    """Uniform load per length (N/m) on the intervals ``[(start, end), ...]`` (m along the lane)."""
    lb = _LoadBuilder(model)
    for a, b in intervals:
        if b > a:
            add_path_load(lb, lane.chain, per_length, float(a), float(b))
    return lb.freeze()


def point_load(model: Model, lane: Lane, position: float, force) -> LoadVectors:
    """A force (N) at ``position`` along the lane, shared between the two lane
    points around it in inverse proportion to the distance (lever rule)."""
    lb = _LoadBuilder(model)
    k = int(np.clip(np.searchsorted(lane.s, position, side="right") - 1, 0, len(lane.s) - 2))
    t = (position - lane.s[k]) / (lane.s[k + 1] - lane.s[k])
    t = min(max(t, 0.0), 1.0)
    F = np.asarray(force, dtype=float)
    lb.add_point(int(lane.nodes[k]), (1.0 - t) * F)
    lb.add_point(int(lane.nodes[k + 1]), t * F)
    return lb.freeze()
