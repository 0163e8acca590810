"""The whole load in one increment, and the bulk reading of plain members,
give what the step-by-step paths give."""
from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from numpy.testing import assert_allclose

import cablefe
from cablefe.io import case as case_io
from cablefe.solvers import newton, static
from conftest import solve_counting_factorisations

ROOT = Path(__file__).resolve().parent.parent


def _solve(path, whole: bool, monkeypatch):
    original = newton.follow_load_path

    def patched(problem, settings=newton.NewtonSettings(), progress=None):
        return original(problem, dataclasses.replace(settings, whole_load_first=whole), progress)

    monkeypatch.setattr(static, "follow_load_path", patched)
    return cablefe.solve(cablefe.load_model(path))


def test_a_stiffening_net_takes_the_whole_load_at_once_and_lands_on_the_same_state(monkeypatch):
    # the equilibrium of a stable (positive definite) path is unique, so the
    # one-increment answer must be the incremental one; both meet the
    # residual test ||r|| <= 1e-8 ||f||, and positions of the 12 m net move
    # by the residual over the stiffness: far below 1e-6 m
    path = ROOT / "cases" / "saddle_net.toml"
    steps = _solve(path, False, monkeypatch)
    whole = _solve(path, True, monkeypatch)
    for name in ("snow", "uplift"):
        assert whole[name].outcome.increments == (1.0,)
        assert len(steps[name].outcome.increments) > 1
        assert whole[name].outcome.iterations < steps[name].outcome.iterations
        assert whole[name].outcome.negative_pivots == (0,)
        assert_allclose(whole[name].state.positions, steps[name].state.positions, rtol=0, atol=1e-6)


def test_plain_members_read_in_bulk_as_the_full_check_reads_them(monkeypatch):
    for name in ("saddle_net.toml", "hanger_deck.toml", "generated-net.toml"):
        path = ROOT / "cases" / name
        bulk = case_io.read_case(path)
        monkeypatch.setattr(case_io._Reader, "plain_members", lambda *a: None)
        full = case_io.read_case(path)
        monkeypatch.undo()
        assert bulk.members == full.members
        assert bulk == full


def test_modified_and_inexact_newton_land_on_the_same_state_with_fewer_factorisations(monkeypatch):
    # near the solution the last factorisation serves: as it is (modified
    # Newton, the chord method: Kelley 1995, Iterative Methods for Linear and
    # Nonlinear Equations, ch. 5, from memory) or as the preconditioner of
    # conjugate gradients on the present tangent (inexact Newton: Dembo,
    # Eisenstat & Steihaug 1982, SIAM J. Numer. Anal. 19(2), from memory);
    # the equilibrium is the same unique one, met to the same residual test,
    # so positions agree far below 1e-6 m
    path = ROOT / "cases" / "saddle_net.toml"

    def solve(**change):
        original = newton.follow_load_path

        def patched(problem, settings=newton.NewtonSettings(), progress=None):
            return original(problem, dataclasses.replace(settings, **change), progress)
        monkeypatch.setattr(static, "follow_load_path", patched)
        try:
            return solve_counting_factorisations(monkeypatch, path)
        finally:
            monkeypatch.setattr(static, "follow_load_path", original)

    full, full_count = solve(modified_ratio=0.0, krylov_ratio=0.0)
    chord, chord_count = solve(modified_ratio=1e-4, krylov_ratio=0.0)
    inexact, inexact_count = solve(modified_ratio=1e-4, krylov_ratio=1e-2)
    for name in ("snow", "uplift"):
        for other in (chord, inexact):
            assert other[name].converged and full[name].converged
            assert other[name].outcome.negative_pivots == full[name].outcome.negative_pivots
            assert_allclose(other[name].state.positions, full[name].state.positions, rtol=0, atol=1e-6)
    assert chord_count < full_count
    assert inexact_count < chord_count


class _CubicSprings:
    """Two unknowns, internal force A u + u^3 (componentwise): a stiffening
    problem with a symmetric positive definite tangent A + 3 diag(u^2)."""

    symmetric_tangent = True
    roundoff = 0.0

    def __init__(self, krylov_answers: bool):
        self.A = np.array([[2.0, -1.0], [-1.0, 2.0]])
        self.f = np.array([3.0, 1.0])
        self.krylov_answers = krylov_answers
        self.calls = {"factorise": 0, "krylov": 0, "chord": 0}
        self._K = None

    def evaluate(self, u, lam, want_tangent):
        r = self.A @ u + u**3 - lam * self.f
        K = sp.csr_matrix(self.A + np.diag(3.0 * u**2)) if want_tangent else None
        return r, float(np.linalg.norm(lam * self.f)), K

    def advance(self, u, du):
        return u + du

    def solve_linear(self, K, r):
        self.calls["factorise"] += 1
        self._K = K.toarray()
        return np.linalg.solve(self._K, r)

    def solve_again(self, r):
        self.calls["chord"] += 1
        return np.linalg.solve(self._K, r)

    def solve_krylov(self, K, r, rtol, maxiter):
        self.calls["krylov"] += 1
        if not self.krylov_answers:
            return None   # as for negative curvature or no convergence
        return np.linalg.solve(K.toarray(), r)


def test_a_failed_inexact_step_factorises_instead_of_a_chord_step():
    # a failed conjugate gradient attempt may have met an indefinite tangent:
    # the step must factorise (and so count the pivots), never fall back on
    # the old factors
    problem = _CubicSprings(krylov_answers=False)
    step = newton.newton_increment(problem, np.zeros(2), 1.0, newton.NewtonSettings(tolerance=1e-12))
    assert step.converged
    assert problem.calls["krylov"] >= 1 and problem.calls["chord"] == 0
    # the solution of A u + u^3 = f, checked by its residual
    u = step.state
    assert_allclose(problem.A @ u + u**3, problem.f, rtol=0, atol=1e-11)
    answered = _CubicSprings(krylov_answers=True)
    again = newton.newton_increment(answered, np.zeros(2), 1.0, newton.NewtonSettings(tolerance=1e-12))
    assert again.converged and answered.calls["chord"] == 0
    assert answered.calls["factorise"] < problem.calls["factorise"]
    assert_allclose(again.state, u, rtol=0, atol=1e-11)
