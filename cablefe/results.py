"""Results of a static analysis, keyed by node and member ids.

Arrays stay in SI units; :meth:`Results.as_dict` converts to the case's units
for writing.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from .model import Model, report_deck_nodes
from .solvers.static import StaticResult


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


def beam_section_forces(model: Model, result: StaticResult) -> np.ndarray:
    """Stress resultants at both ends of every beam element, (n_beam, 12).

    ``[N, Vy, Vz, T, My, Mz]`` at end i then end j (N, N m) in the current
    corotated axes, signed as in :mod:`cablefe.elements.beam`.  The kernel's
    end forces hold the nodal actions of an unloaded element; member loads
    on the element (self-weight, ``per_length``, patches) enter the model as
    consistent nodal loads, so they are subtracted here (scaled by the load
    factor reached) to give the section forces at the element ends.
    """
    r = result.responses["beam"]
    loads = model.combined_loads(result.factors)
    if loads.beam_loads is None or not np.any(loads.beam_loads):
        return r.local_end_forces
    n = len(r.force)
    acting = r.force - result.outcome.load_factor * loads.beam_loads
    loc = np.einsum("nki,nbk->nbi", r.frame, acting.reshape(n, 4, 3)).reshape(n, 12)
    return np.concatenate([-loc[:, 0:6], loc[:, 6:12]], axis=1)


def member_forces(model: Model, result: StaticResult) -> MemberForces:
    per = element_end_tensions(model, result.responses)
    if "beam" in per:
        le = beam_section_forces(model, result)
        ends = np.stack([le[:, 0], le[:, 6]], axis=1)
        per["beam"] = (ends, ends.max(axis=1), ends.min(axis=1), np.zeros(len(ends), bool))
    nm = len(model.members)
    tension = np.zeros((nm, 2))
    mx = np.full(nm, -np.inf)
    mn = np.full(nm, np.inf)
    slack = np.zeros(nm, dtype=bool)
    # batched per family: element -> member through the table's member index
    first = np.fromiter((m.first for m in model.members), dtype=np.int64, count=nm)
    last = first + np.fromiter((m.count for m in model.members), dtype=np.int64, count=nm) - 1
    family = np.array([m.family for m in model.members], dtype=object)
    for f, (ends, emax, emin, eslack) in per.items():
        owner = model.families[f].member
        mine = np.flatnonzero(family == f)
        tension[mine, 0] = ends[first[mine], 0]
        tension[mine, 1] = ends[last[mine], 1]
        np.maximum.at(mx, owner, emax)
        np.minimum.at(mn, owner, emin)
        slack |= np.bincount(owner, weights=eslack, minlength=nm) > 0
    elements = [per[m.family][0][m.elements] for m in model.members]
    beams = {k: le[m.elements] for k, m in enumerate(model.members) if m.family == "beam"}
    return MemberForces(tension, mx, mn, slack, elements, beams)


def result_header(res: StaticResult, force_scale: float = 1.0, length_scale: float = 1.0) -> dict:
    """The per-result entries of results.json before ``nodes`` and ``members``.

    ``equilibrium`` is :func:`cablefe.solvers.static.equilibrium_check` in
    the file's units (forces divided by ``force_scale`` N, moments by
    ``force_scale * length_scale`` N m).
    """
    o = res.outcome
    return {"converged": bool(o.converged), "load_factor": float(o.load_factor),
            "iterations": int(o.iterations), "residual": float(o.residual), "status": o.status,
            "message": o.message, "factors": dict(res.factors), "warnings": list(res.warnings),
            "equilibrium": equilibrium_in_units(res.equilibrium, force_scale, length_scale)}


def equilibrium_in_units(eq: Mapping, force_scale: float, length_scale: float) -> dict:
    """The equilibrium check with forces in ``force_scale`` N and moments in ``force_scale * length_scale`` N m."""
    out = {}
    for key, value in eq.items():
        if key in ("largest_unbalanced_force", "load_scale"):
            out[key] = float(value) / force_scale
        elif key == "largest_unbalanced_moment":
            out[key] = float(value) / (force_scale * length_scale)
        elif key in ("total_load", "reactions_plus_loads"):
            out[key] = [float(v) / force_scale for v in value]
        else:
            out[key] = value
    return out


def stability_and_path(model: Model, res: StaticResult) -> dict:
    """The ``stability`` and ``path`` entries of a result, in the case's units.

    ``stability`` counts the negative pivots (eigenvalues) of the tangent at
    the last converged state (None when it was not measured); ``path`` has
    one entry per converged step with the displacements of the tracked
    nodes and of the node of largest displacement at that step.
    """
    o = res.outcome
    n = o.negative_pivots[-1] if o.negative_pivots else None
    L = model.spec.units.length_scale
    ids = model.node_ids
    path = [{"load_factor": lam, "displacements": dict(zip((ids[k] for k in nodes.tolist()), (disp / L).tolist()))}
            for lam, nodes, disp in (e for e in o.path if e is not None)]
    return {"stability": {"negative_pivots": n, "stable": None if n is None else n == 0}, "path": path}


@dataclass(frozen=True)
class Results:
    """All solved combinations of a model."""

    model: Model
    items: tuple[StaticResult, ...]
    # member forces per result, computed once: the summary, the report, the
    # plots and the writers all ask for them
    _forces: dict = field(default_factory=dict, init=False, repr=False, compare=False)

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

    def positions(self, name: str) -> np.ndarray:
        """(nn, 3) deformed node positions in site coordinates (as in the case), m.

        ``self[name].state.positions`` are the same positions relative to
        the model's local origin (``model.origin``).
        """
        return self.model.to_site(self[name].state.positions)

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
        if name not in self._forces:
            self._forces[name] = member_forces(self.model, self[name])
        return self._forces[name]

    def tension(self, name: str, member: str) -> np.ndarray:
        """(2,) tension at the first and last node of a member, N."""
        return self.member_forces(name).tension[self.model.member_index[member]]

    def deck_deflection(self, name: str) -> dict | None:
        """Largest vertical deflection among the ``[report] deck`` nodes.

        Returns
        -------
        dict or None
            ``node`` (id), ``index``, ``displacement`` (3,) m, ``vertical``
            (z displacement, m, negative down) and ``x`` (the node's x in
            site coordinates, m); None when the case has no
            ``[report] deck``.
        """
        nodes = report_deck_nodes(self.model)
        if nodes is None:
            return None
        disp = self.displacements(name)[nodes]
        k = int(np.argmax(np.abs(disp[:, 2])))
        n = int(nodes[k])
        return {"node": self.model.node_ids[n], "index": n, "displacement": disp[k].copy(),
                "vertical": float(disp[k, 2]), "x": float(self.model.site_coordinates[n, 0])}

    def as_dict(self) -> dict:
        """The results file content (contract v1), in the case's units."""
        m = self.model
        u = m.spec.units
        L, F = u.length_scale, u.force_scale
        out = {"units": {"length": u.length, "force": u.force}, "results": {}}
        for res in self.items:
            pos = res.state.positions
            disp = pos - m.coordinates
            pos = m.to_site(pos)   # positions are written in site coordinates
            # whole arrays to lists once, then one small dict per node and
            # member (a per-node numpy call costs more than the dict itself)
            nodes = {nid: {"position": p, "displacement": d} for nid, p, d in
                     zip(m.node_ids, (pos / L).tolist(), (disp / L).tolist())}
            for nid in m.spec.supports:
                k = m.node_index[nid]
                g = m.dof[k]
                entry = nodes[nid]
                entry["reaction"] = (res.reactions[g[:3]] / F).tolist()
                if (g[3:] >= 0).all():
                    entry["reaction_moment"] = (res.reactions[g[3:]] / (F * L)).tolist()
            if res.state.rotations is not None:
                from .elements.beam.rotations import logm_so3
                turning = np.flatnonzero(m.dof[:, 3] >= 0)
                R = res.state.rotations[turning]
                if m.initial_rotations is not None:
                    # measured from the orientation in [nodes], as displacements
                    # are from its positions: R R0^T (rotations compose on the left)
                    R = np.einsum("nij,nkj->nik", R, m.initial_rotations[turning])
                for k, theta in zip(turning, logm_so3(R).tolist()):
                    nodes[m.node_ids[k]]["rotation"] = theta
            mf = self.member_forces(res.name)
            members = {}
            counts = [len(e) for e in mf.elements]
            split = np.cumsum([0] + counts).tolist()
            ends_all = (np.concatenate(mf.elements) / F).tolist() if counts else []
            for k, (mem, ten, top, low, loose) in enumerate(zip(
                    m.members, (mf.tension / F).tolist(), (mf.max_tension / F).tolist(),
                    (mf.min_tension / F).tolist(), mf.slack.tolist())):
                e = {"tension": ten, "max_tension": top, "min_tension": low, "slack": loose,
                     "elements": ends_all[split[k]:split[k + 1]]}
                if k in mf.beam_end_forces:
                    # stress resultants in the element's current local axes,
                    # same sign at both ends (beam.local_end_forces): per
                    # element [[end i], [end j]] with [Vy, Vz] and [My, Mz]
                    le = mf.beam_end_forces[k]
                    scale = np.array([F, F, F, F * L, F * L, F * L] * 2)
                    ends = (le / scale).reshape(-1, 2, 6)
                    e["shear"] = ends[:, :, 1:3].tolist()
                    e["torsion"] = ends[:, :, 3].tolist()
                    e["moment"] = ends[:, :, 4:6].tolist()
                    e["local_end_forces"] = ends.reshape(-1, 12).tolist()
                members[mem.id] = e
            out["results"][res.name] = {**result_header(res, F, L), **stability_and_path(m, res),
                                        "nodes": nodes, "members": members}
            deck = self.deck_deflection(res.name)
            if deck is not None:   # extension: [report] deck
                out["results"][res.name]["deck"] = {"node": deck["node"],
                                                    "deflection": (deck["displacement"] / L).tolist(),
                                                    "vertical": deck["vertical"] / L}
        return out
