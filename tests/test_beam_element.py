"""Tests of the corotational beam element kernels (cablefe.elements.beam).

Outside references: classical linear frame stiffness, central finite
differences, rigid-body invariance and statics, exact circular bending, the
elastica (scipy solve_bvp), Euler buckling, and handbook fixed-end actions.
"""

import mpmath
import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from numpy.testing import assert_allclose
from scipy.integrate import quad, solve_bvp
from scipy.optimize import brentq
from scipy.spatial.transform import Rotation

from cablefe.elements import beam

EPS = np.finfo(float).eps
# the verify fixture only records, so one instance may serve every example
SHARED_FIXTURE = [HealthCheck.function_scoped_fixture]

# A steel I-ish section, deliberately unequal Iy, Iz so that mix-ups show.
STEEL = dict(E=2.1e11, G=8.1e10, A=1.2e-2, Iy=8.0e-5, Iz=2.5e-5, J=1.5e-6)


def props(n, **kw):
    p = {k: np.full(n, v) for k, v in STEEL.items()}
    p.update({k: np.full(n, v) for k, v in kw.items()})
    return p


finite = dict(allow_nan=False, allow_infinity=False)
vec3 = lambda lo, hi: arrays(float, 3, elements=st.floats(lo, hi, **finite))  # noqa: E731


def unit(v):
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def blockdiag4(Q):
    """(n,3,3) -> (n,12,12) with Q on the four 3x3 diagonal blocks."""
    n = Q.shape[0]
    T = np.zeros((n, 12, 12))
    for b in range(4):
        T[:, 3 * b:3 * b + 3, 3 * b:3 * b + 3] = Q
    return T


# ---------------------------------------------------------------------------
# SO(3) helpers
# ---------------------------------------------------------------------------


@settings(max_examples=40, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(v=vec3(-10, 10), w=vec3(-10, 10))
def test_skew_is_cross_product(verify, v, w):
    # keep products of components out of the underflow range
    assume(np.all((np.abs(np.outer(v, w)) > 1e-250) | (np.outer(v, w) == 0)))
    # source: definition of the cross product matrix (any vector algebra text)
    verify.check("skew-symmetric matrix of v times w = v x w, random v, w",
                 "definition of the cross product matrix (any vector algebra text); numpy.cross",
                 beam.skew(v[None])[0] @ w, np.cross(v, w), rtol=0,
                 atol=10 * EPS * np.abs(v).max() * np.abs(w).max())


@settings(max_examples=60, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(theta=vec3(-10, 10))
def test_expm_matches_matrix_exponential(verify, theta):
    # source: the matrix exponential series, summed by mpmath.expm at 30
    # digits (independent of Rodrigues' formula).
    with mpmath.workdps(30):
        ref = np.array(mpmath.expm(mpmath.matrix(beam.skew(theta).tolist())).tolist(), dtype=float)
    R = beam.expm_so3(theta[None])[0]
    # Rodrigues in double precision: a few eps per entry, plus eps |theta|
    # from the argument of sin and cos.
    verify.check("rotation matrix exp(skew(theta)) for random rotation vectors, |theta_i| <= 10 rad",
                 "matrix exponential series summed by mpmath.expm at 30 digits", R, ref, rtol=0,
                 atol=10 * EPS * (1 + np.linalg.norm(theta)))


@settings(max_examples=60, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(axis=vec3(-1, 1).filter(lambda a: np.linalg.norm(a) > 1e-3),
       angle=st.one_of(st.floats(0.0, np.pi), st.sampled_from(
           [0.0, 1e-14, 1e-9, 1e-4, np.pi / 2, np.pi - 1e-4, np.pi - 1e-9, np.pi - 1e-13, np.pi])))
def test_logm_inverts_expm_near_zero_and_pi(verify, axis, angle):
    theta = angle * unit(axis)
    R = Rotation.from_rotvec(theta).as_matrix()  # source: scipy Rotation (quaternion route)
    got = beam.logm_so3(R[None])[0]
    assert np.linalg.norm(got) <= np.pi * (1 + 4 * EPS)
    # The log at exactly pi is defined up to the sign of the axis; both map
    # to the same rotation, which is what must hold everywhere.
    assert_allclose(beam.expm_so3(got[None])[0], R, rtol=0, atol=20 * EPS)
    if angle < np.pi - 1e-6:
        # away from pi the principal logarithm is unique; the axis error of a
        # matrix with entry round-off eps grows like eps / sin(angle).
        verify.check("rotation vector (matrix logarithm) of random rotations, angle up to pi - 1e-6",
                     "scipy.spatial.transform.Rotation.as_rotvec (quaternion route)",
                     got, Rotation.from_matrix(R).as_rotvec(), rtol=0,
                     atol=20 * EPS / max(np.sin(angle), 1e-6) + 20 * EPS, unit="rad")


# ---------------------------------------------------------------------------
# frames
# ---------------------------------------------------------------------------


def test_local_frames_axes_and_default_up():
    xi = np.array([[0.0, 0, 0], [1, 2, 3], [0, 0, 0], [5, 5, 0]])
    xj = np.array([[3.0, 0, 0], [1, 2, 7], [1, 1, 1], [5, 5, -2]])
    F = beam.local_frames(xi, xj)
    assert_allclose(np.einsum("nki,nkj->nij", F, F), np.broadcast_to(np.eye(3), (4, 3, 3)), atol=1e-15)
    assert_allclose(np.linalg.det(F), 1.0, rtol=1e-15)
    assert_allclose(F[:, :, 0], unit(xj - xi), rtol=1e-15)
    # Horizontal member: z is global Z.  Vertical members take X as "up".
    assert_allclose(F[0], np.eye(3), atol=1e-15)
    assert_allclose(F[1][:, 2], [1, 0, 0], atol=1e-15)
    assert_allclose(F[3][:, 2], [1, 0, 0], atol=1e-15)
    # Inclined member: z in the plane of x and Z, on the upper side.
    ez = F[2][:, 2]
    assert ez[2] > 0
    assert_allclose(np.dot(np.cross(F[2][:, 0], [0, 0, 1]), ez), 0.0, atol=1e-15)


def test_local_frames_custom_up_and_parallel_up_is_rejected():
    xi = np.zeros((2, 3))
    xj = np.array([[1.0, 0, 0], [0, 1, 0]])
    F = beam.local_frames(xi, xj, up=np.array([[0, 1.0, 1.0], [1.0, 0, 0]]))
    assert_allclose(F[0][:, 2], [0, 0.5**0.5, 0.5**0.5], atol=1e-15)
    assert_allclose(F[1][:, 2], [1, 0, 0], atol=1e-15)
    with pytest.raises(ValueError, match="element 1"):
        beam.local_frames(xi, xj, up=np.array([[0, 0, 1.0], [0, -3.0, 0]]))
    with pytest.raises(ValueError, match="zero length"):
        beam.local_frames(xi, xi)


# ---------------------------------------------------------------------------
# small displacements: classical frame stiffness
# ---------------------------------------------------------------------------


def classical_frame_stiffness(L, E, G, A, Iy, Iz, J):
    """12x12 linear 3D frame stiffness in local axes, DOFs per node
    [u, v, w, theta_x, theta_y, theta_z].
    source: Przemieniecki 1968, Theory of Matrix Structural Analysis, ch. 5,
    3D beam element stiffness; same matrix in McGuire, Gallagher & Ziemian
    2000, Matrix Structural Analysis, 2nd ed., ch. 4 (chapters from memory).
    Written out here entry by entry, independently of the element code."""
    K = np.zeros((12, 12))
    a, t = E * A / L, G * J / L
    for i, j, v in ((0, 0, a), (0, 6, -a), (6, 6, a), (3, 3, t), (3, 9, -t), (9, 9, t)):
        K[i, j] = K[j, i] = v
    # bending in x-y: v, theta_z (theta_z = dv/dx)
    b = E * Iz
    for (i, j), v in {(1, 1): 12 * b / L**3, (1, 5): 6 * b / L**2, (1, 7): -12 * b / L**3,
                      (1, 11): 6 * b / L**2, (5, 5): 4 * b / L, (5, 7): -6 * b / L**2,
                      (5, 11): 2 * b / L, (7, 7): 12 * b / L**3, (7, 11): -6 * b / L**2,
                      (11, 11): 4 * b / L}.items():
        K[i, j] = K[j, i] = v
    # bending in x-z: w, theta_y (theta_y = -dw/dx)
    b = E * Iy
    for (i, j), v in {(2, 2): 12 * b / L**3, (2, 4): -6 * b / L**2, (2, 8): -12 * b / L**3,
                      (2, 10): -6 * b / L**2, (4, 4): 4 * b / L, (4, 8): 6 * b / L**2,
                      (4, 10): 2 * b / L, (8, 8): 12 * b / L**3, (8, 10): 6 * b / L**2,
                      (10, 10): 4 * b / L}.items():
        K[i, j] = K[j, i] = v
    return K


@settings(max_examples=25, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(d=vec3(-5, 5).filter(lambda v: np.linalg.norm(v) > 0.5), up=vec3(-1, 1), x0=vec3(-50, 50))
def test_reference_tangent_is_classical_frame_stiffness(verify, d, up, x0):
    assume(np.linalg.norm(np.cross(unit(d), up)) > 1e-2)  # up must not be along the member
    xi, xj = x0[None], (x0 + d)[None]
    F0 = beam.local_frames(xi, xj, up[None])
    L0 = np.linalg.norm(d)[None]
    I = np.eye(3)[None]
    r = beam.response(xi, xj, I, I, F0, L0, **props(1))
    T = blockdiag4(np.swapaxes(F0, 1, 2))[0]  # global -> local
    K_ref = T.T @ classical_frame_stiffness(L0[0], **STEEL) @ T
    scale = np.abs(K_ref).max()
    # Same linear algebra up to round-off in the frame (|x0| up to 50 m).
    verify.check("beam tangent at the unloaded reference state = 12x12 linear 3D frame stiffness, "
                 "random orientation and position", "Przemieniecki 1968, Theory of Matrix Structural "
                 "Analysis, ch. 5; McGuire, Gallagher & Ziemian 2000, Matrix Structural Analysis, "
                 "2nd ed., ch. 4 (chapters from memory)", r.tangent[0], K_ref, rtol=0, atol=1e-11 * scale)
    # Unloaded reference state: no internal force.
    assert_allclose(r.force, 0.0, atol=1e-12 * scale)


# ---------------------------------------------------------------------------
# consistent tangent vs finite differences, at large rotations
# ---------------------------------------------------------------------------


def deformed_state(n, rng_draw):
    """Random element batch: arbitrary orientation and rigid rotation (any
    angle, including beyond a full turn), moderate deformation."""
    d, up, spin, dx, rot_i, rot_j, strain = rng_draw
    xi0 = np.zeros((n, 3))
    xj0 = d
    F0 = beam.local_frames(xi0, xj0, up)
    L0 = np.linalg.norm(d, axis=1)
    Q = beam.expm_so3(spin)
    xi = dx[:, 0:3] * L0[:, None]
    xj = np.einsum("nij,nj->ni", Q, d) + dx[:, 3:6] * L0[:, None]
    Ri = beam.expm_so3(rot_i) @ Q
    Rj = beam.expm_so3(rot_j) @ Q
    return xi, xj, Ri, Rj, F0, L0, strain


def state_strategy(n):
    dirs = arrays(float, (n, 3), elements=st.floats(-3, 3, **finite)).filter(
        lambda a: np.all(np.linalg.norm(a, axis=1) > 1.0))
    ups = arrays(float, (n, 3), elements=st.floats(-1, 1, **finite)).filter(
        lambda a: np.all(np.linalg.norm(a, axis=1) > 0.2))
    return st.tuples(
        dirs, ups,
        arrays(float, (n, 3), elements=st.floats(-4, 4, **finite)),       # rigid spin, up to ~7 rad
        arrays(float, (n, 6), elements=st.floats(-0.08, 0.08, **finite)),  # end movements / L0
        arrays(float, (n, 3), elements=st.floats(-0.5, 0.5, **finite)),    # nodal deformation rotations
        arrays(float, (n, 3), elements=st.floats(-0.5, 0.5, **finite)),
        arrays(float, n, elements=st.floats(-0.01, 0.01, **finite)),       # stress-free strain
    ).filter(lambda s: np.all(np.abs(np.einsum("ni,ni->n", unit(s[0]), unit(s[1]))) < 0.95))


def fd_tangent(xi, xj, Ri, Rj, F0, L0, p, strain, h):
    """Central differences of the force: translations additively, rotations
    spatially, R -> expm(skew(+-h e_k)) R."""
    n = xi.shape[0]
    K = np.zeros((n, 12, 12))
    for col in range(12):
        e = np.zeros((n, 3))
        e[:, col % 3] = h
        f = []
        for s in (1.0, -1.0):
            a = [xi, xj, Ri, Rj]
            blk = col // 3
            if blk == 0:
                a[0] = xi + s * e
            elif blk == 2:
                a[1] = xj + s * e
            elif blk == 1:
                a[2] = beam.expm_so3(s * e) @ Ri
            else:
                a[3] = beam.expm_so3(s * e) @ Rj
            f.append(beam.response(*a, F0, L0, **p, axial_strain=strain, want_tangent=False).force)
        K[:, :, col] = (f[0] - f[1]) / (2 * h)
    return K


def check_tangent_by_differences(xi, xj, Ri, Rj, F0, L0, strain, p):
    r = beam.response(xi, xj, Ri, Rj, F0, L0, **p, axial_strain=strain)
    h = 1e-5  # m and rad; element lengths 1-5 m, coordinates up to ~5 m
    Kfd = fd_tangent(xi, xj, Ri, Rj, F0, L0, p, strain, h)
    # Central-difference error: truncation h^2 |f'''| / 6 with |f'''| <~ |K|
    # (per m^2 or rad^2, lengths >= 1 m), plus round-off of the two force
    # evaluations, eps (|f| + |K| |x|) / h (the chord is formed from
    # coordinates of size |x|).  Both are ~1e-10 |K| here; a factor 10 covers
    # the constants.  Geometric terms are of order |f| / L, far above this.
    Kmax = np.abs(r.tangent).max(axis=(1, 2))
    fmax = np.abs(r.force).max(axis=1)
    xmax = np.abs(np.concatenate([xi, xj], axis=1)).max(axis=1)
    tol = 10 * (h**2 * Kmax + EPS * (fmax + Kmax * xmax) / h)
    for e in range(xi.shape[0]):
        assert_allclose(r.tangent[e], Kfd[e], rtol=0, atol=tol[e])
    return r


@settings(max_examples=25, deadline=None)
@given(draw=state_strategy(3))
def test_tangent_matches_central_differences_at_large_rotations(draw):
    state = deformed_state(3, draw)
    check_tangent_by_differences(*state, props(3))


def test_tangent_matches_central_differences_strongly_deformed():
    # A fixed, strongly deformed batch: rigid turns beyond pi, local rotations
    # of 0.5 rad, 2% strain.  Here the geometric terms (~|f|/L) are at least
    # 1e-3 |K|, so the check above cannot pass with a material-only tangent.
    rng = np.random.default_rng(20021)
    n = 4
    d = rng.uniform(-3, 3, (n, 3))
    d *= rng.uniform(1.0, 5.0, n)[:, None] / np.linalg.norm(d, axis=1)[:, None]
    up = np.cross(d, rng.normal(size=(n, 3)))
    spin = unit(rng.normal(size=(n, 3))) * np.array([2.0, 3.5, 5.0, 6.9])[:, None]
    rot = 0.5 * unit(rng.normal(size=(n, 2, 3)))
    draw = (d, up, spin, rng.uniform(-0.08, 0.08, (n, 6)), rot[:, 0], rot[:, 1], np.full(n, 0.02))
    state = deformed_state(n, draw)
    r = check_tangent_by_differences(*state, props(n))
    L0 = state[5]
    assert np.all(np.abs(r.force).max(axis=1) / L0 > 1e-3 * np.abs(r.tangent).max(axis=(1, 2)))


@settings(max_examples=25, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(draw=state_strategy(2))
def test_internal_forces_are_self_equilibrated(verify, draw):
    xi, xj, Ri, Rj, F0, L0, strain = deformed_state(2, draw)
    r = beam.response(xi, xj, Ri, Rj, F0, L0, **props(2), axial_strain=strain)
    f = r.force
    scale = np.abs(f).max() * (1 + np.abs(np.r_[xi, xj]).max())
    # source: Newton's laws for a free body: sum of forces and of moments
    # (about the origin) of the nodal actions on the element vanish.
    verify.check("beam end forces at random large rotations: sum of forces", "Newton's laws, "
                 "equilibrium of a free body (statics)", f[:, 0:3] + f[:, 6:9], 0.0, atol=1e-12 * scale,
                 unit="N")
    moment = f[:, 3:6] + f[:, 9:12] + np.cross(xi, f[:, 0:3]) + np.cross(xj, f[:, 6:9])
    verify.check("beam end forces at random large rotations: sum of moments about the origin",
                 "Newton's laws, equilibrium of a free body (statics)", moment, 0.0, atol=1e-12 * scale,
                 unit="N m")
    # Axial and shear resultants are the same at both ends (no span load).
    assert_allclose(r.local_end_forces[:, 0:3], r.local_end_forces[:, 6:9], atol=1e-12 * scale)


def test_want_tangent_false_gives_same_force():
    rng = np.random.default_rng(7)
    draw = (rng.uniform(1, 2, (4, 3)), rng.uniform(-1, 1, (4, 3)), rng.uniform(-4, 4, (4, 3)),
            rng.uniform(-0.05, 0.05, (4, 6)), rng.uniform(-0.3, 0.3, (4, 3)),
            rng.uniform(-0.3, 0.3, (4, 3)), np.zeros(4))
    xi, xj, Ri, Rj, F0, L0, strain = deformed_state(4, draw)
    a = beam.response(xi, xj, Ri, Rj, F0, L0, **props(4))
    b = beam.response(xi, xj, Ri, Rj, F0, L0, **props(4), want_tangent=False)
    assert b.tangent is None
    assert_allclose(a.force, b.force, rtol=0, atol=0)


# ---------------------------------------------------------------------------
# rigid-body motion
# ---------------------------------------------------------------------------


@settings(max_examples=25, deadline=None)
@given(draw=state_strategy(2), spin=vec3(-7, 7), shift=vec3(-100, 100))
def test_rigid_body_motion(draw, spin, shift):
    xi, xj, Ri, Rj, F0, L0, strain = deformed_state(2, draw)
    p = props(2)
    Q = beam.expm_so3(np.broadcast_to(spin, (2, 3)))
    # Undeformed element moved rigidly: no force.
    xi0, xj0 = np.zeros((2, 3)), F0[:, :, 0] * L0[:, None]
    r0 = beam.response(xi0 + shift, np.einsum("nij,nj->ni", Q, xj0) + shift, Q, Q, F0, L0, **p)
    # Forces come only from round-off in the moved coordinates (|x| <= ~110 m)
    # and rotations: |f| <~ eps (EA |x| / L + EI / L) times a few.
    fr = 100 * EPS * (STEEL["E"] * STEEL["A"] * (1 + np.abs(shift).max()) / L0.min()
                      + STEEL["E"] * STEEL["Iy"] / L0.min())
    assert_allclose(r0.force, 0.0, atol=fr)
    # A deformed state moved rigidly: same local resultants, rotated forces
    # and rotated tangent (objectivity).
    a = beam.response(xi, xj, Ri, Rj, F0, L0, **p, axial_strain=strain)
    xq = lambda x: np.einsum("nij,nj->ni", Q, x) + shift  # noqa: E731
    b = beam.response(xq(xi), xq(xj), Q @ Ri, Q @ Rj, F0, L0, **p, axial_strain=strain)
    # Relative round-off: the chord of a 1-5 m element is formed from
    # coordinates up to ~110 m (relative error eps |x| / L), and local
    # rotations come from products of rotations; allow 1000 times that.
    rel = 1000 * EPS * (1 + np.abs(shift).max()) / L0.min()
    # Near-zero deformation leaves only the absolute round-off floor fr.
    sl = np.abs(a.local_end_forces).max()
    assert_allclose(b.local_end_forces, a.local_end_forces, rtol=0, atol=rel * sl + fr)
    T = blockdiag4(Q)
    assert_allclose(b.force, np.einsum("nij,nj->ni", T, a.force), rtol=0,
                    atol=rel * np.abs(a.force).max() + fr)
    assert_allclose(b.tangent, T @ a.tangent @ np.swapaxes(T, 1, 2), rtol=0,
                    atol=rel * np.abs(a.tangent).max())


def test_stress_free_strain_and_sign_of_axial_force(verify):
    F0 = beam.local_frames(np.zeros((2, 3)), np.array([[2.0, 0, 0], [2.0, 0, 0]]))
    I = np.broadcast_to(np.eye(3), (2, 3, 3))
    strain = np.array([1.2e-5 * 40, -1.2e-5 * 25])  # alpha dT, heated and cooled
    L0 = np.full(2, 2.0)
    EA = STEEL["E"] * STEEL["A"]
    # Free to expand: no force at the stress-free length L0 (1 + strain).
    xj = np.array([[2.0 * (1 + strain[0]), 0, 0], [2.0 * (1 + strain[1]), 0, 0]])
    r = beam.response(np.zeros((2, 3)), xj, I, I, F0, L0, **props(2), axial_strain=strain)
    assert_allclose(r.force, 0.0, atol=10 * EPS * EA)  # round-off in l - Ls only
    # Held at L0: N = EA (L0 - Ls)/Ls, compression when heated.
    # source: elementary restrained thermal bar (common practice), with the
    # strain of the stress-free length as in N = EA (L - L0)/L0.
    r = beam.response(np.zeros((2, 3)), np.array([[2.0, 0, 0]] * 2), I, I, F0, L0, **props(2),
                      axial_strain=strain)
    N = -EA * strain / (1 + strain)
    verify.check("beam held at its length, stress-free strain alpha dT (+40 K and -25 K): axial force "
                 "N = EA (L0 - Ls)/Ls", "elementary restrained thermal bar (common practice)",
                 r.axial_force, N, rtol=1e-12, unit="N")
    assert_allclose(r.local_end_forces[:, 0], N, rtol=1e-12)
    assert_allclose(r.local_end_forces[:, 6], N, rtol=1e-12)
    # Tension positive: f_i = -N e, f_j = +N e (cablefe.elements conventions).
    assert_allclose(r.force[:, 0], -N, rtol=1e-12)
    assert_allclose(r.force[:, 6], N, rtol=1e-12)


def test_bad_inputs_are_rejected():
    F0 = beam.local_frames(np.zeros((2, 3)), np.array([[1.0, 0, 0], [0, 1.0, 0]]))
    I = np.broadcast_to(np.eye(3), (2, 3, 3))
    x = np.zeros((2, 3))
    y = F0[:, :, 0]
    with pytest.raises(ValueError, match="Rj\\[1\\]"):
        bad = I.copy()
        bad[1] = np.diag([1.0, 1.0, 1.1])
        beam.response(x, y, I, bad, F0, np.ones(2), **props(2))
    with pytest.raises(ValueError, match="element 0"):
        beam.response(x, y, I, I, F0, np.ones(2), **props(2, Iz=np.array([-1.0, 1.0])))
    with pytest.raises(ValueError, match="shape"):
        beam.response(x[:1], y, I, I, F0, np.ones(2), **props(2))


# ---------------------------------------------------------------------------
# whole cantilevers solved with a small Newton loop
# ---------------------------------------------------------------------------


def solve_cantilever(n_el, length, Q, tip_load, steps, p=None, tol=1e-10, max_iter=30):
    """Cantilever along Q e_x with section z along Q e_z, clamped at node 0,
    a fixed global load (force, moment) at the tip, load control + Newton."""
    p = props(n_el) if p is None else p
    s = np.linspace(0.0, length, n_el + 1)
    X0 = np.outer(s, Q[:, 0])
    F0 = beam.local_frames(X0[:-1], X0[1:], np.broadcast_to(Q[:, 2], (n_el, 3)))
    L0 = np.full(n_el, length / n_el)
    X = X0.copy()
    R = np.broadcast_to(np.eye(3), (n_el + 1, 3, 3)).copy()
    ndof = 6 * (n_el + 1)
    fext = np.zeros(ndof)
    fext[-6:] = tip_load
    # Stop at a relative residual tol, or at the round-off floor of the
    # axial force N = EA (l - Ls)/Ls, which is about eps * EA per element.
    stop = max(tol * np.linalg.norm(tip_load), 100 * EPS * np.max(p["E"] * p["A"]))
    for step in range(1, steps + 1):
        lam = step / steps
        for _ in range(max_iter):
            r = beam.response(X[:-1], X[1:], R[:-1], R[1:], F0, L0, **p)
            K = np.zeros((ndof, ndof))
            f = np.zeros(ndof)
            for e in range(n_el):  # tiny dense assembly; element e owns DOFs 6e..6e+11
                K[6 * e:6 * e + 12, 6 * e:6 * e + 12] += r.tangent[e]
                f[6 * e:6 * e + 12] += r.force[e]
            res = lam * fext - f
            if np.linalg.norm(res[6:]) < stop:
                break
            du = np.linalg.solve(K[6:, 6:], res[6:]).reshape(n_el, 6)
            X[1:] += du[:, 0:3]
            R[1:] = beam.expm_so3(du[:, 3:6]) @ R[1:]
        else:
            raise AssertionError(f"Newton did not converge at load step {step}")
    return X, R, r


ORIENT = beam.expm_so3(np.array([[0.3, -1.1, 0.7]]))[0]  # a general orientation


@pytest.mark.parametrize("turns", [0.75, 1.0])
def test_end_moment_rolls_cantilever_into_circle(verify, turns):
    n_el, length = 20, 4.0
    EIy = STEEL["E"] * STEEL["Iy"]
    M = turns * 2 * np.pi * EIy / length  # moment about the local y axis
    tip = np.zeros(6)
    tip[3:6] = M * ORIENT[:, 1]
    X, R, r = solve_cantilever(n_el, length, ORIENT, tip, steps=int(12 * turns))
    # Exact: uniform curvature kappa = M/EI, arc of radius EI/M; every section
    # turns about the moment axis by kappa s.
    # source: Euler-Bernoulli moment-curvature law M = EI / rho, exact for the
    # inextensible elastica (e.g. Timoshenko & Gere 1961, Theory of Elastic
    # Stability, ch. 2; from memory).
    Rad = EIy / M
    s = np.linspace(0, length, n_el + 1)
    R_exact = beam.expm_so3(np.outer(s / Rad, ORIENT[:, 1]))
    source = ("Euler-Bernoulli moment-curvature law M = EI/rho, exact for the inextensible elastica "
              "(Timoshenko & Gere 1961, Theory of Elastic Stability, ch. 2; from memory)")
    verify.check(f"cantilever (20 beams, 4 m) rolled by an end moment into {turns} of a circle: "
                 "section rotations exp(kappa s)", source, R, R_exact, rtol=0, atol=1e-9)
    # The nodes are the vertices of chords of length L0/n (N = 0) inscribed in
    # the arc.  A chord spanning an arc angle phi sits on a circle of radius
    # (phi/2)/sin(phi/2) times the arc's radius (plane geometry).
    phi = length / n_el / Rad
    Rad_nodes = Rad * (phi / 2) / np.sin(phi / 2)
    a = s / Rad
    ex, ez = ORIENT[:, 0], -ORIENT[:, 2]  # bending about +y turns x toward -z
    X_exact = Rad_nodes * (np.outer(np.sin(a), ex) + np.outer(1 - np.cos(a), ez))
    verify.check("same cantilever: node positions on the arc (chords inscribed in the circle)",
                 source + "; plane geometry of inscribed chords", X, X_exact, rtol=0,
                 atol=1e-9 * length, unit="m")
    if turns == 1.0:
        assert_allclose(X[-1], 0.0, atol=1e-9 * length)  # full circle closes
        assert_allclose(R[-1], np.eye(3), atol=1e-9)
    # Pure bending: every section carries My = M, nothing else.
    lef = r.local_end_forces
    verify.check("same cantilever: bending moment My = M in every element (pure bending)",
                 "statics of the free body beyond the section", lef[:, [4, 10]], M, rtol=1e-8, unit="N m")
    verify.check("same cantilever: all other section forces and moments vanish (pure bending)",
                 "statics of the free body beyond the section",
                 lef[:, [0, 1, 2, 3, 5, 6, 7, 8, 9, 11]], 0.0, atol=1e-8 * M / length)


def elastica_tip(k):
    """Tip position (x/L, -z/L) of a cantilever under a dead tip load P with
    k = P L^2 / EI, from theta'' + k cos(theta) = 0, theta(0) = 0,
    theta'(1) = 0 (s in units of L).
    source: Bisshopp & Drucker 1945, Large deflection of cantilever beams,
    Q. Appl. Math. 3, 272-275, eq. for the elastica; solved with solve_bvp."""
    def rhs(s, y):
        return np.vstack([y[1], -k * np.cos(y[0]), np.cos(y[0]), np.sin(y[0])])

    def bc(y0, y1):
        return np.array([y0[0], y1[1], y0[2], y0[3]])

    s = np.linspace(0, 1, 201)
    y0 = np.vstack([0.5 * s, 0.5 * np.ones_like(s), s, 0.2 * s**2])
    sol = solve_bvp(rhs, bc, s, y0, tol=1e-10, max_nodes=100000)
    assert sol.success
    return sol.y[2, -1], sol.y[3, -1]


def test_tip_load_follows_elastica_with_second_order_convergence(verify):
    length, k = 3.0, 3.0  # P L^2 / EI = 3: tip rotation ~ 60 degrees
    EIy = STEEL["E"] * STEEL["Iy"]
    P = k * EIy / length**2
    # Axial stiffness made large so that the inextensible elastica is the
    # exact reference (stretching P/EA ~ 3e-6, far below the mesh error).
    p_kw = dict(A=10.0)
    tip = np.zeros(6)
    tip[0:3] = -P * ORIENT[:, 2]  # dead load along -local z (bends about +y)
    x_ref, w_ref = elastica_tip(k)
    tips, errors = [], []
    meshes = [5, 10, 20]
    for n_el in meshes:
        X, R, r = solve_cantilever(n_el, length, ORIENT, tip, steps=4, p=props(n_el, **p_kw))
        u = X[-1] @ ORIENT  # tip position in member axes
        tips.append(np.array([u[0], -u[2]]) / length)
        errors.append(np.hypot(*(tips[-1] - [x_ref, w_ref])))
        assert abs(u[1]) < 1e-9 * length  # stays in its plane
    # Linear (cubic Hermite) local beams on a corotated chord converge at
    # second order in the element length (Crisfield 1997, Non-linear Finite
    # Element Analysis of Solids and Structures, Vol. 2, ch. 17; from memory);
    # the rate is fitted on log-log data.
    rate = np.polyfit(np.log(meshes), np.log(errors), 1)[0]
    assert -2.3 < rate < -1.7, (rate, errors)
    verify.check("cantilever under a dead tip load, P L^2/EI = 3, 5/10/20 beams: order of the tip "
                 "error against the elastica", "Crisfield 1997, Non-linear Finite Element Analysis of "
                 "Solids and Structures, Vol. 2, ch. 17 (second order; from memory)", -rate, 2.0, atol=0.3)
    # Richardson extrapolation with order 2 removes the leading error term;
    # the O(h^4) remainder is at least 20 times smaller than the n = 20 error.
    extrapolated = tips[-1] + (tips[-1] - tips[-2]) / 3
    assert np.hypot(*(extrapolated - [x_ref, w_ref])) < 0.05 * errors[-1], (extrapolated, errors)
    verify.check("same cantilever: Richardson-extrapolated tip position (x/L, w/L) vs the elastica "
                 "(distance asserted below 1/20 of the 20-beam error)", "Bisshopp & Drucker 1945, "
                 "Large deflection of cantilever beams, Q. Appl. Math. 3, 272-275; solved with "
                 "scipy.integrate.solve_bvp", extrapolated, [x_ref, w_ref], rtol=0, atol=0.05 * errors[-1])
    # Root section: statics of the whole cantilever gives a bending moment
    # P * x_tip about local y, and resultant force magnitude P.
    # source: equilibrium of the free body beyond the root (statics).
    lef = r.local_end_forces[0]
    verify.check("same cantilever: root bending moment P x_tip", "statics of the free body beyond "
                 "the root", lef[4], P * u[0], rtol=1e-8, unit="N m")
    verify.check("same cantilever: root resultant force P", "statics of the free body beyond the root",
                 np.linalg.norm(lef[0:3]), P, rtol=1e-8, unit="N")
    assert_allclose(lef[[3, 5]], 0.0, atol=1e-8 * P * length)


def test_pinned_column_tangent_is_singular_at_euler_load(verify):
    length = 5.0
    EI_weak = STEEL["E"] * min(STEEL["Iy"], STEEL["Iz"])
    # source: Euler 1744; pinned column P_cr = pi^2 EI / L^2 about the weak
    # axis (Timoshenko & Gere 1961, Theory of Elastic Stability, ch. 2)
    P_euler = np.pi**2 * EI_weak / length**2

    def critical(n_el):
        p = props(n_el, A=1e3)  # P/EA ~ 1e-9: shortening does not shift the load
        s = np.linspace(0, length, n_el + 1)
        F0 = beam.local_frames(np.outer(s[:-1], ORIENT[:, 0]), np.outer(s[1:], ORIENT[:, 0]),
                               np.broadcast_to(ORIENT[:, 2], (n_el, 3)))
        L0 = np.full(n_el, length / n_el)
        R = np.broadcast_to(np.eye(3), (n_el + 1, 3, 3))
        ndof = 6 * (n_el + 1)
        # Work in member axes at every node so that supports are plain DOFs.
        T = np.kron(np.eye(2 * (n_el + 1)), ORIENT)  # u_global = T u_member
        # pin at node 0 (translations and twist), roller at the top (only
        # axial movement); all rotations otherwise free
        fixed = [0, 1, 2, 3, 6 * n_el + 1, 6 * n_el + 2]
        keep = np.setdiff1d(np.arange(ndof), fixed)

        def min_eig(P):
            # exact straight equilibrium under compression P
            X = np.outer(s * (1 - P / (STEEL["E"] * p["A"][0])), ORIENT[:, 0])
            r = beam.response(X[:-1], X[1:], R[:-1], R[1:], F0, L0, **p)
            # l - Ls cancels: relative error ~ eps EA / P
            assert_allclose(r.axial_force, -P, rtol=100 * EPS * STEEL["E"] * p["A"][0] / P)
            K = np.zeros((ndof, ndof))
            for e in range(n_el):
                K[6 * e:6 * e + 12, 6 * e:6 * e + 12] += r.tangent[e]
            Kf = (T.T @ K @ T)[np.ix_(keep, keep)]
            # at this unbent equilibrium the tangent is symmetric
            assert_allclose(Kf, Kf.T, rtol=0, atol=1e-9 * np.abs(Kf).max())
            return np.linalg.eigvalsh(0.5 * (Kf + Kf.T))[0]

        return brentq(min_eig, 0.5 * P_euler, 1.5 * P_euler, xtol=1e-12 * P_euler)

    meshes = [4, 8, 16]
    loads = np.array([critical(n) for n in meshes])
    errors = np.abs(loads / P_euler - 1)
    rate = np.polyfit(np.log(meshes), np.log(errors), 1)[0]
    assert -2.3 < rate < -1.7, (rate, errors)
    # Richardson extrapolation with order 2 removes the leading error term;
    # what is left is O(h^4), at least 20 times smaller than the n = 16 error.
    extrapolated = loads[-1] + (loads[-1] - loads[-2]) / 3
    verify.check("pinned column, 5 m, 4/8/16 beams: Richardson-extrapolated load where the tangent "
                 "turns singular vs pi^2 EI/L^2 (tolerance 1/20 of the 16-beam error)",
                 "Euler 1744; Timoshenko & Gere 1961, Theory of Elastic Stability, ch. 2",
                 extrapolated, P_euler, rtol=0.05 * errors[-1], unit="N")


# ---------------------------------------------------------------------------
# member loads
# ---------------------------------------------------------------------------


def test_full_span_uniform_load(verify):
    xi = np.array([[0.0, 0, 0], [1.0, 2.0, 3.0]])
    xj = np.array([[6.0, 0, 0], [4.0, -1.0, 5.0]])
    F0 = beam.local_frames(xi, xj)
    L = np.linalg.norm(xj - xi, axis=1)
    p = np.array([[0.0, 0, -4.5e3], [1.0e3, -2.0e3, -3.0e3]])
    f = beam.equivalent_nodal_loads(xi, xj, F0, L, p, 0.0, L)
    # source: Roark's Formulas for Stress and Strain (Young & Budynas 2002,
    # 7th ed., Table 8.1), fixed-fixed beam under uniform load: end shears
    # wL/2, end moments wL^2/12 (from memory); axial share half to each end.
    for e in range(2):
        ex = F0[e][:, 0]
        pa = ex * (ex @ p[e])
        pt = p[e] - pa  # transverse part
        source = ("Young & Budynas 2002, Roark's Formulas for Stress and Strain, 7th ed., Table 8.1 "
                  "(fixed-fixed, uniform load; from memory)")
        verify.check(f"fixed-end forces of a full-span uniform load, beam {e} ({L[e]:.3g} m): wL/2 at "
                     "each end", source, f[e, [0, 1, 2, 6, 7, 8]], np.tile((pa + pt) * L[e] / 2, 2),
                     rtol=1e-12, atol=1e-9 * np.abs(p[e]).max(), unit="N")
        # moment of the load about the near end, shared as wL^2/12:
        # +ex x p at i, -ex x p at j.
        m = np.cross(ex, pt) * L[e] ** 2 / 12
        verify.check(f"fixed-end moments of a full-span uniform load, beam {e}: +-wL^2/12", source,
                     f[e, [3, 4, 5, 9, 10, 11]], np.r_[m, -m], rtol=1e-12, atol=1e-9 * np.abs(m).max(),
                     unit="N m")
    # horizontal beam with gravity load: wL/2 down, +-wL^2/12 about y
    verify.check("horizontal 6 m beam, 4.5 kN/m down: end shears wL/2 and moments +-wL^2/12", source,
                 f[0, [2, 4, 8, 10]], [-4.5e3 * 3, 4.5e3 * 36 / 12, -4.5e3 * 3, -4.5e3 * 36 / 12],
                 rtol=1e-12)


@settings(max_examples=30, deadline=None, suppress_health_check=SHARED_FIXTURE)
@given(a=st.floats(0.0, 0.9), frac=st.floats(0.05, 1.0), p=vec3(-5e3, 5e3))
def test_partial_uniform_load_matches_fixed_end_actions(verify, a, frac, p):
    L = 7.0
    a = a * L
    b = a + frac * (L - a)
    xi, xj = np.array([[1.0, -2.0, 0.5]]), np.array([[5.0, 1.0, 4.5]])
    xj = xi + L * unit(xj - xi)
    F0 = beam.local_frames(xi, xj, np.array([[0.2, 0.1, 1.0]]))
    f = beam.equivalent_nodal_loads(xi, xj, F0, np.array([L]), p[None], np.array([a]), np.array([b]))[0]
    pl = F0[0].T @ p
    # Reference: integrate the point-load fixed-end actions over the patch.
    # source: Roark's Formulas for Stress and Strain (Young & Budynas 2002,
    # Table 8.1, case 1d), fixed-fixed beam, point load W at distance x from
    # the left: M_A = W x (L-x)^2/L^2, M_B = W x^2 (L-x)/L^2,
    # R_A = W (L-x)^2 (L + 2x)/L^3 (from memory); axial: W (L-x)/L and W x/L.
    RA = quad(lambda x: (L - x) ** 2 * (L + 2 * x) / L**3, a, b)[0]
    RB = quad(lambda x: x**2 * (3 * L - 2 * x) / L**3, a, b)[0]
    MA = quad(lambda x: x * (L - x) ** 2 / L**2, a, b)[0]
    MB = quad(lambda x: x**2 * (L - x) / L**2, a, b)[0]
    NA = quad(lambda x: (L - x) / L, a, b)[0]
    NB = quad(lambda x: x / L, a, b)[0]
    local = F0[0].T
    fi, mi, fj, mj = (local @ f[0:3], local @ f[3:6], local @ f[6:9], local @ f[9:12])
    # loads below 1 N/m (hypothesis likes subnormal numbers) are held to the
    # round-off of a 1 N/m load, not to a subnormal tolerance
    scale = max(np.abs(p).max(), 1.0) * L * (1 + L)
    tol = dict(rtol=0, atol=1e-10 * scale)
    source = ("Young & Budynas 2002, Roark's Formulas for Stress and Strain, Table 8.1, case 1d "
              "(from memory), integrated over the patch by scipy.integrate.quad")
    verify.check("fixed-end forces (both ends) of a partial uniform load on a random patch of a 7 m beam",
                 source, np.r_[fi, fj], [pl[0] * NA, pl[1] * RA, pl[2] * RA, pl[0] * NB, pl[1] * RB,
                                         pl[2] * RB], unit="N", **tol)
    # A load along +y turns end i about +z and end j about -z; along +z the
    # reverse about y (theta_y = -dw/dx).
    verify.check("fixed-end moments (both ends) of a partial uniform load on a random patch", source,
                 np.r_[mi, mj], [0.0, -pl[2] * MA, pl[1] * MA, 0.0, pl[2] * MB, -pl[1] * MB],
                 unit="N m", **tol)


def test_patch_from_left_end_closed_form(verify):
    L, c, w = 6.0, 2.5, -3.0e3
    F0 = beam.local_frames(np.zeros((1, 3)), np.array([[L, 0, 0]]))
    f = beam.equivalent_nodal_loads(np.zeros((1, 3)), np.array([[L, 0, 0]]), F0, [L],
                                    np.array([[0, 0, w]]), 0.0, c)[0]
    # source: fixed-fixed beam, uniform load over a length c from the left end:
    # M_A = w c^2 (6L^2 - 8cL + 3c^2)/(12 L^2), M_B = w c^3 (4L - 3c)/(12 L^2),
    # R_A = w c (2L^3 - 2c^2 L + c^3)/(2 L^3) (Roark's Table 8.1; from memory).
    MA = w * c**2 * (6 * L**2 - 8 * c * L + 3 * c**2) / (12 * L**2)
    MB = w * c**3 * (4 * L - 3 * c) / (12 * L**2)
    RA = w * c * (2 * L**3 - 2 * c**2 * L + c**3) / (2 * L**3)
    verify.check("fixed-fixed 6 m beam, 3 kN/m over 2.5 m from the left end: end shears and moments",
                 "Young & Budynas 2002, Roark's Formulas for Stress and Strain, Table 8.1 (from memory)",
                 f[[2, 4, 8, 10]], [RA, -MA, w * c - RA, MB], rtol=1e-12)
    with pytest.raises(ValueError, match="element 0"):
        beam.equivalent_nodal_loads(np.zeros((1, 3)), np.array([[L, 0, 0]]), F0, [L],
                                    np.array([[0, 0, w]]), 3.0, 2.0)
