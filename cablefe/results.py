"""Results of a static analysis, keyed by node and member ids.

Arrays stay in SI units; :meth:`Results.as_dict` converts to the case's units
for writing.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from .model import Model
from .solve.static import StaticResult


@dataclass(frozen=True)
class MemberForces:
    """Axial forces of every member (N).

    tension : (nm, 2) at the first and last node
    max_tension, min_tension : (nm,)
    slack : (nm,) bool, any element slack
    elements : list of (count, 2) arrays: end forces of each element
    beam_end_forces : member index -> (count, 12) local end forces of beams
    """

    tension: np.ndarray
    max_tension: np.ndarray
    min_tension: np.ndarray
    slack: np.ndarray
    elements: list
    beam_end_forces: Mapping[int, np.ndarray]


def element_end_tensions(model: Model, responses) -> dict:
    """family -> (n, 2) axial force at element ends, (n,) max, (n,) min, (n,) slack."""
    out = {}
    for f, r in responses.items():
        if f == "beam":
            le = r.local_end_forces
            # N positive in tension at both ends by the beam kernel's convention
            ends = np.stack([le[:, 0], le[:, 6]], axis=1)
            out[f] = (ends, ends.max(axis=1), ends.min(axis=1), np.zeros(len(ends), bool))
        elif f == "cable":
            out[f] = (r.end_tension, r.max_tension, r.min_tension, r.slack)
        else:
            ends = r.end_tension
            out[f] = (ends, r.tension, r.tension, r.slack)
    return out


def member_forces(model: Model, result: StaticResult) -> MemberForces:
    per = element_end_tensions(model, result.responses)
    nm = len(model.members)
    tension = np.zeros((nm, 2))
    mx = np.zeros(nm)
    mn = np.zeros(nm)
    slack = np.zeros(nm, dtype=bool)
    elements = []
    beams = {}
    for k, m in enumerate(model.members):
        ends, emax, emin, eslack = per[m.family]
        s = m.elements
        tension[k] = ends[s.start, 0], ends[s.stop - 1, 1]
        mx[k] = emax[s].max()
        mn[k] = emin[s].min()
        slack[k] = bool(eslack[s].any())
        elements.append(ends[s])
        if m.family == "beam":
            beams[k] = result.responses["beam"].local_end_forces[s]
    return MemberForces(tension, mx, mn, slack, elements, beams)


@dataclass(frozen=True)
class Results:
    """All solved combinations of a model."""

    model: Model
    items: tuple[StaticResult, ...]

    @property
    def names(self) -> list[str]:
        return [r.name for r in self.items]

    @property
    def all_converged(self) -> bool:
        return all(r.converged for r in self.items)

    def __getitem__(self, name: str) -> StaticResult:
        for r in self.items:
            if r.name == name:
                return r
        raise KeyError(f"no result named {name!r} (known: {', '.join(self.names)})")

    def displacements(self, name: str) -> np.ndarray:
        """(nn, 3) displacements from the model's coordinates, m."""
        return self[name].state.positions - self.model.coordinates

    def node_displacement(self, name: str, node: str) -> np.ndarray:
        return self.displacements(name)[self.model.node_index[node]]

    def reactions(self, name: str) -> dict[str, np.ndarray]:
        """Support force (N) on the structure at each supported node."""
        m = self.model
        out = {}
        r = self[name].reactions
        for nid in m.spec.supports:
            g = m.dof[m.node_index[nid], :3]
            out[nid] = r[g]
        return out

    def member_forces(self, name: str) -> MemberForces:
        return member_forces(self.model, self[name])

    def tension(self, name: str, member: str) -> np.ndarray:
        """(2,) tension at the first and last node of a member, N."""
        return self.member_forces(name).tension[self.model.member_index[member]]

    def as_dict(self) -> dict:
        """The results file content (contract v1), in the case's units."""
        m = self.model
        u = m.spec.units
        L, F = u.length_scale, u.force_scale
        out = {"units": {"length": u.length, "force": u.force}, "results": {}}
        for res in self.items:
            pos = res.state.positions
            disp = pos - m.coordinates
            nodes = {}
            for k, nid in enumerate(m.node_ids):
                entry = {"position": (pos[k] / L).tolist(), "displacement": (disp[k] / L).tolist()}
                if nid in m.spec.supports:
                    g = m.dof[k]
                    entry["reaction"] = (res.reactions[g[:3]] / F).tolist()
                    if (g[3:] >= 0).all():
                        entry["reaction_moment"] = (res.reactions[g[3:]] / (F * L)).tolist()
                if res.state.rotations is not None and m.dof[k, 3] >= 0:
                    from .elements.beam import logm_so3
                    entry["rotation"] = logm_so3(res.state.rotations[k][None])[0].tolist()
                nodes[nid] = entry
            mf = member_forces(m, res)
            members = {}
            for k, mem in enumerate(m.members):
                e = {"tension": (mf.tension[k] / F).tolist(),
                     "max_tension": float(mf.max_tension[k] / F),
                     "min_tension": float(mf.min_tension[k] / F),
                     "slack": bool(mf.slack[k]),
                     "elements": (mf.elements[k] / F).tolist()}
                if k in mf.beam_end_forces:
                    le = mf.beam_end_forces[k]
                    scale = np.array([F, F, F, F * L, F * L, F * L] * 2)
                    le = le / scale
                    e["shear"] = [[row[1], row[2], row[7], row[8]] for row in le.tolist()]
                    e["torsion"] = [[row[3], row[9]] for row in le.tolist()]
                    e["moment"] = [[row[4], row[5], row[10], row[11]] for row in le.tolist()]
                    e["local_end_forces"] = le.tolist()
                members[mem.id] = e
            o = res.outcome
            out["results"][res.name] = {
                "converged": bool(o.converged),
                "load_factor": float(o.load_factor),
                "iterations": int(o.iterations),
                "residual": float(o.residual),
                "status": o.status,
                "message": o.message,
                "factors": dict(res.factors),
                "nodes": nodes,
                "members": members,
            }
        return out
