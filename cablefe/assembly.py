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

from .elements import bar, catenary, family  # noqa: F401  (the kernel modules stay reachable here)
from .elements.catenary import cable_inputs  # noqa: F401  (re-exported: results_io uses it)
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
                          want_tangent: bool = True) -> dict:
        """Each non-empty family's response at ``state``, by family name.

        Every family's kernel is looked up in the registry of
        :mod:`cablefe.elements`, so a new family needs no change here.
        """
        return {name: family(name).evaluate(table, state, loads, lam, want_tangent, self._guess.get(name))
                for name, table in self.model.families.items() if len(table)}

    def forget(self) -> None:
        """Drop the warm starts (catenary end forces) before a new load path."""
        self._guess.clear()

    def remember(self, responses: Mapping[str, object]) -> None:
        """Keep what each family uses as a warm start for the next call."""
        for name, response in responses.items():
            keep = family(name).warm_start
            if keep is not None:
                self._guess[name] = keep(response)

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
    ndof = model.ndof
    rows, cols, vals = [], [], []
    for name, table in model.families.items():
        if not len(table):
            continue
        own = table.props["weight"] / gravity
        added = (np.zeros(len(table)) if extra_per_length is None
                 else extra_per_length.get(name, np.zeros(len(table))))
        element_mass = family(name).mass(table, own, added, lumped, beam_frames)
        k = table.dofs.shape[1]
        rows.append(np.repeat(table.dofs, k, axis=1).ravel())
        cols.append(np.tile(table.dofs, (1, k)).ravel())
        vals.append(element_mass.ravel())
    if node_mass is not None and np.any(node_mass):
        g = model.dof[:, :3]
        rows.append(g.ravel())
        cols.append(g.ravel())
        vals.append(np.repeat(np.asarray(node_mass, dtype=float), 3))
    if not rows:
        return sp.csr_matrix((ndof, ndof))
    return sp.coo_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                         shape=(ndof, ndof)).tocsr()
