"""``C K^-1 F`` when ``C`` and ``F`` touch few unknowns: the Schur complement.

Influence lines need ``C K^-1 F`` for response rows ``C`` and unit loads
``F`` that act on a few hundred of the tangent's unknowns (the lane, the
watched nodes and members).  Ordering those unknowns ``R`` last, the LU
factors of the permuted tangent are block triangular,

    [K_II K_IR]   [L11  0 ] [U11 U12]
    [K_RI K_RR] = [L21 L22] [ 0  U22],

and the trailing factors are those of the Schur complement
``S = K_RR - K_RI K_II^-1 K_IR = L22 U22``, whose inverse is the ``R`` block
of ``K^-1`` (the inverse of a block triangular matrix has the inverses of
the diagonal blocks on its diagonal: Golub & Van Loan 2013, Matrix
Computations, 4th ed., sec. 3.2, block LU and the Schur complement, from
memory).  So

    C K^-1 F = C_R U22^-1 L22^-1 F_R,

one factorisation and dense triangular solves of size ``r = |R|``, instead
of a solve with the whole factors per lane point or per response.  The
unknowns ``R`` are appended to the tangent's own fill-reducing order: for a
lane across a net they are the separator a nested ordering puts last anyway.

The route is taken only when its cost, a factorisation
(:data:`FACTORISATION_IN_SOLVES`) and the dense work (``r^3/3`` for the
trailing factor, ``2 r^2 p`` for the solves), is well below that of the
solves it replaces, and its answer is checked: one random combination of the loads is
solved with the whole factors, its backward error must be small and its
``R`` part must match.  Otherwise None is returned and the caller solves.
"""
from __future__ import annotations

import logging

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
import scipy.sparse.linalg as spla

log = logging.getLogger(__name__)

#: unknowns beyond which the dense trailing block is not formed (its
#: factor, r^2 doubles, and r^3/3 flops)
MAX_TOUCHED = 3000
#: the Schur route is taken when its cost (a factorisation plus the dense
#: work) is below this fraction of the solves it replaces
WORTH = 0.5
#: a factorisation's cost in solves with its factors (measured with SuperLU:
#: 26 on a 28 812-DOF net, about 40 on a 1 816-DOF beam and cable bridge;
#: benchmarks/README.md)
FACTORISATION_IN_SOLVES = 30.0
#: accepted scaled backward error of the check solve, and relative
#: disagreement of its touched part with the Schur route's answer
CHECK_BACKWARD = 1e-10
CHECK_AGREEMENT = 1e-8
#: seed of the check's random load combination (reproducible answers)
_CHECK_SEED = 20261204


def schur_product(K: sp.csr_matrix, order: np.ndarray | None, C, F, factor_nnz: int | None) -> np.ndarray | None:
    """``C K^-1 F`` through the Schur complement on the unknowns ``C`` and ``F`` touch.

    Parameters
    ----------
    K : (n, n) sparse tangent
    order : (n,) a fill-reducing order of ``K`` (new index -> old index),
        e.g. the one SuperLU found for it; None: the route is not taken
    C : (m, n) sparse response rows
    F : (n, p) load columns (sparse or dense)
    factor_nnz : nonzeros of ``K``'s factors, for the cost of the solves
        this route replaces; None: the route is not taken

    Returns
    -------
    (m, p) array, or None when the route does not pay or fails its check.
    """
    n = K.shape[0]
    m, p = C.shape[0], F.shape[1]
    if order is None or factor_nnz is None or n == 0 or m == 0 or p == 0:
        return None
    C = sp.csr_matrix(C)
    # the touched unknowns, by a mask (the route is declined here for most
    # calls that do not pay, before any matrix is formed)
    mask = np.zeros(n, dtype=bool)
    mask[C.indices] = True
    if sp.issparse(F):
        F = sp.csc_matrix(F)
        mask[F.indices] = True
    else:
        mask |= np.any(np.asarray(F) != 0.0, axis=1)
    r = int(np.count_nonzero(mask))
    if r == 0:
        return np.zeros((m, p))
    solve = 2.0 * (2.0 * factor_nnz + K.nnz)           # flops of one solve and its residual
    dense = r ** 3 / 3.0 + 2.0 * r * r * p + 2.0 * m * r * p
    if r > MAX_TOUCHED or r >= n or FACTORISATION_IN_SOLVES * solve + dense > WORTH * min(m, p) * solve:
        return None
    touched = np.flatnonzero(mask)
    F = sp.csc_matrix(F)
    rest = order[~mask[order]]
    perm = np.concatenate([rest, touched])              # new index -> old index
    Kp = sp.csc_matrix(K)[perm][:, perm].tocsc()
    try:
        lu = spla.splu(Kp, permc_spec="NATURAL", diag_pivot_thresh=0.0, options=dict(SymmetricMode=True))
    except RuntimeError as exc:     # a zero pivot without interchanges
        log.debug("Schur route: %s", exc)
        return None
    t0 = n - r
    # scipy's SuperLU: Pr Kp Pc = L U, so Kp^-1[a, b] = (LU)^-1[perm_c[a], perm_r[b]];
    # the touched unknowns must have stayed in the trailing block
    cpos, rpos = lu.perm_c[t0:] - t0, lu.perm_r[t0:] - t0
    if cpos.min() < 0 or rpos.min() < 0:
        return None
    L22 = lu.L.tocsc()[t0:, t0:].toarray()
    U22 = lu.U.tocsc()[t0:, t0:].toarray()
    F_R = F[touched].toarray()                          # (r, p), touched in R order
    placed = np.zeros((r, p))
    placed[rpos] = F_R
    with np.errstate(all="ignore"):
        Y = sla.solve_triangular(L22, placed, lower=True, unit_diagonal=True, check_finite=False)
        Z = sla.solve_triangular(U22, Y, lower=False, check_finite=False)
    X_R = Z[cpos]                                       # (K^-1)_RR F_R
    if not np.all(np.isfinite(X_R)):
        return None
    # the check: a random combination of the loads solved with the whole factors
    w = np.random.default_rng(_CHECK_SEED).uniform(-1.0, 1.0, p)
    b = np.zeros(n)
    b[t0:] = F_R @ w
    x = lu.solve(b)
    res = Kp @ x - b
    scale = abs(Kp).max() * np.abs(x).max() + np.abs(b).max()
    if not (np.all(np.isfinite(x)) and np.abs(res).max() <= CHECK_BACKWARD * scale):
        return None
    expect = X_R @ w
    if np.abs(x[t0:] - expect).max() > CHECK_AGREEMENT * max(np.abs(x[t0:]).max(), np.finfo(float).tiny):
        return None
    return C[:, touched] @ X_R
