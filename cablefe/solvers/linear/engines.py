"""Factorization engines: symmetric SuperLU with a reused ordering, scipy's
partial-pivoting SuperLU, and the three PARDISO matrix types; each takes a
system and returns its factors (with their inertia when they reveal it)
or raises ``_FactorFailed``.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .errors import _FactorFailed
from .pardiso import _INT32_MAX, _PardisoHandle, _pardiso_library
from .pattern import _System


# --------------------------------------------------------------------------
# factors produced by the engines
# --------------------------------------------------------------------------


class _SuperLUFactor:
    #: cost of a factorisation, with the count of its pivot signs, in
    #: back-substitutions with its factors (measured on saddle nets, 2
    #: cores: 0.13 + 0.026 s against 5.4 ms at 28 812 DOFs, 0.80 + 0.29 s
    #: against 27 ms at 117 612; benchmarks/README.md)
    solves_per_factorisation = 30.0

    def __init__(self, label: str, lu, q: np.ndarray | None):
        self.label = label
        self._lu = lu
        self._q = q   # K[q][:, q] was factorized (ordering reuse)
        self.stats = {"nnz_factor": int(lu.nnz)}

    @property
    def order(self) -> np.ndarray | None:
        """Rows as :meth:`solve_ordered` takes them (``K[q][:, q]`` was
        factorised), or None for the matrix's own order."""
        return self._q

    def solve(self, B: np.ndarray) -> np.ndarray:
        if self._q is None:
            return self.solve_ordered(B)
        X = np.empty_like(B)
        X[self._q] = self.solve_ordered(B[self._q])
        return X

    def solve_ordered(self, B: np.ndarray) -> np.ndarray:
        return np.asarray(self._lu.solve(B)).reshape(B.shape)

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
    #: the same for PARDISO: its supernodal factorisation is fast, its
    #: solve is not, and it counts the pivots as it goes (0.13 s against
    #: 27 ms at 117 612 DOFs on 2 cores)
    solves_per_factorisation = 5.0

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

    #: its solve takes the matrix's own order
    order = None

    def solve(self, B: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(self._handle.solve(self._a, B, self._generation))

    solve_ordered = solve

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
