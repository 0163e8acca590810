"""The sparsity-pattern cache and one matrix on it: the derived structures
(upper triangle, full symmetric, SuperLU's reused ordering) computed once
per pattern, the diagonal scaling and the probe solve that checks a
factorization.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from .pardiso import _INT32_MAX, _PardisoHandle

# Fixed seed: the probe must give the same answer for the same matrix on
# every run.
_PROBE_SEED = 20240611


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
