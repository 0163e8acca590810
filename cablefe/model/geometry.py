"""Starting geometry: the local origin of a model on a site grid, the
start positions of interior nodes of divided members (given, hanging or on
the chord), beams' stress-free reference geometry and default ``up``.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np

from ..errors import CaseError
from ..spec import CaseSpec


def _beam_reference(spec: CaseSpec, index: Mapping[str, int], coordinates: np.ndarray,
                    rot: np.ndarray, origin=np.zeros(3)) -> tuple[np.ndarray, np.ndarray | None]:
    """Stress-free positions (nn, 3) m and starting rotations (nn, 3, 3) from ``[beam_reference]``.

    ``rot`` (nn,) marks the nodes touched by beams; only they may have an
    entry (the reader checks this too; a spec built in code is checked here).
    The starting rotations are None when no node has rotations.
    """
    reference = coordinates.copy()
    rotations = np.broadcast_to(np.eye(3), (len(coordinates), 3, 3)).copy() if rot.any() else None
    if not spec.beam_reference:
        return reference, rotations
    names = list(spec.beam_reference)
    for name in names:
        ref = spec.beam_reference[name]
        key = ref.key or f"beam_reference.{name}"
        if name not in index:
            raise CaseError(key, f'no node named "{name}"')
        if not rot[index[name]]:
            raise CaseError(key, f'node "{name}" is joined to no beam; a stress-free geometry is given '
                            "for beam nodes only")
    rows = np.fromiter((index[n] for n in names), dtype=np.int64, count=len(names))
    reference[rows] = np.array([spec.beam_reference[n].position for n in names],
                               dtype=float).reshape(-1, 3) - origin
    from ..elements.beam.rotations import expm_so3
    theta = np.array([spec.beam_reference[n].rotation for n in names], dtype=float).reshape(-1, 3)
    rotations[rows] = expm_so3(theta)
    return reference, rotations


def local_origin(site: np.ndarray) -> np.ndarray:
    """Site position (3,) m of the local origin of a model with these node coordinates.

    The bounding-box centre rounded to a multiple of ``g = 16 * 2^ceil(log2 size)``
    (size: the box's largest side, at least 1 m).  A model drawn within a few
    sizes of the origin keeps origin 0 (its local coordinates are the case's,
    bit for bit); one drawn far away gets local coordinates of at most about
    ``g`` in size, so positions and chords there carry the round-off of the
    model's size, not of its distance from the origin.  ``g`` is a power of
    two, so subtracting the origin from a site coordinate is exact.
    """
    site = np.asarray(site, dtype=float).reshape(-1, 3)
    if not len(site) or not np.all(np.isfinite(site)):
        return np.zeros(3)
    lo, hi = site.min(axis=0), site.max(axis=0)
    size = max(float((hi - lo).max()), 1.0)
    g = 16.0 * 2.0 ** np.ceil(np.log2(size))
    return np.round(0.5 * (lo + hi) / g) * g + 0.0   # + 0.0: no negative zeros


def interior_start(mem, xa, xb, origin, weight, EA) -> list:
    """Start positions (local, m) of the ``divide - 1`` interior nodes of a member.

    The one rule for where interior nodes start: the member's ``interior``
    points when the case gives them (site coordinates, made local with
    ``origin``); else, for a divided cable or bar longer than its chord
    (``length0``), on the hanging chain of :func:`_hanging_start`; else
    evenly on the straight chord from ``xa`` to ``xb`` (local, m).
    ``weight`` is per unstressed length (N/m), ``EA`` the axial stiffness (N).
    """
    n = int(mem.divide)
    if mem.interior is not None:
        return [np.subtract(point, origin).tolist() for point in mem.interior]
    hanging = _hanging_start(mem, xa, xb, weight, EA)
    if hanging is not None:
        return list(hanging)
    return [xa + (xb - xa) * k / n for k in range(1, n)]


def _hanging_start(mem, xa, xb, weight, EA) -> np.ndarray | None:
    """Starting points (divide - 1, 3) for the interior nodes of a divided
    cable or bar whose unstressed length exceeds its chord; None otherwise.

    The nodes are put on a parabola in the vertical plane of the chord as a
    chain of equal links, each stretched by about the strain the member's own
    weight will give it, H / EA with H = w c^2 / (8 d) (parabolic cable,
    Irvine 1981, ch. 2); the sag is chosen so that the chain ends at the far
    node.  The solver then starts near the hanging shape with every element
    equally taut, instead of from a straight, compressed or slack line.
    """
    if mem.type not in ("cable", "bar") or mem.length0 is None or mem.divide < 2:
        return None
    chord = float(np.linalg.norm(xb - xa))
    horizontal = float(np.hypot(*(xb - xa)[:2]))
    if mem.length0 <= chord or horizontal < 1e-6 * chord:
        return None
    from scipy.optimize import brentq
    n = int(mem.divide)
    d_par = chord * float(np.sqrt(3.0 / 8.0 * (mem.length0 / chord - 1.0)))
    strain = min(weight * chord**2 / (8.0 * d_par) / EA, 1e-2) if weight > 0 else 1e-6
    link = mem.length0 * (1.0 + strain) / n
    if link * n <= chord:
        return None

    def point(t, d):
        return xa + t * (xb - xa) - np.array([0.0, 0.0, 4.0 * d * t * (1.0 - t)])

    def walk(d):
        ts = [0.0]
        for _ in range(n):
            t0 = ts[-1]
            p0 = point(t0, d)
            hi = t0 + link / chord
            while np.linalg.norm(point(hi, d) - p0) < link:
                hi += link / chord
            ts.append(brentq(lambda t: np.linalg.norm(point(t, d) - p0) - link, t0, hi,
                             xtol=1e-14))
        return np.array(ts)

    hi = d_par
    while walk(hi)[-1] > 1.0:
        hi *= 2.0
    lo = 0.0
    d = brentq(lambda d: walk(d)[-1] - 1.0, lo, hi, xtol=1e-12 * chord)
    ts = walk(d)
    return np.array([point(t, d) for t in ts[1:-1]])


def _default_up(xi, xj):
    """The default documented in :func:`cablefe.elements.beam.frames.local_frames`."""
    from ..elements.beam.frames import VERTICAL_COSINE
    e = (xj - xi) / np.linalg.norm(xj - xi)
    return np.array([1.0, 0.0, 0.0]) if abs(e[2]) > VERTICAL_COSINE else np.array([0.0, 0.0, 1.0])


# -- loads ----------------------------------------------------------------------
