"""Exceptions of the sparse linear-solver layer: a singular tangent, a stale
PARDISO factorization, and the internal signal that one engine failed.
"""

from __future__ import annotations

import numpy as np


class SingularMatrixError(ValueError):
    """The tangent stiffness is singular: the structure is a mechanism.

    Parameters
    ----------
    message : str
        Human-readable description.
    equations : array_like of int
        Indices (rows of ``K``, i.e. free-DOF numbers) of the suspect
        equations: rows that are (nearly) zero, or the DOFs that take part in a
        zero-stiffness mode.  The caller maps them to nodes and directions.

    Attributes
    ----------
    equations : numpy.ndarray of int64
        Sorted suspect equation indices (may be empty when no factorization
        at all could be made to examine the matrix).
    """

    def __init__(self, message: str, equations=()):
        super().__init__(message)
        self.equations = np.unique(np.asarray(equations, dtype=np.int64))


class StaleFactorizationError(ValueError):
    """A PARDISO factorization was used after the solver refactorized.

    PARDISO keeps one numerical factorization per analysed pattern; a later
    :meth:`LinearSolver.factorize` of the same pattern (or a
    :meth:`LinearSolver.reset`) overwrites the factors that an older
    :class:`Factorization` pointed to.
    """


class _FactorFailed(Exception):
    """Internal: one backend could not factorize; try the next."""
