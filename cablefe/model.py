"""The analysis model: a case turned into plain arrays (SI units).

Built once from a :class:`cablefe.spec.CaseSpec`; immutable afterwards.  It
holds the node coordinates, the DOF numbering, one element table per family
and the load vectors of every load case.  Nothing here knows TOML or units
text.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

import numpy as np

from .errors import CaseError
from .patterns import PatternIndex, match_indices
from .spec import (CaseSpec, MemberLoad, NodalLoad, PatchLoad, PrescribedDisplacement,
                   SelfWeight, TemperatureLoad, DIRECTIONS)

log = logging.getLogger(__name__)

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


def _section_data(spec: CaseSpec, member, key):
    try:
        sec = spec.sections[member.section]
    except KeyError:
        raise CaseError(f"{key}.section", f'no section named "{member.section}" '
                        f'(known: {", ".join(spec.sections)})') from None
    try:
        mat = spec.materials[sec.material]
    except KeyError:
        raise CaseError(f"sections.{sec.name}.material", f'no material named "{sec.material}" '
                        f'(known: {", ".join(spec.materials)})') from None
    weight = sec.weight if sec.weight is not None else sec.area * mat.unit_weight
    return sec, mat, weight


def build_model(spec: CaseSpec) -> Model:
    """Turn a validated case into arrays.

    Raises
    ------
    CaseError
        For problems only visible with the geometry (zero-length members,
        beam ``up`` parallel to the member, loads on missing paths).
    """
    node_ids = list(spec.nodes)
    site = np.array([spec.nodes[n] for n in node_ids], dtype=float).reshape(-1, 3)
    origin = local_origin(site)
    # every position below is local (relative to ``origin``): see Model
    coords = [tuple(p) for p in (site - origin).tolist()]
    index = {n: k for k, n in enumerate(node_ids)}
    reference = spec.beam_reference

    # -- members and their elements -----------------------------------------
    per_family: dict[str, dict[str, list]] = {f: {"nodes": [], "member": [], "L0": [], "EA": [],
                                                  "weight": [], "alpha": [], "tension_only": [],
                                                  "breaking_load": [], "E": [], "G": [], "A": [],
                                                  "Iy": [], "Iz": [], "J": [], "up": []}
                                              for f in FAMILIES}
    # undivided bars and cables without a problem are done in one batch; the
    # loop below does the rest (and raises the same errors as ever, in order)
    straight = _straight_members(spec, index, coords)
    infos: dict[int, tuple] = {}
    for m_idx, mem in enumerate(spec.members):
        if straight["take"][m_idx]:
            continue
        key = mem.key or f"members[{m_idx}]"
        sec, mat, weight = _section_data(spec, mem, key)
        a, b = mem.nodes
        for end, name in zip(("nodes[0]", "nodes[1]"), (a, b)):
            if name not in index:
                raise CaseError(f"{key}.nodes", f'no node named "{name}"')
        xa, xb = np.array(coords[index[a]]), np.array(coords[index[b]])
        chord = float(np.linalg.norm(xb - xa))
        if chord <= 0.0:
            raise CaseError(f"{key}.nodes", f'zero length: nodes "{a}" and "{b}" coincide')
        n = int(mem.divide)
        interior = mem.interior
        chain = [index[a]]
        hanging = None if interior is not None else _hanging_start(mem, xa, xb, weight, mat.E * sec.area)
        for k in range(1, n):
            nid = f"{mem.id}.{k}"
            if nid in index:
                raise CaseError(f"{key}.divide", f'interior node "{nid}" clashes with a node of that name')
            index[nid] = len(node_ids)
            node_ids.append(nid)
            if interior is not None:
                coords.append(tuple(np.subtract(interior[k - 1], origin).tolist()))
            elif hanging is not None:
                coords.append(tuple(hanging[k - 1]))
            else:
                coords.append(tuple(xa + (xb - xa) * k / n))
            chain.append(index[nid])
        chain.append(index[b])
        family = mem.type
        EA = mat.E * sec.area
        if mem.type in ("cable", "bar"):
            if mem.length0 is not None:
                L0 = mem.length0
            elif mem.pretension is not None:
                L0 = chord / (1.0 + mem.pretension / EA)
            else:
                L0 = chord
        else:
            L0 = chord
        t = per_family[family]
        if family == "beam":
            # a beam is stress-free as drawn (or at its [beam_reference]
            # positions): each element's reference length is its own chord
            # there (given interior points need not be evenly spaced)
            pts = np.array([np.subtract(reference[node_ids[c]].position, origin) if node_ids[c] in reference
                            else coords[c] for c in chain], dtype=float)
            if (pieces := np.linalg.norm(np.diff(pts, axis=0), axis=1)).min() <= 0.0:
                raise CaseError("beam_reference", f'beam member "{mem.id}": two consecutive nodes have the '
                                "same stress-free position (zero-length element)")
        else:
            pieces = np.full(n, L0 / n)
        for k in range(n):
            t["nodes"].append((chain[k], chain[k + 1]))
            t["member"].append(m_idx)
            t["L0"].append(float(pieces[k]))
            t["EA"].append(EA)
            t["weight"].append(weight)
            t["alpha"].append(mat.alpha)
            t["tension_only"].append(bool(mem.tension_only) or family == "cable")
            t["breaking_load"].append(np.nan if sec.breaking_load is None else sec.breaking_load)
            if family == "beam":
                for name in ("Iy", "Iz", "J"):
                    if getattr(sec, name) is None:
                        raise CaseError(f"sections.{sec.name}.{name}",
                                        f"beam member {mem.id} needs {name} on its section")
                t["E"].append(mat.E)
                t["G"].append(mat.G)
                t["A"].append(sec.area)
                t["Iy"].append(sec.Iy)
                t["Iz"].append(sec.Iz)
                t["J"].append(sec.J)
                t["up"].append(mem.up)
        infos[m_idx] = (family, n, tuple(node_ids[c] for c in chain), key)
    members = _merge_straight(spec, per_family, straight, infos)

    coordinates = np.array(coords, dtype=float).reshape(-1, 3)
    nn = len(node_ids)

    # -- DOF numbering: rotations only where beams touch ---------------------
    rot = np.zeros(nn, dtype=bool)
    bt = per_family["beam"]["nodes"]
    if len(bt):
        rot[np.asarray(bt).ravel()] = True
    active = np.zeros(nn, dtype=bool)
    for f in FAMILIES:
        if len(per_family[f]["nodes"]):
            active[np.asarray(per_family[f]["nodes"]).ravel()] = True
    has = np.zeros((nn, 6), dtype=bool)
    has[:, :3] = True
    has[:, 3:] = rot[:, None]
    dof = -np.ones((nn, 6), dtype=np.int64)
    dof[has] = np.arange(int(has.sum()))
    ndof = int(has.sum())
    reference_coordinates, initial_rotations = _beam_reference(spec, index, coordinates, rot, origin)

    supported = np.zeros(ndof, dtype=bool)
    for nid, mask in spec.supports.items():
        if nid not in index:
            raise CaseError(f"supports.{nid}", f'no node named "{nid}"')
        g = dof[index[nid]][np.asarray(mask, dtype=bool)]
        supported[g[g >= 0]] = True
    restrained = supported.copy()
    lonely = np.flatnonzero(~active)
    if lonely.size:
        loose = [node_ids[k] for k in lonely if node_ids[k] not in spec.supports]
        if loose:
            log.warning("nodes joined to no member are held fixed: %s", ", ".join(loose[:10]))
        g = dof[lonely].ravel()
        restrained[g[g >= 0]] = True

    # -- element tables --------------------------------------------------------
    families = {}
    for f in FAMILIES:
        t = per_family[f]
        nodes = np.asarray(t["nodes"], dtype=np.int64).reshape(-1, 2)
        k = 6 if f == "beam" else 3
        dofs = np.concatenate([dof[nodes[:, 0], :k], dof[nodes[:, 1], :k]], axis=1) if len(nodes) \
            else np.zeros((0, 2 * k), dtype=np.int64)
        props = {
            "EA": np.asarray(t["EA"], dtype=float),
            "unstressed_length": np.asarray(t["L0"], dtype=float),
            "weight": np.asarray(t["weight"], dtype=float),
            "alpha": np.asarray(t["alpha"], dtype=float),
            "tension_only": np.asarray(t["tension_only"], dtype=bool),
            "breaking_load": np.asarray(t["breaking_load"], dtype=float),
        }
        if f == "beam":
            from .elements import beam
            for name in ("E", "G", "A", "Iy", "Iz", "J"):
                props[name] = np.asarray(t[name], dtype=float)
            xi, xj = reference_coordinates[nodes[:, 0]], reference_coordinates[nodes[:, 1]]
            props["length"] = np.linalg.norm(xj - xi, axis=1)
            ups = t["up"]
            up = None
            if any(u is not None for u in ups):
                up = np.array([u if u is not None else _default_up(a, b) for u, a, b in zip(ups, xi, xj)])
            try:
                props["frame0"] = beam.local_frames(xi, xj, up) if len(nodes) else np.zeros((0, 3, 3))
            except ValueError as exc:
                if up is None:  # the default up is never parallel: a geometry problem
                    raise CaseError("members", f"beam elements: {exc}") from None
                # name the member: the element whose up vector is most nearly
                # along its axis is the one the kernel refused
                ex = (xj - xi) / np.linalg.norm(xj - xi, axis=1)[:, None]
                un = up / np.linalg.norm(up, axis=1)[:, None]
                e = int(np.argmin(np.linalg.norm(np.cross(ex, un), axis=1)))
                mem = spec.members[int(t["member"][e])]
                key = mem.key or f"members[{int(t['member'][e])}]"
                raise CaseError(f"{key}.up", f"up = {[float(v) for v in up[e]]} of beam member \"{mem.id}\" "
                                f"is parallel to its axis {ex[e].round(6).tolist()}; it must fix the "
                                "direction of the local z axis, so choose a vector across the member") from None
        families[f] = ElementTable(f, nodes, np.asarray(t["member"], dtype=np.int64), dofs,
                                   MappingProxyType(props))

    model = Model(spec=spec, node_ids=tuple(node_ids), node_index=MappingProxyType(index),
                  coordinates=coordinates, dof=dof, restrained=restrained, supported=supported,
                  families=MappingProxyType(families), members=tuple(members),
                  member_index=MappingProxyType({m.id: k for k, m in enumerate(members)}),
                  load_cases=MappingProxyType({}), reference_coordinates=reference_coordinates,
                  initial_rotations=initial_rotations, origin=origin)
    cases = _build_loads(spec, model)
    combos = tuple((c.name, MappingProxyType(dict(c.factors))) for c in spec.combinations)
    from dataclasses import replace
    model = replace(model, load_cases=MappingProxyType(cases), combinations=combos)
    report_deck_nodes(model)   # fail at build time, not after the analysis
    notes = model_warnings(model)
    for w in notes:
        # info only: form-finding builds many models; ``check`` prints these
        # and every result repeats them in its warnings
        log.info(w)
    return replace(model, warnings=tuple(notes)) if notes else model


#: nodes closer than this fraction of the model's size are taken as one point
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
    from .elements.beam import expm_so3
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


_STRAIGHT_FIELDS = ("nodes", "member", "L0", "EA", "weight", "alpha", "tension_only", "breaking_load")


def _straight_members(spec: CaseSpec, index: Mapping[str, int], coords: list) -> dict:
    """Element data of the undivided bars and cables, in one batch.

    Big models (cable nets) are mostly such members; a Python pass per
    member costs ~15 us, the batch below ~1 us.  A member with any problem
    (unknown section or node, zero length) is left to the loop of
    :func:`build_model`, which raises the error for it in member order.

    Returns
    -------
    dict
        ``take`` (nm,) bool, the members done here; ``family`` -> dict of
        arrays named as :data:`_STRAIGHT_FIELDS` (one element per member).
    """
    mems = spec.members
    nm = len(mems)
    take = np.zeros(nm, dtype=bool)
    out = {"take": take}
    cand = np.fromiter((m.divide == 1 and m.interior is None and m.type in ("bar", "cable")
                        for m in mems), dtype=bool, count=nm)
    sections = {}
    for name in {m.section for m in mems}:
        sec = spec.sections.get(name)
        mat = None if sec is None else spec.materials.get(sec.material)
        sections[name] = None if mat is None else (sec, mat, sec.weight if sec.weight is not None
                                                   else sec.area * mat.unit_weight)
    code_of = {name: k for k, name in enumerate(sections)}
    table = [sections[name] for name in code_of]
    ok_section = np.array([v is not None for v in table] + [False])
    code = np.fromiter((code_of[m.section] for m in mems), dtype=np.int64, count=nm)
    ia = np.fromiter((index.get(m.nodes[0], -1) for m in mems), dtype=np.int64, count=nm)
    ib = np.fromiter((index.get(m.nodes[1], -1) for m in mems), dtype=np.int64, count=nm)
    xyz = np.asarray(coords, dtype=float).reshape(-1, 3)
    found = (ia >= 0) & (ib >= 0)
    d = np.where(found[:, None], xyz[np.maximum(ib, 0)] - xyz[np.maximum(ia, 0)], 0.0)
    chord = np.sqrt(np.einsum("ij,ij->i", d, d))
    take[:] = cand & ok_section[code] & found & (chord > 0.0)
    if not take.any():
        return out

    def column(values):
        return np.array([np.nan if v is None else v for v in values], dtype=float)

    def prop(fn):
        return np.array([fn(*v) if v is not None else np.nan for v in table], dtype=float)

    EA_s, w_s, alpha_s = prop(lambda s, m, w: m.E * s.area), prop(lambda s, m, w: w), prop(lambda s, m, w: m.alpha)
    brk_s = prop(lambda s, m, w: np.nan if s.breaking_load is None else s.breaking_load)
    for family in ("bar", "cable"):
        rows = np.flatnonzero(take & np.fromiter((m.type == family for m in mems), dtype=bool, count=nm))
        if not rows.size:
            continue
        picked = [mems[k] for k in rows]
        c = code[rows]
        EA = EA_s[c]
        length0 = column([m.length0 for m in picked])
        pretension = column([m.pretension for m in picked])
        L0 = np.where(~np.isnan(length0), length0,
                      np.where(~np.isnan(pretension), chord[rows] / (1.0 + pretension / EA), chord[rows]))
        tension_only = (np.ones(rows.size, dtype=bool) if family == "cable"
                        else np.fromiter((bool(m.tension_only) for m in picked), dtype=bool, count=rows.size))
        out[family] = {"nodes": np.stack([ia[rows], ib[rows]], axis=1), "member": rows, "L0": L0,
                       "EA": EA, "weight": w_s[c], "alpha": alpha_s[c], "tension_only": tension_only,
                       "breaking_load": brk_s[c]}
    return out


def _merge_straight(spec: CaseSpec, per_family: dict, straight: dict, infos: dict) -> list:
    """Put the batched elements among the looped ones in member order.

    ``per_family`` is updated in place (lists become arrays); returns the
    :class:`MemberInfo` of every member.
    """
    first = np.zeros(len(spec.members), dtype=np.int64)
    for f in FAMILIES:
        batch = straight.get(f)
        if batch is None:
            continue
        t = per_family[f]
        looped = len(t["member"])
        for name in _STRAIGHT_FIELDS:
            mine = np.asarray(t[name]).reshape((looped, 2) if name == "nodes" else (looped,))
            t[name] = np.concatenate([mine.astype(batch[name].dtype), batch[name]])
        order = np.argsort(t["member"], kind="stable")   # elements of a member stay in order
        for name in _STRAIGHT_FIELDS:
            t[name] = t[name][order]
    for f in FAMILIES:
        owner = np.asarray(per_family[f]["member"], dtype=np.int64)
        if owner.size:
            starts = np.flatnonzero(np.r_[True, owner[1:] != owner[:-1]])
            first[owner[starts]] = starts
    members = []
    take = straight["take"]
    for m_idx, mem in enumerate(spec.members):
        if take[m_idx]:
            members.append(MemberInfo(mem.id, mem.type, mem.section, mem.type, int(first[m_idx]), 1,
                                      tuple(mem.nodes), mem.key or f"members[{m_idx}]"))
        else:
            family, n, chain, key = infos[m_idx]
            members.append(MemberInfo(mem.id, mem.type, mem.section, family, int(first[m_idx]), n,
                                      chain, key))
    return members


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
    """The default documented in :func:`cablefe.elements.beam.local_frames`."""
    from .elements.beam import VERTICAL_COSINE
    e = (xj - xi) / np.linalg.norm(xj - xi)
    return np.array([1.0, 0.0, 0.0]) if abs(e[2]) > VERTICAL_COSINE else np.array([0.0, 0.0, 1.0])


# -- loads ----------------------------------------------------------------------

class _LoadBuilder:
    def __init__(self, model: Model):
        self.model = model
        self.nodal = np.zeros(model.ndof)
        self.weight = {f: np.zeros(len(t)) for f, t in model.families.items()}
        self.strain = {f: np.zeros(len(t)) for f, t in model.families.items()}
        self.prescribed = np.zeros(model.ndof)
        self.beam = np.zeros((len(model.families["beam"]), 12))

    def freeze(self) -> LoadVectors:
        return LoadVectors(self.nodal, self.weight, self.strain, self.prescribed, self.beam)

    def add_point(self, node: int, force) -> None:
        g = self.model.dof[node, :3]
        self.nodal[g] += force

    def add_element_load(self, family: str, elems: np.ndarray, per_length: np.ndarray,
                         a: np.ndarray, b: np.ndarray) -> None:
        """Uniform load per undeformed length on [a, b] of each element (m).

        Beams take the load on their stress-free geometry (the model's
        ``reference_coordinates``), the geometry their frames come from.
        """
        m = self.model
        t = m.families[family]
        nodes = t.nodes[elems]
        X = m.coordinates if family != "beam" or m.reference_coordinates is None else m.reference_coordinates
        xi, xj = X[nodes[:, 0]], X[nodes[:, 1]]
        length = np.linalg.norm(xj - xi, axis=1)
        p = np.broadcast_to(per_length, (len(elems), 3)).astype(float)
        if family == "beam":
            from .elements import beam
            fe = beam.equivalent_nodal_loads(xi, xj, t.props["frame0"][elems], length, p, a, b)
            np.add.at(self.nodal, t.dofs[elems], fe)
            np.add.at(self.beam, elems, fe)
            return
        if family == "cable":
            # a downward load over the whole element is carried exactly by the
            # catenary as extra weight per unstressed length; the rest is lumped
            full = (a <= 0.0) & (b >= length * (1 - 1e-12))
            down = np.where(full & (p[:, 2] < 0.0), -p[:, 2], 0.0)
            L0 = t.props["unstressed_length"][elems]
            np.add.at(self.weight[family], elems, down * length / L0)
            p = p.copy()
            p[:, 2] += down
        total = p * (b - a)[:, None]
        centre = 0.5 * (a + b) / length
        np.add.at(self.nodal, t.dofs[elems, :3], total * (1.0 - centre)[:, None])
        np.add.at(self.nodal, t.dofs[elems, 3:6], total * centre[:, None])


def _element_lengths(model: Model, family: str, elems) -> np.ndarray:
    """Undeformed chord (m) of elements: beams on their stress-free geometry, the rest as drawn."""
    t = model.families[family]
    if family == "beam":
        return t.props["length"][elems]
    X = model.coordinates
    return np.linalg.norm(X[t.nodes[elems, 1]] - X[t.nodes[elems, 0]], axis=1)


def _member_elements(model: Model, indices):
    """(family, element index array) groups for member indices."""
    groups: dict[str, list[int]] = {}
    for k in indices:
        mi = model.members[k]
        groups.setdefault(mi.family, []).extend(range(mi.first, mi.first + mi.count))
    return {f: np.asarray(v, dtype=np.int64) for f, v in groups.items()}


def _segment_elements(model: Model, a: str, b: str):
    """Elements from node a to node b in order: list of (family, element, reversed)."""
    ia, ib = model.node_index[a], model.node_index[b]
    for f, t in model.families.items():
        hit = np.flatnonzero((t.nodes[:, 0] == ia) & (t.nodes[:, 1] == ib))
        if hit.size:
            return [(f, int(hit[0]), False)]
        hit = np.flatnonzero((t.nodes[:, 0] == ib) & (t.nodes[:, 1] == ia))
        if hit.size:
            return [(f, int(hit[0]), True)]
    for mi in model.members:
        if mi.node_ids[0] == a and mi.node_ids[-1] == b:
            return [(mi.family, e, False) for e in range(mi.first, mi.first + mi.count)]
        if mi.node_ids[0] == b and mi.node_ids[-1] == a:
            return [(mi.family, e, True) for e in reversed(range(mi.first, mi.first + mi.count))]
    return None


def _build_loads(spec: CaseSpec, model: Model) -> dict[str, LoadVectors]:
    builders: dict[str, _LoadBuilder] = {}
    ids = PatternIndex([m.id for m in model.members])   # indexed once for every load
    for k, load in enumerate(spec.loads):
        key = load.key or f"loads[{k}]"
        lb = builders.setdefault(load.case, _LoadBuilder(model))
        if isinstance(load, SelfWeight):
            if not load.factor > 0.0:  # a spec built in code skips the reader's check
                raise CaseError(f"{key}.factor", f"expected a self-weight factor > 0, found {load.factor!r}")
            for f, t in model.families.items():
                if not len(t):
                    continue
                w = t.props["weight"] * load.factor
                if f == "cable":
                    lb.weight[f] += w
                else:
                    length = _element_lengths(model, f, np.arange(len(t)))
                    # weight per unstressed length times L0 is the element's weight
                    W = w * t.props["unstressed_length"]
                    lb.add_element_load(f, np.arange(len(t)), np.stack([0 * W, 0 * W, -W / length], axis=1),
                                        np.zeros(len(t)), length)
        elif isinstance(load, NodalLoad):
            n = _node(model, load.node, f"{key}.node")
            lb.add_point(n, np.asarray(load.force, dtype=float))
            if load.moment is not None and np.any(np.asarray(load.moment) != 0):
                g = model.dof[n, 3:]
                if (g < 0).any():
                    raise CaseError(f"{key}.moment", f'node "{load.node}" has no rotations '
                                    "(only nodes joined to beams take moments)")
                lb.nodal[g] += np.asarray(load.moment, dtype=float)
        elif isinstance(load, MemberLoad):
            hit = match_members(ids, load.members)
            if not hit:
                raise CaseError(f"{key}.members", f"no member matches {list(load.members)}")
            for f, elems in _member_elements(model, hit).items():
                t = model.families[f]
                length = _element_lengths(model, f, elems)
                lb.add_element_load(f, elems, np.asarray(load.per_length, dtype=float),
                                    np.zeros(len(elems)), length)
        elif isinstance(load, PatchLoad):
            _add_patch(model, lb, load, key)
        elif isinstance(load, TemperatureLoad):
            hit = match_members(ids, load.members)
            if not hit:
                raise CaseError(f"{key}.members", f"no member matches {list(load.members)}")
            for f, elems in _member_elements(model, hit).items():
                lb.strain[f][elems] += model.families[f].props["alpha"][elems] * load.delta_t
        elif isinstance(load, PrescribedDisplacement):
            n = _node(model, load.node, f"{key}.node")
            vals = list(load.displacement) + list(load.rotation or (None, None, None))
            for d, v in enumerate(vals):
                if v is None:
                    continue
                g = model.dof[n, d]
                if g < 0:
                    if v != 0.0:
                        raise CaseError(f"{key}", f'node "{load.node}" has no {DIRECTIONS[d]} DOF to move')
                    continue
                if not model.supported[g]:
                    if v != 0.0:
                        raise CaseError(f"{key}.displacement", f'node "{load.node}" is not restrained in '
                                        f"{DIRECTIONS[d]}; only supported directions can be moved")
                    continue
                lb.prescribed[g] += v
        else:  # pragma: no cover - the spec types are closed
            raise CaseError(key, f"unknown load type {type(load).__name__}")
    for c in spec.load_cases:
        builders.setdefault(c, _LoadBuilder(model))
    return {name: b.freeze() for name, b in builders.items()}


def _node(model: Model, name: str, key: str) -> int:
    try:
        return model.node_index[name]
    except KeyError:
        raise CaseError(key, f'no node named "{name}"') from None


def _add_patch(model: Model, lb: _LoadBuilder, load: PatchLoad, key: str) -> None:
    p = np.asarray(load.per_length, dtype=float)
    s = 0.0
    end = np.inf if load.end is None else load.end
    for a, b in zip(load.path[:-1], load.path[1:]):
        for name in (a, b):
            _node(model, name, f"{key}.path")
        chain = _segment_elements(model, a, b)
        if chain is None:
            raise CaseError(f"{key}.path", f'nodes "{a}" and "{b}" are not joined by a member')
        for f, e, rev in chain:
            length = float(_element_lengths(model, f, np.array([e]))[0])
            lo, hi = max(load.start, s), min(end, s + length)
            if hi > lo:
                u0, u1 = lo - s, hi - s
                if rev:  # distances are measured from node j of this element
                    u0, u1 = length - u1, length - u0
                lb.add_element_load(f, np.array([e]), p, np.array([u0]), np.array([u1]))
            s += length
