"""A case as validated plain data, in SI units.

This is what :mod:`cablefe.io.case` produces from a TOML file, and what a
notebook user can build directly in Python.  Ids stay strings here; the
:class:`cablefe.model.Model` turns them into arrays.  Units: N, m, Pa, N/m,
N/m^3, 1/K, K.

Each item keeps ``key``, its key path in the case file (``"members[3]"``), so
that errors found later (zero-length member, path not joined by members) can
still point at the line the engineer must fix.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

MEMBER_TYPES = ("cable", "bar", "beam")
DIRECTIONS = ("x", "y", "z", "rx", "ry", "rz")


@dataclass(frozen=True)
class UnitSystem:
    """Units of bare numbers in a case file and in its results.

    ``length_scale`` is metres per length unit, ``force_scale`` newtons per
    force unit.
    """

    length: str = "m"
    force: str = "kN"
    length_scale: float = 1.0
    force_scale: float = 1000.0


@dataclass(frozen=True)
class Material:
    name: str
    E: float                    # Pa
    G: float                    # Pa (default E / 2.6)
    unit_weight: float = 0.0    # N/m^3
    alpha: float = 0.0          # 1/K
    fy: float | None = None     # Pa, yield strength for the beam stress check


@dataclass(frozen=True)
class Section:
    name: str
    material: str
    area: float                       # m^2
    weight: float | None = None       # N/m; None: area * unit_weight
    breaking_load: float | None = None  # N
    diameter: float | None = None     # m
    Iy: float | None = None           # m^4, bending about local y
    Iz: float | None = None           # m^4, bending about local z
    J: float | None = None            # m^4, torsion constant
    Wy: float | None = None           # m^3, elastic section modulus for bending about local y
    Wz: float | None = None           # m^3, elastic section modulus for bending about local z


@dataclass(frozen=True)
class Member:
    id: str
    type: str                         # "cable" | "bar" | "beam"
    nodes: tuple[str, str]
    section: str
    key: str = ""
    length0: float | None = None      # m, unstressed length of the whole member
    pretension: float | None = None   # N, alternative to length0
    tension_only: bool = False
    divide: int = 1
    up: tuple[float, float, float] | None = None
    # extension: coordinates (m) of the interior nodes of a divided member, as
    # written by form-finding so that a shaped case reloads in its shape
    interior: tuple[tuple[float, float, float], ...] | None = None


@dataclass(frozen=True)
class BeamReference:
    """Stress-free geometry of a node touched by beams (extension, written by form-finding).

    ``position`` (m) is where the node lies when the beams are stress-free;
    ``rotation`` (rad) is the rotation vector that takes the stress-free
    orientation of the node to its orientation in ``[nodes]``.  The beams'
    reference frames and lengths come from ``position``; the analysis starts
    with the nodal rotation ``expm(skew(rotation))``.
    """

    node: str
    position: tuple[float, float, float]
    rotation: tuple[float, float, float] = (0.0, 0.0, 0.0)
    key: str = ""


@dataclass(frozen=True)
class SelfWeight:
    case: str
    key: str = ""
    factor: float = 1.0


@dataclass(frozen=True)
class NodalLoad:
    case: str
    node: str
    force: tuple[float, float, float] = (0.0, 0.0, 0.0)          # N
    moment: tuple[float, float, float] | None = None             # N m
    key: str = ""


@dataclass(frozen=True)
class MemberLoad:
    """Uniform load per unit undeformed length on matching members (N/m)."""

    case: str
    members: tuple[str, ...]          # ids or shell-style patterns
    per_length: tuple[float, float, float]
    key: str = ""


@dataclass(frozen=True)
class PatchLoad:
    """Uniform load per length on part of a path of consecutive nodes."""

    case: str
    path: tuple[str, ...]
    per_length: tuple[float, float, float]   # N/m
    start: float = 0.0                       # m along the undeformed path
    end: float | None = None                 # m; None: end of the path
    key: str = ""


@dataclass(frozen=True)
class TemperatureLoad:
    case: str
    members: tuple[str, ...]
    delta_t: float                    # K
    key: str = ""


@dataclass(frozen=True)
class PrescribedDisplacement:
    case: str
    node: str
    displacement: tuple[float | None, float | None, float | None]          # m
    rotation: tuple[float | None, float | None, float | None] | None = None  # rad
    key: str = ""


Load = SelfWeight | NodalLoad | MemberLoad | PatchLoad | TemperatureLoad | PrescribedDisplacement


@dataclass(frozen=True)
class Combination:
    name: str
    factors: Mapping[str, float]
    key: str = ""


@dataclass(frozen=True)
class AdjustGroup:
    members: tuple[str, ...]          # patterns
    together: bool = False
    key: str = ""


@dataclass(frozen=True)
class ShapeSpec:
    method: str = "target"            # "target" | "force-density"
    permanent: tuple[str, ...] = ()
    tolerance: float = 1e-4           # m
    targets: Mapping[str, Mapping[str, float]] = field(default_factory=dict)   # node -> {x|y|z: m}
    adjust: tuple[AdjustGroup, ...] = ()
    force_density: Mapping[str, float] = field(default_factory=dict)          # pattern -> N/m
    fabrication_temperature: float | None = None   # K difference from the analysis state
    max_iterations: int = 30
    key: str = "shape"


@dataclass(frozen=True)
class AnalysisSettings:
    increments: int = 10
    tolerance: float = 1e-8
    max_iterations: int = 30
    solver: str = "auto"              # linear solver backend
    max_cuts: int = 12                # extension: how often an increment may be halved in a row
    max_total_iterations: int = 400   # extension: Newton iterations per result (work budget)
    max_total_cuts: int = 40          # extension: increment cuts per result (work budget)
    control: str = "load"             # "load" | "arc-length": how the path to λ = 1 is followed
    track: tuple[str, ...] = ()       # node ids whose displacements every converged step records


@dataclass(frozen=True)
class AddedMass:
    """Mass beyond the members' own weight (``[modes] masses``).

    Either ``node`` with ``mass`` (kg, on its three translations) or
    ``members`` (patterns) with ``per_length`` (kg per m of each element's
    unstressed length).
    """

    node: str | None = None
    mass: float = 0.0                 # kg
    members: tuple[str, ...] = ()
    per_length: float = 0.0           # kg/m
    key: str = ""


@dataclass(frozen=True)
class PedestrianSpec:
    """``[modes.pedestrians]``: comfort check of a deck under a pedestrian stream.

    ``constants`` holds the guideline constants the case overrides (names of
    :data:`cablefe.dynamics.pedestrians.CONSTANTS`, SI values); the rest
    come from that table.
    """

    lane: tuple[str, ...]             # member patterns walked on
    width: float                      # m, walkway width carried by each lane line
    density: float                    # pedestrians per m^2
    damping: float                    # damping ratio
    constants: Mapping[str, Any] = field(default_factory=dict)
    key: str = "modes.pedestrians"


@dataclass(frozen=True)
class ModesSpec:
    """``[modes]``: natural modes about a converged state."""

    about: str | None = None          # result name; None: the first result
    count: int = 12
    masses: tuple[AddedMass, ...] = ()
    mass_matrix: str = "consistent"   # bars and cables: "consistent" | "lumped"
    pedestrians: PedestrianSpec | None = None
    key: str = "modes"


@dataclass(frozen=True)
class StudySpec:
    """One ``[[studies]]`` entry (see :mod:`cablefe.studies`), SI units.

    ``path`` is a list of node ids, or (``path_pattern``) one member id
    pattern whose matches, in case order, are chained into the lane.
    ``load`` is N/m for patches, N for a point force; for ``influence``
    only its direction counts.  ``sigma`` / ``range`` are m, or ratios of
    the unstressed length when ``relative``.
    """

    name: str
    kind: str                                  # "influence" | "patch" | "sweep" | "tolerance"
    base: str | None = None                    # result the study starts from; None: the first
    path: tuple[str, ...] = ()
    path_pattern: bool = False
    load: tuple[float, float, float] | None = None
    watch: tuple[str, ...] | None = None       # node / member patterns; None: all
    length: float | None = None                # m, sweep patch length
    steps: int | None = None
    sigma: float | None = None
    range: float | None = None
    relative: bool = False
    samples: int | None = None
    seed: int = 0
    key: str = ""


@dataclass(frozen=True)
class CaseSpec:
    """A whole validated case in SI units."""

    title: str = ""
    units: UnitSystem = UnitSystem()
    materials: Mapping[str, Material] = field(default_factory=dict)
    sections: Mapping[str, Section] = field(default_factory=dict)
    nodes: Mapping[str, tuple[float, float, float]] = field(default_factory=dict)   # m
    supports: Mapping[str, tuple[bool, bool, bool, bool, bool, bool]] = field(default_factory=dict)
    members: tuple[Member, ...] = ()
    loads: tuple[Load, ...] = ()
    combinations: tuple[Combination, ...] = ()
    shape: ShapeSpec | None = None
    analysis: AnalysisSettings = AnalysisSettings()
    # extension: node id -> stress-free geometry of beam nodes (``[beam_reference]``)
    beam_reference: Mapping[str, BeamReference] = field(default_factory=dict)
    source: str | None = None          # path of the file read, if any
    raw: Mapping[str, Any] | None = None  # the parsed TOML, kept for faithful rewriting
    extra: Mapping[str, Any] = field(default_factory=dict)  # tables for later studies
    studies: tuple[StudySpec, ...] = ()        # ``[[studies]]``
    modes: ModesSpec | None = None     # ``[modes]``
    # ``[design]`` with its ``[[design.size]]`` groups, and ``[catalogues.*]``
    design: "DesignSpec | None" = None
    catalogues: Mapping[str, "Catalogue"] = field(default_factory=dict)

    @property
    def load_cases(self) -> tuple[str, ...]:
        """Names of the load cases in order of first appearance."""
        seen: dict[str, None] = {}
        for load in self.loads:
            seen.setdefault(load.case, None)
        return tuple(seen)


@dataclass(frozen=True)
class CatalogueSection:
    """One section of a catalogue, SI units; beam data optional."""

    name: str
    area: float                       # m^2
    breaking_load: float | None = None  # N
    weight: float | None = None       # N/m
    diameter: float | None = None     # m
    Iy: float | None = None           # m^4
    Iz: float | None = None           # m^4
    J: float | None = None            # m^4
    Wy: float | None = None           # m^3
    Wz: float | None = None           # m^3


@dataclass(frozen=True)
class Catalogue:
    """Sections to choose from, smallest first (by area, then breaking load)."""

    name: str
    material: str
    sections: tuple[CatalogueSection, ...]
    source: str = ""                  # "catalogues.NAME" or the CSV file read
    key: str = ""


@dataclass(frozen=True)
class SizeGroup:
    """Members that get one common catalogue section."""

    members: tuple[str, ...]          # patterns
    catalogue: str
    key: str = ""


#: Placeholder defaults of the design factors: the engineer sets them from
#: the governing code.
DESIGN_DEFAULTS = {"cable_factor": 2.2, "min_tension": 0.1, "deflection_limit": 300.0,
                   "yield_factor": 1.1}


@dataclass(frozen=True)
class DesignSpec:
    """``[design]``: which results and members are checked, and the factors.

    ``placeholders`` names the factors left at their default (placeholders
    for the engineer to set).  ``permanent`` names the result holding the
    permanent state (None: found by :func:`cablefe.design.checks.permanent_result`);
    ``span`` (m) overrides the deck span taken from the deck nodes.
    """

    results: tuple[str, ...] = ("*",)
    members: tuple[str, ...] = ("*",)
    cable_factor: float = DESIGN_DEFAULTS["cable_factor"]
    min_tension: float = DESIGN_DEFAULTS["min_tension"]
    deflection_limit: float = DESIGN_DEFAULTS["deflection_limit"]
    yield_factor: float = DESIGN_DEFAULTS["yield_factor"]
    placeholders: tuple[str, ...] = tuple(DESIGN_DEFAULTS)
    permanent: str | None = None
    span: float | None = None
    size: tuple[SizeGroup, ...] = ()
    max_sizing_iterations: int = 10
    key: str = "design"


def support_mask(code: str) -> tuple[bool, ...] | None:
    """Restraint mask (x, y, z, rx, ry, rz) for a support code, None if invalid."""
    words = code.split()
    if words == ["all"]:
        return (True,) * 6
    if words == ["pin"]:
        return (True, True, True, False, False, False)
    if not words or any(w not in DIRECTIONS for w in words) or len(set(words)) != len(words):
        return None
    return tuple(d in words for d in DIRECTIONS)


def as_vector(value, n: int = 3) -> np.ndarray:
    return np.asarray(value, dtype=float).reshape(n)
