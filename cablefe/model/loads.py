"""Load vectors: nodal forces, element weight and thermal strain, beam
span loads and prescribed support movements of every load case.
"""

from __future__ import annotations

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
