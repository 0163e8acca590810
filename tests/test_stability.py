"""Stability measured by the inertia of the tangent (negative pivots).

Outside references: Sylvester's law of inertia checked against
numpy.linalg.eigvalsh (LAPACK) on random symmetric indefinite matrices, and
the Euler loads of a pinned column (Timoshenko & Gere 1961, Theory of
Elastic Stability, ch. 2).
"""
import json
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import cablefe
from cablefe.cli import main
from cablefe.solvers import linear
from cablefe.solvers.linear import dense_inertia, make_linear_solver
from cablefe.spec import AnalysisSettings, Material, Member, NodalLoad, Section
from conftest import make_spec, solve_counting_factorisations

BACKENDS = linear.available_backends()
# the verify fixture only records, so one instance may serve every example
SHARED_FIXTURE = [HealthCheck.function_scoped_fixture]


def random_symmetric(n, negative, seed, density):
    """Symmetric matrix with ``negative`` eigenvalues in [-10, -0.1] and the
    others in [0.1, 10], on a random sparse-ish pattern.

    Q is a product of random Givens rotations on a few index pairs, so the
    matrix stays sparse for a low ``density`` and dense for a high one; the
    eigenvalues are exactly those put on the diagonal (an orthogonal
    similarity), far enough from zero (cond <= 100) that no floating-point
    doubt about a sign can arise.
    """
    rng = np.random.default_rng(seed)
    lam = rng.uniform(0.1, 10.0, n)
    lam[rng.permutation(n)[:negative]] *= -1.0
    A = np.diag(lam)
    for _ in range(int(density * n * n) if n > 1 else 0):
        i, j = rng.choice(n, 2, replace=False)
        c, s = np.cos(t := rng.uniform(0, 2 * np.pi)), np.sin(t)
        G = np.eye(n)
        G[[i, i, j, j], [i, j, i, j]] = c, -s, s, c
        A = G @ A @ G.T
    A = 0.5 * (A + A.T)
    A[np.abs(A) < 1e-13] = 0.0
    return sp.csr_matrix(A)


@pytest.mark.parametrize("backend", BACKENDS)
@settings(max_examples=25, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(n=st.integers(1, 40), frac=st.floats(0.0, 1.0), density=st.floats(0.01, 0.5),
       seed=st.integers(0, 10**6))
def test_inertia_matches_eigenvalues(verify, backend, n, frac, density, seed):
    negative = int(round(frac * n))
    K = random_symmetric(n, negative, seed, density)
    fact = make_linear_solver(backend).factorize(K)
    # source: Sylvester's law of inertia; eigenvalue signs by
    # numpy.linalg.eigvalsh (LAPACK dsyevd).  |eigenvalue| >= 0.1 >> the
    # solver's 1e-10 backward error: the signs are exact
    lam = np.linalg.eigvalsh(K.toarray())
    expected = (int(np.sum(lam > 0)), int(np.sum(lam < 0)), 0)
    assert expected[1] == negative
    verify.check(f"inertia (positive, negative, zero pivots) of random symmetric indefinite matrices, "
                 f"n <= 40, {backend}: factorization and one-off count",
                 "Sylvester's law of inertia; eigenvalue signs by numpy.linalg.eigvalsh (LAPACK dsyevd)",
                 [fact.inertia(), make_linear_solver(backend).inertia(K)], [expected, expected])


@settings(max_examples=15, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(n=st.integers(2, 30), frac=st.floats(0.0, 1.0), seed=st.integers(0, 10**6),
       skew=st.floats(0.0, 2.0))
def test_inertia_of_the_symmetric_part(verify, n, frac, seed, skew):
    S = random_symmetric(n, int(round(frac * n)), seed, 0.3)
    W = np.random.default_rng(seed + 1).standard_normal((n, n))
    K = sp.csr_matrix(S.toarray() + skew * (W - W.T))     # symmetric part S
    # source: numpy.linalg.eigvalsh (LAPACK) of the symmetric part
    lam = np.linalg.eigvalsh(S.toarray())
    verify.check("inertia of random unsymmetric matrices counted on their symmetric part",
                 "Sylvester's law of inertia; numpy.linalg.eigvalsh (LAPACK) of the symmetric part",
                 make_linear_solver("superlu", symmetric=False).inertia(K),
                 (int(np.sum(lam > 0)), int(np.sum(lam < 0)), 0))


@settings(max_examples=15, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(n=st.integers(1, 30), frac=st.floats(0.0, 1.0), seed=st.integers(0, 10**6))
def test_dense_ldl_inertia(verify, n, frac, seed):
    K = random_symmetric(n, int(round(frac * n)), seed, 0.5).toarray()
    # source: numpy.linalg.eigvalsh (LAPACK dsyevd); Sylvester's law
    lam = np.linalg.eigvalsh(K)
    verify.check("inertia of random symmetric indefinite matrices by dense LDL^T",
                 "Sylvester's law of inertia; numpy.linalg.eigvalsh (LAPACK dsyevd)",
                 dense_inertia(K), (int(np.sum(lam > 0)), int(np.sum(lam < 0)), 0))


def tiny_diagonal_pairs(n_pairs, seed, tiny=1e-14):
    """[[tiny, 1], [1, tiny]] blocks, symmetrically permuted: eigenvalues
    tiny +- 1, yet every diagonal pivot is tiny (SuperLU's diagonal-pivot
    factorization is rejected and row interchanges take over)."""
    A = sp.block_diag([np.array([[tiny, 1.0], [1.0, tiny]])] * n_pairs, format="csr")
    p = np.random.default_rng(seed).permutation(2 * n_pairs)
    return A[p][:, p].tocsr()


@pytest.mark.parametrize("dense_max", [linear.DENSE_INERTIA_MAX, 0])
def test_inertia_after_row_interchanges(monkeypatch, dense_max, verify):
    # both fallbacks: dense LDL^T, and (dense_max = 0) other symmetric
    # orderings, whose probe must then refuse the tiny pivots: no count is
    # better than a wrong one
    monkeypatch.setattr(linear, "DENSE_INERTIA_MAX", dense_max)
    K = tiny_diagonal_pairs(20, seed=3)
    fact = make_linear_solver("superlu").factorize(K)
    assert fact.backend == "superlu-pivoting"
    # source: eigenvalues tiny +- 1 of each block; numpy.linalg.eigvalsh
    lam = np.linalg.eigvalsh(K.toarray())
    expected = (int(np.sum(lam > 0)), int(np.sum(lam < 0)), 0)
    assert expected == (20, 20, 0)
    if dense_max:
        verify.check("inertia of 20 permuted [[1e-14, 1], [1, 1e-14]] blocks after row interchanges",
                     "eigenvalues 1e-14 +- 1 of each block; numpy.linalg.eigvalsh", fact.inertia(), expected)
    else:
        assert fact.inertia() is None


@settings(max_examples=10, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(n=st.integers(2, 60), frac=st.floats(0.0, 1.0), seed=st.integers(0, 10**6))
def test_inertia_by_other_orderings(verify, n, frac, seed):
    # the fallback for matrices too large for a dense LDL^T: symmetric
    # SuperLU with other orderings.  On a strictly diagonally dominant
    # matrix every symmetric ordering factors stably without pivoting
    # (dominance is kept by elimination; Golub & Van Loan 2013, Matrix
    # Computations, sec. 4.1, from memory), so each must give the count.
    rng = np.random.default_rng(seed)
    B = sp.random(n, n, density=0.2, random_state=rng, format="csr")
    O = sp.triu(B, 1)
    O = O + O.T
    sign = np.ones(n)
    sign[rng.permutation(n)[:int(round(frac * n))]] = -1.0
    K = (O + sp.diags(sign * (np.asarray(abs(O).sum(axis=1)).ravel() + 1.0))).tocsr()
    fact = make_linear_solver("superlu").factorize(K)
    # source: numpy.linalg.eigvalsh (LAPACK dsyevd); Sylvester's law
    lam = np.linalg.eigvalsh(K.toarray())
    expected = (int(np.sum(lam > 0)), int(np.sum(lam < 0)), 0)
    old = linear.DENSE_INERTIA_MAX
    try:
        linear.DENSE_INERTIA_MAX = 0
        found = linear._fallback_inertia(fact._system, 1e-10)
        assert found is not None
        verify.check("inertia of random diagonally dominant symmetric matrices by other SuperLU orderings",
                     "Sylvester's law of inertia; numpy.linalg.eigvalsh (LAPACK dsyevd)", found, expected)
    finally:
        linear.DENSE_INERTIA_MAX = old


# ---------------------------------------------------------------------------
# a pinned column: stable below Euler's load, unstable beyond it
# ---------------------------------------------------------------------------

E, G = 2.1e11, 8.1e10
A_, IY, IZ, J = 1.2e-2, 8.0e-5, 2.5e-5, 1.5e-6    # Iy / Iz = 3.2: strong axis at 3.2 Pe
LENGTH = 5.0
P_EULER = np.pi**2 * E * IZ / LENGTH**2            # weak axis, first mode


def column(P, n=8, increments=8):
    """A straight pinned column along x, compressed by P at its top."""
    spec = make_spec(
        {"A": (0, 0, 0), "B": (LENGTH, 0, 0)},
        [Member("C", "beam", ("A", "B"), "s", divide=n)],
        # pin at A (and its twist), roller at B: only axial movement
        {"A": (True, True, True, True, False, False), "B": (False, True, True, False, False, False)},
        loads=[NodalLoad("P", "B", (-P, 0.0, 0.0))],
        materials={"steel": Material("steel", E=E, G=G)},
        sections={"s": Section("s", "steel", area=A_, Iy=IY, Iz=IZ, J=J)},
        analysis=AnalysisSettings(increments=increments, tolerance=1e-9, max_iterations=30))
    res = cablefe.solve(cablefe.build_model(spec))
    return res.items[0]


def euler_modes_below(P):
    """Number of buckling loads of the pinned column below P.

    source: Euler; P_n = n^2 pi^2 E I / L^2 for a pinned column about each
    principal axis (Timoshenko & Gere 1961, Theory of Elastic Stability,
    ch. 2).  The model's loads differ from these by the 8-element mesh
    (~0.1 % for n = 1, ~1 % for n = 2, from the O(h^2) error of cubic
    elements) and the shortening P / EA (< 0.3 %); the loads tested below
    keep more than 5 % from every P_n.
    """
    n = np.arange(1, 5)
    loads = np.concatenate([n**2 * np.pi**2 * E * IZ / LENGTH**2, n**2 * np.pi**2 * E * IY / LENGTH**2])
    assert np.min(np.abs(loads / P - 1.0)) > 0.05
    return int(np.sum(loads < P))


@pytest.mark.parametrize("ratio, unstable", [(0.9, 0), (1.3, 1), (3.5, 2)])
def test_pinned_column_beyond_euler_load_is_unstable(ratio, unstable, verify):
    P = ratio * P_EULER
    res = column(P)
    o = res.outcome
    # the straight state is an equilibrium at every load: load control
    # follows it, and only the pivot count tells that it has buckled
    assert res.converged
    assert euler_modes_below(P) == unstable
    verify.check(f"pinned column (8 beam elements) at {ratio} x Euler load: negative pivots of the "
                 "tangent = buckling loads P_n = n^2 pi^2 EI/L^2 (both axes) below the load",
                 "Timoshenko & Gere 1961, Theory of Elastic Stability, ch. 2",
                 o.negative_pivots[-1], unstable)
    # every converged step counts the Euler loads below its own load
    for lam, n in zip(o.increments, o.negative_pivots):
        if min(abs(lam * P / (k * P_EULER) - 1.0) for k in (1, 3.2, 4)) > 0.05:
            verify.check(f"pinned column at {ratio} x Euler load: negative pivots at every converged step "
                         "= buckling loads below the step's load", "Timoshenko & Gere 1961, Theory of "
                         "Elastic Stability, ch. 2", n, euler_modes_below(lam * P))
    warned = [w for w in o.warnings if "unstable equilibrium" in w]
    if unstable:
        # the warning names the first converged load factor beyond Euler's load
        first = next(lam for lam, n in zip(o.increments, o.negative_pivots) if n)
        assert f"load factor {first:.4f}" in warned[0]
        before = max([lam for lam in o.increments if lam < first], default=0.0)
        # source: Timoshenko & Gere 1961, ch. 2 (Euler load, weak axis)
        assert before * P < P_EULER * 1.05 and first * P > P_EULER * 0.95
    else:
        assert warned == []


COLUMN_CASE = """
title = "pinned column"
[units]
length = "m"
force = "N"
[materials.steel]
E = "210 GPa"
G = "81 GPa"
[sections.s]
material = "steel"
area = "0.012 m^2"
Iy = "8.0e-5 m^4"
Iz = "2.5e-5 m^4"
J = "1.5e-6 m^4"
[nodes]
A = [0, 0, 0]
B = [5, 0, 0]
[supports]
A = "x y z rx"
B = "y z"
[[members]]
id = "C"
type = "beam"
nodes = ["A", "B"]
section = "s"
divide = 8
[[loads]]
case = "push"
node = "B"
force = [{force}, 0, 0]
[analysis]
increments = 4
tolerance = 1e-9
track = ["C.4"]
"""


@pytest.mark.parametrize("ratio", [0.9, 1.3])
def test_column_stability_in_results_and_summary(tmp_path, capsys, ratio, verify):
    case = tmp_path / "column.toml"
    case.write_text(COLUMN_CASE.format(force=-ratio * P_EULER))
    out = tmp_path / "out"
    assert main(["solve", str(case), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    res = json.loads((out / "results.json").read_text())["results"]["push"]
    # source: Euler load of the pinned column (Timoshenko & Gere 1961, ch. 2)
    verify.check(f"pinned column case file at {ratio} x Euler load: negative pivots in results.json",
                 "Timoshenko & Gere 1961, Theory of Elastic Stability, ch. 2 (pi^2 EI/L^2)",
                 res["stability"]["negative_pivots"], 1 if ratio > 1 else 0)
    if ratio > 1:
        assert res["stability"] == {"negative_pivots": 1, "stable": False}
        assert "UNSTABLE (1 negative pivot" in text
        assert any("unstable equilibrium" in w and "load factor" in w for w in res["warnings"])
    else:
        assert res["stability"] == {"negative_pivots": 0, "stable": True}
        assert "stability: stable" in text
        assert res["warnings"] == []
    # one path entry per converged step, with the tracked mid-height node
    assert [e["load_factor"] for e in res["path"]][-1] == 1.0
    assert all("C.4" in e["displacements"] for e in res["path"])


# -- the count at a converged state, read from the last iteration ---------------

def _spring_held_strut(P, ky, kz):
    """Two collinear bars A-M-B (each L = 2 m) compressed by P at B, the middle
    node held sideways by a y spring and a z spring (bars to fixed points)."""
    L, Ls, EA = 2.0, 1.0, 2.0e9
    steel = Material("steel", E=2.0e11, G=8.0e10, unit_weight=0.0)
    sections = {"strut": Section("strut", "steel", area=EA / 2.0e11),
                "sy": Section("sy", "steel", area=ky * Ls / 2.0e11),
                "sz": Section("sz", "steel", area=kz * Ls / 2.0e11)}
    spec = make_spec(
        {"A": (0, 0, 0), "M": (L, 0, 0), "B": (2 * L, 0, 0), "Y": (L, Ls, 0), "Z": (L, 0, Ls)},
        [Member("AM", "bar", ("A", "M"), "strut"), Member("MB", "bar", ("M", "B"), "strut"),
         Member("MY", "bar", ("M", "Y"), "sy"), Member("MZ", "bar", ("M", "Z"), "sz")],
        {"A": (True,) * 3 + (False,) * 3, "B": (False, True, True) + (False,) * 3,
         "Y": (True,) * 3 + (False,) * 3, "Z": (True,) * 3 + (False,) * 3},
        loads=[NodalLoad("P", "B", (-P, 0.0, 0.0))], sections=sections, materials={"steel": steel},
        analysis=AnalysisSettings(increments=1, tolerance=1e-10, max_iterations=30))
    return cablefe.solve(cablefe.build_model(spec)).items[0]


@pytest.mark.parametrize("P, unstable", [(0.8e5, 0), (1.2e5, 1), (2.5e5, 2)])
def test_spring_held_strut_unstable_beyond_its_critical_loads(P, unstable, verify):
    # source: the rigid two-link strut with a lateral spring k at its hinge
    # buckles at P_cr = k L / 2 (L the length of one link): the geometric
    # stiffness of the two compressed links, 2P/L, cancels the spring
    # (Bazant & Cedolin 1991, Stability of Structures, sec. 1.1, from
    # memory; here y: k = 1e5 N/m gives 1.0e5 N, z: k = 2e5 N/m gives 2.0e5 N,
    # and the axial stiffness EA/L = 1e9 N/m makes the links rigid to 1e-4)
    res = _spring_held_strut(P, 1.0e5, 2.0e5)
    assert res.converged
    verify.check("two collinear bars compressed by P, the middle node on lateral springs ky, kz: "
                 "negative pivots = critical loads k L/2 below P",
                 "Bazant & Cedolin 1991, Stability of Structures, sec. 1.1 (from memory)",
                 res.outcome.negative_pivots[-1], unstable)


def test_converged_count_from_the_last_iteration_equals_a_fresh_count(monkeypatch):
    # the count read from the last iteration's factorisation (when its
    # residual was small) must be the one a fresh factorisation of the
    # converged tangent gives, and must save that factorisation
    from cablefe.solvers import newton
    path = Path(__file__).resolve().parent.parent / "cases" / "saddle_net.toml"
    counts = {}

    def run(reuse):
        monkeypatch.setattr(newton, "PIVOT_REUSE_RATIO", 1e-3 if reuse else -1.0)
        results, counts[reuse] = solve_counting_factorisations(monkeypatch, path)
        return {r.name: r.outcome for r in results.items}

    fresh, reused = run(False), run(True)
    for name, outcome in fresh.items():
        assert outcome.negative_pivots == reused[name].negative_pivots
        assert_allclose(reused[name].state.positions, outcome.state.positions, rtol=0, atol=0)
    # one fewer factorisation per converged increment that could use it
    assert counts[True] < counts[False]
