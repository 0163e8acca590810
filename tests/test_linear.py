"""Tests of the sparse linear-solver layer (cablefe.solvers.linear).

Reference solutions come from dense LAPACK through numpy.linalg and from the
closed form of a chain of springs in series.  The random test matrices are
made strictly diagonally dominant, so by Gershgorin's theorem every
eigenvalue satisfies 1 < |lambda| < 2 r_max + 2 (r_max the largest off-
diagonal row sum): they are nonsingular with a condition number of a few
units, and solutions of backward-stable solvers agree to a few n * eps.
"""

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal

from cablefe.solvers.linear import (
    KNOWN_BACKENDS,
    SingularMatrixError,
    StaleFactorizationError,
    available_backends,
    find_unrestrained,
    make_linear_solver,
)

BACKENDS = available_backends()
EPS = np.finfo(float).eps
# the verify fixture only records, so one instance may serve every example
SHARED_FIXTURE = [HealthCheck.function_scoped_fixture]
LAPACK_SOLVE = ("numpy.linalg.solve (LAPACK dgesv, LU with partial pivoting; Anderson et al. 1999, "
                "LAPACK Users' Guide, 3rd ed.)")


# --------------------------------------------------------------------------
# test matrices
# --------------------------------------------------------------------------


def dominant(n, density, seed, *, negative=0, symmetric=True, skew=0.0):
    """Strictly diagonally dominant sparse matrix.

    The diagonal is ``+-(row sum of |off-diagonals| + 1 + u)``, ``u`` in
    [0, 1), with ``negative`` negative entries: a symmetric matrix then has
    exactly ``negative`` negative eigenvalues (Gershgorin discs never reach
    0 along the path from the diagonal to the matrix).  ``skew`` adds an
    unsymmetric part of that relative size.
    """
    rng = np.random.default_rng(seed)
    B = sp.random(n, n, density=density, random_state=rng,
                  data_rvs=lambda m: rng.uniform(-1.0, 1.0, m), format="csr")
    O = sp.triu(B, 1)
    O = O + O.T
    if not symmetric:
        S = sp.random(n, n, density=density, random_state=rng,
                      data_rvs=lambda m: rng.uniform(-1.0, 1.0, m), format="csr")
        O = O + skew * (S - sp.diags(S.diagonal()))
    r = np.asarray(abs(O).sum(axis=1)).ravel()
    sign = np.ones(n)
    sign[rng.permutation(n)[:negative]] = -1.0
    d = sign * (r + 1.0 + rng.uniform(0.0, 1.0, n))
    return (O + sp.diags(d)).tocsr()


def tiny_diagonal_pairs(n_pairs, seed, *, tiny=1e-14, lower=1.0):
    """Symmetrically permuted blocks [[tiny, 1], [lower, tiny]].

    Eigenvalues (symmetric case) are tiny +- 1: perfectly conditioned, yet
    every first pivot taken on the diagonal is ``tiny``, so factorization
    without pivoting has a growth of 1/tiny.
    """
    block = np.array([[tiny, 1.0], [lower, tiny]])
    A = sp.block_diag([block] * n_pairs, format="csr")
    p = np.random.default_rng(seed).permutation(2 * n_pairs)
    return A[p][:, p].tocsr()


def spring_chain(k, *, supported=True):
    """Stiffness of springs in series: node 0 (optionally) to a wall.

    ``k[i]`` connects node i-1 to node i (node -1 is the wall); k[i] = 0
    removes a spring.
    """
    k = np.asarray(k, dtype=float)
    main = k.copy()
    main[:-1] += k[1:]
    if not supported:
        main[0] -= k[0]
    off = -k[1:]
    return sp.diags([off, main, off], [-1, 0, 1], format="csr")


def assert_solves(K, x, b, rtol):
    """Residual check relative to |K| |x| + |b| (normwise backward error)."""
    Kd = K.toarray()
    r = Kd @ x - b
    scale = np.abs(Kd).sum(axis=1).max() * np.abs(x).max() + np.abs(b).max()
    assert np.abs(r).max() <= rtol * scale


# --------------------------------------------------------------------------
# accuracy against the dense reference
# --------------------------------------------------------------------------


@pytest.mark.parametrize("backend", BACKENDS)
@settings(max_examples=12, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(n=st.integers(1, 60), density=st.floats(0.02, 0.3), seed=st.integers(0, 10**6))
def test_spd_matches_dense_solve(verify, backend, n, density, seed):
    K = dominant(n, density, seed)
    b = np.random.default_rng(seed + 1).standard_normal(n)
    fact = make_linear_solver(backend).factorize(K)
    x = fact.solve(b)
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv, LU with
    # partial pivoting; Anderson et al. 1999, LAPACK Users' Guide, 3rd ed.)
    x_ref = np.linalg.solve(K.toarray(), b)
    # cond(K) < 2 r_max + 2 < 40 here: both solutions agree to ~ cond n eps
    verify.check(f"sparse solve ({backend}) of random diagonally dominant SPD systems, n <= 60",
                 LAPACK_SOLVE, x, x_ref, rtol=1e-11, atol=1e-12 * np.abs(x_ref).max())
    assert_solves(K, x, b, rtol=100 * n * EPS)
    assert fact.n == n and not fact.fallback


@pytest.mark.parametrize("backend", BACKENDS)
def test_indefinite_symmetric(backend, verify):
    n, neg = 80, 7
    K = dominant(n, 0.08, 3, negative=neg)
    B = np.random.default_rng(4).standard_normal((n, 3))
    fact = make_linear_solver(backend).factorize(K)
    X = fact.solve(B)
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
    verify.check(f"sparse solve ({backend}) of an indefinite symmetric system (n = 80, 7 negative "
                 "eigenvalues), three right-hand sides", LAPACK_SOLVE,
                 X, np.linalg.solve(K.toarray(), B), rtol=1e-11, atol=1e-12)
    # source: Sylvester's law of inertia, eigenvalue signs from
    # numpy.linalg.eigvalsh (LAPACK dsyevd)
    lam = np.linalg.eigvalsh(K.toarray())
    expected = (int(np.sum(lam > 0)), int(np.sum(lam < 0)), 0)
    assert expected == (n - neg, neg, 0)
    inertia = fact.inertia()
    if inertia is not None:   # splu-default's row pivoting hides it
        verify.check(f"inertia from the factorization ({backend}) of the same system",
                     "Sylvester's law of inertia; eigenvalue signs by numpy.linalg.eigvalsh (LAPACK dsyevd)",
                     inertia, expected)
    if backend in ("superlu", "pardiso"):
        assert inertia is not None


@pytest.mark.parametrize("backend", BACKENDS)
def test_tiny_diagonal_pivots_fall_back(backend, verify):
    K = tiny_diagonal_pairs(25, seed=5)
    b = np.random.default_rng(6).standard_normal(50)
    fact = make_linear_solver(backend).factorize(K)
    x = fact.solve(b)
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv); cond(K) = 1
    verify.check(f"sparse solve ({backend}) of 25 permuted [[1e-14, 1], [1, 1e-14]] blocks (tiny "
                 "diagonal pivots)", LAPACK_SOLVE + "; cond(K) = 1",
                 x, np.linalg.solve(K.toarray(), b), rtol=1e-12, atol=1e-13)
    if backend == "superlu":
        # diagonal pivots of 1e-14 grow the factors by 1e14: the probe must
        # reject them and partial pivoting take over
        assert fact.backend == "superlu-pivoting" and fact.fallback
        assert fact.attempts[0][0] == "superlu-symmetric"


@pytest.mark.parametrize("backend", BACKENDS)
@pytest.mark.parametrize("case", ["mild", "tiny-diagonal"])
def test_unsymmetric(backend, case, verify):
    if case == "mild":
        K = dominant(70, 0.1, 8, negative=5, symmetric=False, skew=0.3)
    else:
        K = tiny_diagonal_pairs(20, seed=9, lower=-2.5)
    n = K.shape[0]
    b = np.random.default_rng(10).standard_normal(n)
    fact = make_linear_solver(backend, symmetric=False).factorize(K)
    x = fact.solve(b)
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
    verify.check(f"sparse solve ({backend}) of an unsymmetric system ({case})", LAPACK_SOLVE,
                 x, np.linalg.solve(K.toarray(), b), rtol=1e-11, atol=1e-12)
    assert fact.inertia() is None


def test_pattern_reuse_with_new_values(verify):
    K1 = dominant(120, 0.05, 11, negative=3)
    K2 = K1.copy()
    rng = np.random.default_rng(12)
    # same pattern, every value changed (explicit zeros stay in the pattern)
    K2.data = K2.data * rng.uniform(0.5, 1.5, K2.nnz)
    K2.data[K2.indices == np.repeat(np.arange(120), np.diff(K2.indptr))] *= 3.0
    K2 = ((K2 + K2.T) * 0.5).tocsr()
    assert_array_equal(K2.indptr, K1.indptr)
    assert_array_equal(K2.indices, K1.indices)
    b = rng.standard_normal(120)
    for backend in BACKENDS:
        solver = make_linear_solver(backend)
        # Newton order: factorize, solve, refactorize, solve
        f1 = solver.factorize(K1)
        x1 = f1.solve(b)
        f2 = solver.factorize(K2)
        x2 = f2.solve(b)
        # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
        verify.check(f"sparse solve ({backend}) of two systems on one pattern (factorize, solve, "
                     "refactorize, solve)", LAPACK_SOLVE, [x1, x2],
                     [np.linalg.solve(K1.toarray(), b), np.linalg.solve(K2.toarray(), b)],
                     rtol=1e-11, atol=1e-12)
        assert not f1.reused_pattern and f2.reused_pattern
        # a different pattern is recognized as such
        f3 = solver.factorize(dominant(120, 0.05, 13))
        assert not f3.reused_pattern


def test_coo_csc_and_duplicate_entries(verify):
    # an assembly in COO form with duplicate (summed) entries, then the same
    # matrix as CSC: both are one pattern after canonicalization
    K = dominant(50, 0.1, 23, negative=2)
    coo = K.tocoo()
    half = coo.data * 0.5
    dup = sp.coo_matrix((np.concatenate([half, half]),
                         (np.concatenate([coo.row, coo.row]), np.concatenate([coo.col, coo.col]))),
                        shape=K.shape)
    b = np.random.default_rng(24).standard_normal(50)
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
    x_ref = np.linalg.solve(K.toarray(), b)
    for backend in BACKENDS:
        solver = make_linear_solver(backend)
        f1 = solver.factorize(dup)
        verify.check(f"sparse solve ({backend}) of a system assembled in COO form with duplicate entries",
                     LAPACK_SOLVE, f1.solve(b), x_ref, rtol=1e-11, atol=1e-12)
        f2 = solver.factorize(K.tocsc())
        assert f2.reused_pattern
        verify.check(f"sparse solve ({backend}) of the same system as CSC and as a dense array",
                     LAPACK_SOLVE, [f2.solve(b), solver.solve(K.toarray(), b)], [x_ref, x_ref],
                     rtol=1e-11, atol=1e-12)


def test_inputs_are_not_mutated_and_values_are_owned(verify):
    K = dominant(40, 0.1, 14, negative=2)
    b = np.random.default_rng(15).standard_normal(40)
    K_before, b_before = K.copy(), b.copy()
    x_ref = np.linalg.solve(K.toarray(), b)
    for backend in BACKENDS:
        fact = make_linear_solver(backend).factorize(K)
        x = fact.solve(b)
        assert_array_equal(K.data, K_before.data)
        assert_array_equal(K.indices, K_before.indices)
        assert_array_equal(b, b_before)
        # the caller reassembles into the same arrays: the factorization must
        # still solve (and check residuals against) the matrix it was given
        K.data *= 2.0
        # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
        verify.check(f"sparse solve ({backend}) before and after the caller overwrites the matrix values",
                     LAPACK_SOLVE, [fact.solve(b), x], [x_ref, x_ref], rtol=1e-11, atol=1e-12)
        K.data[:] = K_before.data


def test_rhs_shapes_and_empty_system(verify):
    K = dominant(30, 0.1, 16)
    fact = make_linear_solver("superlu").factorize(K)
    B = np.random.default_rng(17).standard_normal((30, 4))
    X = fact.solve(B)
    assert X.shape == (30, 4)
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
    verify.check("sparse solve (superlu) with four right-hand sides at once", LAPACK_SOLVE,
                 X, np.linalg.solve(K.toarray(), B), rtol=1e-11, atol=1e-12)
    with pytest.raises(ValueError, match="shape"):
        fact.solve(np.ones(29))
    empty = make_linear_solver("superlu").factorize(sp.csr_matrix((0, 0)))
    assert empty.solve(np.zeros(0)).shape == (0,)
    with pytest.raises(ValueError, match="square"):
        make_linear_solver("superlu").factorize(sp.csr_matrix((3, 4)))
    bad = K.copy()
    bad.data[0] = np.nan
    with pytest.raises(ValueError, match="non-finite"):
        make_linear_solver("superlu").factorize(bad)


# --------------------------------------------------------------------------
# springs in series: closed form and mechanisms
# --------------------------------------------------------------------------


def chain_tolerance(K):
    """Normwise forward-error bound cond(K) * eta for a backward error eta.

    The solvers' backward error is checked at 1e-10 but is a few eps in
    practice; 100 eps covers the short chains here.
    """
    # source: NumPy reference, numpy.linalg.cond (2-norm condition number
    # from the SVD, LAPACK dgesdd); forward error <= cond * backward error,
    # Higham 2002, Accuracy and Stability of Numerical Algorithms, 2nd ed.,
    # Thm 7.2
    return np.linalg.cond(K.toarray()) * 100 * EPS


@pytest.mark.parametrize("backend", BACKENDS)
def test_spring_chain_closed_form(backend, verify):
    # stiffness contrast 1e7: cond(K) ~ 6e9, but nothing is singular
    k = np.where(np.arange(40) % 2 == 0, 2.0e7, 2.0)   # N/m
    P = 1.0e3                                           # N at the free end
    K = spring_chain(k)
    b = np.zeros(40)
    b[-1] = P
    x = make_linear_solver(backend).factorize(K).solve(b)
    # source: springs in series under an end load all carry P, so
    # u_j = P * sum_{i<=j} 1/k_i (Hooke's law; e.g. Bathe 2014, Finite
    # Element Procedures, sec. 3.2, from memory)
    u = P * np.cumsum(1.0 / k)
    verify.check(f"40 springs in series, stiffness contrast 1e7, end load ({backend}): displacements "
                 "u_j = P sum 1/k_i (tolerance cond(K) x 100 eps)", "Hooke's law for springs in series "
                 "(e.g. Bathe 2014, Finite Element Procedures, sec. 3.2, from memory); Higham 2002, "
                 "Accuracy and Stability of Numerical Algorithms, 2nd ed., Thm 7.2",
                 x, u, rtol=0.0, atol=chain_tolerance(K) * np.abs(u).max(), unit="m")


@pytest.mark.parametrize("backend", BACKENDS)
def test_soft_support_is_solved_not_flagged(backend, verify):
    # the whole chain hangs on one spring 1e-9 times softer than the rest:
    # scaled condition ~ 1e11, above the probe's trigger, so the mode search
    # runs and must find a (small) stiffness, not a mechanism
    k = np.full(30, 4.0e6)
    k[0] = 4.0e-3
    P = 10.0
    K = spring_chain(k)
    b = np.zeros(30)
    b[-1] = P
    fact = make_linear_solver(backend).factorize(K)
    assert fact.condition_estimate > 1e10
    # source: springs in series, u_j = P * sum_{i<=j} 1/k_i (see above)
    u = P * np.cumsum(1.0 / k)
    verify.check(f"chain of 30 springs hung on one 1e-9 times softer spring ({backend}): displacements "
                 "u_j = P sum 1/k_i", "Hooke's law for springs in series (e.g. Bathe 2014, Finite Element "
                 "Procedures, sec. 3.2, from memory); Higham 2002, Thm 7.2",
                 fact.solve(b), u, rtol=0.0, atol=chain_tolerance(K) * np.abs(u).max(), unit="m")


@pytest.mark.parametrize("backend", BACKENDS)
def test_near_mechanism_is_flagged(backend):
    # a support spring 1e-15 times the others: singular in double precision
    k = np.full(30, 4.0e6)
    k[0] = 4.0e-9
    with pytest.raises(SingularMatrixError) as err:
        make_linear_solver(backend).factorize(spring_chain(k))
    # the mechanism is the rigid translation of the whole chain
    assert_array_equal(err.value.equations, np.arange(30))


@pytest.mark.parametrize("backend", BACKENDS)
def test_singular_zero_row(backend):
    k = np.full(12, 5.0e4)
    k[[7, 8]] = 0.0          # node 7 loses both its springs: zero row
    K = spring_chain(k)
    assert_array_equal(find_unrestrained(K), [7])
    with pytest.raises(SingularMatrixError) as err:
        make_linear_solver(backend).factorize(K)
    assert_array_equal(err.value.equations, [7])
    assert isinstance(err.value, ValueError)


@pytest.mark.parametrize("backend", BACKENDS)
def test_singular_floating_end_of_chain(backend):
    k = np.full(15, 3.0e5)
    k[9] = 0.0               # nodes 9..14 float free: rigid-body mechanism
    K = spring_chain(k)
    assert find_unrestrained(K).size == 0   # no zero row: needs factorization
    with pytest.raises(SingularMatrixError) as err:
        make_linear_solver(backend).factorize(K)
    # the mechanism is the uniform translation of nodes 9..14
    assert_array_equal(err.value.equations, np.arange(9, 15))


@pytest.mark.parametrize("backend", BACKENDS)
def test_singular_unsupported_chain(backend):
    K = spring_chain(np.linspace(1.0e3, 2.0e3, 10), supported=False)
    with pytest.raises(SingularMatrixError) as err:
        make_linear_solver(backend).factorize(K)
    assert_array_equal(err.value.equations, np.arange(10))


def test_find_unrestrained():
    K = sp.csr_matrix(np.array([
        [0.0, 1.0, 0.0, 0.0],     # zero diagonal of a nonsingular saddle
        [1.0, 0.0, 0.0, 0.0],
        [0.0, 0.0, 4.0, 0.0],
        [0.0, 0.0, 0.0, 4.0e-15],  # nearly nothing restrains DOF 3
    ]))
    assert_array_equal(find_unrestrained(K, tol=1e-12), [3])
    assert_array_equal(find_unrestrained(K, tol=1e-16), [])
    with pytest.raises(ValueError):
        find_unrestrained(K, tol=-1.0)


def test_unknown_backend_lists_known_names():
    with pytest.raises(ValueError) as err:
        make_linear_solver("cholmod")
    for name in KNOWN_BACKENDS:
        assert name in str(err.value)
    assert "cholmod" in str(err.value)


def test_auto_is_always_available(verify):
    solver = make_linear_solver()
    assert solver.name == "auto"
    K = dominant(20, 0.2, 18)
    b = np.ones(20)
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
    verify.check("sparse solve by the automatic backend choice", LAPACK_SOLVE,
                 solver.solve(K, b), np.linalg.solve(K.toarray(), b), rtol=1e-11)
    assert set(available_backends()) >= {"superlu", "splu-default"}


# --------------------------------------------------------------------------
# PARDISO specifics (optional dependency)
# --------------------------------------------------------------------------


@pytest.fixture
def pardiso():
    pytest.importorskip("pypardiso")
    if "pardiso" not in available_backends():
        pytest.skip("pypardiso is installed but MKL PARDISO does not work here")
    return make_linear_solver("pardiso")


def test_pardiso_spd_then_indefinite_is_remembered(pardiso):
    K_spd = dominant(90, 0.06, 19)
    K_ind = K_spd.copy()
    diag = K_ind.indices == np.repeat(np.arange(90), np.diff(K_ind.indptr))
    K_ind.data[np.flatnonzero(diag)[:4]] *= -1.0    # same pattern, 4 slack DOFs
    b = np.random.default_rng(20).standard_normal(90)
    f1 = pardiso.factorize(K_spd)
    assert f1.backend == "pardiso-spd" and not f1.fallback
    f2 = pardiso.factorize(K_ind)
    assert f2.backend == "pardiso-indefinite" and f2.fallback
    assert f2.attempts[0][0] == "pardiso-spd"
    assert f2.inertia() == (86, 4, 0)
    f3 = pardiso.factorize(K_ind)
    assert f3.backend == "pardiso-indefinite" and f3.attempts == []
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
    assert_allclose(f3.solve(b), np.linalg.solve(K_ind.toarray(), b), rtol=1e-11, atol=1e-12)
    # a factorization overwritten by a later factorize() refuses to solve
    with pytest.raises(StaleFactorizationError):
        f2.solve(b)


def test_pardiso_detects_unsymmetric_input(pardiso):
    K = dominant(60, 0.1, 21, symmetric=False, skew=0.2)
    b = np.random.default_rng(22).standard_normal(60)
    fact = pardiso.factorize(K)   # solver made with symmetric=True
    assert fact.backend == "pardiso-unsymmetric"
    # source: NumPy reference, numpy.linalg.solve (LAPACK dgesv)
    assert_allclose(fact.solve(b), np.linalg.solve(K.toarray(), b), rtol=1e-11, atol=1e-12)


# -- C K^-1 F through the Schur complement ---------------------------------------

def _grid_tangent(m, seed, unsymmetric=0.0):
    """A 5-point stencil on an m x m grid plus random positive diagonal (SPD),
    optionally with a small unsymmetric part."""
    rng = np.random.default_rng(seed)
    n = m * m
    idx = np.arange(n).reshape(m, m)
    rows = np.concatenate([idx[:, :-1].ravel(), idx[:-1, :].ravel()])
    cols = np.concatenate([idx[:, 1:].ravel(), idx[1:, :].ravel()])
    k = rng.uniform(0.5, 2.0, rows.size)
    off = sp.coo_matrix((-k, (rows, cols)), shape=(n, n))
    deg = np.bincount(rows, k, n) + np.bincount(cols, k, n) + rng.uniform(0.01, 0.1, n)
    K = (off + off.T + sp.diags(deg)).tocsr()
    if unsymmetric:
        K = (K + unsymmetric * sp.coo_matrix((rng.uniform(-1, 1, rows.size), (rows, cols)), shape=(n, n))).tocsr()
    return K


@pytest.mark.parametrize("unsymmetric", [0.0, 0.05])
def test_schur_product_matches_dense_solve(monkeypatch, unsymmetric, verify):
    from cablefe.solvers.linear import schur
    import scipy.sparse.linalg as spla
    monkeypatch.setattr(schur, "WORTH", 1e9)       # take the route whatever it costs
    m = 24
    K = _grid_tangent(m, 3, unsymmetric)
    n = K.shape[0]
    rng = np.random.default_rng(4)
    line = np.arange(m) * m + m // 2               # a grid line across the middle
    C = sp.csr_matrix((rng.uniform(-1, 1, 3 * m), (np.repeat(np.arange(m), 3),
                                                    np.concatenate([line, line + 1, line - 1]).reshape(3, m).T.ravel())),
                      shape=(m, n))
    F = sp.csc_matrix((np.ones(m), (line, np.arange(m))), shape=(n, m))
    order = np.argsort(spla.splu(K.tocsc(), permc_spec="MMD_AT_PLUS_A").perm_c)
    got = schur.schur_product(K, order, C, F, factor_nnz=10**6)
    assert got is not None
    # source: C K^-1 F by LAPACK's dense LU solve (numpy.linalg.solve)
    expected = C.toarray() @ np.linalg.solve(K.toarray(), F.toarray())
    verify.check(f"C K^-1 F through the Schur complement on 72 of 576 unknowns ({'un' if unsymmetric else ''}"
                 "symmetric grid tangent)", "LAPACK dense LU solve (numpy.linalg.solve)",
                 got, expected, atol=1e-11 * np.abs(expected).max())


def test_schur_product_declines_when_it_does_not_pay_or_fails_its_check(monkeypatch):
    from cablefe.solvers.linear import schur
    import scipy.sparse.linalg as spla
    K = _grid_tangent(12, 5)
    n = K.shape[0]
    order = np.argsort(spla.splu(K.tocsc(), permc_spec="MMD_AT_PLUS_A").perm_c)
    C = sp.csr_matrix(np.eye(n)[:3])
    F = sp.csc_matrix(np.eye(n)[:, :3])
    # three columns cost little to solve: the dense route is not worth it
    assert schur.schur_product(K, order, C, F, factor_nnz=n) is None
    # every unknown touched: nothing to eliminate first
    assert schur.schur_product(K, order, sp.csr_matrix(np.eye(n)), F, factor_nnz=10**9) is None
    monkeypatch.setattr(schur, "WORTH", 1e9)
    assert schur.schur_product(K, order, C, F, factor_nnz=n) is not None
    monkeypatch.setattr(schur, "CHECK_BACKWARD", -1.0)   # no answer passes the check
    assert schur.schur_product(K, order, C, F, factor_nnz=n) is None


@pytest.mark.parametrize("small_system", [5000, 0])
def test_solve_product_matches_dense_solve(monkeypatch, small_system, verify):
    _solve_product_against_dense(monkeypatch, "superlu", small_system, verify)


@pytest.mark.parametrize("backend", [b for b in BACKENDS if b != "superlu"])
def test_solve_product_of_other_backends(monkeypatch, backend):
    _solve_product_against_dense(monkeypatch, backend, 5000, None)


def _solve_product_against_dense(monkeypatch, backend, small_system, verify):
    from cablefe.solvers.linear import solver as solver_module
    monkeypatch.setattr(solver_module, "SMALL_SYSTEM", small_system)
    monkeypatch.setattr(solver_module, "SMALL_BLOCK", 16)       # 37 columns: blocks of 16, 16 and 5
    K = _grid_tangent(15, 6)
    n = K.shape[0]
    rng = np.random.default_rng(8)
    B = rng.uniform(-1, 1, (n, 37))
    B[:, 3] *= 1e6                  # columns of very different sizes
    left = sp.random(11, n, density=0.05, random_state=9, format="csr")
    solver = make_linear_solver(backend)
    solver.factorize(K)
    fact = solver.factorize(K)     # the second: SuperLU solves in its reused order
    # source: LAPACK's dense LU solve (numpy.linalg.solve)
    expected = left.toarray() @ np.linalg.solve(K.toarray(), B)
    for rhs in (B, sp.csc_matrix(B)):
        kept = (rhs.copy(), left.copy())
        got = fact.solve_product(left, rhs)
        assert got.shape == (11, 37)
        # the inputs are left as they were (no in-place sorting of shared arrays)
        for before, after in zip(kept, (rhs, left)):
            if sp.issparse(after):
                assert (np.array_equal(before.data, after.data) and np.array_equal(before.indices, after.indices)
                        and np.array_equal(before.indptr, after.indptr))
            else:
                assert np.array_equal(before, after)
        if verify is None:
            assert_allclose(got, expected, rtol=1e-10, atol=1e-12 * np.abs(expected).max())
            continue
        verify.check(f"left K^-1 B a block of columns at a time ({backend}, 37 columns)",
                     "LAPACK dense LU solve (numpy.linalg.solve)", got / np.abs(expected).max(axis=0),
                     expected / np.abs(expected).max(axis=0), atol=1e-10)


def test_solve_product_checks_every_column(monkeypatch):
    """One column solved badly among many fails the combined check, and every
    column is solved again with its own check."""
    K = _grid_tangent(10, 9)
    n = K.shape[0]
    B = np.random.default_rng(10).uniform(-1, 1, (n, 40))
    B[:, 7] *= 1e-6                # the bad column is also the smallest one
    solver = make_linear_solver("superlu")
    solver.factorize(K)
    fact = solver.factorize(K)
    calls = []
    original = type(fact).solve

    def counted(self, b):
        calls.append(1)
        return original(self, b)
    monkeypatch.setattr(type(fact), "solve", counted)
    factor = fact._factor
    raw = factor.solve_ordered

    def spoiled(R):
        X = raw(R)
        hit = np.flatnonzero(np.all(np.isclose(R, B[factor.order][:, [7]]), axis=0))
        X[:, hit] *= 1.0 + 1e-6     # off by 1e-6 in one column only
        return X
    monkeypatch.setattr(factor, "solve_ordered", spoiled)
    left = sp.identity(n, format="csr")
    X = fact.solve_product(left, B)
    assert len(calls) == 40      # each column again, with the full check and refinement
    assert_allclose(X, np.linalg.solve(K.toarray(), B), rtol=1e-9)
    # without the spoiled column the blocks pass their check and nothing is solved again
    monkeypatch.setattr(factor, "solve_ordered", raw)
    calls.clear()
    fact.solve_product(left, B)
    assert calls == []
