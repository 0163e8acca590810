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
from ..model import LoadVectors, Model, _add_patch, _element_lengths, _LoadBuilder, _segment_elements
from ..spec import PatchLoad, StudySpec


@dataclass(frozen=True)
class Lane:
    """Lane of a study.

    Attributes
    ----------
    path : node ids handed to patch loads (declared nodes, ends of members)
    nodes : (m + 1,) node indices of the lane points in order
    s : (m + 1,) distance of each lane point from the start, m
    """

    path: tuple[str, ...]
    nodes: np.ndarray
    s: np.ndarray

    @property
    def length(self) -> float:
        return float(self.s[-1])


def build_lane(model: Model, study: StudySpec) -> Lane:
    """The lane of ``study`` in ``model``; CaseError at ``<study>.path`` if not a chain."""
    key = f"{study.key}.path"
    path = _member_chain(model, study.path[0], key) if study.path_pattern else tuple(study.path)
    nodes = [model.node_index[path[0]]]
    s = [0.0]
    for a, b in zip(path[:-1], path[1:]):
        chain = _segment_elements(model, a, b)
        if chain is None:
            raise CaseError(key, f'nodes "{a}" and "{b}" are not joined by a member')
        for f, e, rev in chain:
            t = model.families[f]
            n0, n1 = t.nodes[e]
            length = float(_element_lengths(model, f, np.array([e]))[0])
            nodes.append(int(n0 if rev else n1))
            s.append(s[-1] + length)
    return Lane(path, np.asarray(nodes, dtype=np.int64), np.asarray(s))


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
    p = tuple(float(v) for v in per_length)
    for a, b in intervals:
        if b > a:
            _add_patch(model, lb, PatchLoad("", lane.path, p, float(a), float(b)), "studies")
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
