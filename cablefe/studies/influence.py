"""Influence lines by the adjoint method (Müller-Breslau's principle).

Linearised at the base state ``u0`` with tangent ``K``, a response
``R(u)`` changes under a load ``δf`` by ``δR = c · K^-1 δf`` with
``c = ∂R/∂u``.  Solving once ``K^T λ = c`` (the structure's deflected shape
under the response's dual unit "release" load: Müller-Breslau) gives the
whole influence line at once, ``η(s) = λ · f_unit(s)``.  So the base
tangent is factorised once (the study session's factorization, reused) and
each response costs one back-substitution.  When the lane has fewer
points than there are responses, the same matrix ``C K^-1 F`` is formed
from one back-substitution of ``K`` per lane point instead (for a
symmetric tangent this is Maxwell-Betti reciprocity), whichever is fewer.  Responses:

* node displacement ``ux uy uz``: ``c`` is the unit vector of the DOF;
* member tension: the end of the member that is most in tension at the
  base state; with ``f`` the element's internal force at that end,
  ``T = |f|`` for a cable and ``T = ±e·f`` for a bar or beam (``e`` the
  chord direction), so ``c = ê^T K_e[end rows]`` (plus, for beams, the
  turning of the chord against the end's transverse force
  ``f⊥·(du_j - du_i)/L``; for a bar ``f`` is along ``e`` and that term is
  zero);
* support reaction ``Rx Ry Rz``: ``R = f_int - f_ext`` at a restrained DOF,
  so ``c`` is that row of the full tangent, less the unit load itself when
  it stands on the support.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from ..results import element_end_tensions

#: solve per lane point instead of per response when that is fewer (same
#: numbers; a switch for tests)
RECIPROCITY = True
#: the Schur complement route of the linear layer when it pays (same
#: numbers; a switch for tests)
SCHUR = True


@dataclass(frozen=True)
class InfluenceLines:
    """Influence lines along a lane (SI: m/N for displacements, N/N otherwise).

    names : response names (``"<node> ux"``, ``"<member> tension"``, ``"<node> Rx"``)
    kind : per response "displacement" | "tension" | "reaction"
    owner : per response node or member id
    direction : per response 0, 1, 2 (x, y, z) or -1 for tensions
    values : (n_responses, n_points) influence of a unit force along ``direction`` of the load
    s : (n_points,) positions along the lane, m
    base : (n_responses,) response values at the base state (m, N)
    """

    names: list
    kind: list
    owner: list
    direction: np.ndarray
    values: np.ndarray
    s: np.ndarray
    base: np.ndarray


def _tension_rows(model, assembler, state, loads, members, blocks):
    """Gradient rows ``∂T/∂u`` (free DOFs) of the watched members' governing end tension.

    ``blocks`` are the element responses (with tangents) at ``state``.  Batched
    per family: the governing end is the first largest end tension of the
    member's elements, in element then end order (as ``numpy.argmax``).
    Returns the rows as triplets ``(row, column, value)`` and the base tensions.
    """
    per = element_end_tensions(model, blocks)
    members = np.asarray(members, dtype=int)
    base = np.zeros(len(members))
    rows, cols, vals = [np.zeros(0, int)], [np.zeros(0, int)], [np.zeros(0)]
    info = [model.members[k] for k in members.tolist()]
    family = np.array([m.family for m in info])
    first_all = np.array([m.first for m in info], dtype=np.int64)
    count_all = np.array([m.count for m in info], dtype=np.int64)
    for f in dict.fromkeys(family.tolist()):
        r_idx = np.flatnonzero(family == f)
        first, count = first_all[r_idx], count_all[r_idx]
        # the (member row, element) pairs of these members, then their ends
        owner = np.repeat(np.arange(len(r_idx)), count)
        elem = np.repeat(first, count) + np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
        value = per[f][0][elem].ravel()
        who = np.repeat(owner, 2)
        order = np.lexsort((np.arange(value.size), -value, who))
        best = order[np.searchsorted(who[order], np.arange(len(r_idx)))]
        e, end = elem[best // 2], best % 2
        base[r_idx] = value[best]
        resp, t = blocks[f], model.families[f]
        k3 = 3 if f != "beam" else 6           # DOFs per node
        sel = end[:, None] * k3 + np.arange(3)                      # (n, 3) rows of the end
        fe = np.take_along_axis(resp.force[e], sel, axis=1)         # (n, 3)
        rows_end = np.take_along_axis(resp.tangent[e], sel[:, :, None], axis=1)   # (n, 3, k)
        sign = np.where(end == 1, 1.0, -1.0)
        d = state.positions[t.nodes[e, 1]] - state.positions[t.nodes[e, 0]]
        chord = np.linalg.norm(d, axis=1)
        axis = d / chord[:, None]
        if f == "cable":
            size = np.linalg.norm(fe, axis=1)
            w = np.divide(fe, size[:, None], out=np.zeros_like(fe), where=size[:, None] > 0)
            g = np.einsum("ni,nik->nk", w, rows_end)
        else:
            g = np.einsum("ni,nik->nk", sign[:, None] * axis, rows_end)
            if f == "beam":
                acting = fe
                if loads.beam_loads is not None:
                    acting = acting - np.take_along_axis(loads.beam_loads[e], sel, axis=1)
                perp = acting - np.einsum("ni,ni->n", axis, acting)[:, None] * axis
                turn = (sign / chord)[:, None] * perp
                g[:, 6:9] += turn
                g[:, 0:3] -= turn
        eq = assembler.equation[t.dofs[e]]
        keep = eq >= 0
        rows.append(np.broadcast_to(r_idx[:, None], eq.shape)[keep])
        cols.append(eq[keep])
        vals.append(g[keep])
    return (np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)), base


def _reaction_rows(model, assembler, blocks, dofs):
    """Rows ``dofs`` (global DOFs) of the tangent over all DOFs, restricted to the
    free columns, from the element blocks (the assembly of those rows only), as
    triplets ``(row, column, value)`` (repeated entries add up)."""
    index = np.full(model.ndof, -1)
    index[dofs] = np.arange(len(dofs))
    rows, cols, vals = [np.zeros(0, int)], [np.zeros(0, int)], [np.zeros(0)]
    for f, r in blocks.items():
        g = model.families[f].dofs                       # (n, k)
        row = index[g]                                   # (n, k)
        col = assembler.equation[g]
        hit = np.flatnonzero((row >= 0).any(axis=1))
        if not hit.size:
            continue
        row, col, K = row[hit], col[hit], r.tangent[hit]          # K (m, k, k)
        keep = (row[:, :, None] >= 0) & (col[:, None, :] >= 0)
        rows.append(np.broadcast_to(row[:, :, None], K.shape)[keep])
        cols.append(np.broadcast_to(col[:, None, :], K.shape)[keep])
        vals.append(K[keep])
    return np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)


def influence_lines(session, lane, direction, node_ids=None, member_ids=None) -> InfluenceLines:
    """Influence lines of the watched responses of ``session`` along ``lane``.

    Parameters
    ----------
    session : :class:`cablefe.studies.base.Session` (model, assembler,
        solver, base state and loads)
    lane : :class:`cablefe.studies.lane.Lane`
    direction : (3,) direction of the moving unit force (normalised here)
    node_ids, member_ids : index arrays of the watched nodes and members;
        default the session's watch
    """
    model, asm, state, loads = session.model, session.assembler, session.base_state, session.base_loads
    w = session.ctx.watch
    nodes = w.nodes if node_ids is None else np.asarray(node_ids)
    members = w.members if member_ids is None else np.asarray(member_ids)
    d = np.asarray(direction, dtype=float)
    d = d / np.linalg.norm(d)
    nfree = asm.nfree
    names, kind, owner, dirs, base = [], [], [], [], []
    disp0 = state.positions - model.coordinates

    # displacement rows: ux uy uz of each watched node, in node order
    nodes = np.asarray(nodes, dtype=np.int64)
    g = model.dof[nodes, :3].ravel()                  # (3 n,) global DOFs (-1: none)
    eq = np.where(g >= 0, asm.equation[np.maximum(g, 0)], -1)
    r_rows = np.flatnonzero(eq >= 0)
    r_cols = eq[r_rows]
    ids = [model.node_ids[n] for n in nodes.tolist()]
    names += [f"{i} {label}" for i in ids for label in ("ux", "uy", "uz")]
    kind += ["displacement"] * g.size
    owner += [i for i in ids for _ in range(3)]
    dirs += [0, 1, 2] * len(ids)
    base += disp0[nodes, :3].ravel().tolist()
    # the response rows C = dR/du over the free DOFs, gathered as triplets
    triplets = [(r_rows, r_cols, np.ones(len(r_rows)))]

    blocks = session.base_evaluation.responses
    T0 = np.zeros(0)
    if len(members):
        (rows, cols, vals), T0 = _tension_rows(model, asm, state, loads, members, blocks)
        triplets.append((rows + len(names), cols, vals))
    for k in members:
        names.append(f"{model.members[k].id} tension")
        kind.append("tension")
        owner.append(model.members[k].id)
        dirs.append(-1)
    base += T0.tolist()

    # reactions of watched supported nodes, in their restrained directions
    reac = [(n, a, int(model.dof[n, a])) for n in nodes if model.node_ids[n] in model.spec.supports
            for a in range(3) if model.dof[n, a] >= 0 and model.supported[model.dof[n, a]]]
    if reac:
        g = np.array([r[2] for r in reac])
        rows, cols, vals = _reaction_rows(model, asm, blocks, g)
        triplets.append((rows + len(names), cols, vals))
        R0 = session.base_evaluation.internal[g] - loads.nodal[g]
        for (n, a, _), r0 in zip(reac, R0):
            names.append(f"{model.node_ids[n]} R{'xyz'[a]}")
            kind.append("reaction")
            owner.append(model.node_ids[n])
            dirs.append(a)
            base.append(float(r0))
    rows, cols, vals = (np.concatenate(x) for x in zip(*triplets))
    C = sp.csr_matrix((vals, (rows, cols)), shape=(len(names), nfree))

    # unit forces at the lane points, on the free equations (sparse: one
    # to three entries per column); a reaction takes the force that stands
    # on its own support directly
    P = len(lane.nodes)
    g = model.dof[lane.nodes, :3]                     # (P, 3) global DOFs
    comp = np.broadcast_to(d[None, :], g.shape)
    eq = np.where(g >= 0, asm.equation[np.maximum(g, 0)], -1)
    on = (eq >= 0) & (comp != 0.0)
    # (built column by column: row-major over (point, axis) is column order)
    indptr = np.concatenate([[0], np.cumsum(np.count_nonzero(on, axis=1))])
    F_free = sp.csc_matrix((comp[on], eq[on], indptr), shape=(nfree, P))
    direct = np.zeros((len(names), P))
    if reac:
        # (reaction, lane point, axis) where the unit force stands on the support
        i, point, axis = np.nonzero(np.array([r[2] for r in reac])[:, None, None] == g[None])
        direct[len(names) - len(reac) + i, point] = -d[axis]

    values = np.zeros((len(names), P))
    symmetric_tangent = not model.has_rotations
    # few unknowns touched (a lane across a big net): one factorisation with
    # them ordered last gives C K^-1 F from the Schur complement
    product = None
    if nfree and SCHUR and session.base_factor is not None:
        product = session.base_factor.schur_product(C, F_free)
    if product is not None:
        values[:] = product
    elif nfree:
        if RECIPROCITY and P < len(names) and session.base_factor is not None:
            # fewer lane points than responses: solve K X = F once per lane
            # point with the session's factorization of the base tangent,
            # then C X: the same numbers as the adjoint (C K^-1 F either
            # way; for a symmetric K this is Maxwell-Betti reciprocity), and
            # an unsymmetric K (beams) needs no factorization of K^T
            values[:] = session.base_factor.solve_product(C, F_free)
        else:
            # the adjoint needs K^T; the tangent of bars and cables is
            # symmetric, so the session's factorization serves as it is
            fact = session.base_factor
            if not symmetric_tangent or fact is None:
                fact = session.solver.factorize(session.base_tangent.T.tocsr())
            values[:] = fact.solve_product(F_free.T, C.T).T
    values += direct
    return InfluenceLines(names, kind, owner, np.asarray(dirs), values, lane.s.copy(), np.asarray(base))

