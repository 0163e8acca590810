"""The model's data types: one :class:`ElementTable` per element family,
:class:`MemberInfo` per case member, :class:`LoadVectors` per load case and
the immutable :class:`Model` that holds them (SI units, local positions).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

import numpy as np

from ..patterns import PatternIndex
from ..spec import DIRECTIONS, CaseSpec


FAMILIES = ("bar", "cable", "beam")


@dataclass(frozen=True)
class ElementTable:
    """All elements of one family.

    Attributes
    ----------
    family : "bar" | "cable" | "beam"
    nodes : (n, 2) int, node indices of the element ends
    member : (n,) int, index of the member the element belongs to
    dofs : (n, k) int, global DOF numbers (k = 6 for bar/cable, 12 for beam)
    props : mapping of name -> (n, ...) arrays.  bar/cable: ``EA`` (N),
        ``unstressed_length`` (m), ``weight`` (N/m of unstressed length),
        ``alpha`` (1/K), ``tension_only`` (bool), ``breaking_load`` (N, nan if
        unknown).  beam additionally ``frame0`` (n, 3, 3), ``length`` (m, the
        stress-free chord, equal to ``unstressed_length``), ``E``, ``G``,
        ``A``, ``Iy``, ``Iz``, ``J``; ``frame0`` and ``length`` come from the
        model's ``reference_coordinates``.
    """

    family: str
    nodes: np.ndarray
    member: np.ndarray
    dofs: np.ndarray
    props: Mapping[str, np.ndarray]

    def __len__(self) -> int:
        return len(self.nodes)


@dataclass(frozen=True)
class MemberInfo:
    """A member of the case: one or more elements of a family in a row."""

    id: str
    type: str
    section: str
    family: str
    first: int          # first element index in the family table
    count: int          # number of elements (``divide``)
    node_ids: tuple[str, ...]   # end node, interior nodes, end node
    key: str = ""

    @property
    def elements(self) -> slice:
        return slice(self.first, self.first + self.count)


@dataclass(frozen=True)
class LoadVectors:
    """The loads of one load case (or a factored sum of them), SI units.

    Attributes
    ----------
    nodal : (ndof,) forces (N) and moments (N m) at the DOFs
    weight : family -> (n,) distributed downward load carried inside the
        element (catenary only), N per m of unstressed length
    strain : family -> (n,) stress-free strain (thermal), dimensionless
    prescribed : (ndof,) prescribed displacement/rotation of restrained DOFs
    beam_loads : (n_beam, 12) or None, the part of ``nodal`` that comes from
        member loads on each beam element (consistent nodal forces, N, and
        moments, N m, global axes); results subtract it to get the section
        forces at the element ends
    """

    nodal: np.ndarray
    weight: Mapping[str, np.ndarray]
    strain: Mapping[str, np.ndarray]
    prescribed: np.ndarray
    beam_loads: np.ndarray | None = None

    def scaled(self, factor: float) -> "LoadVectors":
        return LoadVectors(self.nodal * factor,
                           {k: v * factor for k, v in self.weight.items()},
                           {k: v * factor for k, v in self.strain.items()},
                           self.prescribed * factor,
                           None if self.beam_loads is None else self.beam_loads * factor)

    def __add__(self, other: "LoadVectors") -> "LoadVectors":
        if self.beam_loads is None or other.beam_loads is None:
            beam_loads = self.beam_loads if other.beam_loads is None else other.beam_loads
        else:
            beam_loads = self.beam_loads + other.beam_loads
        return LoadVectors(self.nodal + other.nodal,
                           {k: self.weight[k] + other.weight[k] for k in self.weight},
                           {k: self.strain[k] + other.strain[k] for k in self.strain},
                           self.prescribed + other.prescribed, beam_loads)


@dataclass(frozen=True)
class Model:
    """Arrays describing a structure and its loads (SI units).

    ``dof[n, d]`` is the global number of direction d (x y z rx ry rz) of
    node n, or -1 when the node has no such DOF (rotations exist only at
    nodes touched by beams).

    ``reference_coordinates`` (nn, 3) m are the stress-free positions of the
    beam nodes (``[beam_reference]``; equal to ``coordinates`` elsewhere),
    from which the beams' frames, lengths and member loads are taken;
    ``initial_rotations`` (nn, 3, 3) are the nodal rotations the analysis
    starts from (identity where no reference rotation is given), None
    without rotations.  Displacements are measured from ``coordinates``.

    Coordinates are local: ``coordinates``, ``reference_coordinates`` and
    every :class:`~cablefe.assembly.State` are relative to ``origin`` (m,
    site coordinates), chosen by :func:`local_origin`.  A model drawn on a
    projected survey grid (x ~ 5e5 m, y ~ 5e6 m) stores its positions with
    an absolute resolution of eps |x| ~ 1e-9 m, which a stiff cable turns
    into a tension error of (EA/T) 1e-9 m / L (measured: 2e-5 relative on a
    half-span crowd of a 60 m suspension span, 1e-3 at a 1e9 m offset).
    Near the site's centre the resolution is that of the model's size.
    Site positions are ``origin + local``, added back only on output
    (:attr:`site_coordinates`, :meth:`to_site`).
    """

    spec: CaseSpec
    node_ids: tuple[str, ...]
    node_index: Mapping[str, int]
    coordinates: np.ndarray          # (nn, 3) m
    dof: np.ndarray                  # (nn, 6) int
    restrained: np.ndarray           # (ndof,) bool: supported or inactive
    supported: np.ndarray            # (ndof,) bool: restrained by a support
    families: Mapping[str, ElementTable]
    members: tuple[MemberInfo, ...]
    member_index: Mapping[str, int]
    load_cases: Mapping[str, LoadVectors]
    combinations: tuple[tuple[str, Mapping[str, float]], ...] = field(default=())
    reference_coordinates: np.ndarray | None = None   # (nn, 3) m; None: ``coordinates``
    initial_rotations: np.ndarray | None = None       # (nn, 3, 3); None: identity / no rotations
    origin: np.ndarray = field(default_factory=lambda: np.zeros(3))   # (3,) m, site position of local 0
    #: sentences for the engineer about the model itself (coincident nodes,
    #: implausible sections); every result repeats them
    warnings: tuple = ()

    @property
    def site_coordinates(self) -> np.ndarray:
        """(nn, 3) node coordinates as drawn in the case (site coordinates), m."""
        return self.to_site(self.coordinates)

    def to_site(self, positions) -> np.ndarray:
        """Local positions (..., 3) m to site coordinates (for output only)."""
        positions = np.asarray(positions, dtype=float)
        return positions + self.origin if np.any(self.origin) else positions.copy()

    @property
    def size(self) -> float:
        """Largest side of the bounding box of the nodes, m (0 for a single point)."""
        c = self.coordinates
        return float(np.ptp(c, axis=0).max()) if len(c) else 0.0

    @property
    def ndof(self) -> int:
        return int(self.dof.max()) + 1 if self.dof.size else 0

    @property
    def has_rotations(self) -> bool:
        return bool((self.dof[:, 3:] >= 0).any())

    @property
    def free(self) -> np.ndarray:
        """Global numbers of the unrestrained DOFs."""
        return np.flatnonzero(~self.restrained)

    def describe_dof(self, g: int) -> tuple[str, str]:
        """(node id, direction) of global DOF number g."""
        n, d = np.argwhere(self.dof == g)[0]
        return self.node_ids[n], DIRECTIONS[d]

    def results_to_run(self) -> tuple[tuple[str, Mapping[str, float]], ...]:
        """Combinations, or every load case alone when there are none."""
        if self.combinations:
            return self.combinations
        return tuple((name, MappingProxyType({name: 1.0})) for name in self.load_cases)

    def combined_loads(self, factors: Mapping[str, float]) -> LoadVectors:
        total = self.zero_loads()
        for case, factor in factors.items():
            total = total + self.load_cases[case].scaled(float(factor))
        return total

    def zero_loads(self) -> LoadVectors:
        return LoadVectors(np.zeros(self.ndof),
                           {f: np.zeros(len(t)) for f, t in self.families.items()},
                           {f: np.zeros(len(t)) for f, t in self.families.items()},
                           np.zeros(self.ndof))

    def self_weight(self) -> float:
        """Total own weight of all members, N (weight per unstressed length x L0)."""
        return float(sum(np.sum(t.props["weight"] * t.props["unstressed_length"])
                         for t in self.families.values() if len(t)))

    def member_ids_matching(self, patterns) -> list[int]:
        return match_members([m.id for m in self.members], patterns)

    def replace_unstressed_lengths(self, family: str, values) -> "Model":
        """A new model whose ``family`` elements have the given L0 (m)."""
        from dataclasses import replace
        table = self.families[family]
        props = dict(table.props)
        props["unstressed_length"] = np.asarray(values, dtype=float).copy()
        fams = dict(self.families)
        fams[family] = replace(table, props=MappingProxyType(props))
        return replace(self, families=MappingProxyType(fams))

    def replace_coordinates(self, coordinates) -> "Model":
        """A new model with other node coordinates (m); element data kept."""
        from dataclasses import replace
        return replace(self, coordinates=np.asarray(coordinates, dtype=float).copy())


def match_members(ids, patterns) -> list[int]:
    """Indices of ids matching any of the ids or shell-style patterns, in id order.

    ``ids`` is a sequence of ids or a :class:`~cablefe.patterns.PatternIndex`
    built once for many calls; see :mod:`cablefe.patterns` for the rules.
    """
    index = ids if isinstance(ids, PatternIndex) else PatternIndex(ids)
    return index.indices(patterns).tolist()
