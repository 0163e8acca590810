"""Form-finding by force density (Schek 1974): one sparse linear solve per
direction; cable lengths from the exact elastic catenary.  SI units."""
from __future__ import annotations

import logging

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ...elements.catenary.inverse import solve_end_forces
from ...errors import CaseError
from ...model import LoadVectors, Model, match_members
from ...spec import ShapeSpec


log = logging.getLogger(__name__)
from .common import ForceDensityShape

# ---------------------------------------------------------------------------
# force density
# ---------------------------------------------------------------------------

def _member_force_density(model: Model, shape: ShapeSpec) -> np.ndarray:
    """(nm,) q of the first matching pattern, in the order given; CaseErrors for beams and unmatched members."""
    ids = [m.id for m in model.members]
    q = np.full(len(ids), np.nan)
    for pattern, value in shape.force_density.items():
        hit = np.asarray(match_members(ids, (pattern,)), dtype=np.int64)
        if hit.size:
            fresh = hit[np.isnan(q[hit])]
            q[fresh] = value
    kinds = np.array([m.type for m in model.members])
    beams = np.flatnonzero(kinds == "beam")
    if beams.size:
        raise CaseError("shape.force_density", f'member "{ids[beams[0]]}" is a beam: the force density method '
                        'takes cable and bar members only (use method = "target" with beams)')
    unmatched = np.flatnonzero(np.isnan(q))
    if unmatched.size:
        raise CaseError("shape.force_density", f'member "{ids[unmatched[0]]}" matches no pattern '
                        f'(patterns: {", ".join(shape.force_density)})')
    tension_only = (kinds == "cable") | np.array([m.tension_only for m in model.spec.members], dtype=bool)
    pushed = np.flatnonzero((q < 0.0) & tension_only)
    if pushed.size:
        k = int(pushed[0])
        what = "cable" if kinds[k] == "cable" else "tension-only bar"
        raise CaseError("shape.force_density", f'member "{ids[k]}" is a {what} and cannot take the '
                        f"compression of force density {q[k]:.6g} N/m")
    return q


def catenary_length_for_chord_force(l, h, chord_force, weight, EA, max_iter=200):
    """Unstressed length of elastic catenaries spanning (l, h) with a given chord force.

    The chord force of a catenary is ``[H l + (V - W/2) h] / c`` (the chord
    component of the mean end force with half the weight taken off each
    end); it falls as the unstressed length grows.  Vectorized bisection on a
    bracket found by doubling, each trial solved exactly by
    :func:`cablefe.elements.catenary.inverse.solve_end_forces`.

    Parameters
    ----------
    l, h : (n,) horizontal projection and rise of the chord, m
    chord_force : (n,) wanted chord force, N (> 0)
    weight : (n,) weight per unstressed length, N/m
    EA : (n,) axial stiffness, N

    Returns
    -------
    L0 : (n,) unstressed length, m
    ok : (n,) bool, False where no length gives that force (a force too
        small to hold the cable's weight on that chord)
    """
    l, h, N, w, EA = (np.asarray(a, dtype=float) for a in (l, h, chord_force, weight, EA))
    c = np.hypot(l, h)
    straight = c / (1.0 + N / EA)          # exact when weightless
    if not np.any(w > 0.0):
        return straight, np.ones(len(c), dtype=bool)

    def excess(L0, guess=None):
        H, V, conv = solve_end_forces(l, h, L0, w, EA, guess=guess)
        return (H * l + (V - 0.5 * w * L0) * h) / c - N, (H, V)

    # a straight bar of that tension is too short to sag under weight: it
    # pulls harder than N; shorten further only if that fails
    lo = straight.copy()
    f_lo, _ = excess(lo)
    for _ in range(60):
        bad = ~(f_lo >= 0.0)
        if not bad.any():
            break
        lo = np.where(bad, 0.5 * lo, lo)
        f_lo, _ = excess(lo)
    step = 1e-6 * lo
    hi = lo + step
    f_hi, _ = excess(hi)
    for _ in range(80):
        bad = f_hi > 0.0
        if not bad.any():
            break
        step = np.where(bad, 2.0 * step, step)
        hi = np.where(bad, lo + step, hi)
        f_hi, _ = excess(hi)
    ok = (f_lo >= 0.0) & (f_hi <= 0.0)
    guess = None
    for _ in range(max_iter):
        mid = 0.5 * (lo + hi)
        f_mid, guess = excess(mid, guess)
        up = f_mid > 0.0
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
        if np.all(hi - lo <= 4e-16 * hi):
            break
    weightless = w <= 0.0
    return np.where(weightless, straight, 0.5 * (lo + hi)), ok | weightless


def force_density_shape(model: Model, shape_spec: ShapeSpec, permanent_loads: LoadVectors) -> ForceDensityShape:
    """Linear force density form-finding (Schek 1974).

    Parameters
    ----------
    model : Model of cable and bar members only
    shape_spec : ShapeSpec with ``force_density`` (pattern -> q, N/m)
    permanent_loads : LoadVectors of the permanent state (nodal forces,
        catenary weight per unstressed length, thermal strain)

    Returns
    -------
    ForceDensityShape

    Raises
    ------
    CaseError
        ``shape.force_density``: a beam, a member matching no pattern, a
        cable in compression, free nodes without a unique equilibrium, or a
        cable whose force density cannot hold its weight.
    """
    q_member = _member_force_density(model, shape_spec)
    nn = len(model.node_ids)
    fams = [f for f in ("bar", "cable") if len(model.families[f])]
    ends_i = np.concatenate([model.families[f].nodes[:, 0] for f in fams])
    ends_j = np.concatenate([model.families[f].nodes[:, 1] for f in fams])
    q = np.concatenate([q_member[model.families[f].member] for f in fams])
    ne = len(q)
    C = sp.csr_matrix((np.r_[-np.ones(ne), np.ones(ne)], (np.r_[np.arange(ne), np.arange(ne)], np.r_[ends_i, ends_j])),
                      shape=(ne, nn))
    D = (C.T @ sp.diags(q) @ C).tocsc()

    # loads: nodal forces, element weight lumped half to each end
    dof = model.dof[:, :3]
    P = np.where(dof >= 0, permanent_loads.nodal[np.maximum(dof, 0)], 0.0)
    t = model.families["cable"]
    if len(t):
        W = permanent_loads.weight["cable"] * t.props["unstressed_length"]
        np.add.at(P[:, 2], t.nodes.ravel(), -0.5 * np.repeat(W, 2))

    # positions of held directions: the case's, moved by prescribed movements
    X = model.coordinates.copy()
    free = np.zeros((nn, 3), dtype=bool)
    free[dof >= 0] = ~model.restrained[dof[dof >= 0]]
    moved = np.where(dof >= 0, permanent_loads.prescribed[np.maximum(dof, 0)], 0.0)
    X = np.where(free, X, X + moved)
    # directions with the same free nodes share one factorization
    groups: dict[bytes, list[int]] = {}
    for d in range(3):
        groups.setdefault(np.packbits(free[:, d]).tobytes(), []).append(d)
    for dirs in groups.values():
        f = free[:, dirs[0]]
        if not f.any():
            continue
        held = ~f
        rhs = P[np.ix_(f, dirs)] - D[f][:, held] @ X[np.ix_(held, dirs)]
        try:
            lu = spla.splu(D[f][:, f].tocsc())
            sol = lu.solve(np.asfortranarray(rhs))
        except RuntimeError:
            sol = np.full(rhs.shape, np.nan)
        if not np.all(np.isfinite(sol)):
            raise CaseError("shape.force_density", "the force densities give the free nodes no unique "
                            "equilibrium (singular force density matrix): every free node needs a path of "
                            "members to a support, and mixed signs must not cancel")
        X[np.ix_(f, dirs)] = sol

    force_density, tension, lengths = {}, {}, {}
    for f in ("bar", "cable"):
        tab = model.families[f]
        qe = q_member[tab.member]
        if not len(tab):
            force_density[f] = tension[f] = lengths[f] = np.zeros(0)
            continue
        d = X[tab.nodes[:, 1]] - X[tab.nodes[:, 0]]
        L = np.linalg.norm(d, axis=1)
        N = qe * L
        EA = tab.props["EA"]
        thermal = 1.0 + permanent_loads.strain[f]
        if f == "bar":
            L0_eff = L / (1.0 + N / EA)
        else:
            L0_eff, ok = catenary_length_for_chord_force(np.hypot(d[:, 0], d[:, 1]), d[:, 2], N,
                                                         permanent_loads.weight["cable"], EA)
            if not ok.all():
                k = int(tab.member[np.flatnonzero(~ok)[0]])
                raise CaseError("shape.force_density", f'cable "{model.members[k].id}": its force density '
                                f"{q_member[k]:.6g} N/m cannot hold its weight on the found chord")
        force_density[f] = qe
        tension[f] = N
        lengths[f] = L0_eff / thermal
    L0m = np.full(len(model.members), np.nan)
    for f in ("bar", "cable"):
        tab = model.families[f]
        if len(tab):
            total = np.bincount(tab.member, weights=lengths[f], minlength=len(L0m))
            hit = np.unique(tab.member)
            L0m[hit] = total[hit]
    return ForceDensityShape(X, force_density, tension, lengths, L0m)
