"""Load vectors: nodal forces, element weight and thermal strain, beam
span loads and prescribed support movements of every load case.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CaseError
from ..patterns import PatternIndex
from ..spec import (DIRECTIONS, CaseSpec, MemberLoad, NodalLoad, PatchLoad, PrescribedDisplacement,
                    SelfWeight, TemperatureLoad)
from .tables import LoadVectors, Model, match_members


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
            from ..elements import beam
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


class EdgeIndex:
    """The element or member joining two nodes, found by hash or binary search.

    Built once per model (``O(elements log elements)``), so a path of ``m``
    nodes is resolved in ``O(m log elements)`` instead of a scan over every
    element per segment.
    """

    def __init__(self, model: Model):
        self.model = model
        nn = max(len(model.node_ids), 1)
        self._nn = nn
        self._tables = []
        for f, t in model.families.items():
            if not len(t):
                continue
            key = t.nodes[:, 0].astype(np.int64) * nn + t.nodes[:, 1]
            unique, first = np.unique(key, return_index=True)   # the first element of each node pair
            self._tables.append((f, unique, first))
        self._members: dict[tuple[str, str], tuple[int, bool]] = {}
        for k, mi in enumerate(model.members):
            self._members.setdefault((mi.node_ids[0], mi.node_ids[-1]), (k, False))
            self._members.setdefault((mi.node_ids[-1], mi.node_ids[0]), (k, True))

    def _element(self, unique, first, key: int):
        at = int(np.searchsorted(unique, key))
        return int(first[at]) if at < len(unique) and unique[at] == key else None

    def segment(self, a: str, b: str):
        """Elements from node ``a`` to node ``b`` in order: a list of
        ``(family, element, reversed)``, or None when nothing joins them.

        An element joining the two (the first family, then the lowest
        element, that has them as ends in this order, else the other way),
        otherwise the elements of the first member declared between them.
        """
        ia, ib = self.model.node_index[a], self.model.node_index[b]
        for f, unique, first in self._tables:
            e = self._element(unique, first, ia * self._nn + ib)
            if e is not None:
                return [(f, e, False)]
            e = self._element(unique, first, ib * self._nn + ia)
            if e is not None:
                return [(f, e, True)]
        hit = self._members.get((a, b))
        if hit is None:
            return None
        k, rev = hit
        mi = self.model.members[k]
        order = range(mi.first, mi.first + mi.count)
        return [(mi.family, e, rev) for e in (reversed(order) if rev else order)]


@dataclass(frozen=True)
class PathChain:
    """The elements along a path of nodes, in order, with their undeformed lengths.

    family : (k,) family name of each element
    element : (k,) element index in its family's table
    reverse : (k,) True when the element runs against the path
    length : (k,) undeformed chord of each element, m (beams: stress-free)
    nodes : (k + 1,) node indices of the points along the chain
    """

    family: tuple
    element: np.ndarray
    reverse: np.ndarray
    length: np.ndarray
    nodes: np.ndarray

    @property
    def starts(self) -> np.ndarray:
        """(k,) distance of each element's first point along the path, m."""
        return np.concatenate([[0.0], np.cumsum(self.length)[:-1]]) if len(self.length) else np.zeros(0)


def path_chain(model: Model, path, key: str, edges: EdgeIndex | None = None) -> PathChain:
    """The :class:`PathChain` of the node ids ``path``; CaseError at ``key`` when
    a node is unknown or two consecutive nodes are not joined."""
    edges = edges or EdgeIndex(model)
    fams, elems, revs = [], [], []
    nodes = [_node(model, path[0], key)]
    for a, b in zip(path[:-1], path[1:]):
        _node(model, b, key)
        chain = edges.segment(a, b)
        if chain is None:
            raise CaseError(key, f'nodes "{a}" and "{b}" are not joined by a member')
        for f, e, rev in chain:
            fams.append(f)
            elems.append(e)
            revs.append(rev)
            n0, n1 = model.families[f].nodes[e]
            nodes.append(int(n0 if rev else n1))
    elems = np.asarray(elems, dtype=np.int64)
    fam = np.asarray(fams, dtype=object)
    length = np.zeros(len(elems))
    for f in dict.fromkeys(fams):
        mine = fam == f
        length[mine] = _element_lengths(model, f, elems[mine])
    return PathChain(tuple(fams), elems, np.asarray(revs, dtype=bool), length, np.asarray(nodes, dtype=np.int64))


def add_path_load(lb: "_LoadBuilder", chain: PathChain, per_length, start: float, end: float | None) -> None:
    """A uniform load per length (N/m) on ``[start, end]`` m along ``chain``
    (``end`` None: to its end), as element loads on the parts covered."""
    p = np.asarray(per_length, dtype=float)
    s0 = chain.starts
    lo = np.maximum(start, s0)
    hi = np.minimum(np.inf if end is None else end, s0 + chain.length)
    hit = hi > lo
    u0, u1 = lo - s0, hi - s0
    # on a reversed element distances are measured from its node j
    rev = chain.reverse
    u0, u1 = np.where(rev, chain.length - u1, u0), np.where(rev, chain.length - u0, u1)
    fam = np.asarray(chain.family, dtype=object)
    for f in dict.fromkeys(chain.family):
        mine = np.flatnonzero(hit & (fam == f))
        if mine.size:
            lb.add_element_load(f, chain.element[mine], p, u0[mine], u1[mine])


def _build_loads(spec: CaseSpec, model: Model) -> dict[str, LoadVectors]:
    builders: dict[str, _LoadBuilder] = {}
    ids = PatternIndex([m.id for m in model.members])   # indexed once for every load
    edges = None    # the node pairs of elements and members, indexed at the first patch load
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
            edges = edges or EdgeIndex(model)
            _add_patch(model, lb, load, key, edges)
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


def _add_patch(model: Model, lb: _LoadBuilder, load: PatchLoad, key: str, edges: EdgeIndex | None = None) -> None:
    add_path_load(lb, path_chain(model, load.path, f"{key}.path", edges), load.per_length, load.start, load.end)