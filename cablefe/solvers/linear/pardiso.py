"""Bindings to Intel oneMKL PARDISO (optional, through ``pypardiso``'s library
discovery): the error table, the library lookup and one handle per
sparsity pattern and matrix type that runs the analysis (phase 11) once
and the numerical factorization (phase 22) each time.
"""

from __future__ import annotations

import ctypes
import functools

import numpy as np

from .errors import StaleFactorizationError, _FactorFailed

# A pattern with more stored entries than this cannot be passed to the
# 32-bit PARDISO interface.
_INT32_MAX = np.iinfo(np.int32).max


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
