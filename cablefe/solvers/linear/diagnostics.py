"""Diagnostics of a tangent stiffness: input checks, unrestrained equations,
the mechanism search (block inverse iteration for zero-stiffness modes) and
the inertia (dense Bunch-Kaufman or other symmetric orderings) when the
factors cannot give it.
"""

from __future__ import annotations

import importlib

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .engines import _SUPERLU_SYM, _SuperLUFactor
from .pattern import _System

# Fixed seed: the mechanism search must give the same answer for the same
# matrix on every run.
_MODES_SEED = 7


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


def _dense_inertia_max() -> int:
    """:data:`cablefe.solvers.linear.DENSE_INERTIA_MAX`, read when used.

    The setting lives on the package (its public name) and is looked up at
    call time, so one assignment there governs this module too.
    """
    return importlib.import_module(__package__).DENSE_INERTIA_MAX


def _fallback_inertia(system: _System, tol: float) -> tuple[int, int, int] | None:
    """Inertia of a symmetric ``K`` whose factors used row interchanges.

    Dense ``LDL^T`` up to :data:`DENSE_INERTIA_MAX` equations; above, the
    symmetric SuperLU factorization with other fill-reducing orderings
    (diagonal pivots, probe-checked as in :meth:`LinearSolver._probe`).
    """
    if system.n <= _dense_inertia_max():
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
