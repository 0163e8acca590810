"""The public layer of the sparse direct solvers: :class:`LinearSolver` picks
a backend (and its fallback chain), factorizes, checks and diagnoses;
:class:`Factorization` solves and counts the inertia;
:func:`make_linear_solver` and :func:`available_backends`.
"""

from __future__ import annotations

import functools
import logging
import time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .diagnostics import (_canonical_csr, _describe, _fallback_inertia, _null_modes,
                          _unrestrained)
from .engines import _ENGINES, _SUPERLU_SYM
from .errors import SingularMatrixError, _FactorFailed
from .pardiso import _pardiso_library
from .pattern import _Pattern, _System
from .schur import schur_product

logger = logging.getLogger(__name__)

#: Names accepted by :func:`make_linear_solver`.
KNOWN_BACKENDS = ("auto", "pardiso", "superlu", "splu-default")

#: :meth:`Factorization.solve_product`: columns per solve call (PARDISO; it
#: also bounds the dense block in memory), and for SuperLU the columns per
#: call on systems of up to SMALL_SYSTEM equations (one at a time above)
BLOCK_COLUMNS = 256
SMALL_SYSTEM = 5000
SMALL_BLOCK = 32
_BLOCK_CHECK_SEED = 7321


def _dense_columns(B, a: int, b: int) -> np.ndarray:
    """Columns ``a:b`` of ``B`` (dense, or sparse CSC with no duplicates) as
    a dense Fortran-ordered block (what SuperLU and PARDISO solve without a
    copy), without building a sparse slice."""
    if not sp.issparse(B):
        return np.asfortranarray(B[:, a:b], dtype=np.float64)
    lo, hi = B.indptr[a], B.indptr[b]
    out = np.zeros((B.shape[0], b - a), order="F")
    out[B.indices[lo:hi], np.repeat(np.arange(b - a), np.diff(B.indptr[a:b + 1]))] = B.data[lo:hi]
    return out


@functools.lru_cache(maxsize=8)
def _check_weights(p: int) -> np.ndarray:
    """The fixed random weights ``u`` of :meth:`Factorization.solve_product`'s
    combined check for ``p`` columns: ``|u_j|`` in [1/2, 1], random sign
    (read-only; the same for every call, so results are reproducible)."""
    rng = np.random.default_rng(_BLOCK_CHECK_SEED)
    u = rng.uniform(0.5, 1.0, p) * rng.choice([-1.0, 1.0], p)
    u.flags.writeable = False
    return u


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

    def solve_product(self, left, B) -> np.ndarray:
        """``left K^-1 B`` for many columns ``B``, never holding all of ``K^-1 B``.

        ``B`` is solved a block of columns at a time, as the backend solves
        fastest: SuperLU ``SMALL_BLOCK`` columns per call on systems of up
        to ``SMALL_SYSTEM`` equations and one at a time above (its
        multi-column solve was measured 3-4 times slower there: 28 812
        DOFs, 64 columns, 2.6 s against 0.75 s; at 1 816 DOFs 32 columns
        per call took 4.8 ms against 11 ms one by one for 102 columns),
        other backends ``BLOCK_COLUMNS``; each block is multiplied by
        ``left`` at once.  With SuperLU the blocks are solved in the
        factors' own row order, and ``left``'s columns are put in that
        order once, instead of permuting every block there and back.

        All columns are checked together, with one product with ``K``: the
        residual of ``X w`` for random weights ``w_j = u_j / d_j``, ``d_j``
        the denominator of column ``j``'s scaled backward error (see
        :meth:`_System.backward_error`) and ``|u_j|`` in [1/2, 1] with a
        random sign, must be below the solver's ``residual_tol``: each
        column then counts as its own backward error, so one column above
        twice the tolerance shows unless the others cancel it exactly,
        which has probability zero.  When the check fails, every column is
        solved again by :meth:`solve`, with its full check, refinement and
        fallbacks.

        Parameters
        ----------
        left : (m, n) sparse or dense matrix
        B : (n, p) array or sparse matrix (densified a block at a time)

        Returns
        -------
        numpy.ndarray, shape (m, p)
        """
        left = sp.csr_matrix(left)
        m, p = left.shape[0], B.shape[1]
        if left.shape[1] != self.n or B.shape[0] != self.n:
            raise ValueError(f"left must have {self.n} columns and B {self.n} rows, "
                             f"got {left.shape} and {B.shape}")
        out = np.zeros((m, p))
        if self.n == 0 or m == 0 or p == 0:
            return out
        factor, backend = self._factor, self.backend
        q = factor.order
        # B's rows and left's columns in the factors' order: for sparse
        # matrices a relabelling of their indices (into new arrays: the
        # caller's matrices are never sorted or summed in place)
        where = None
        if q is not None:
            where = np.empty_like(q)
            where[q] = np.arange(q.size)
        Lq = left if q is None else sp.csr_matrix((left.data, where[left.indices], left.indptr),
                                                  shape=left.shape)
        if sp.issparse(B):
            B = sp.csc_matrix(B, dtype=np.float64)
            rows = B.indices.copy() if q is None else where[B.indices]
            Bq = sp.csc_matrix((B.data.copy(), rows, B.indptr.copy()), shape=B.shape)
            Bq.sum_duplicates()
        else:
            Bq = np.asarray(B) if q is None else np.asarray(B)[q]
        step = BLOCK_COLUMNS
        if backend.startswith(("superlu", "splu")):
            step = SMALL_BLOCK if self.n <= SMALL_SYSTEM else 1
        if self._check:
            system = self._system
            s, sinv = (system.s, system.sinv) if q is None else (system.s[q], system.sinv[q])
            u = _check_weights(p)
            w = np.zeros(p)
            xw = np.zeros(self.n)
            if sp.issparse(Bq):        # |S b_j|_inf of every column at once
                scaled_b = np.abs(Bq.data * s[Bq.indices])
                b_norm = np.zeros(p)
                filled = np.flatnonzero(np.diff(Bq.indptr))
                b_norm[filled] = np.maximum.reduceat(scaled_b, Bq.indptr[filled])
            else:
                b_norm = np.max(np.abs(Bq * s[:, None]), axis=0)
            scaled = np.empty((self.n, min(step, p)), order="F")
        for a in range(0, p, step):
            b = min(a + step, p)
            block = _dense_columns(Bq, a, b)
            try:
                X = factor.solve_ordered(block)
            except _FactorFailed as exc:
                self._fall_back(str(exc))
                return self._solve_product_by_columns(left, B)
            out[:, a:b] = Lq @ X
            if self._check:
                # w_j = u_j / (|S K S|_inf |S^-1 x_j|_inf + |S b_j|_inf)
                part = np.multiply(X, sinv[:, None], out=scaled[:, :b - a])
                den = system.norm_hat * np.max(np.abs(part, out=part), axis=0) + b_norm[a:b]
                np.divide(u[a:b], den, out=w[a:b], where=den > 0.0)
                xw += X @ w[a:b]
        if self._check:
            bw = Bq @ w
            if q is not None:          # back to the matrix's own order
                xw[q], bw[q] = xw.copy(), bw.copy()
            r = np.max(np.abs(system.s * (bw - system.K @ xw)))
            if not r <= self._tol:
                logger.debug("linear solve: block solves failed their combined check "
                             "(%.1e > %.0e); solving column by column", r, self._tol)
                return self._solve_product_by_columns(left, B)
        return out

    def _solve_product_by_columns(self, left, B) -> np.ndarray:
        out = np.zeros((left.shape[0], B.shape[1]))
        for j in range(B.shape[1]):
            b = B[:, j]
            b = b.toarray().ravel() if sp.issparse(b) else np.asarray(b).ravel()
            out[:, j] = left @ self.solve(b)
        return out

    def schur_product(self, C, F) -> np.ndarray | None:
        """``C K^-1 F`` through the Schur complement on the unknowns ``C``
        (rows, sparse) and ``F`` (columns) touch, or None when that route
        does not pay or cannot be taken (see :mod:`.schur`): the caller
        then solves with :meth:`solve`.  Needs the SuperLU ordering of the
        pattern (any backend's factors are left untouched).
        """
        if self._system is None:
            return None
        return schur_product(self._system.K, self._system.pattern.superlu_q, C, F,
                             self.stats.get("nnz_factor"))

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

    @property
    def solves_per_factorisation(self) -> float:
        """What a factorisation by this backend costs, in back-substitutions
        with its factors (a measured constant of the backend; inf for an
        empty system): the budget of iterative solves preconditioned with
        these factors (see :mod:`.krylov`)."""
        return float(getattr(self._factor, "solves_per_factorisation", 1.0)) if self.n else float("inf")

    def precondition(self, v: np.ndarray) -> np.ndarray:
        """``K^-1 v`` with these factors and no residual check or refinement.

        For preconditioning another matrix (see :mod:`.krylov`): the Krylov
        iteration judges its own residual, so a check here would only cost
        one more product with ``K`` per iteration.
        """
        v = np.asarray(v, dtype=np.float64)
        if self.n == 0:
            return np.zeros_like(v)
        return self._raw_solve(v[:, None]).ravel()


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

        unrestrained = _unrestrained(system.K, system.diag, self.unrestrained_tol)
        if unrestrained.size:
            raise SingularMatrixError(
                f"K has {unrestrained.size} unrestrained equation(s) (zero stiffness): "
                f"{_describe(unrestrained)}", unrestrained)

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
