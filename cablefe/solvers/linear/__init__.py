"""Sparse direct solvers for the Newton tangent system ``K du = r``.

The Newton solver assembles the tangent stiffness ``K`` of the free degrees
of freedom (DOFs) as a scipy sparse matrix whose sparsity pattern stays the
same for all iterations of one model while its values change.  This module
hides the choice of the sparse direct solver behind one small interface::

    solver = make_linear_solver("auto")        # once per model
    fact = solver.factorize(K)                 # every Newton iteration
    du = fact.solve(r)                         # r of shape (n,) or (n, m)

Backends
--------
``"pardiso"``
    Intel oneMKL PARDISO through the optional ``pypardiso`` package (only its
    shared-library discovery is used; the calls are made here so that the
    symbolic analysis, phase 11, is done once per sparsity pattern and only
    the numerical factorization, phase 22, is repeated).  Symmetric matrices
    are passed as their upper triangle in SPD mode (``mtype=2``, Cholesky);
    when that fails (slack member, compression: the matrix is indefinite) the
    symmetric-indefinite mode (``mtype=-2``, Bunch-Kaufman ``LDL^T``) is used
    and that choice is remembered for the pattern.  A numerically
    unsymmetric matrix uses ``mtype=11``.
``"superlu"``
    scipy's SuperLU with the minimum-degree ordering of ``K + K^T``,
    diagonal pivots whenever the diagonal entry is nonzero
    (``diag_pivot_thresh=0``) and ``SymmetricMode``, which keeps the
    symmetric fill-reducing ordering intact (2-3 times faster than scipy's
    default on stiffness matrices).  Without pivoting for size the
    factorization can fail or lose accuracy on indefinite or unsymmetric
    matrices; it then falls back to scipy's default partial pivoting.  (Never
    pass this ordering to ``spsolve``: it cannot switch pivoting off, and row
    interchanges on a symmetric ordering blow the fill up.)
``"splu-default"``
    scipy's ``splu`` defaults (COLAMD column ordering, partial pivoting): the
    reference floor, used by benchmarks.
``"auto"``
    ``"pardiso"`` when ``pypardiso`` imports and passes a smoke test,
    otherwise ``"superlu"``.

What is reused between factorizations of one pattern
----------------------------------------------------
PARDISO keeps its symbolic analysis (ordering, elimination tree, supernodes)
in its internal handle; only phase 22 is repeated.  scipy's ``splu`` offers no
symbolic reuse and accepts no user permutation (``permc_spec`` only takes
the names of its built-in orderings).  What scipy allows is to apply the
column ordering found by the first factorization ourselves: later
factorizations factor ``K[q][:, q]`` with ``permc_spec="NATURAL"`` (in
``SymmetricMode`` the row permutation then stays the identity) and skip the
minimum-degree ordering; the symbolic factorization is still redone inside
SuperLU every time.  The permuted matrix is built by one precomputed gather,
so the reuse costs ``O(nnz)``.

Checks
------
Every factorization is checked with a probe solve of a fixed pseudo-random
right-hand side: a non-finite or inaccurate result (normwise backward error
of the diagonally scaled system above ``residual_tol``, judged without
iterative refinement, which can mask the pivot growth of unstable factors)
moves on to the next backend of the fallback chain.
The probe also yields a lower bound of the condition number; when it is
large the lowest modes of ``K`` are computed by block inverse iteration and,
if some mode has (relative) zero stiffness, :class:`SingularMatrixError` is
raised with the equations taking part in that mechanism.  Every
:meth:`Factorization.solve` checks its residual the same way, takes one step
of iterative refinement when needed and, if that is not enough, switches to
the remaining SuperLU fallbacks.

All checks are done on the diagonally scaled matrix ``S K S`` with
``S = diag(|K_ii|)^(-1/2)``, so that DOFs of different units (translations in
m, rotations in rad) are compared fairly.

Inertia (stability)
-------------------
:meth:`Factorization.inertia` counts the positive, negative and zero
eigenvalues of a symmetric ``K`` from its factors, and
:meth:`LinearSolver.inertia` does it for the symmetric part of any ``K``.
The count is exact by Sylvester's law of inertia (congruent matrices have
the same numbers of positive, negative and zero eigenvalues; e.g. Golub &
Van Loan 2013, Matrix Computations, 4th ed., thm. 8.1.17, from memory):

* symmetric SuperLU: with ``diag_pivot_thresh=0`` and ``SymmetricMode`` the
  rows are permuted like the columns (``perm_r == perm_c``, checked) and, L
  having a unit diagonal, ``P K P^T = L U = L D L^T`` with ``D = diag(U)``:
  the signs of U's diagonal are those of K's eigenvalues.  Reading the
  diagonal builds U once: measured on the tangent of a 100 x 100 net
  (28 812 DOFs), 8 ms next to 130-150 ms for the factorization (~6 %).
* PARDISO: a successful Cholesky (``mtype=2``) proves K positive definite;
  the Bunch-Kaufman ``LDL^T`` (``mtype=-2``) reports the counts itself
  (``iparm(22)``, ``iparm(23)``).  Perturbed pivots (``iparm(14)``) are
  pivots of size ~1e-8 |K|: the count is then that of a matrix within that
  distance.
* a factorization with row interchanges (SuperLU's partial-pivoting
  fallback) hides the inertia; it is then taken from a dense Bunch-Kaufman
  ``LDL^T`` (``scipy.linalg.ldl``; the 1 x 1 and 2 x 2 blocks of D give the
  signs) for up to :data:`DENSE_INERTIA_MAX` equations, otherwise from
  symmetric SuperLU factorizations with other orderings whose probe solve
  passes; None when none does.

In floating point the factors are exact for a matrix ``K + E`` with ``E``
of the size of the probe's backward error (accepted only below
``residual_tol``, i.e. 1e-10 of the scaled ``|K|``), so every eigenvalue
larger than that in magnitude is counted with its right sign (Weyl's
inequality).

Singular matrices
-----------------
Before factorizing, :func:`find_unrestrained` looks for (nearly) zero rows:
found ones raise :class:`SingularMatrixError` at once, naming exactly those
equations.  A mechanism without a zero row (a floating group of nodes) shows
up as a failed factorization, a rejected probe or a zero mode in the probe
check; its equations are then found by inverse iteration (on a slightly
shifted ``K`` when nothing could factorize it).  Only choices that ended in a
successful factorization are remembered, so a temporarily singular tangent
does not slow down later iterations.

Lifetime
--------
A PARDISO :class:`Factorization` is valid until the next
:meth:`LinearSolver.factorize` of the same pattern by the same solver (the
factors live inside PARDISO's handle); using it afterwards raises
:class:`StaleFactorizationError`.  SuperLU factorizations stay valid.
"""

from __future__ import annotations

#: largest number of equations whose inertia is taken from a dense LDL^T
#: when the sparse factors cannot give it (about 1 s and 32 MB at 2000).
#: Read at call time from this package, so one setting governs every module.
DENSE_INERTIA_MAX = 2000

from .diagnostics import _fallback_inertia, dense_inertia, find_unrestrained  # noqa: E402
from .errors import SingularMatrixError, StaleFactorizationError  # noqa: E402
from .krylov import KrylovOutcome, preconditioned_cg  # noqa: E402
from .solver import (KNOWN_BACKENDS, Factorization, LinearSolver,  # noqa: E402
                     available_backends, make_linear_solver)

__all__ = [
    "DENSE_INERTIA_MAX",
    "Factorization",
    "KNOWN_BACKENDS",
    "KrylovOutcome",
    "LinearSolver",
    "SingularMatrixError",
    "StaleFactorizationError",
    "available_backends",
    "dense_inertia",
    "find_unrestrained",
    "make_linear_solver",
    "preconditioned_cg",
]
