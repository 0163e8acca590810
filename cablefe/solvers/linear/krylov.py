"""Conjugate gradients preconditioned by an earlier factorisation.

Between two Newton iterations near the solution the tangent changes little,
so the factors of an earlier tangent ``K_0`` are an excellent preconditioner
for the present one ``K``: the eigenvalues of ``K_0^-1 K`` cluster about 1
and the preconditioned conjugate gradient method (PCG) reaches a modest
relative residual in a few iterations, each one back-substitution with the
old factors and one product with ``K`` (5 ms and 0.4 ms on a 28 812-DOF net
whose factorisation takes 130-200 ms).  The Newton driver uses it for
inexact Newton steps and factorises again only when PCG does not converge
within a budget (see :mod:`cablefe.solvers.newton`).

The iteration is Algorithm 9.1 of Saad 2003, Iterative Methods for Sparse
Linear Systems, 2nd ed., SIAM (preconditioned conjugate gradient); the
method is Hestenes & Stiefel 1952, J. Res. NBS 49(6).  It needs a symmetric
``K`` and a symmetric positive definite preconditioner; a curvature
``p^T K p <= 0`` proves that ``K`` is not positive definite and ends the
iteration (status ``"indefinite"``: the caller factorises and counts the
pivots).  Convergence is judged on the true residual ``||b - K x||_2``,
recomputed at the end, relative to ``||b||_2``.

The dot products go through ``np.einsum``: BLAS ``ddot`` wakes its threads
for vectors of this size, which was measured to cost 1-3 ms a call on a
busy 2-core machine (the Newton driver does the same).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np


def dot(a: np.ndarray, b: np.ndarray) -> float:
    """``a . b`` by numpy's own loop (no BLAS threads)."""
    return float(np.einsum("i,i->", a, b))


@dataclass(frozen=True)
class KrylovOutcome:
    """Result of :func:`preconditioned_cg`.

    Attributes
    ----------
    x : the last iterate (zeros when no step was taken)
    status : ``"converged"``, ``"max-iterations"``, ``"indefinite"`` (a
        direction of non-positive curvature met) or ``"non-finite"``
    iterations : iterations taken (back-substitutions with the preconditioner)
    relative_residual : ``||b - K x||_2 / ||b||_2`` of ``x``
    """

    x: np.ndarray
    status: str
    iterations: int
    relative_residual: float

    @property
    def converged(self) -> bool:
        return self.status == "converged"


def preconditioned_cg(K, b: np.ndarray, precondition: Callable[[np.ndarray], np.ndarray],
                      rtol: float, maxiter: int) -> KrylovOutcome:
    """Solve ``K x = b`` by conjugate gradients with the preconditioner ``precondition``.

    Parameters
    ----------
    K : (n, n) symmetric sparse matrix (or anything with ``@``)
    b : (n,) right-hand side
    precondition : ``z = M^-1 v`` for a symmetric positive definite ``M``
        (e.g. a back-substitution with the factors of an earlier tangent)
    rtol : relative residual ``||b - K x|| / ||b||`` to reach
    maxiter : largest number of iterations

    Returns
    -------
    KrylovOutcome
    """
    b = np.asarray(b, dtype=np.float64)
    x = np.zeros_like(b)
    bnorm = math.sqrt(dot(b, b))
    if bnorm == 0.0:
        return KrylovOutcome(x, "converged", 0, 0.0)
    if not math.isfinite(bnorm):
        return KrylovOutcome(x, "non-finite", 0, math.inf)
    goal = rtol * bnorm
    r = b.copy()
    z = precondition(r)
    rz = dot(r, z)
    p = z.copy()
    status = "max-iterations"
    it = 0
    for it in range(1, maxiter + 1):
        q = K @ p
        curvature = dot(p, q)
        if not (math.isfinite(curvature) and math.isfinite(rz)):
            status = "non-finite"
            break
        if curvature <= 0.0 or rz <= 0.0:
            # p^T K p <= 0: K is not positive definite; r^T M^-1 r <= 0: M is not
            status = "indefinite"
            break
        alpha = rz / curvature
        x += alpha * p
        r -= alpha * q
        if math.sqrt(dot(r, r)) <= goal:
            status = "converged"
            break
        z = precondition(r)
        rz_next = dot(r, z)
        p *= rz_next / rz
        p += z
        rz = rz_next
    # the recursively updated residual drifts from the true one in long
    # runs; the verdict is the true residual's
    true = b - K @ x
    ratio = math.sqrt(dot(true, true)) / bnorm
    if status == "converged" and not ratio <= rtol:
        status = "max-iterations"
    if not math.isfinite(ratio):
        status = "non-finite"
    return KrylovOutcome(x, status, it, ratio)
