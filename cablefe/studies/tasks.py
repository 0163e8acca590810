"""The picklable tasks of studies: one nonlinear solve each, from the base state."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .base import Session, TaskResult
from .lane import patch_loads, point_load


@dataclass(frozen=True)
class PatchTask:
    """Uniform load per length (N/m) on intervals of the lane (m)."""

    index: int
    intervals: tuple
    per_length: tuple

    def run(self, s: Session) -> TaskResult:
        return s.solve(self.index, patch_loads(s.model, s.lane, self.intervals, self.per_length))


@dataclass(frozen=True)
class PointTask:
    """A force (N) at a position along the lane (m)."""

    index: int
    position: float
    force: tuple

    def run(self, s: Session) -> TaskResult:
        return s.solve(self.index, point_load(s.model, s.lane, self.position, self.force))


@dataclass(frozen=True)
class LengthErrorTask:
    """Errors (m) of the unstressed length of every member (0 for beams),
    shared equally by the elements of a divided member."""

    index: int
    errors: np.ndarray

    def run(self, s: Session) -> TaskResult:
        m = s.model
        for f in ("cable", "bar"):
            t = m.families[f]
            if not len(t):
                continue
            count = np.bincount(t.member, minlength=len(m.members))
            m = m.replace_unstressed_lengths(f, t.props["unstressed_length"]
                                             + self.errors[t.member] / count[t.member])
        return s.solve(self.index, s.model.zero_loads(), model=m)
