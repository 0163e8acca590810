"""Natural modes about a converged state, against closed forms and published results."""
import tomli as tomllib  # tomli: a declared dependency, so Python 3.10 works

import numpy as np
import pytest
import scipy.linalg as sla
from numpy.testing import assert_allclose
from scipy.optimize import brentq

import cablefe
from cablefe.elements import bar, beam
from cablefe.io.case import parse_case
from cablefe.solvers.modes import ModesError
from cablefe.vibration import modes as modes_of

G = 9.80665


def model_of(text: str):
    return cablefe.build_model(parse_case(tomllib.loads(text)))


def string_case(n=60, tension=1.0e4, mass_matrix="consistent", count=8, E="200 GPa", density=7850.0):
    return f"""
[units]
length = "m"
force = "N"
[materials.s]
E = "{E}"
density = "{density} kg/m^3"
[sections.s]
material = "s"
area = "1e-4 m^2"
[nodes]
A = [0, 0, 0]
B = [10, 0, 0]
[supports]
A = "all"
B = "all"
[[members]]
id = "S"
type = "bar"
nodes = ["A", "B"]
section = "s"
pretension = {tension}
divide = {n}
[[loads]]
case = "pre"
node = "A"
force = [0, 0, 0]
[modes]
count = {count}
mass_matrix = "{mass_matrix}"
"""


def solved_modes(text):
    model = model_of(text)
    found = modes_of(model)
    return model, found


# -- taut string and the shallow cable's swinging modes ------------------------------

def test_taut_string_frequencies_are_bracketed_by_lumped_and_consistent_mass(verify):
    # source: taut string f_n = (n / 2l) sqrt(T / m) (classical; e.g. Blevins 1979, Formulas for Natural Frequency and Mode Shape, ch. 7; from memory).
    # Linear elements: the discrete n-th frequency is off by about (n pi / N)^2 / 24, too high
    # with consistent mass and too low with lumped mass (dispersion of the discrete string).
    N, T, l = 60, 1.0e4, 10.0
    for mm, sign in (("consistent", 1.0), ("lumped", -1.0)):
        model, found = solved_modes(string_case(N, T, mm))
        m = found.total_mass / l            # mass per current length (stretched string)
        f = np.array([md.frequency for md in found.modes])
        for n in (1, 2, 3):
            exact = n / (2 * l) * np.sqrt(T / m)
            pair = f[2 * n - 2:2 * n]       # a vertical and a lateral mode of equal frequency
            err = (n * np.pi / N) ** 2 / 24
            verify.check(f"taut string, mode pair {n}, {mm} mass, 60 elements (with the discrete "
                         "dispersion (n pi / N)^2 / 24)",
                         "classical taut string f_n = (n / 2l) sqrt(T / m)", pair,
                         exact * (1 + sign * err), rtol=0.1 * err, unit="Hz")
        assert found.orthogonality < 1e-10
        assert {found.modes[0].kind, found.modes[1].kind} == {"vertical", "lateral"}


def sagging_cable_case(EA, n=80, count=10, extra=""):
    # span 100 m, weight 100 N/m: unstressed length for a sag of about 2 m (sag ratio 1/50)
    # with the stretch under H = w l^2 / (8 d) taken off (parabolic cable, Irvine 1981, ch. 2)
    H = 100.0 * 100.0 ** 2 / (8 * 2.0)
    L0 = 100.0 * (1 + 8 / 3 * 0.02 ** 2) / (1 + H / EA)
    return f"""
[units]
length = "m"
force = "N"
[materials.c]
E = {EA}
unit_weight = 100.0
[sections.c]
material = "c"
area = 1.0
[nodes]
A = [0, 0, 0]
B = [100, 0, 0]
[supports]
A = "pin"
B = "pin"
[[members]]
id = "C"
type = "cable"
nodes = ["A", "B"]
section = "c"
length0 = {L0}
divide = {n}
[[loads]]
case = "g"
self_weight = true
[analysis]
increments = 4
tolerance = 1e-11
[modes]
count = {count}
{extra}
"""


def _cable_state(model, found):
    res = cablefe.solve(model).items[0]
    H = float(res.responses["cable"].H[0])
    l = 100.0
    m = found.total_mass / l                # mass per horizontal length
    return H, m


def test_shallow_cable_swinging_modes(verify):
    # source: Irvine & Caughey 1974, Proc. R. Soc. A 341, 299-315 (out-of-plane modes of a
    # shallow cable: f_n = (n / 2l) sqrt(H / m), m per span length).  Shallow-cable theory
    # neglects terms of order (sag/span)^2 = 4e-4; discretisation (n pi / 80)^2 / 24 < 2e-3.
    model = model_of(sagging_cable_case(EA=1e9))
    found = modes_of(model)
    H, m = _cable_state(model, found)
    lateral = [md.frequency for md in found.modes if md.energy["lateral"] > 0.99][:3]
    exact = np.array([n / 200.0 * np.sqrt(H / m) for n in (1, 2, 3)])
    verify.check("out-of-plane modes 1-3 of a shallow cable (sag 1/50), 80 catenary elements",
                 "Irvine & Caughey 1974, Proc. R. Soc. A 341, f_n = (n / 2l) sqrt(H / m)",
                 lateral, exact, rtol=3e-3, unit="Hz")


def _symmetric_roots(lam2, count):
    """Roots of tan(w/2) = w/2 - (4/lam2)(w/2)^3 (Irvine & Caughey 1974), one per branch of tan."""
    h = lambda w: np.sin(w / 2) - np.cos(w / 2) * (w / 2 - 4 / lam2 * (w / 2) ** 3)  # noqa: E731
    eps = 1e-9
    return [brentq(h, (2 * k + 1) * np.pi + eps, (2 * k + 3) * np.pi - eps, xtol=1e-14)
            for k in range(count)]


@pytest.mark.parametrize("lam2_target", [12.0, 120.0])
def test_sagging_cable_in_plane_modes_below_and_above_the_crossover(lam2_target, verify):
    # source: Irvine & Caughey 1974, Proc. R. Soc. A 341, 299-315 (also Irvine 1981, Cable
    # Structures, ch. 3): antisymmetric in-plane modes omega_n = (2 n pi / l) sqrt(H/m); symmetric
    # ones solve tan(w/2) = w/2 - (4/lam^2)(w/2)^3, w = omega l / sqrt(H/m),
    # lam^2 = (m g l / H)^2 l / (H Le / EA), Le = l (1 + 8 (d/l)^2).  The first symmetric mode
    # lies below the first antisymmetric one for lam^2 < 4 pi^2 and above it beyond.
    d_over_l = 0.02
    H_guess = 100.0 * 100.0 ** 2 / (8 * 2.0)
    EA = lam2_target * H_guess * (1 + 8 * d_over_l ** 2) / (8 * d_over_l) ** 2
    model = model_of(sagging_cable_case(EA=EA))
    found = modes_of(model)
    H, m = _cable_state(model, found)
    res = cablefe.solve(model).items[0]
    z = res.state.positions[:, 2]
    d = -float(z.min())
    l = 100.0
    Le = l * (1 + 8 * (d / l) ** 2)
    lam2 = (m * G * l / H) ** 2 * l / (H * Le / EA)
    c = np.sqrt(H / m)
    antisym = [2 * n * np.pi / l * c / (2 * np.pi) for n in (1, 2)]
    sym = [w * c / l / (2 * np.pi) for w in _symmetric_roots(lam2, 2)]
    in_plane = [md for md in found.modes if md.energy["lateral"] < 1e-6]
    f = np.array([md.frequency for md in in_plane[:3]])
    expected = np.sort(antisym + sym)[:3]
    # shallow-cable theory drops terms of order (d/l)^2 and the cable's axial inertia: 1 %
    verify.check(f"lowest 3 in-plane modes of a sagging cable, lambda^2 = {lam2:.3g} "
                 f"({'below' if lam2 < 4 * np.pi ** 2 else 'above'} the crossover)",
                 "Irvine & Caughey 1974, Proc. R. Soc. A 341 (symmetric: tan(w/2) = w/2 - (4/lam^2)(w/2)^3; "
                 "antisymmetric: omega_n = (2 n pi / l) sqrt(H/m))", f, expected, rtol=1e-2, unit="Hz")
    first_symmetric_lower = sym[0] < antisym[0]
    assert first_symmetric_lower == (lam2 < 4 * np.pi ** 2)
    # the lowest in-plane mode is symmetric about midspan exactly when theory says so
    shape = found.shapes[found.modes.index(in_plane[0])][:, 2]
    x = res.state.positions[:, 0]
    mirror = np.argsort(np.abs(x[None, :] - (l - x)[:, None]), axis=1)[:, 0]
    symmetric = np.abs(shape + shape[mirror]).max() > np.abs(shape - shape[mirror]).max()
    assert symmetric == first_symmetric_lower


# -- beams ---------------------------------------------------------------------------

def beam_case(n, supports, L=10.0, count=6, E=2.1e11, rho=7850.0, extra="", Iy=2e-6, Iz=8e-6, A=1e-3, J=1e-6):
    nodes = "\n".join(f'N{k} = [{L * k / n}, 0, 0]' for k in range(n + 1))
    members = "\n".join(f'[[members]]\nid = "B{k}"\ntype = "beam"\nnodes = ["N{k}", "N{k + 1}"]\nsection = "b"'
                        for k in range(n))
    return f"""
[units]
length = "m"
force = "N"
[materials.m]
E = {E}
density = "{rho} kg/m^3"
[sections.b]
material = "m"
area = {A}
Iy = {Iy}
Iz = {Iz}
J = {J}
[nodes]
{nodes}
[supports]
{supports.format(last=n)}
{members}
[[loads]]
case = "none"
node = "N0"
force = [0, 0, 0]
[modes]
count = {count}
{extra}
"""


SIMPLY = 'N0 = "x y z rx"\nN{last} = "y z"'
CANTILEVER = 'N0 = "all"'


def test_simply_supported_beam_frequencies_converge_at_fourth_order(verify):
    # source: Blevins 1979, Formulas for Natural Frequency and Mode Shape, table 8-1
    # (simply supported Euler-Bernoulli beam: f_n = (n^2 pi / 2 L^2) sqrt(EI / m)), with the
    # section's rotary inertia (Rayleigh beam) exactly: omega^2 = EI k^4 / (m (1 + r^2 k^2)),
    # k = n pi / L, r^2 = I / A (Rayleigh 1877, Theory of Sound, §186; from memory).  Here
    # (r k)^2 = 8e-4 for n = 2: the rotary term is checked too.  Cubic Hermite elements with
    # consistent mass converge as h^4 (common practice).
    L, E, A, Iy, rho = 10.0, 2.1e11, 1e-3, 2e-6, 7850.0
    m = rho * A
    k = np.array([1, 2]) * np.pi / L
    exact = np.sqrt(E * Iy * k ** 4 / (m * (1 + Iy / A * k ** 2))) / (2 * np.pi)
    errors = []
    for n in (4, 8, 16):
        _, found = solved_modes(beam_case(n, SIMPLY))
        vertical = [md.frequency for md in found.modes if md.kind == "vertical"][:2]
        errors.append(abs(vertical[1] - exact[1]) / exact[1])
        if n == 16:
            # Hermite elements with consistent mass overestimate by about (k h)^4 / 1440
            # (h the element length; the fitted rate below confirms the order)
            bound = (k * L / n) ** 4 / 1440
            assert np.all(vertical > exact)
            verify.check("simply supported beam, vertical modes 1-2, 16 beam elements",
                         "Blevins 1979, Formulas for Natural Frequency and Mode Shape, table 8-1, with "
                         "Rayleigh's rotary-inertia term (Theory of Sound 1877, §186; from memory)",
                         vertical, exact, rtol=1.5 * float(bound.max()), unit="Hz")
            assert np.all(np.abs(vertical / exact - 1) < 1.5 * bound)
    rate = np.polyfit(np.log([4, 8, 16]), np.log(errors), 1)[0]
    assert -4.6 < rate < -3.4
    verify.check("simply supported beam, 4/8/16 beam elements: order of convergence of mode 2",
                 "Hermite elements with consistent mass converge as h^4 (common practice); reference "
                 "Blevins 1979, table 8-1 with Rayleigh's rotary inertia", -rate, 4.0, atol=0.6)


def test_cantilever_frequencies_vertical_and_lateral(verify):
    # source: Blevins 1979, Formulas for Natural Frequency and Mode Shape, table 8-1
    # (clamped-free beam: lambda_1 = 1.87510407, lambda_2 = 4.69409113; f = lambda^2/(2 pi L^2)
    # sqrt(EI/m)); lambda from the root of cos(l) cosh(l) + 1 = 0, computed here.
    L, E, A, Iy, Iz, rho = 10.0, 2.1e11, 1e-2, 2e-6, 8e-6, 7850.0
    m = rho * A
    lam = [brentq(lambda x: np.cos(x) * np.cosh(x) + 1, a, b, xtol=1e-14) for a, b in ((1, 3), (4, 6))]
    _, found = solved_modes(beam_case(20, CANTILEVER, count=6, A=A))
    for kind, I in (("vertical", Iy), ("lateral", Iz)):
        f = [md.frequency for md in found.modes if md.kind == kind][:2]
        exact = [x ** 2 / (2 * np.pi * L ** 2) * np.sqrt(E * I / m) for x in lam]
        # rotary inertia of the section (r^2 = I/A <= 8e-4 m^2) lowers f_2 by about
        # (lambda_2 r / L)^2 / 2 < 1e-4
        verify.check(f"cantilever, {kind} modes 1-2, 20 beam elements",
                     "Blevins 1979, Formulas for Natural Frequency and Mode Shape, table 8-1 "
                     "(roots of cos l cosh l + 1 = 0 by scipy)", f, exact, rtol=2e-4, unit="Hz")


def test_beam_mass_matrix_moves_rigidly_with_the_section(verify):
    # source: rigid-body kinetic energy (exact): a translation carries the mass m L, a rotation
    # about a transverse axis through the midpoint the inertia m L^3 / 12 + rho I L.
    rng = np.random.default_rng(3)
    frame = sla.qr(rng.standard_normal((3, 3)))[0]
    frame *= np.sign(np.linalg.det(frame))
    L, m, jx, ry, rz = 3.0, 12.0, 0.7, 0.3, 0.5
    M = beam.mass_matrix(frame[None], [L], [m], [jx], [ry], [rz])[0]
    xi, xj = np.zeros(3), frame[:, 0] * L
    mid = 0.5 * (xi + xj)
    for d in range(3):
        u = np.zeros(12)
        u[[d, 6 + d]] = 1.0
        verify.check(f"beam consistent mass: rigid translation along global {'xyz'[d]} carries m L",
                     "rigid-body kinetic energy (exact)", u @ M @ u, m * L, rtol=1e-12, unit="kg")
    for axis, rot in ((1, ry), (2, rz), (0, jx)):
        w = frame[:, axis]
        u = np.concatenate([np.cross(w, xi - mid), w, np.cross(w, xj - mid), w])
        expected = rot * L + (0.0 if axis == 0 else m * L ** 3 / 12)
        verify.check(f"beam consistent mass: rigid rotation about local axis {'xyz'[axis]}",
                     "rigid-body kinetic energy (exact): m L^3 / 12 + rho I L", u @ M @ u, expected,
                     rtol=1e-12, unit="kg m^2")
    assert_allclose(M, M.T, atol=1e-12)
    Mb = bar.mass_matrix([L], [m], lumped=False)[0]
    verify.check("bar consistent mass: rigid translation carries m L", "rigid-body kinetic energy (exact)",
                 np.ones(6) @ Mb @ np.ones(6) / 3, m * L, rtol=1e-12, unit="kg")


# -- modal properties ------------------------------------------------------------------

def frame_case(count):
    """A small braced portal of beams and a tie: every DOF mobile, all modes computable."""
    return f"""
[units]
length = "m"
force = "kN"
[materials.m]
E = "210 GPa"
density = "7850 kg/m^3"
[sections.b]
material = "m"
area = "2000 mm^2"
Iy = "4e6 mm^4"
Iz = "2e6 mm^4"
J = "1e6 mm^4"
[sections.t]
material = "m"
area = "300 mm^2"
[nodes]
A = [0, 0, 0]
B = [6, 1, 0]
C = [0, 0, 4]
D = [6, 1, 4.5]
[supports]
A = "all"
B = "pin"
[[members]]
id = "P1"
type = "beam"
nodes = ["A", "C"]
section = "b"
divide = 2
[[members]]
id = "P2"
type = "beam"
nodes = ["B", "D"]
section = "b"
divide = 2
[[members]]
id = "R"
type = "beam"
nodes = ["C", "D"]
section = "b"
divide = 3
[[members]]
id = "T"
type = "bar"
nodes = ["A", "D"]
section = "t"
pretension = 20
[[loads]]
case = "g"
self_weight = true
[modes]
count = {count}
masses = [{{ node = "C", mass = "0.5 t" }}, {{ members = "R", per_length = 40 }}]
"""


def test_effective_masses_of_all_modes_sum_to_the_mobile_mass(verify):
    # source: completeness of the M-orthonormal modes (exact): sum_k (phi_k^T M r)^2 = r^T M r.
    model = model_of(frame_case(count=1000))
    found = modes_of(model)
    assert found.method == "dense"
    n = int((~model.restrained).sum())
    assert len(found.modes) == n
    total = np.sum([md.effective_mass for md in found.modes], axis=0)
    verify.check("sum of the effective masses of all modes of a small frame (x, y, z)",
                 "completeness of M-orthonormal modes (exact)", total, found.mobile_mass, rtol=1e-9, unit="kg")
    assert_allclose(np.sum([md.effective_mass_ratio for md in found.modes], axis=0), 1.0, rtol=1e-9)
    # added masses: 500 kg on C and 40 kg/m on the 6.08 m rafter
    rafter = np.linalg.norm([6, 1, 0.5])
    verify.check("small frame: added mass 500 kg on a node plus 40 kg/m on the 6.08 m rafter",
                 "hand calculation from the case's masses", found.added_mass, 500 + 40 * rafter,
                 rtol=1e-12, unit="kg")
    assert_allclose(found.own_mass, found.self_weight_mass, rtol=1e-12)


def test_lanczos_agrees_with_the_dense_solution(verify):
    # source: scipy.linalg.eigh on the same matrices (an independent dense eigensolver)
    model = model_of(frame_case(count=5))
    found = modes_of(model)
    assert found.method == "shift-invert Lanczos"
    dense = modes_of(model_of(frame_case(count=1000)))
    verify.check("5 lowest modes of a small frame by shift-invert Lanczos",
                 "scipy.linalg.eigh on the same matrices (dense)", [m.frequency for m in found.modes],
                 [m.frequency for m in dense.modes[:5]], rtol=1e-9, unit="Hz")
    assert found.orthogonality < 1e-9


def test_frequencies_scale_with_the_root_of_stiffness_over_mass(verify):
    # source: omega^2 = k / m (exact): 9 E and 4 rho give 1.5 f for an unstressed structure
    base = modes_of(model_of(beam_case(8, SIMPLY)))
    scaled = modes_of(model_of(beam_case(8, SIMPLY, E=9 * 2.1e11, rho=4 * 7850.0)))
    verify.check("beam frequencies with 9 E and 4 rho", "omega^2 = k / m (exact): 1.5 times",
                 [m.frequency for m in scaled.modes], [1.5 * m.frequency for m in base.modes], rtol=1e-9,
                 unit="Hz")
    # a cable under its own weight: E and rho scaled together keep the shape and the tension
    # per unit mass, so every frequency stays
    text = sagging_cable_case(EA=1e8, n=20, count=4)
    a = modes_of(model_of(text))
    assert "E = 100000000.0" in text
    text = text.replace("E = 100000000.0", "E = 300000000.0").replace("unit_weight = 100.0", "unit_weight = 300.0")
    b = modes_of(model_of(text))
    verify.check("sagging cable with 3 E and 3 unit weight: frequencies unchanged",
                 "omega^2 = k / m with the shape and tension per unit mass kept (dimensional analysis, exact)",
                 [m.frequency for m in b.modes], [m.frequency for m in a.modes], rtol=1e-7, unit="Hz")


def test_a_string_without_tension_is_a_mechanism_with_a_clear_message():
    model = model_of(string_case(n=4, tension=0.0))
    with pytest.raises(ModesError, match="stiffness"):
        modes_of(model)


# -- pedestrians -------------------------------------------------------------------------

def girder_case(n=40, density=0.5, damping=0.01, width=2.0, extra=""):
    # simply supported girder, 30 m: f_1 = (pi / 2 L^2) sqrt(EI / m) = 1.94 Hz (plateau of psi)
    return beam_case(n, SIMPLY, L=30.0, count=4, E=2.1e11, rho=7850.0, Iy=2.3e-3, Iz=5e-2, A=0.05, J=1e-2,
                     extra=f"""[modes.pedestrians]
lane = "B*"
width = {width}
density = {density}
damping = {damping}
{extra}""").replace("area = 1e-3", "area = 0.05")


@pytest.mark.parametrize("density", [0.5, 1.2])
def test_resonant_acceleration_of_a_simply_supported_girder(density, verify):
    # source: steady-state resonance of one mode, a = F* / (2 xi M*) (Heinemeyer et al. 2009,
    # Design of Lightweight Footbridges for Human Induced Vibrations, EUR 23984 EN; from
    # memory); for sin(pi x / L) under p per length in the mode's sign, F* = 2 p L / pi and
    # M* = m L / 2, so a = 2 p / (pi xi m) (closed form, derived here).  Load per
    # length p = P n' psi b with P = 280 N, n' = 10.8 sqrt(xi n) / S below 1 P/m^2 and
    # 1.85 sqrt(n) / S from it, psi = 1 between 1.7 and 2.1 Hz (same source, from memory).
    L, b, xi = 30.0, 2.0, 0.01
    model = model_of(girder_case(density=density, damping=xi, width=b))
    found = modes_of(model)
    first = found.modes[0]
    assert first.kind == "vertical"
    assert 1.7 < first.frequency < 2.1
    S = b * L
    n = density * S
    n_eq = 10.8 * np.sqrt(xi * n) / S if density < 1.0 else 1.85 * np.sqrt(n) / S
    p = 280.0 * n_eq * 1.0 * b
    m = 7850.0 * 0.05
    c = first.pedestrians
    assert c.critical and c.direction == "vertical"
    # two known small departures, both lowering a: the lane integral of the shape
    # interpolated linearly between 40 nodes, (pi / 40)^2 / 12 = 5e-4, and the section's rotary
    # inertia in M*, (pi r / L)^2 = 5e-4 (r^2 = I / A)
    verify.check(f"resonant peak acceleration of a 30 m simply supported girder, {density} P/m^2",
                 "a = 2 p / (pi xi m) for sin(pi x / L) (closed form); p = P n' psi b by Heinemeyer et al. "
                 "2009, EUR 23984 EN (from memory)", c.acceleration, 2 * p / (np.pi * xi * m), rtol=2e-3,
                 unit="m/s^2")
    assert c.comfort_class == (1 if c.acceleration <= 0.5 else 2 if c.acceleration <= 1.0 else
                               3 if c.acceleration <= 2.5 else 4)


def test_pedestrian_constants_set_in_the_case_are_used():
    base = modes_of(model_of(girder_case())).modes[0].pedestrians
    doubled = modes_of(model_of(girder_case(extra='force_vertical = "560 N"'))).modes[0].pedestrians
    assert_allclose(doubled.acceleration, 2 * base.acceleration, rtol=1e-12)
    outside = modes_of(model_of(girder_case(extra="psi_vertical = [[2.5, 0], [3.0, 1], [3.5, 0]]\n"
                                                  "critical_vertical = [[2.5, 3.5]]"))).modes[0].pedestrians
    assert outside.acceleration == 0.0 and not outside.critical and outside.comfort_class == 1


# -- reader and command line ---------------------------------------------------------------

MM = 'mass_matrix = "consistent"'
BAD_MODES = [
    # (replace this, with that, key path, words)
    ("count = 8", "count = 0", "modes.count", "positive integer"),
    ("count = 8", "count = 8\nfrequencies = 3", "modes.frequencies", "unknown key"),
    ("count = 8", 'count = 8\nabout = "wind"', "modes.about", 'no result named "wind"'),
    ('mass_matrix = "consistent"', 'mass_matrix = "diagonal"', "modes.mass_matrix", "lumped"),
    ("count = 8", 'count = 8\nmasses = [{ node = "Q", mass = 5 }]', "modes.masses[0].node", "Q"),
    ("count = 8", 'count = 8\nmasses = [{ node = "A", mass = "5 kN" }]', "modes.masses[0].mass", "mass"),
    ("count = 8", 'count = 8\nmasses = [{ members = "X*", per_length = 5 }]', "modes.masses[0].members",
     "matches no member"),
    ("count = 8", 'count = 8\nmasses = [{ members = "S", mass = 5 }]', "modes.masses[0].mass", "per_length"),
    (MM, MM + '\n[modes.pedestrians]\nlane = "S"\nwidth = 2\ndensity = 0.5',
     "modes.pedestrians.damping", "missing"),
    (MM, MM + '\n[modes.pedestrians]\nlane = "S"\nwidth = 2\ndensity = 0.5\ndamping = 0.01\n'
     'force_vertical = 280\nforce_sideways = 35', "modes.pedestrians.force_sideways", "unknown key"),
    (MM, MM + '\n[modes.pedestrians]\nlane = "S"\nwidth = 2\ndensity = 0.5\ndamping = 1.5',
     "modes.pedestrians.damping", "below 1"),
    (MM, MM + '\n[modes.pedestrians]\nlane = "S"\nwidth = 2\ndensity = 0.5\ndamping = 0.01\n'
     "comfort_vertical = [1.0, 0.5, 2.5]", "modes.pedestrians.comfort_vertical", "increase"),
    (MM, MM + '\n[modes.pedestrians]\nlane = "S"\nwidth = 2\ndensity = 0.5\ndamping = 0.01\n'
     "psi_lateral = [[0.5, 0], [0.7, 2]]", "modes.pedestrians.psi_lateral[1][1]", "between 0 and 1"),
    (MM, MM + '\n[modes.pedestrians]\nlane = "S"\nwidth = 2\ndensity = 0.5\ndamping = 0.01\n'
     'critical_lateral = [["0.5 Hz", "1.2 m"]]', "modes.pedestrians.critical_lateral[0][1]", "frequency"),
]


@pytest.mark.parametrize("old,new,key,words", BAD_MODES)
def test_bad_modes_tables_name_the_key(tmp_path, capsys, old, new, key, words):
    from cablefe.cli import main
    text = string_case(n=4)
    assert old in text
    path = tmp_path / "case.toml"
    path.write_text(text.replace(old, new))
    out = tmp_path / "out"
    assert main(["modes", str(path), "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and f"{path}: {key}: " in err and words in err, err
    assert not out.exists()


def test_modes_command_writes_the_files_and_a_frequency_table(tmp_path, capsys):
    import json
    import meshio
    from cablefe.cli import main
    path = tmp_path / "girder.toml"
    path.write_text(girder_case(n=16))
    out = tmp_path / "out"
    assert main(["modes", str(path), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "f [Hz]" in text and "caution:" in text
    data = json.loads((out / "modes.json").read_text())
    first = data["modes"][0]
    for name in ("number", "frequency", "period", "generalised_mass", "effective_mass_ratio", "kind"):
        assert name in first
    assert set(first["pedestrians"]) >= {"critical", "acceleration", "comfort_class"}
    assert data["about"] == "none" and data["total_mass"] > 0
    assert data["pedestrians"]["constants"]["force_vertical"]["value"] == 280.0
    mesh = meshio.read(out / "modes.vtu")
    assert sorted(mesh.point_data) == [f"mode_{k}" for k in range(1, 5)]
    assert (out / "modes.pvd").exists() and (out / "modes.png").stat().st_size > 0


def test_a_case_without_modes_table_is_refused(tmp_path, capsys):
    from cablefe.cli import main
    path = tmp_path / "case.toml"
    path.write_text(string_case(n=4).split("[modes]")[0])
    assert main(["modes", str(path), "-o", str(tmp_path / "out")]) == 2
    assert "modes: the case has no [modes] table" in capsys.readouterr().err


def test_a_mechanism_is_one_line_and_exit_2(tmp_path, capsys):
    from cablefe.cli import main
    path = tmp_path / "case.toml"
    path.write_text(string_case(n=4, tension=0.0))
    assert main(["modes", str(path), "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "stiffness" in err


def test_run_on_a_generated_footbridge_reports_modes_and_comfort(tmp_path, capsys):
    import json
    from pathlib import Path
    from cablefe.cli import main
    case = Path(__file__).resolve().parent.parent / "cases" / "generated-suspension.toml"
    out = tmp_path / "out"
    assert main(["run", str(case), "-o", str(out), "--only", "permanent"]) == 0
    data = json.loads((out / "modes.json").read_text())
    assert data["about"] == "permanent" and len(data["modes"]) == 12
    assert all("pedestrians" in m for m in data["modes"])
    # the members' mass is their self-weight / g; the superimposed deck load is the added mass
    assert abs(data["own_mass"] - data["self_weight_mass"]) <= 1e-9 * data["self_weight_mass"]
    kinds = {m["kind"] for m in data["modes"]}
    assert {"vertical", "lateral", "torsional"} <= kinds


def test_slack_members_are_left_out_of_the_stiffness():
    # a weightless tension-only guy from the string's midpoint to the ground: slack, it must not
    # change a frequency; pretensioned, it stiffens the vertical modes
    base = string_case(n=4, count=4)
    guy = """
[materials.light]
E = "200 GPa"
unit_weight = 0
[sections.guy]
material = "light"
area = "1e-4 m^2"
[[members]]
id = "G"
type = "bar"
nodes = ["S.2", "P"]
section = "guy"
tension_only = true
{length}
"""
    ground = base.replace('B = [10, 0, 0]', 'B = [10, 0, 0]\nP = [5, 0, -3]').replace('B = "all"', 'B = "all"\nP = "all"')
    alone = [m.frequency for m in modes_of(model_of(base)).modes]
    slack = [m.frequency for m in modes_of(model_of(ground.replace("[[loads]]", guy.format(length="length0 = 3.5") + "\n[[loads]]"))).modes]
    taut = [m.frequency for m in modes_of(model_of(ground.replace("[[loads]]", guy.format(length="pretension = 500") + "\n[[loads]]"))).modes]
    assert_allclose(slack, alone, rtol=1e-12)
    assert taut[1] > 2 * alone[1]    # the first vertical mode is held at midspan by the guy


def test_lane_integral_of_a_sign_changing_element_matches_quadrature(verify):
    # source: scipy.integrate.quad of |a + (b - a) s / L| (an independent evaluation)
    from scipy.integrate import quad
    from cablefe.dynamics.pedestrians import lane_integral, reduction
    rng = np.random.default_rng(5)
    a, b, L = rng.standard_normal(20), rng.standard_normal(20), rng.uniform(0.5, 3.0, 20)
    expected = sum(quad(lambda s, a=a_, b=b_, L=L_: abs(a + (b - a) * s / L), 0, L_,
                        points=[L_ * a_ / (a_ - b_)] if a_ * b_ < 0 else None, epsabs=1e-13)[0]
                   for a_, b_, L_ in zip(a, b, L))
    verify.check("integral of |mode| over 20 random elements, some changing sign",
                 "scipy.integrate.quad of |a + (b - a) s / L|", lane_integral(a, b, L), expected, rtol=1e-10)
    # psi: 0 outside the corner points, linear between them
    corners = [[1.25, 0.0], [1.7, 1.0], [2.1, 1.0], [2.3, 0.0]]
    assert reduction(1.0, corners) == 0.0 and reduction(2.5, corners) == 0.0
    assert_allclose(reduction(1.475, corners), 0.5, rtol=1e-12)
    assert reduction(1.9, corners) == 1.0
