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

import ctypes
import functools
import logging
import time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

logger = logging.getLogger(__name__)

__all__ = [
    "DENSE_INERTIA_MAX",
    "Factorization",
    "LinearSolver",
    "SingularMatrixError",
    "StaleFactorizationError",
    "available_backends",
    "dense_inertia",
    "find_unrestrained",
    "make_linear_solver",
]

#: Names accepted by :func:`make_linear_solver`.
KNOWN_BACKENDS = ("auto", "pardiso", "superlu", "splu-default")

# Fixed seeds: the probe and the mechanism search must give the same answer
# for the same matrix on every run.
_PROBE_SEED = 20240611
_MODES_SEED = 7

# A pattern with more stored entries than this cannot be passed to the
# 32-bit PARDISO interface.
_INT32_MAX = np.iinfo(np.int32).max

#: largest number of equations whose inertia is taken from a dense LDL^T
#: when the sparse factors cannot give it (about 1 s and 32 MB at 2000)
DENSE_INERTIA_MAX = 2000


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


# --------------------------------------------------------------------------
# PARDISO access (optional)
# --------------------------------------------------------------------------

# PARDISO error codes, oneMKL PARDISO reference, description of the `error`
# parameter (from memory).
_PARDISO_ERRORS = {
    -1: "input inconsistent",
    -2: "not enough memory",
    -3: "reordering problem",
    -4: "zero pivot, numerical factorization or iterative refinement problem",
    -5: "unclassified (internal) error",
    -6: "reordering failed",
    -7: "diagonal matrix is singular",
    -8: "32-bit integer overflow problem",
    -9: "not enough memory for out-of-core solver",
    -10: "error opening out-of-core files",
    -11: "read/write error with out-of-core files",
}


def _point_pypardiso_at_mkl() -> None:
    """Tell pypardiso where the pip-installed ``libmkl_rt`` is.

    Without ``PYPARDISO_MKL_RT`` pypardiso searches the whole of
    ``sys.prefix`` recursively for the library, twice (at import and in our
    constructor call): about 1 s per process, measured, a third of a whole
    ``cablefe solve`` of a 100 x 100 net.  The ``mkl`` wheel's file list
    gives the path at once.  A path set by the user is kept.
    """
    import os
    if os.environ.get("PYPARDISO_MKL_RT"):
        return
    try:
        from importlib import metadata
        files = metadata.distribution("mkl").files or ()
    except Exception:   # no mkl wheel (conda or system MKL): pypardiso searches
        return
    for f in files:
        if f.name.startswith("libmkl_rt.so") or f.name in ("mkl_rt.dll", "mkl_rt.2.dll", "libmkl_rt.dylib"):
            path = f.locate()
            if os.path.exists(path):
                os.environ["PYPARDISO_MKL_RT"] = os.path.realpath(path)
                return


@functools.lru_cache(maxsize=1)
def _pardiso_library():
    """Locate MKL's ``pardiso`` entry point through ``pypardiso``.

    Returns
    -------
    tuple
        ``(function, "")`` when usable, ``(None, reason)`` otherwise.
    """
    _point_pypardiso_at_mkl()
    try:
        import pypardiso
    except Exception as exc:  # ImportError, or a broken MKL install
        return None, f"pypardiso is not importable ({exc})"
    try:
        # pypardiso's constructor finds and loads libmkl_rt; the call itself
        # is made by us so that the analysis phase can be reused.
        lib = pypardiso.PyPardisoSolver().libmkl
        fn = lib.pardiso
        i32p = ctypes.POINTER(ctypes.c_int32)
        fn.argtypes = [
            ctypes.POINTER(ctypes.c_int64),  # pt (internal handle)
            i32p, i32p, i32p, i32p, i32p,    # maxfct, mnum, mtype, phase, n
            ctypes.c_void_p,                 # a
            i32p, i32p, i32p, i32p,          # ia, ja, perm, nrhs
            i32p, i32p,                      # iparm, msglvl
            ctypes.c_void_p, ctypes.c_void_p,  # b, x
            i32p,                            # error
        ]
        fn.restype = None
        # smoke test: [[4, 1], [1, 3]] x = [1, 2] -> x = [1, 7] / 11
        handle = _PardisoHandle(fn, 2, np.array([0, 2, 3]), np.array([0, 1, 1]))
        a = np.array([4.0, 1.0, 3.0])
        try:
            handle.analyse(a)
            gen = handle.factor(a)
            x = handle.solve(a, np.array([[1.0], [2.0]]), gen)
        finally:
            handle.release()
        if not np.allclose(x[:, 0], [1.0 / 11.0, 7.0 / 11.0], rtol=1e-12, atol=0.0):
            return None, "PARDISO smoke test gave a wrong solution"
    except Exception as exc:
        return None, f"PARDISO could not be loaded or failed its smoke test ({exc})"
    return fn, ""


class _PardisoHandle:
    """One PARDISO internal handle: one matrix type, one analysed pattern.

    Parameters
    ----------
    fn : ctypes function
        MKL ``pardiso``.
    mtype : int
        2 (real SPD), -2 (real symmetric indefinite) or 11 (real unsymmetric).
    ia, ja : numpy.ndarray
        Zero-based CSR row pointer and sorted column indices (upper triangle
        with all diagonal entries present for symmetric types).
    """

    def __init__(self, fn, mtype: int, ia: np.ndarray, ja: np.ndarray):
        self._fn = fn
        self.mtype = int(mtype)
        self.n = int(ia.size - 1)
        self.ia = np.ascontiguousarray(ia, dtype=np.int32)
        self.ja = np.ascontiguousarray(ja, dtype=np.int32)
        self.pt = np.zeros(64, dtype=np.int64)
        self.iparm = np.zeros(64, dtype=np.int32)
        ip = self.iparm
        ip[0] = 1       # do not use the solver defaults: values below are set
        ip[1] = 2       # METIS nested-dissection ordering
        ip[7] = 0       # two refinement steps when pivots were perturbed
        ip[34] = 1      # zero-based ia/ja (scipy's convention)
        if self.mtype == 11:
            # unsymmetric: perturb pivots below 1e-13 |A|, scaling and
            # weighted matching (the oneMKL defaults for mtype 11)
            ip[9], ip[10], ip[12] = 13, 1, 1
        else:
            # symmetric: perturb pivots below 1e-8 |A|; Bunch-Kaufman 1x1 and
            # 2x2 pivots for the indefinite type (oneMKL defaults)
            ip[9], ip[10], ip[12], ip[20] = 8, 0, 0, 1
        ip[17] = -1     # report the number of nonzeros in the factors
        self._perm = np.zeros(1, dtype=np.int32)
        self.analysed = False
        # bumped by every numerical factorization and by release(): a
        # Factorization remembers the value it was made with
        self.generation = 0

    def _call(self, phase: int, a, b=None, x=None, nrhs: int = 1) -> int:
        err = ctypes.c_int32(0)
        i32p = ctypes.POINTER(ctypes.c_int32)

        def ref(v):
            return ctypes.byref(ctypes.c_int32(v))

        self._fn(
            self.pt.ctypes.data_as(ctypes.POINTER(ctypes.c_int64)),
            ref(1), ref(1), ref(self.mtype), ref(phase), ref(self.n),
            None if a is None else a.ctypes.data,
            self.ia.ctypes.data_as(i32p), self.ja.ctypes.data_as(i32p),
            self._perm.ctypes.data_as(i32p), ref(nrhs),
            self.iparm.ctypes.data_as(i32p), ref(0),
            None if b is None else b.ctypes.data,
            None if x is None else x.ctypes.data,
            ctypes.byref(err),
        )
        return int(err.value)

    @staticmethod
    def _message(err: int) -> str:
        return f"PARDISO error {err}: {_PARDISO_ERRORS.get(err, 'unknown error')}"

    def analyse(self, a: np.ndarray) -> None:
        """Phase 11: ordering and symbolic factorization."""
        err = self._call(11, a)
        if err != 0:
            raise _FactorFailed(self._message(err))
        self.analysed = True

    def factor(self, a: np.ndarray) -> int:
        """Phase 22: numerical factorization; returns the new generation."""
        self.generation += 1
        err = self._call(22, a)
        if err != 0:
            msg = self._message(err)
            if self.mtype == 2 and err == -4:
                # iparm(30): equation of the zero or negative pivot
                msg += f" (non-positive pivot at equation {int(self.iparm[29]) - 1})"
            raise _FactorFailed(msg)
        return self.generation

    def solve(self, a: np.ndarray, B: np.ndarray, generation: int) -> np.ndarray:
        """Phase 33: forward/backward substitution for ``B`` of shape (n, m)."""
        if generation != self.generation:
            raise StaleFactorizationError(
                "this PARDISO factorization was overwritten by a later factorize() "
                "or reset() of the same LinearSolver; solve before refactorizing or "
                "use one solver per matrix")
        Bf = np.array(B, dtype=np.float64, order="F", copy=True)
        X = np.zeros_like(Bf, order="F")
        err = self._call(33, a, Bf, X, nrhs=Bf.shape[1])
        if err != 0:
            raise _FactorFailed(self._message(err))
        return X

    def release(self) -> None:
        """Phase -1: free all memory of this handle."""
        self.generation += 1
        if self.pt.any():
            self._call(-1, None)
            self.pt[:] = 0
        self.analysed = False

    def __del__(self):
        # the pattern cache and every factorization made with this handle
        # hold a reference: MKL's memory goes when the last of them goes
        try:
            self.release()
        except Exception:   # interpreter shutdown: MKL may be unloaded
            pass


# --------------------------------------------------------------------------
# sparsity-pattern cache
# --------------------------------------------------------------------------


def _positions(keys: np.ndarray, query: np.ndarray) -> np.ndarray:
    """Positions of ``query`` in the sorted ``keys``; -1 where absent."""
    if keys.size == 0:
        return np.full(query.shape, -1, dtype=np.int64)
    pos = np.minimum(np.searchsorted(keys, query), keys.size - 1)
    return np.where(keys[pos] == query, pos, -1)


def _union_sorted(*arrays: np.ndarray) -> np.ndarray:
    """Sorted unique union of int64 arrays.

    Sort-based on purpose: numpy's hash-based ``unique`` (numpy >= 2.3) is
    several times slower on the ~10^6-10^7 keys of a stiffness pattern.
    """
    a = np.sort(np.concatenate(arrays))
    if a.size == 0:
        return a
    keep = np.empty(a.size, dtype=bool)
    keep[0] = True
    np.not_equal(a[1:], a[:-1], out=keep[1:])
    return a[keep]


def _compact(a: np.ndarray) -> np.ndarray:
    """int32 copy of an index array when its values fit, else int64."""
    if a.size == 0 or (a.max() <= _INT32_MAX and a.min() >= -1):
        return a.astype(np.int32)
    return a.astype(np.int64)


def _csr_from_keys(keys: np.ndarray, n: int):
    """CSR ``indptr``/``indices`` of the sorted linear keys ``row * n + col``."""
    rows = keys // n
    indptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=n), out=indptr[1:])
    return indptr, keys - rows * n


@dataclass
class _Structure:
    """A derived CSR structure and where its values come from in ``K.data``."""

    indptr: np.ndarray
    indices: np.ndarray
    src: np.ndarray              # position in K.data, -1 for a structural zero
    mirror: np.ndarray | None = None   # position of the transposed entry
    rows: np.ndarray | None = None     # row of every entry


class _Pattern:
    """Everything that depends only on the sparsity pattern of ``K``.

    Derived index arrays use int32 where they fit, to keep the cache small
    next to the factors (at 10^6 DOFs K has ~1.6e7 entries).
    """

    def __init__(self, n: int, indptr: np.ndarray, indices: np.ndarray):
        self.n = n
        self.indptr = indptr.copy()
        self.indices = indices.copy()
        self.nnz = int(indices.size)
        self.pardiso: dict[int, _PardisoHandle] = {}
        self.pardiso_symmetric_mtype = 2   # becomes -2 once SPD mode failed
        self.superlu_q: np.ndarray | None = None
        self.superlu_struct: _Structure | None = None
        self.diag_pos = _compact(_positions(
            self._keys(), np.arange(n, dtype=np.int64) * (n + 1)))

    def matches(self, K: sp.csr_matrix) -> bool:
        return (K.shape[0] == self.n and K.nnz == self.nnz
                and np.array_equal(K.indptr, self.indptr)
                and np.array_equal(K.indices, self.indices))

    def _rows(self) -> np.ndarray:
        return np.repeat(np.arange(self.n, dtype=np.int64), np.diff(self.indptr))

    def _keys(self) -> np.ndarray:
        # linear keys row * n + col; canonical CSR makes them sorted, unique
        return self._rows() * self.n + self.indices.astype(np.int64)

    @functools.cached_property
    def upper(self) -> _Structure:
        """Upper triangle of pattern(K + K^T) with every diagonal entry."""
        n = self.n
        keys = self._keys()
        rows, cols = keys // n, self.indices.astype(np.int64)
        lo, hi = np.minimum(rows, cols), np.maximum(rows, cols)
        del rows
        diag = np.arange(n, dtype=np.int64) * (n + 1)
        ukeys = _union_sorted(lo * n + hi, diag)
        del lo, hi
        indptr, indices = _csr_from_keys(ukeys, n)
        urows = ukeys // n
        src = _compact(_positions(keys, ukeys))
        mirror = _compact(_positions(keys, indices * n + urows))
        return _Structure(_compact(indptr), _compact(indices), src, mirror,
                          _compact(urows))

    @functools.cached_property
    def full(self) -> _Structure:
        """pattern(K) with every diagonal entry (for the unsymmetric type)."""
        keys = self._keys()
        diag = np.arange(self.n, dtype=np.int64) * (self.n + 1)
        fkeys = _union_sorted(keys, diag)
        indptr, indices = _csr_from_keys(fkeys, self.n)
        return _Structure(_compact(indptr), _compact(indices),
                          _compact(_positions(keys, fkeys)))

    def set_superlu_order(self, perm_c: np.ndarray) -> None:
        """Store SuperLU's column order and the gather building ``K[q][:, q]``."""
        p = np.asarray(perm_c, dtype=np.int64)   # old index -> new index
        q = np.argsort(p)                         # new index -> old index
        new_r, new_c = p[self._rows()], p[self.indices]
        order = np.lexsort((new_r, new_c))        # CSC order of K[q][:, q]
        indptr = np.zeros(self.n + 1, dtype=np.int64)
        np.cumsum(np.bincount(new_c, minlength=self.n), out=indptr[1:])
        self.superlu_q = q
        self.superlu_struct = _Structure(_compact(indptr), _compact(new_r[order]),
                                         _compact(order))

    @functools.cached_property
    def probe_rhs(self) -> np.ndarray:
        rng = np.random.default_rng(_PROBE_SEED)
        return rng.uniform(-1.0, 1.0, self.n)

    def release(self) -> None:
        # drop the references only: a Factorization still in use keeps its
        # handle (and MKL memory) alive until it is garbage collected
        self.pardiso.clear()


# --------------------------------------------------------------------------
# one matrix (values) on a pattern
# --------------------------------------------------------------------------


class _System:
    """The values of one ``K`` on its pattern, plus its diagonal scaling."""

    def __init__(self, pattern: _Pattern, values: np.ndarray):
        self.pattern = pattern
        self.n = pattern.n
        # owned copy of the values with one trailing zero, so that a gather
        # index of -1 (entry absent from K) reads 0.0 without another copy
        self._ext = np.empty(values.size + 1)
        self._ext[:-1] = values
        self._ext[-1] = 0.0
        data = self.data = self._ext[:-1]
        self.K = sp.csr_matrix((data, pattern.indices, pattern.indptr),
                               shape=(pattern.n, pattern.n), copy=False)
        diag = self.gather(pattern.diag_pos)
        absd = np.abs(diag)
        dmax = float(absd.max()) if absd.size else 0.0
        if dmax == 0.0:
            dmax = float(np.abs(data).max()) if data.size else 0.0
        self.diag = diag
        self.dmax = dmax
        # S = diag(|K_ii|)^(-1/2); a zero diagonal gets the largest one so
        # that saddle-point-like rows stay of order one
        d = np.where(absd > 0.0, absd, dmax if dmax > 0.0 else 1.0)
        self.sinv = np.sqrt(d)   # S^-1
        self.s = 1.0 / self.sinv  # S

    def gather(self, src: np.ndarray) -> np.ndarray:
        """``K.data[src]`` with 0.0 where ``src == -1``."""
        return self._ext[src]

    @functools.cached_property
    def norm_hat(self) -> float:
        """Infinity norm of the scaled matrix ``S K S``."""
        if self.n == 0:
            return 0.0
        pat = self.pattern
        absK = sp.csr_matrix((np.abs(self.data), pat.indices, pat.indptr),
                             shape=(self.n, self.n), copy=False)
        return float(np.max(self.s * (absK @ self.s)))

    @functools.cached_property
    def asymmetry(self) -> float:
        """``max |Khat_ij - Khat_ji|`` of the scaled matrix (0 when symmetric)."""
        up = self.pattern.upper
        diff = np.abs(self.gather(up.src) - self.gather(up.mirror))
        diff *= self.s[up.rows]
        diff *= self.s[up.indices]
        return float(diff.max()) if diff.size else 0.0

    def backward_error(self, B: np.ndarray, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Scaled normwise backward error of each column of ``K X = B``.

        Returns
        -------
        eta : numpy.ndarray, shape (m,)
            ``|S r|_inf / (|S K S|_inf |S^-1 x|_inf + |S b|_inf)``.
        R : numpy.ndarray, shape (n, m)
            Residual ``B - K X`` (in the units of ``B``).
        """
        R = B - self.K @ X
        s = self.s[:, None]
        num = np.max(np.abs(R * s), axis=0)
        den = (self.norm_hat * np.max(np.abs(X * self.sinv[:, None]), axis=0)
               + np.max(np.abs(B * s), axis=0))
        with np.errstate(invalid="ignore", divide="ignore"):
            eta = np.where(den > 0.0, num / np.where(den > 0.0, den, 1.0), 0.0)
        eta = np.where(np.isfinite(R).all(axis=0), eta, np.inf)
        return eta, R


# --------------------------------------------------------------------------
# factors produced by the engines
# --------------------------------------------------------------------------


class _SuperLUFactor:
    def __init__(self, label: str, lu, q: np.ndarray | None):
        self.label = label
        self._lu = lu
        self._q = q   # K[q][:, q] was factorized (ordering reuse)
        self.stats = {"nnz_factor": int(lu.nnz)}

    def solve(self, B: np.ndarray) -> np.ndarray:
        if self._q is None:
            return np.asarray(self._lu.solve(B)).reshape(B.shape)
        X = np.empty_like(B)
        X[self._q] = np.asarray(self._lu.solve(B[self._q])).reshape(B.shape)
        return X

    def inertia(self, system: _System) -> tuple[int, int, int] | None:
        # with a symmetric permutation (perm_r == perm_c) and symmetric K,
        # K = P^T L U P with U = D L^T, so the signs of U's diagonal are the
        # signs of D: Sylvester's law of inertia gives the eigenvalue signs
        if not np.array_equal(self._lu.perm_r, self._lu.perm_c):
            return None
        u = self._lu.U.diagonal()
        pos, neg = int(np.sum(u > 0.0)), int(np.sum(u < 0.0))
        return pos, neg, int(u.size - pos - neg)


class _PardisoFactor:
    def __init__(self, label: str, handle: _PardisoHandle, a: np.ndarray, generation: int):
        self.label = label
        self._handle = handle
        self._a = a   # PARDISO reads the values again during refinement
        self._generation = generation
        ip = handle.iparm
        self.stats = {
            "nnz_factor": int(ip[17]),
            "perturbed_pivots": int(ip[13]),
            "pardiso_memory_kb": {"analysis_peak": int(ip[14]), "permanent": int(ip[15]),
                                  "factorization": int(ip[16])},
        }
        if handle.mtype == 2:
            self._inertia = (handle.n, 0, 0)
        elif handle.mtype == -2:
            pos, neg = int(ip[21]), int(ip[22])
            self._inertia = (pos, neg, handle.n - pos - neg)
        else:
            self._inertia = None

    def solve(self, B: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(self._handle.solve(self._a, B, self._generation))

    def inertia(self, system: _System) -> tuple[int, int, int] | None:
        return self._inertia


# --------------------------------------------------------------------------
# engines: (system) -> factor, or raise _FactorFailed
# --------------------------------------------------------------------------

_SUPERLU_SYM = dict(diag_pivot_thresh=0.0, options=dict(SymmetricMode=True))


def _engine_superlu_symmetric(system: _System):
    pat = system.pattern
    try:
        if pat.superlu_q is None:
            Kc = system.K.tocsc()
            lu = spla.splu(Kc, permc_spec="MMD_AT_PLUS_A", **_SUPERLU_SYM)
            pat.set_superlu_order(lu.perm_c)
            return _SuperLUFactor("superlu-symmetric", lu, None)
        st = pat.superlu_struct
        Kp = sp.csc_matrix((system.data[st.src], st.indices, st.indptr),
                           shape=(pat.n, pat.n))
        lu = spla.splu(Kp, permc_spec="NATURAL", **_SUPERLU_SYM)
        return _SuperLUFactor("superlu-symmetric", lu, pat.superlu_q)
    except RuntimeError as exc:   # "Factor is exactly singular"
        raise _FactorFailed(f"SuperLU (diagonal pivots): {exc}") from None


def _engine_splu_default(system: _System, label: str = "splu-default"):
    try:
        lu = spla.splu(system.K.tocsc())
    except RuntimeError as exc:
        raise _FactorFailed(f"SuperLU (partial pivoting): {exc}") from None
    return _SuperLUFactor(label, lu, None)


def _engine_superlu_pivoting(system: _System):
    return _engine_splu_default(system, "superlu-pivoting")


def _pardiso_engine(mtype: int, label: str):
    def engine(system: _System):
        fn, reason = _pardiso_library()
        if fn is None:
            raise _FactorFailed(reason)
        pat = system.pattern
        st = pat.full if mtype == 11 else pat.upper
        if st.indices.size > _INT32_MAX:
            raise _FactorFailed("pattern too large for 32-bit PARDISO indices")
        a = system.gather(st.src)
        handle = pat.pardiso.get(mtype)
        if handle is None:
            handle = _PardisoHandle(fn, mtype, st.indptr, st.indices)
            pat.pardiso[mtype] = handle
        if not handle.analysed:
            handle.analyse(a)
        gen = handle.factor(a)
        return _PardisoFactor(label, handle, a, gen)
    return engine


_ENGINES = {
    "pardiso-spd": _pardiso_engine(2, "pardiso-spd"),
    "pardiso-indefinite": _pardiso_engine(-2, "pardiso-indefinite"),
    "pardiso-unsymmetric": _pardiso_engine(11, "pardiso-unsymmetric"),
    "superlu-symmetric": _engine_superlu_symmetric,
    "superlu-pivoting": _engine_superlu_pivoting,
    "splu-default": _engine_splu_default,
}


# --------------------------------------------------------------------------
# input handling and diagnostics
# --------------------------------------------------------------------------


def _canonical_csr(K) -> sp.csr_matrix:
    """Square float64 CSR with sorted, unique indices; the caller's K untouched."""
    if sp.issparse(K):
        Kc = K.tocsr()
    else:
        arr = np.asarray(K)
        if arr.ndim != 2:
            raise ValueError(f"K must be a sparse or 2-D array, got shape {arr.shape}")
        Kc = sp.csr_matrix(arr)
    if Kc.shape[0] != Kc.shape[1]:
        raise ValueError(f"K must be square, got shape {Kc.shape}")
    if np.iscomplexobj(Kc.data):
        raise ValueError("K must be real, got a complex matrix")
    if Kc.dtype != np.float64:
        Kc = Kc.astype(np.float64)
    if not Kc.has_canonical_format:
        Kc = Kc.copy()
        Kc.sum_duplicates()
    if not np.all(np.isfinite(Kc.data)):
        bad = np.unique(np.repeat(np.arange(Kc.shape[0]), np.diff(Kc.indptr))[
            ~np.isfinite(Kc.data)])
        raise ValueError(f"K has non-finite entries in rows {bad[:10].tolist()}"
                         f"{' ...' if bad.size > 10 else ''}")
    return Kc


def find_unrestrained(K, tol: float = 1e-12) -> np.ndarray:
    """Equations with (near-)zero stiffness: DOFs that nothing restrains.

    Equation ``i`` is flagged when ``|K_ii| <= tol * d_max`` and every
    ``|K_ij| <= sqrt(tol) * d_max``, with ``d_max`` the largest ``|K_jj|``.
    For a positive semi-definite stiffness a small diagonal forces small
    off-diagonals (``K_ij^2 <= K_ii K_jj``, Cauchy-Schwarz), so the test
    flags every unrestrained DOF of such a matrix; the bound on the row keeps
    the legitimate zero diagonal of an indefinite but nonsingular matrix
    (e.g. a constraint row) from being flagged.  Cost ``O(nnz)``.

    Parameters
    ----------
    K : scipy.sparse matrix or array_like, shape (n, n)
        Tangent stiffness (N/m, N, N m/rad; mixed per DOF).
    tol : float
        Relative threshold (dimensionless).

    Returns
    -------
    numpy.ndarray of int64
        Sorted equation indices.
    """
    if not tol >= 0.0:
        raise ValueError(f"tol must be >= 0, got {tol}")
    Kc = _canonical_csr(K)
    return _unrestrained(Kc, Kc.diagonal(), tol)


def _unrestrained(Kc: sp.csr_matrix, diag: np.ndarray, tol: float) -> np.ndarray:
    n = Kc.shape[0]
    absd = np.abs(diag)
    dmax = float(absd.max()) if n else 0.0
    if dmax == 0.0:
        # nothing on the diagonal: no stiffness scale to compare with
        return np.arange(n, dtype=np.int64)
    # the row maximum may include the diagonal: a flagged diagonal is below
    # tol * d_max <= sqrt(tol) * d_max anyway
    rowmax = np.zeros(n)
    nonempty = np.diff(Kc.indptr) > 0
    if Kc.nnz:
        rowmax[nonempty] = np.maximum.reduceat(np.abs(Kc.data), Kc.indptr[:-1][nonempty])
    flagged = (absd <= tol * dmax) & (rowmax <= np.sqrt(tol) * dmax)
    return np.flatnonzero(flagged).astype(np.int64)


def _null_modes(system: _System, solve, tol: float, *, block: int = 6,
                iterations: int = 3, participation: float = 1e-2):
    """Lowest modes of ``S K S`` by block inverse iteration.

    ``solve`` applies an (approximate, possibly shifted) inverse of ``K``.
    The Ritz vectors ``v`` (unit 2-norm) of the iterated block with
    ``|S K S v|_2 <= tol`` are zero-stiffness modes.

    Returns
    -------
    equations : numpy.ndarray of int64
        DOFs whose scaled amplitude in some zero mode is at least
        ``participation`` times that mode's largest one.
    residuals : numpy.ndarray
        ``|S K S v|_2`` of every Ritz vector, ascending (dimensionless).
    best : numpy.ndarray of int64
        Participating DOFs of the lowest Ritz vector (even if not a zero mode).
    """
    n = system.n
    k = min(block, n)
    rng = np.random.default_rng(_MODES_SEED)
    Q = np.linalg.qr(rng.standard_normal((n, k)))[0]
    sinv = system.sinv[:, None]
    for _ in range(iterations):
        # (S K S)^-1 Q = S^-1 K^-1 S^-1 Q
        Y = sinv * solve(sinv * Q)
        if not np.all(np.isfinite(Y)):
            break
        Q = np.linalg.qr(Y)[0]
    s = system.s[:, None]
    KQ = s * (system.K @ (s * Q))
    H = Q.T @ KQ
    _, W = np.linalg.eigh(0.5 * (H + H.T))
    V, KV = Q @ W, KQ @ W
    res = np.linalg.norm(KV, axis=0)
    order = np.argsort(res)
    res, V = res[order], V[:, order]

    def members(v):
        mag = np.abs(v)
        return np.flatnonzero(mag >= participation * mag.max())

    null = [members(V[:, j]) for j in range(k) if res[j] <= tol]
    eqs = np.unique(np.concatenate(null)) if null else np.zeros(0, dtype=np.int64)
    return eqs.astype(np.int64), res, members(V[:, 0]).astype(np.int64)


def _block_inertia(a: np.ndarray, b: np.ndarray) -> tuple[int, int, int]:
    """Eigenvalue sign counts of a symmetric block-diagonal matrix.

    ``a`` is its diagonal and ``b`` its first subdiagonal, nonzero only
    inside the 2 x 2 blocks (the D of a Bunch-Kaufman ``LDL^T``).  A 2 x 2
    block ``[[p, q], [q, r]]`` has eigenvalues of opposite signs when its
    determinant ``p r - q^2`` is negative, both of the sign of its trace
    when positive, and one zero eigenvalue when it vanishes.
    """
    n = a.size
    first = np.flatnonzero(b != 0.0)          # block rows (k, k + 1)
    single = np.ones(n, dtype=bool)
    single[first] = False
    single[first + 1] = False
    d1 = a[single]
    p, r, q = a[first], a[first + 1], b[first]
    det, trace = p * r - q * q, p + r
    pos = int(np.sum(d1 > 0.0)) + int(np.sum(det < 0.0)) + 2 * int(np.sum((det > 0.0) & (trace > 0.0))) \
        + int(np.sum((det == 0.0) & (trace > 0.0)))
    neg = int(np.sum(d1 < 0.0)) + int(np.sum(det < 0.0)) + 2 * int(np.sum((det > 0.0) & (trace < 0.0))) \
        + int(np.sum((det == 0.0) & (trace < 0.0)))
    return pos, neg, n - pos - neg


def dense_inertia(A) -> tuple[int, int, int]:
    """Inertia of a dense symmetric matrix by a Bunch-Kaufman ``LDL^T``.

    ``A = P L D L^T P^T`` (``scipy.linalg.ldl``, LAPACK ``?sytrf``) is a
    congruence, so by Sylvester's law of inertia ``A`` and the
    block-diagonal ``D`` have the same numbers of positive, negative and
    zero eigenvalues.  Cost ``n^3 / 3`` flops.

    Parameters
    ----------
    A : array_like, shape (n, n)
        Symmetric matrix (only the lower triangle is read).

    Returns
    -------
    tuple of int
        ``(positive, negative, zero)``.
    """
    import scipy.linalg as sla
    A = np.asarray(A, dtype=np.float64)
    if A.shape[0] == 0:
        return (0, 0, 0)
    _, d, _ = sla.ldl(A, lower=True, hermitian=True, check_finite=False)
    return _block_inertia(np.diag(d).copy(), np.diag(d, -1).copy())


def _fallback_inertia(system: _System, tol: float) -> tuple[int, int, int] | None:
    """Inertia of a symmetric ``K`` whose factors used row interchanges.

    Dense ``LDL^T`` up to :data:`DENSE_INERTIA_MAX` equations; above, the
    symmetric SuperLU factorization with other fill-reducing orderings
    (diagonal pivots, probe-checked as in :meth:`LinearSolver._probe`).
    """
    if system.n <= DENSE_INERTIA_MAX:
        return dense_inertia(system.K.toarray())
    bhat = system.pattern.probe_rhs
    B = (bhat * system.sinv)[:, None]
    for spec in ("COLAMD", "MMD_ATA", "NATURAL"):
        try:
            lu = spla.splu(system.K.tocsc(), permc_spec=spec, **_SUPERLU_SYM)
        except RuntimeError:
            continue
        factor = _SuperLUFactor("superlu-symmetric", lu, None)
        found = factor.inertia(system)
        if found is None:
            continue
        eta, _ = system.backward_error(B, factor.solve(B))
        if np.isfinite(eta[0]) and eta[0] <= tol:
            return found
    return None


def _describe(eqs: np.ndarray, limit: int = 12) -> str:
    head = ", ".join(str(int(i)) for i in eqs[:limit])
    return head + (f", ... ({eqs.size} in total)" if eqs.size > limit else "")


# --------------------------------------------------------------------------
# public objects
# --------------------------------------------------------------------------


@dataclass
class Factorization:
    """Factors of one tangent stiffness, ready to solve ``K x = b``.

    Attributes
    ----------
    n : int
        Number of equations.
    backend : str
        Engine whose factors are used: ``"pardiso-spd"``,
        ``"pardiso-indefinite"``, ``"pardiso-unsymmetric"``,
        ``"superlu-symmetric"``, ``"superlu-pivoting"`` or ``"splu-default"``
        (``"empty"`` for ``n = 0``).
    requested : str
        Name the solver was made with.
    fallback : bool
        True when ``backend`` is not the first choice for this request
        (including a choice remembered for the pattern from an earlier
        fallback, and a fallback triggered later by :meth:`solve`).
    attempts : list of (str, str)
        Engines that failed for this matrix and why.
    reused_pattern : bool
        True when the sparsity pattern was already known to the solver (the
        cached analysis/ordering was used).
    condition_estimate : float
        Lower bound of the infinity-norm condition number of the scaled
        matrix ``S K S`` from the probe solve (NaN when checks are off).
    seconds : float
        Wall time of :meth:`LinearSolver.factorize`, checks included (s).
    stats : dict
        Backend details: ``nnz_factor``, and for PARDISO the number of
        perturbed pivots and its memory report (kB).
    last_backward_error : float
        Scaled backward error of the latest :meth:`solve` (dimensionless).
    """

    n: int
    backend: str
    requested: str
    fallback: bool
    attempts: list
    reused_pattern: bool
    condition_estimate: float
    seconds: float
    stats: dict
    _system: _System | None = field(repr=False, default=None)
    _factor: object = field(repr=False, default=None)
    _spare: list = field(repr=False, default_factory=list)
    _tol: float = field(repr=False, default=1e-10)
    _singular_tol: float = field(repr=False, default=1e-12)
    _check: bool = field(repr=False, default=True)
    last_backward_error: float = float("nan")
    _inertia: tuple | None = field(repr=False, default=None)

    def solve(self, b) -> np.ndarray:
        """Solve ``K x = b``.

        The residual is checked; one step of iterative refinement is taken
        when the scaled backward error exceeds the solver's
        ``residual_tol``, and if that is not enough the remaining SuperLU
        fallbacks are tried.

        Parameters
        ----------
        b : array_like, shape (n,) or (n, m)
            Right-hand side(s), in the units of the residual forces (N, N m).

        Returns
        -------
        numpy.ndarray, shape of ``b``
            Solution(s), in the units of the DOFs (m, rad).

        Raises
        ------
        SingularMatrixError
            When the residual cannot be reduced and ``K`` has a zero mode.
        StaleFactorizationError
            When a PARDISO factorization was overwritten by the solver.
        """
        b = np.asarray(b)
        if b.ndim not in (1, 2) or b.shape[0] != self.n:
            raise ValueError(f"b must have shape ({self.n},) or ({self.n}, m), got {b.shape}")
        if np.iscomplexobj(b):
            raise ValueError("b must be real")
        if not np.all(np.isfinite(b)):
            raise ValueError("b has non-finite entries")
        B = np.array(b if b.ndim == 2 else b[:, None], dtype=np.float64, copy=True)
        if self.n == 0 or B.shape[1] == 0:
            return B.reshape(b.shape)
        X = self._raw_solve(B)
        if self._check:
            eta, R = self._system.backward_error(B, X)
            if np.any(eta > self._tol):
                X = X + self._raw_solve(R)
                eta, R = self._system.backward_error(B, X)
            while np.any(eta > self._tol) and self._spare:
                self._fall_back(f"solve backward error {eta.max():.1e} > {self._tol:.0e}")
                X = self._raw_solve(B)
                eta, R = self._system.backward_error(B, X)
                if np.any(eta > self._tol):
                    X = X + self._raw_solve(R)
                    eta, R = self._system.backward_error(B, X)
            self.last_backward_error = float(eta.max())
            if np.any(eta > self._tol):
                eqs, _, _ = _null_modes(self._system, self._factor.solve, self._singular_tol)
                if eqs.size:
                    raise SingularMatrixError(
                        f"K is singular (zero-stiffness mode); equations {_describe(eqs)}", eqs)
                logger.warning("linear solve: scaled backward error %.1e exceeds %.0e "
                               "(backend %s); K is ill-conditioned", eta.max(), self._tol,
                               self.backend)
        return X.reshape(b.shape)

    def _raw_solve(self, B: np.ndarray) -> np.ndarray:
        while True:
            try:
                return self._factor.solve(B)
            except _FactorFailed as exc:
                if not self._spare:
                    raise RuntimeError(
                        f"solve failed with {self.backend} and no fallback is left: "
                        f"{exc}") from None
                self._fall_back(str(exc))

    def _fall_back(self, reason: str) -> None:
        self.attempts.append((self.backend, reason))
        while self._spare:
            name = self._spare.pop(0)
            try:
                self._factor = _ENGINES[name](self._system)
            except _FactorFailed as exc:
                self.attempts.append((name, str(exc)))
                continue
            logger.info("linear solve: %s -> %s (%s)", self.backend, name, reason)
            self.backend, self.fallback = name, True
            self.stats = dict(self._factor.stats)
            return

    def inertia(self) -> tuple[int, int, int] | None:
        """Signs of the eigenvalues of a symmetric ``K`` from its pivots.

        Exact by Sylvester's law of inertia (see the module documentation,
        "Inertia"): read from the factors when they are a symmetric
        ``LDL^T`` (symmetric SuperLU, PARDISO), otherwise from a dense
        ``LDL^T`` of a small ``K`` or another symmetric SuperLU ordering.

        Returns
        -------
        tuple of int or None
            ``(positive, negative, zero)`` counts, or None for an
            unsymmetric ``K`` (see :meth:`LinearSolver.inertia` for its
            symmetric part) or when no symmetric factorization could be
            made.  A negative count > 0 at an equilibrium means the
            structure is unstable there (e.g. compressed beams past
            buckling).  For SuperLU this builds the ``U`` factor once
            (extra memory of that size, ~6 % of the factorization's time).
        """
        if self.n == 0:
            return (0, 0, 0)
        if self._system.asymmetry > 1e-12:
            return None
        if self._inertia is None:
            found = self._factor.inertia(self._system)
            if found is None:
                found = _fallback_inertia(self._system, self._tol)
            self._inertia = found
        return self._inertia


class LinearSolver:
    """Factorizes tangent stiffness matrices, reusing work per sparsity pattern.

    Make one with :func:`make_linear_solver` and keep it for all Newton
    iterations of a model.  The solver remembers the last sparsity pattern
    (``indptr``/``indices`` of the canonical CSR form of ``K``); a new pattern
    replaces it (PARDISO memory of the old one is freed once no
    factorization made with it is referenced).  Not thread-safe.

    Parameters
    ----------
    name : str
        One of :data:`KNOWN_BACKENDS`.
    symmetric : bool
        True when ``K`` is (meant to be) symmetric.  PARDISO then factorizes
        the upper triangle; a matrix whose scaled asymmetry exceeds 1e-12 is
        still solved exactly, with PARDISO's unsymmetric type.  SuperLU
        factorizes the full matrix either way.
    residual_tol : float
        Largest accepted scaled normwise backward error (dimensionless).  A
        stable direct solve reaches a few ``n_c * eps`` (``n_c`` the longest
        column of the factor), i.e. 1e-15 to 1e-13 for stiffness matrices;
        the default 1e-10 leaves room for that while rejecting factors with
        pivot growth >~ 1e6.
    singular_tol : float
        A mode ``v`` (unit 2-norm, scaled coordinates) with
        ``|S K S v|_2 <= singular_tol`` is a zero-stiffness mode; the scaled
        diagonal is 1, so this is the stiffness relative to the typical DOF.
    unrestrained_tol : float
        Threshold of :func:`find_unrestrained`, checked before factorizing.
    check : bool
        Probe every factorization and check every solve (recommended; costs
        about one extra solve per factorization and one matrix-vector product
        per solve).
    """

    def __init__(self, name: str = "auto", symmetric: bool = True, *,
                 residual_tol: float = 1e-10, singular_tol: float = 1e-12,
                 unrestrained_tol: float = 1e-12, check: bool = True):
        if name not in KNOWN_BACKENDS:
            raise ValueError(f"unknown linear solver backend {name!r}; known: "
                             f"{', '.join(KNOWN_BACKENDS)}")
        for label, v in (("residual_tol", residual_tol), ("singular_tol", singular_tol),
                         ("unrestrained_tol", unrestrained_tol)):
            if not (0.0 < v < 1.0):
                raise ValueError(f"{label} must be in (0, 1), got {v}")
        if name == "pardiso":
            fn, reason = _pardiso_library()
            if fn is None:
                raise ValueError(f"backend 'pardiso' is not available: {reason}; "
                                 "install it with `pip install pypardiso` or use 'auto'")
        self.name = name
        self.symmetric = bool(symmetric)
        self.residual_tol = float(residual_tol)
        self.singular_tol = float(singular_tol)
        self.unrestrained_tol = float(unrestrained_tol)
        self.check = bool(check)
        if name == "auto":
            self._family = "pardiso" if _pardiso_library()[0] is not None else "superlu"
        else:
            self._family = name
        self._pattern: _Pattern | None = None
        self._symmetric_part: LinearSolver | None = None

    def __repr__(self) -> str:
        return (f"LinearSolver(name={self.name!r}, family={self._family!r}, "
                f"symmetric={self.symmetric})")

    # -- chains ---------------------------------------------------------------

    def _preferred_chain(self, system: _System) -> list[str]:
        superlu = ["superlu-symmetric", "superlu-pivoting"]
        if self._family == "splu-default":
            return ["splu-default"]
        if self._family == "superlu":
            return superlu
        if not self.symmetric or system.asymmetry > 1e-12:
            if self.symmetric:
                logger.debug("linear solve: K is unsymmetric (scaled %.1e); "
                             "using PARDISO's unsymmetric type", system.asymmetry)
            return ["pardiso-unsymmetric", *superlu]
        return ["pardiso-spd", "pardiso-indefinite", *superlu]

    def _start(self, chain: list[str], pattern: _Pattern) -> list[str]:
        # the remembered symmetric PARDISO type of this pattern
        if chain[0] == "pardiso-spd" and pattern.pardiso_symmetric_mtype == -2:
            return chain[1:]
        return chain

    # -- main entry -----------------------------------------------------------

    def factorize(self, K) -> Factorization:
        """Factorize the tangent stiffness ``K``.

        Parameters
        ----------
        K : scipy.sparse matrix or array_like, shape (n, n)
            Tangent stiffness of the free DOFs (N/m, N, N m/rad; mixed per
            DOF).  Not modified; its values are copied, so the caller may
            reassemble into the same arrays afterwards.

        Returns
        -------
        Factorization

        Raises
        ------
        SingularMatrixError
            When ``K`` has unrestrained equations or a zero-stiffness mode.
        ValueError
            For a non-square, complex or non-finite ``K``.
        """
        t0 = time.perf_counter()
        Kc = _canonical_csr(K)
        n = Kc.shape[0]
        reused = self._pattern is not None and self._pattern.matches(Kc)
        if not reused:
            if self._pattern is not None:
                self._pattern.release()
            self._pattern = _Pattern(n, Kc.indptr, Kc.indices)
        pattern = self._pattern
        if n == 0:
            return Factorization(0, "empty", self.name, False, [], reused, 1.0,
                                 time.perf_counter() - t0, {})
        system = _System(pattern, Kc.data)

        free = _unrestrained(system.K, system.diag, self.unrestrained_tol)
        if free.size:
            raise SingularMatrixError(
                f"K has {free.size} unrestrained equation(s) (zero stiffness): "
                f"{_describe(free)}", free)

        preferred = self._preferred_chain(system)
        chain = self._start(preferred, pattern)
        attempts: list[tuple[str, str]] = []
        for j, name in enumerate(chain):
            try:
                factor = _ENGINES[name](system)
            except _FactorFailed as exc:
                attempts.append((name, str(exc)))
                logger.debug("linear solve: %s failed: %s", name, exc)
                continue
            kappa = np.nan
            if self.check:
                ok, reason, kappa = self._probe(system, factor)
                if not ok:
                    attempts.append((name, reason))
                    logger.debug("linear solve: %s rejected: %s", name, reason)
                    continue
            if name == "pardiso-indefinite" and pattern.pardiso_symmetric_mtype == 2:
                pattern.pardiso_symmetric_mtype = -2
                pattern.pardiso.pop(2, None)   # the SPD analysis is not needed again
            if attempts:
                logger.info("linear solve: used %s after %s", name,
                            "; ".join(f"{a}: {r}" for a, r in attempts))
            spare = [e for e in chain[j + 1:] if e.startswith("superlu")]
            return Factorization(
                n=n, backend=name, requested=self.name, fallback=name != preferred[0],
                attempts=attempts, reused_pattern=reused, condition_estimate=float(kappa),
                seconds=time.perf_counter() - t0, stats=dict(factor.stats),
                _system=system, _factor=factor, _spare=spare, _tol=self.residual_tol,
                _singular_tol=self.singular_tol, _check=self.check)
        raise self._diagnose_failure(system, attempts)

    def solve(self, K, b) -> np.ndarray:
        """Factorize ``K`` and solve ``K x = b`` (see :meth:`factorize`)."""
        return self.factorize(K).solve(b)

    def inertia(self, K, factorization: Factorization | None = None) -> tuple[int, int, int] | None:
        """Eigenvalue sign counts of the symmetric part ``(K + K^T) / 2``.

        At an equilibrium the symmetric part of the tangent is the second
        variation of the potential energy, whose negative eigenvalues are
        the unstable modes; the beams' spin-variable tangent is unsymmetric
        away from equilibrium only.

        Parameters
        ----------
        K : scipy.sparse matrix or array_like, shape (n, n)
            Tangent stiffness (N/m, N, N m/rad).
        factorization : Factorization, optional
            A factorization of this ``K`` already made: its pivots are used
            when ``K`` is symmetric (no new factorization).

        Returns
        -------
        tuple of int or None
            ``(positive, negative, zero)``, or None when no symmetric
            factorization could be made.

        Raises
        ------
        SingularMatrixError
            When the symmetric part is singular (a zero eigenvalue).
        """
        if factorization is not None:
            found = factorization.inertia()
            if found is not None:
                return found
        Kc = _canonical_csr(K)
        sym = (0.5 * (Kc + Kc.T)).tocsr()
        if self._symmetric_part is None:
            # its own pattern cache: the main solver keeps the tangent's
            self._symmetric_part = LinearSolver(
                self.name, True, residual_tol=self.residual_tol, singular_tol=self.singular_tol,
                unrestrained_tol=self.unrestrained_tol, check=True)
        return self._symmetric_part.factorize(sym).inertia()

    def reset(self) -> None:
        """Forget the cached pattern and the remembered backend choices.

        PARDISO's memory is freed as soon as no :class:`Factorization` made
        by this solver is still referenced.
        """
        if self._pattern is not None:
            self._pattern.release()
            self._pattern = None
        if self._symmetric_part is not None:
            self._symmetric_part.reset()

    # -- checks ---------------------------------------------------------------

    def _probe(self, system: _System, factor):
        """Solve a fixed pseudo-random system; judge accuracy and singularity.

        Returns ``(ok, reason, kappa)``; raises :class:`SingularMatrixError`
        when the matrix has a zero-stiffness mode.
        """
        bhat = system.pattern.probe_rhs
        B = (bhat * system.sinv)[:, None]          # b = S^-1 bhat
        try:
            X = factor.solve(B)
        except _FactorFailed as exc:
            return False, str(exc), np.nan
        # judged without refinement: refinement can hide unstable factors
        # (pivot growth) on one right-hand side and fail on the next
        eta, _ = system.backward_error(B, X)
        if not np.isfinite(eta[0]):
            return False, "non-finite probe solution", np.nan
        if eta[0] > self.residual_tol:
            return False, (f"probe backward error {eta[0]:.1e} > "
                           f"{self.residual_tol:.0e}"), np.nan
        xhat = X[:, 0] * system.sinv              # xhat = S^-1 x
        kappa = system.norm_hat * np.max(np.abs(xhat)) / np.max(np.abs(bhat))
        # kappa underestimates cond(S K S) by about the size of bhat's
        # component along the lowest mode (~ n^-1/2); a zero mode in floating
        # point has cond ~ 1/eps, far above this trigger, while the mode
        # analysis decides
        # pivots perturbed by PARDISO are near-zero pivots by definition: the
        # refined probe may still pass on a singular matrix, so look closer
        perturbed = factor.stats.get("perturbed_pivots", 0) > 0
        if perturbed or kappa > 1e-2 / self.singular_tol:
            eqs, res, _ = _null_modes(system, factor.solve, self.singular_tol)
            if eqs.size:
                raise SingularMatrixError(
                    f"K is singular: zero-stiffness mode (scaled stiffness {res[0]:.1e}) "
                    f"involving equations {_describe(eqs)}", eqs)
            logger.debug("linear solve: ill-conditioned K (cond >= %.1e), "
                         "lowest scaled stiffness %.1e", kappa, res[0])
        return True, "", kappa

    def _diagnose_failure(self, system: _System, attempts) -> SingularMatrixError:
        """Every backend failed: find the mechanism of a slightly shifted K."""
        summary = "; ".join(f"{a}: {r}" for a, r in attempts)
        d = system.sinv ** 2   # |K_ii|, zero diagonals replaced by the largest
        for sigma in (1e-10, 1e-6):
            Ksh = (system.K + sp.diags(sigma * d)).tocsc()
            for kwargs in (dict(permc_spec="MMD_AT_PLUS_A", **_SUPERLU_SYM), {}):
                try:
                    lu = spla.splu(Ksh, **kwargs)
                except RuntimeError:
                    continue
                eqs, res, best = _null_modes(system, lu.solve, self.singular_tol)
                if eqs.size:
                    return SingularMatrixError(
                        f"K is singular: zero-stiffness mode (scaled stiffness "
                        f"{res[0]:.1e}) involving equations {_describe(eqs)} ({summary})",
                        eqs)
                return SingularMatrixError(
                    f"K could not be factorized ({summary}); its softest mode "
                    f"(scaled stiffness {res[0]:.1e}) involves equations "
                    f"{_describe(best)}", best)
        return SingularMatrixError(f"K could not be factorized ({summary})", ())


def available_backends() -> list[str]:
    """Concrete backends usable on this machine, fastest first.

    ``"auto"`` is always accepted by :func:`make_linear_solver` as well.

    Returns
    -------
    list of str
        A sublist of ``["pardiso", "superlu", "splu-default"]``.
    """
    names = ["superlu", "splu-default"]
    if _pardiso_library()[0] is not None:
        names.insert(0, "pardiso")
    return names


def make_linear_solver(name: str = "auto", symmetric: bool = True, **options) -> LinearSolver:
    """Make a sparse direct solver for the tangent stiffness.

    Parameters
    ----------
    name : {"auto", "pardiso", "superlu", "splu-default"}
        Backend; see the module documentation.
    symmetric : bool
        Whether ``K`` is symmetric (cable, bar and small-rotation beam
        models).
    **options
        ``residual_tol``, ``singular_tol``, ``unrestrained_tol``, ``check``:
        see :class:`LinearSolver`.

    Returns
    -------
    LinearSolver

    Raises
    ------
    ValueError
        For an unknown name (the message lists the known ones) or for
        ``"pardiso"`` when pypardiso is not usable.
    """
    return LinearSolver(name, symmetric, **options)
