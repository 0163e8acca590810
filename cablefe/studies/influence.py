"""Influence lines by the adjoint method (Müller-Breslau's principle).

Linearised at the base state ``u0`` with tangent ``K``, a response
``R(u)`` changes under a load ``δf`` by ``δR = c · K^-1 δf`` with
``c = ∂R/∂u``.  Solving once ``K^T λ = c`` (the structure's deflected shape
under the response's dual unit "release" load: Müller-Breslau) gives the
whole influence line at once, ``η(s) = λ · f_unit(s)``.  So the base
tangent is factorised once (the study session's factorization, reused) and
each response costs one back-substitution.  When the tangent is symmetric
(no beams) and the lane has fewer points than there are responses, the
same matrix ``C K^-1 F`` is formed from one back-substitution per lane
point instead (Maxwell-Betti), whichever is fewer.  Responses:

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

from ..assembly import Assembler
from ..results import element_end_tensions

#: adjoint right-hand sides solved together (bounds the dense block in memory)
CHUNK = 256
#: solve per lane point instead of per response when that is fewer and K is
#: symmetric (same numbers; a switch for tests)
RECIPROCITY = True


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


def _tension_rows(model, assembler, state, loads, members):
    """Gradient rows ``∂T/∂u`` (free DOFs) of the watched members' governing end tension."""
    blocks = assembler.element_responses(state, loads, 1.0, True)
    per = element_end_tensions(model, blocks)
    rows, cols, vals, base = [], [], [], []
    for r, k in enumerate(members):
        mi = model.members[k]
        f = mi.family
        t = model.families[f]
        ends = per[f][0][mi.elements]
        e_local, end = np.unravel_index(int(np.argmax(ends)), ends.shape)
        e = mi.first + int(e_local)
        resp = blocks[f]
        force, tangent = resp.force[e], resp.tangent[e]
        k3 = 3 if f != "beam" else 6           # DOFs per node
        rows_end = slice(end * k3, end * k3 + 3)
        sign = 1.0 if end == 1 else -1.0
        xi, xj = state.positions[t.nodes[e, 0]], state.positions[t.nodes[e, 1]]
        chord = np.linalg.norm(xj - xi)
        axis = (xj - xi) / chord
        base.append(float(ends[e_local, end]))
        if f == "cable":
            fe = force[rows_end]
            size = np.linalg.norm(fe)
            w = fe / size if size > 0 else np.zeros(3)
            g = w @ tangent[rows_end, :]
        else:
            g = sign * axis @ tangent[rows_end, :]
            if f == "beam":
                acting = force[rows_end]
                if loads.beam_loads is not None:
                    acting = acting - loads.beam_loads[e, rows_end]
                perp = acting - (axis @ acting) * axis
                g = g.copy()
                g[6:9] += sign * perp / chord
                g[0:3] -= sign * perp / chord
        eq = assembler.equation[t.dofs[e]]
        keep = eq >= 0
        rows += [r] * int(keep.sum())
        cols += eq[keep].tolist()
        vals += g[keep].tolist()
    return (sp.csr_matrix((vals, (rows, cols)), shape=(len(members), assembler.nfree)),
            np.asarray(base))


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
    nfree, ndof = asm.nfree, model.ndof
    names, kind, owner, dirs, base = [], [], [], [], []
    disp0 = state.positions - model.coordinates

    # displacement rows
    r_rows, r_cols = [], []
    for n in nodes:
        for a, label in enumerate(("ux", "uy", "uz")):
            g = model.dof[n, a]
            if g >= 0 and asm.equation[g] >= 0:
                r_rows.append(len(names))
                r_cols.append(int(asm.equation[g]))
            names.append(f"{model.node_ids[n]} {label}")
            kind.append("displacement")
            owner.append(model.node_ids[n])
            dirs.append(a)
            base.append(float(disp0[n, a]))
    C_disp = sp.csr_matrix((np.ones(len(r_rows)), (r_rows, r_cols)), shape=(len(names), nfree))

    C_ten, T0 = _tension_rows(model, asm, state, loads, members) if len(members) else \
        (sp.csr_matrix((0, nfree)), np.zeros(0))
    for k, t in zip(members, T0):
        names.append(f"{model.members[k].id} tension")
        kind.append("tension")
        owner.append(model.members[k].id)
        dirs.append(-1)
    base += T0.tolist()

    # reactions of watched supported nodes, in their restrained directions
    reac = [(n, a, int(model.dof[n, a])) for n in nodes if model.node_ids[n] in model.spec.supports
            for a in range(3) if model.dof[n, a] >= 0 and model.supported[model.dof[n, a]]]
    C_reac = sp.csr_matrix((len(reac), nfree))
    if reac:
        full = Assembler(model, free=np.arange(ndof))
        ev = full.evaluate(state, loads, 1.0, True)
        Kfull = ev.tangent.tocsr()
        g = np.array([r[2] for r in reac])
        C_reac = Kfull[g][:, asm.free]
        R0 = ev.internal[g] - loads.nodal[g]
        for (n, a, _), r0 in zip(reac, R0):
            names.append(f"{model.node_ids[n]} R{'xyz'[a]}")
            kind.append("reaction")
            owner.append(model.node_ids[n])
            dirs.append(a)
            base.append(float(r0))
    C = sp.vstack([C_disp, C_ten, C_reac]).tocsr()

    # unit forces at the lane points: all DOFs (reactions take a force that
    # stands on their support directly) and the free part
    P = len(lane.nodes)
    F = np.zeros((ndof, P))
    g = model.dof[lane.nodes, :3]                     # (P, 3)
    F[g, np.arange(P)[:, None]] = d[None, :]
    F_free = F[asm.free]
    direct = np.zeros((len(names), P))
    if reac:
        direct[len(names) - len(reac):] = -F[[r[2] for r in reac]]

    values = np.zeros((len(names), P))
    if nfree:
        # the adjoint needs K^T; the tangent of bars and cables is symmetric,
        # so the session's factorization of the base tangent serves as it is
        fact = session.base_factor
        symmetric = not model.has_rotations and fact is not None
        if not symmetric:
            fact = session.solver.factorize(session.base_tangent.T.tocsr())
        if RECIPROCITY and symmetric and P < len(names):
            # fewer lane points than responses: by Maxwell-Betti reciprocity
            # (K symmetric) C K^-1 F = (K^-1 C^T)^T F, so the same numbers
            # come from one solve per lane point, the cheaper side
            for a, X in _solves(fact, F_free):
                values[:, a:a + X.shape[1]] = (C @ X)
        else:
            for a, lam in _solves(fact, C.T.tocsc()):
                values[a:a + lam.shape[1]] = lam.T @ F_free
    values += direct
    return InfluenceLines(names, kind, owner, np.asarray(dirs), values, lane.s.copy(), np.asarray(base))


def _solves(fact, B):
    """``(first column, K^-1 B[:, block])`` over blocks of columns of ``B``.

    SuperLU's solve of many right-hand sides at once was measured 3-4 times
    slower than solving them one by one (28 812 DOFs, 64 columns: 2.6 s
    against 0.75 s), so its columns go one at a time; other backends take
    blocks of ``CHUNK``.
    """
    step = 1 if str(getattr(fact, "backend", "")).startswith(("superlu", "splu")) else CHUNK
    for a in range(0, B.shape[1], step):
        block = B[:, a:a + step]
        block = block.toarray() if hasattr(block, "toarray") else np.asarray(block)
        yield a, fact.solve(block)
