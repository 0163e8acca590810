"""Conjugate gradients preconditioned by an earlier factorisation
(cablefe.solvers.linear.krylov), checked against scipy's direct solver and
its own conjugate gradient routine."""
from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from numpy.testing import assert_allclose

from cablefe.solvers import linear
from cablefe.solvers.linear.krylov import dot, preconditioned_cg


def laplacian_2d(n: int) -> sp.csr_matrix:
    """The 5-point Laplacian on an n x n grid (symmetric positive definite)."""
    t = sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(n, n))
    return (sp.kronsum(t, t)).tocsr()


def perturbed(K0: sp.csr_matrix, size: float, seed: int) -> sp.csr_matrix:
    """``K0`` plus ``size`` times a randomly weighted graph Laplacian of the
    grid's edges (weights in [0, 1]): a nearby tangent with
    ``K0 <= K <= (1 + size) K0`` (``K0`` holds every edge term with weight 1
    plus positive boundary terms), so the eigenvalues of ``K0^-1 K`` lie in
    ``[1, 1 + size]``."""
    n = int(round(np.sqrt(K0.shape[0])))
    idx = np.arange(n * n).reshape(n, n)
    ends = np.concatenate([np.c_[idx[:, :-1].ravel(), idx[:, 1:].ravel()],
                           np.c_[idx[:-1, :].ravel(), idx[1:, :].ravel()]])
    m = len(ends)
    B = sp.csr_matrix((np.tile([1.0, -1.0], m), (np.repeat(np.arange(m), 2), ends.ravel())),
                      shape=(m, n * n))
    w = np.random.default_rng(seed).uniform(0.0, 1.0, m)
    return (K0 + size * (B.T @ sp.diags(w) @ B)).tocsr()


def test_matches_the_direct_solution_with_a_nearby_preconditioner():
    K0 = laplacian_2d(30)
    K = perturbed(K0, 0.2, 1)
    b = np.random.default_rng(2).standard_normal(K.shape[0])
    fact = linear.make_linear_solver("superlu").factorize(K0)
    found = preconditioned_cg(K, b, fact.precondition, rtol=1e-10, maxiter=60)
    assert found.converged
    # reference: scipy's SuperLU of K itself
    exact = spla.splu(K.tocsc()).solve(b)
    assert_allclose(found.x, exact, rtol=0, atol=1e-8 * np.abs(exact).max())
    assert found.relative_residual <= 1e-10
    # few iterations: the eigenvalues of K0^-1 K lie in [1, 1.2]; CG's
    # error in the K-norm falls at least as 2 ((sqrt k - 1)/(sqrt k + 1))^m
    # with k = 1.2 (Saad 2003, Iterative Methods for Sparse Linear Systems,
    # 2nd ed., Theorem 6.29), and the residual is within sqrt(cond K) of
    # it, below 1e3 here: the 30 x 30 Dirichlet Laplacian's eigenvalues are
    # 4 sin^2(i pi / 62) + 4 sin^2(j pi / 62), in [0.0205, 8], and K <= 1.2 K0
    rate = (np.sqrt(1.2) - 1.0) / (np.sqrt(1.2) + 1.0)
    bound = int(np.ceil(np.log(1e-10 / 2.0 / 1e3) / np.log(rate)))
    assert found.iterations <= bound


def test_iterates_as_scipys_conjugate_gradients():
    # the same method as scipy.sparse.linalg.cg (preconditioner M = K0^-1):
    # after a fixed number of iterations the iterates agree to round-off
    K0 = laplacian_2d(20)
    K = perturbed(K0, 0.5, 3)
    b = np.random.default_rng(4).standard_normal(K.shape[0])
    lu = spla.splu(K0.tocsc())
    ours = preconditioned_cg(K, b, lu.solve, rtol=1e-30, maxiter=4)
    assert ours.status == "max-iterations" and ours.iterations == 4
    M = spla.LinearOperator(K.shape, lu.solve)
    ref, info = spla.cg(K, b, rtol=1e-30, maxiter=4, M=M)
    assert info > 0
    assert_allclose(ours.x, ref, rtol=0, atol=1e-10 * np.abs(ref).max())
    assert_allclose(ours.relative_residual, np.linalg.norm(b - K @ ref) / np.linalg.norm(b), rtol=1e-8)


def test_stops_on_a_direction_of_negative_curvature():
    # K = diag(1, ..., 1, -1): with the identity preconditioner the first
    # direction is b itself and b^T K b < 0 for b = e_n
    n = 10
    K = sp.diags(np.r_[np.ones(n - 1), -1.0]).tocsr()
    b = np.zeros(n)
    b[-1] = 1.0
    found = preconditioned_cg(K, b, lambda v: v.copy(), rtol=1e-8, maxiter=10)
    assert found.status == "indefinite" and not found.converged


def test_zero_and_non_finite_right_hand_sides():
    K = laplacian_2d(4)
    zero = preconditioned_cg(K, np.zeros(16), lambda v: v.copy(), 1e-8, 5)
    assert zero.converged and zero.iterations == 0 and not zero.x.any()
    bad = preconditioned_cg(K, np.full(16, np.nan), lambda v: v.copy(), 1e-8, 5)
    assert bad.status == "non-finite"


def test_dot_is_the_inner_product():
    a, b = np.random.default_rng(5).standard_normal((2, 1000))
    assert dot(a, b) == pytest.approx(float(np.sum(a * b)), rel=1e-12)
