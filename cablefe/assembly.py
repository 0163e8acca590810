"""Assembly of internal forces and the sparse tangent stiffness.

The sparsity pattern of the tangent over the free DOFs is computed once per
model; each evaluation refills its values with one ``np.bincount``.  Element
families are summed the same way: each returns ``force`` (n, k) and
``tangent`` (n, k, k) in the conventions of :mod:`cablefe.elements`.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np
import scipy.sparse as sp

from .elements import bar, catenary
from .model import LoadVectors, Model

ROTATION_FAMILIES = ("beam",)


@dataclass(frozen=True)
class State:
    """Current configuration: node positions (nn, 3) in m and, where beams
    exist, total nodal rotations (nn, 3, 3) from the beams' stress-free
    orientation (at the start the model's ``initial_rotations``: identity
    unless the case gives a ``[beam_reference]``)."""

    positions: np.ndarray
    rotations: np.ndarray | None = None


@dataclass(frozen=True)
class Evaluation:
    """Assembled response at one state.

    Attributes
    ----------
    internal : (ndof,) internal forces, N (N m for rotations)
    magnitude : (ndof,) sum of |element forces| at each DOF, a force scale
    tangent : CSR (nfree, nfree) or None
    responses : family -> element response dataclass
    """

    internal: np.ndarray
    magnitude: np.ndarray
    tangent: sp.csr_matrix | None
    responses: Mapping[str, object]


def initial_state(model: Model) -> State:
    """The state at ``model.coordinates`` with the model's starting nodal rotations."""
    rot = None
    if model.has_rotations:
        rot = (model.initial_rotations.copy() if model.initial_rotations is not None
               else np.broadcast_to(np.eye(3), (len(model.node_ids), 3, 3)).copy())
    return State(model.coordinates.copy(), rot)


def cable_inputs(table, loads: LoadVectors, lam: float) -> tuple[np.ndarray, np.ndarray]:
    """Stress-free length (m) and weight per unit stress-free length (N/m) of
    the catenary elements at load factor ``lam``.

    A thermal strain e stretches the stress-free length to ``L0 (1 + e)``
    but leaves the mass alone: the weight per unit of the stretched length
    is ``w0 / (1 + e)``, so the element weighs ``w0 L0`` whatever the
    temperature (Irvine 1981, Cable Structures, sec. 1.3, thermal effects).
    """
    strain = lam * loads.strain["cable"]
    stretch = 1.0 + strain
    return table.props["unstressed_length"] * stretch, lam * loads.weight["cable"] / stretch


def _unique_inverse(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sorted unique values of an int64 array and the index of each entry in them.

    Same result as ``np.unique(keys, return_inverse=True)``, by one argsort:
    numpy >= 2.3 answers ``unique`` with a hash table that is several times
    slower on the 10^6-10^8 keys of a stiffness pattern (measured 0.5 s ->
    0.15 s at 80k bars).  The inverse is int32 when it fits, which halves
    the memory kept for refilling the pattern.
    """
    if keys.size == 0:
        return keys.copy(), np.zeros(0, dtype=np.int64)
    order = np.argsort(keys)
    ordered = keys[order]
    new = np.empty(keys.size, dtype=bool)
    new[0] = True
    np.not_equal(ordered[1:], ordered[:-1], out=new[1:])
    unique = ordered[new]
    del ordered
    group = np.cumsum(new, dtype=np.int64) - 1
    inverse = np.empty(keys.size, dtype=np.int32 if unique.size < 2**31 else np.int64)
    inverse[order] = group
    return unique, inverse


class Assembler:
    """Evaluates element families and sums them into global arrays.

    The sparsity pattern is built once, in the constructor; keep one
    assembler per model (and set of unknowns) and share it between the
    combinations solved on that model.

    Parameters
    ----------
    model : Model
    free : (nfree,) global DOF numbers that are unknowns; default the
        model's unrestrained DOFs.
    """

    #: number of sparsity patterns built by all assemblers (a regression
    #: guard for tests: solving several combinations builds one)
    patterns_built = 0

    def __init__(self, model: Model, free: np.ndarray | None = None):
        self.model = model
        self.free = model.free if free is None else np.asarray(free)
        ndof = model.ndof
        nfree = len(self.free)
        self.equation = -np.ones(ndof, dtype=np.int64)
        self.equation[self.free] = np.arange(nfree)
        self._maps = {}
        keys = []
        for f, table in model.families.items():
            if not len(table):
                continue
            eq = self.equation[table.dofs]                      # (n, k)
            k = eq.shape[1]
            rows = np.repeat(eq, k, axis=1).ravel()
            cols = np.tile(eq, (1, k)).ravel()
            keep = (rows >= 0) & (cols >= 0)
            self._maps[f] = keep
            keys.append(rows[keep].astype(np.int64) * nfree + cols[keep])
        keys = np.concatenate(keys) if keys else np.zeros(0, dtype=np.int64)
        unique, inverse = _unique_inverse(keys)
        self._inverse = inverse
        Assembler.patterns_built += 1
        self._offsets = {}
        start = 0
        for f, keep in self._maps.items():
            n = int(keep.sum())
            self._offsets[f] = (start, start + n)
            start += n
        rows_u = unique // max(nfree, 1)
        self.indices = (unique % max(nfree, 1)).astype(np.int32)
        self.indptr = np.concatenate([[0], np.cumsum(np.bincount(rows_u, minlength=nfree))]).astype(np.int32)
        self.nnz = len(unique)
        self.nfree = nfree
        self._guess = {}

    # -- element evaluation ----------------------------------------------------
    def element_responses(self, state: State, loads: LoadVectors, lam: float,
                          want_tangent: bool = True, remember: bool = False) -> dict:
        out = {}
        model = self.model
        for f, table in model.families.items():
            if not len(table):
                continue
            p = table.props
            xi = state.positions[table.nodes[:, 0]]
            xj = state.positions[table.nodes[:, 1]]
            strain = lam * loads.strain[f]
            if f == "bar":
                out[f] = bar.response(xi, xj, p["unstressed_length"] * (1.0 + strain), p["EA"],
                                      p["tension_only"], want_tangent, p.get("slack_stiffness"))
            elif f == "cable":
                L0, weight = cable_inputs(table, loads, lam)
                # an unconverged inner solve is marked in r.converged and fails
                # the analysis step (solvers.static), so it is not logged here
                r = catenary.response(xi, xj, L0, p["EA"], weight, guess=self._guess.get(f),
                                      want_tangent=want_tangent, warn=False)
                if remember:
                    self._guess[f] = (r.H, r.V)
                out[f] = r
            elif f == "beam":
                from .elements import beam
                Ri = state.rotations[table.nodes[:, 0]]
                Rj = state.rotations[table.nodes[:, 1]]
                # stress-free length from the reference geometry, not from
                # the (possibly shaped, already bent) coordinates
                out[f] = beam.response(xi, xj, Ri, Rj, p["frame0"], p["length"], p["E"], p["G"], p["A"],
                                       p["Iy"], p["Iz"], p["J"], axial_strain=strain,
                                       want_tangent=want_tangent)
        return out

    def forget(self) -> None:
        """Drop the catenary warm starts (before a new load path)."""
        self._guess.clear()

    def remember(self, responses: Mapping[str, object]) -> None:
        """Keep the catenary end forces as warm starts for the next call."""
        r = responses.get("cable")
        if r is not None:
            self._guess["cable"] = (r.H, r.V)

    def evaluate(self, state: State, loads: LoadVectors, lam: float, want_tangent: bool = True) -> Evaluation:
        """Internal forces (all DOFs) and tangent (free DOFs) at ``state``."""
        ndof = self.model.ndof
        responses = self.element_responses(state, loads, lam, want_tangent)
        internal = np.zeros(ndof)
        magnitude = np.zeros(ndof)
        values = []
        for f, r in responses.items():
            dofs = self.model.families[f].dofs
            internal += np.bincount(dofs.ravel(), weights=r.force.ravel(), minlength=ndof)
            magnitude += np.bincount(dofs.ravel(), weights=np.abs(r.force).ravel(), minlength=ndof)
            if want_tangent:
                values.append(r.tangent.reshape(len(dofs), -1).ravel()[self._maps[f]])
        K = None
        if want_tangent:
            vals = np.concatenate(values) if values else np.zeros(0)
            data = np.bincount(self._inverse, weights=vals, minlength=self.nnz)
            K = sp.csr_matrix((data, self.indices, self.indptr), shape=(self.nfree, self.nfree))
        return Evaluation(internal, magnitude, K, responses)

    def local_blocks(self, state: State, loads: LoadVectors, lam: float = 1.0) -> dict:
        """Per-element (force, tangent) arrays by family, for tests."""
        return {f: (r.force, r.tangent) for f, r in
                self.element_responses(state, loads, lam, True).items()}


# -- mass -------------------------------------------------------------------------

def assemble_mass(model: Model, lumped: bool = False, extra_per_length: Mapping[str, np.ndarray] | None = None,
                  node_mass: np.ndarray | None = None, beam_frames: np.ndarray | None = None,
                  gravity: float = 9.80665) -> sp.csr_matrix:
    """Mass matrix over all DOFs, (ndof, ndof) in kg (kg m, kg m² on rotations).

    Every element's own mass is its weight per unstressed length over
    ``gravity`` (the model's weights are forces), spread over its
    unstressed length: bars and cables consistent or ``lumped``, beams
    always consistent with the rotary and torsional inertia of the section
    (``rho I = (w/g) I / A``, polar ``Iy + Iz``).

    Parameters
    ----------
    model : Model
    lumped : bool
        Lumped instead of consistent matrices for bars and cables.
    extra_per_length : family -> (n,) added mass per unstressed length, kg/m
        (translational only: finishes, a share of the crowd)
    node_mass : (nn,) added mass on the translations of each node, kg
    beam_frames : (n_beam, 3, 3) frames of the beam elements (the current
        corotated frames about a loaded state); default their initial frames
    gravity : m/s², standard gravity

    Returns
    -------
    scipy.sparse.csr_matrix
    """
    from .elements import beam, catenary
    ndof = model.ndof
    rows, cols, vals = [], [], []
    for f, t in model.families.items():
        if not len(t):
            continue
        p = t.props
        L0 = p["unstressed_length"]
        own = p["weight"] / gravity
        add = np.zeros(len(t)) if extra_per_length is None else extra_per_length.get(f, np.zeros(len(t)))
        if f == "beam":
            frames = p["frame0"] if beam_frames is None else beam_frames
            # density times area is the own mass per length; rho I follows from it
            rho = own / p["A"]
            Me = beam.mass_matrix(frames, p["length"], own + add, rho * (p["Iy"] + p["Iz"]),
                                  rho * p["Iy"], rho * p["Iz"])
        elif f == "cable":
            Me = catenary.mass_matrix(L0, own + add, lumped)
        else:
            Me = bar.mass_matrix(L0, own + add, lumped)
        k = t.dofs.shape[1]
        rows.append(np.repeat(t.dofs, k, axis=1).ravel())
        cols.append(np.tile(t.dofs, (1, k)).ravel())
        vals.append(Me.ravel())
    if node_mass is not None and np.any(node_mass):
        g = model.dof[:, :3]
        rows.append(g.ravel())
        cols.append(g.ravel())
        vals.append(np.repeat(np.asarray(node_mass, dtype=float), 3))
    if not rows:
        return sp.csr_matrix((ndof, ndof))
    r = np.concatenate(rows)
    c = np.concatenate(cols)
    v = np.concatenate(vals)
    return sp.coo_matrix((v, (r, c)), shape=(ndof, ndof)).tocsr()
