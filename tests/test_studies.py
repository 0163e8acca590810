"""Live-load studies: influence lines, worst patches, sweeps, tolerances."""
from __future__ import annotations

import csv
import json

import numpy as np
import pytest
import tomli
from numpy.testing import assert_allclose, assert_array_equal

import cablefe
from cablefe.errors import CaseError
from cablefe.io.case import parse_case
from cablefe.io.studies_io import write_study
from cablefe.studies.base import session_for
from cablefe.studies.influence import influence_lines
from cablefe.studies.lane import patch_loads, point_load
from cablefe.studies.run import make_context, run_study, sweep_positions
from cablefe.studies.runner import Runner

from study_models import LANE, deck_case


def _spec(text):
    return parse_case(tomli.loads(text))


def _solved(text):
    model = cablefe.build_model(_spec(text))
    return cablefe.solve(model)


def _study_block(**kw):
    lines = ["[[studies]]"]
    for k, v in kw.items():
        lines.append(f"{k} = {v}")
    return "\n".join(lines) + "\n"


# -- influence lines ---------------------------------------------------------------

def test_influence_lines_match_central_differences_of_nonlinear_solves():
    """The adjoint influence line is the derivative of the nonlinear response
    with respect to the force at each lane point: compare with central
    differences (error O(h^2), Burden & Faires, Numerical Analysis, sec. 4.1)
    of full nonlinear solves from the base state."""
    text = deck_case(_study_block(name='"i"', kind='"influence"', path=LANE,
                                  watch='["D3", "D2", "H3", "H5", "MC0", "MC3", "D2-3"]'))
    results = _solved(text)
    study = results.model.spec.studies[0]
    ctx = make_context(results, study)
    session = session_for(ctx)
    infl = influence_lines(session, session.lane, study.load)
    names = {n: k for k, n in enumerate(infl.names)}
    h = 2000.0   # N: small next to the 8 kN/m deck load, large next to round-off
    w = ctx.watch
    node_pos = {results.model.node_ids[n]: k for k, n in enumerate(w.nodes)}
    mem_pos = {results.model.members[k].id: j for j, k in enumerate(w.members)}
    for j in (2, 3, 5):   # lane points D2, D3, D5
        s = float(session.lane.s[j])
        plus = session.solve(0, point_load(session.model, session.lane, s, (0, 0, -h)))
        minus = session.solve(1, point_load(session.model, session.lane, s, (0, 0, h)))
        assert plus.converged and minus.converged
        for node in ("D3", "D2"):
            fd = (plus.displacements[node_pos[node], 2] - minus.displacements[node_pos[node], 2]) / (2 * h)
            # tolerance: the O(h^2) truncation of a response whose
            # curvature is set by the small geometric nonlinearity here
            assert_allclose(infl.values[names[f"{node} uz"], j], fd, rtol=1e-3, atol=1e-12)
        for member in ("H3", "H5", "MC0", "MC3", "D2-3"):
            fd = (plus.max_tension[mem_pos[member]] - minus.max_tension[mem_pos[member]]) / (2 * h)
            assert_allclose(infl.values[names[f"{member} tension"], j], fd, rtol=1e-3, atol=1e-6)


def _beam_case(spans: int, studies: str) -> str:
    """A straight beam along x in the xz plane, ``spans`` equal spans of 8 m, 8 elements each."""
    n = 8 * spans
    xs = np.linspace(0.0, 8.0 * spans, n + 1)
    nodes = "\n".join(f"B{k} = [{x}, 0, 0]" for k, x in enumerate(xs))
    sup = []
    for k in range(n + 1):
        if k == 0:
            sup.append(f'B{k} = "x y z rx rz"')
        elif k % 8 == 0:
            sup.append(f'B{k} = "y z rx rz"')
        else:
            sup.append(f'B{k} = "y rx rz"')
    mem = "\n".join(f'[[members]]\nid = "E{k}"\ntype = "beam"\nnodes = ["B{k}", "B{k + 1}"]\nsection = "s"\n'
                    for k in range(n))
    lane = "[" + ", ".join(f'"B{k}"' for k in range(n + 1)) + "]"
    return f"""
[units]
length = "m"
force = "N"
[materials.steel]
E = "200 GPa"
[sections.s]
material = "steel"
area = "0.01 m^2"
Iy = "1e-4 m^4"
Iz = "1e-4 m^4"
J = "1e-4 m^4"
[nodes]
{nodes}
[supports]
{chr(10).join(sup)}
{mem}
[[loads]]
case = "none"
node = "B1"
force = [0, 0, 0]
[[studies]]
name = "i"
kind = "influence"
path = {lane}
load = [0, 0, -1]
{studies}
[analysis]
solver = "superlu"
""", xs


def test_influence_lines_of_a_simply_supported_beam_match_closed_forms(verify):
    """Unloaded beam: the tangent is the linear stiffness, so the influence
    lines are Müller-Breslau's.  Midspan deflection for a unit load at a
    (b = L - a), for c <= a: y(c) = b c (L^2 - b^2 - c^2) / (6 E I L), and by
    symmetry otherwise (Gere & Timoshenko, Mechanics of Materials, appendix
    G, simple beam with a concentrated load; from memory).  Left reaction:
    R_A = (L - a) / L (statics).  Euler-Bernoulli elements with nodal loads
    give exact nodal values, so only round-off separates them."""
    text, xs = _beam_case(1, 'watch = ["B0", "B4"]')
    results = _solved(text)
    study = results.model.spec.studies[0]
    session = session_for(make_context(results, study))
    infl = influence_lines(session, session.lane, study.load)
    names = {n: k for k, n in enumerate(infl.names)}
    L, EI, c = 8.0, 200e9 * 1e-4, 4.0
    a = xs
    b = L - a
    y = np.where(c <= a, b * c * (L**2 - b**2 - c**2), a * (L - c) * (L**2 - a**2 - (L - c)**2)) / (6 * EI * L)
    verify.check("influence line of the midspan deflection of a simply supported 8 m beam (unit load)",
                 "Müller-Breslau; Gere & Timoshenko, Mechanics of Materials, appendix G, simple beam with a "
                 "concentrated load (from memory)", infl.values[names["B4 uz"]], -y, rtol=1e-9,
                 atol=1e-9 * y.max(), unit="m/N")
    verify.check("influence line of the left reaction of the same beam, (L - a)/L",
                 "Müller-Breslau; statics", infl.values[names["B0 Rz"]], (L - a) / L, rtol=1e-9, atol=1e-9)


def test_influence_line_of_the_middle_reaction_of_a_two_span_beam(verify):
    """Two equal spans L: releasing the middle support, compatibility of the
    simply supported 2L beam (flexibility method; e.g. Hibbeler, Structural
    Analysis, influence lines of statically indeterminate beams) gives
    R_B = a (3 L^2 - a^2) / (2 L^3) for a unit load at a <= L from the end,
    and the mirror image on the other span."""
    text, xs = _beam_case(2, 'watch = ["B8"]')
    results = _solved(text)
    study = results.model.spec.studies[0]
    session = session_for(make_context(results, study))
    infl = influence_lines(session, session.lane, study.load)
    L = 8.0
    a = np.minimum(xs, 2 * L - xs)
    expected = a * (3 * L**2 - a**2) / (2 * L**3)
    verify.check("influence line of the middle reaction of a beam over two 8 m spans, a (3L^2 - a^2)/2L^3",
                 "flexibility method (e.g. Hibbeler, Structural Analysis, influence lines of statically "
                 "indeterminate beams)", infl.values[infl.names.index("B8 Rz")], expected, rtol=1e-9, atol=1e-9)


# -- worst patches ---------------------------------------------------------------------

def test_worst_patch_envelope_is_at_least_as_adverse_as_every_single_patch_on_the_grid():
    """Validation reference: for a linear model the envelope from loading the
    adverse parts of an influence line equals the worst of all patch
    positions (any structural analysis text on influence lines); here every
    single patch between lane nodes is solved nonlinearly by brute force."""
    text = deck_case(_study_block(name='"p"', kind='"patch"', path=LANE, load="[0, 0, -5]",
                                  watch='["D2", "D3", "H*", "MC0", "MC2"]'))
    results = _solved(text)
    study = results.model.spec.studies[0]
    out = run_study(results, study, Runner(workers=1))
    assert out.converged
    ctx = make_context(results, study)
    session = session_for(ctx)
    s = session.lane.s
    brute = [session.solve(0, patch_loads(session.model, session.lane, [(s[i], s[j])], (0, 0, -5000.0)))
             for i in range(len(s)) for j in range(i + 1, len(s))]
    assert all(r.converged for r in brute)
    D = np.stack([r.displacements for r in brute])
    Tmax = np.stack([r.max_tension for r in brute])
    Tmin = np.stack([r.min_tension for r in brute])
    # at least as adverse: a nonlinear response may exceed its linear patch
    # optimum only by second-order terms; allow 1e-3 of the live-load range
    d_range = np.ptp(D, axis=0)
    t_range = np.maximum(np.ptp(Tmax, axis=0), np.ptp(Tmin, axis=0))
    assert np.all(out.max_displacement[:, 2] >= D.max(axis=0)[:, 2] - 1e-3 * d_range[:, 2] - 1e-12)
    assert np.all(out.min_displacement[:, 2] <= D.min(axis=0)[:, 2] + 1e-3 * d_range[:, 2] + 1e-12)
    assert np.all(out.max_tension >= Tmax.max(axis=0) - 1e-3 * t_range)
    assert np.all(out.min_tension <= Tmin.min(axis=0) + 1e-3 * t_range)
    # the hangers' governing patches name intervals of the lane
    g = out.governing_member["max"][out.member_ids.index("H3")]
    assert g["intervals"] and all(0 <= a < b <= 24.0 for a, b in g["intervals"])


# -- sweeps ---------------------------------------------------------------------------------

def test_sweep_equals_the_same_positions_solved_as_combinations(tmp_path):
    """Each sweep position solved from the base state must be the equilibrium
    of base + patch that ``cablefe solve`` finds from the drawn geometry."""
    length, steps = 8.0, 4
    starts = sweep_positions(24.0, steps, length)
    live = "".join(f'[[loads]]\ncase = "p{k}"\npath = {LANE}\nper_length = [0, 0, -5]\n'
                   f"start = {float(a)!r}\nend = {float(a + length)!r}\n" for k, a in enumerate(starts))
    combos = "".join(f'[[combinations]]\nname = "s{k}"\nfactors = {{ dead = 1.0, deck = 1.0, p{k} = 1.0 }}\n'
                     for k in range(steps))
    text = deck_case(combos + _study_block(name='"w"', kind='"sweep"', path=LANE, load="[0, 0, -5]",
                                           length=length, steps=steps, base='"permanent"'), live=live)
    results = _solved(text)
    study = results.model.spec.studies[0]
    ctx = make_context(results, study)
    session = session_for(ctx)
    out = run_study(results, study, Runner(workers=1))
    assert out.converged and out.solves == steps
    m = results.model
    for k, a in enumerate(starts):
        r = session.solve(k, patch_loads(m, session.lane, [(a, a + length)], (0, 0, -5000.0)))
        ref = results.displacements(f"s{k}")[ctx.watch.nodes]
        mf = results.member_forces(f"s{k}")
        # both solves converge to a relative residual of 1e-10: forces agree
        # to that fraction of the largest (the beams' axial forces are ~0)
        ref_t = mf.max_tension[ctx.watch.members]
        assert_allclose(r.displacements, ref, rtol=0, atol=1e-9)
        assert_allclose(r.max_tension, ref_t, rtol=1e-7, atol=1e-9 * np.abs(ref_t).max())
        assert out.governing_member["max"][0] is not None


# -- tolerance ---------------------------------------------------------------------------------

def test_tolerance_scatter_matches_first_order_propagation(tmp_path, verify):
    """Standard deviation of tensions against the law of propagation of
    uncertainty for independent inputs, u_c^2 = sum (dT/dL0_i)^2 u_i^2
    (JCGM 100:2008, GUM, eq. 10), with dT/dL0_i by central differences of
    nonlinear solves.  The sample variance s^2 of n normal samples satisfies
    (n - 1) s^2 / sigma^2 ~ chi^2(n - 1) (e.g. Montgomery & Runger, Applied
    Statistics and Probability for Engineers, sec. 8.4); the test accepts
    the two-sided 99.9 % interval."""
    from scipy.stats import chi2
    sigma, n = 0.002, 60
    text = deck_case(_study_block(name='"t"', kind='"tolerance"', sigma='"2 mm"', samples=n, seed=7,
                                  watch='["D3", "H2", "H3", "MC0"]'))
    results = _solved(text)
    study = results.model.spec.studies[0]
    out = run_study(results, study, Runner(workers=1))
    assert out.converged
    ctx = make_context(results, study)
    session = session_for(ctx)
    m = session.model
    from cablefe.studies.tasks import LengthErrorTask
    grads = []
    h = 0.5e-3
    for k, mem in enumerate(m.members):
        if mem.family not in ("cable", "bar"):
            continue
        e = np.zeros(len(m.members))
        e[k] = h
        up, down = LengthErrorTask(0, e).run(session), LengthErrorTask(1, -e).run(session)
        grads.append((up.max_tension - down.max_tension) / (2 * h))
    predicted = np.sqrt(np.sum((np.array(grads) * sigma) ** 2, axis=0))
    ratio = (n - 1) * out.statistics["std_tension"] ** 2 / predicted**2
    lo, hi = chi2.ppf(0.0005, n - 1), chi2.ppf(0.9995, n - 1)
    # the two-sided interval [lo, hi] as its midpoint +- its half-width
    verify.check("60 samples of 2 mm length errors on a deck's cables: (n - 1) s^2 / u_c^2 of the watched "
                 "tensions inside the two-sided 99.9 % chi-square interval (shown: its midpoint)",
                 "JCGM 100:2008, GUM, eq. 10 (u_c by central differences of nonlinear solves); "
                 "Montgomery & Runger, Applied Statistics and Probability for Engineers, sec. 8.4; "
                 "scipy.stats.chi2", ratio, np.full(ratio.shape, 0.5 * (lo + hi)), rtol=0,
                 atol=0.5 * (hi - lo))

    # the statistics in envelope.json, recomputed with numpy from samples.csv
    write_study(out, m, tmp_path)
    env = json.loads((tmp_path / "envelope.json").read_text())
    with open(tmp_path / "samples.csv") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == n and [int(r["sample"]) for r in rows] == list(range(n))
    for mem in ("H2", "H3", "MC0"):
        T = np.array([float(r[f"{mem} tension"]) for r in rows])
        e = env["members"][mem]
        verify.check("tolerance study envelope.json: mean, 5 % and 95 % percentiles and largest tension "
                     "of each watched member, from samples.csv", "numpy mean, percentile and max",
                     [e["mean_tension"], e["p05_tension"], e["p95_tension"], e["max_tension"]],
                     [T.mean(), *np.percentile(T, [5, 95]), T.max()], rtol=1e-12)
        verify.check("tolerance study envelope.json: standard deviation of each watched member's tension",
                     "numpy std with ddof = 1 (sample standard deviation)", e["std_tension"],
                     T.std(ddof=1), rtol=1e-9)
    uz = np.array([float(r["D3 uz"]) for r in rows])
    verify.check("tolerance study envelope.json: standard deviation of a watched node's vertical displacement",
                 "numpy std with ddof = 1 (sample standard deviation)",
                 env["nodes"]["D3"]["std_displacement"][2], uz.std(ddof=1), rtol=1e-9)


# -- execution: in-process, local processes, Dask ------------------------------------

def test_local_processes_and_dask_give_identical_results():
    text = deck_case(_study_block(name='"p"', kind='"patch"', path=LANE, load="[0, 0, -5]",
                                  watch='["D3", "H2", "H3"]')
                     + _study_block(name='"t"', kind='"tolerance"', range='"0.1 %"', samples=4, seed=1,
                                    watch='["H3"]'), tolerance=1e-8)
    results = _solved(text)
    runs = {"here": Runner(workers=1), "processes": Runner(workers=2)}
    cluster = None
    try:
        from distributed import LocalCluster
    except ImportError:
        LocalCluster = None
    if LocalCluster is not None:
        cluster = LocalCluster(processes=False, n_workers=1, dashboard_address=None)
        runs["dask"] = Runner(scheduler=cluster.scheduler_address)
    try:
        for study in results.model.spec.studies:
            got = {k: run_study(results, study, r) for k, r in runs.items()}
            ref = got["here"]
            for k, o in got.items():
                assert_array_equal(o.max_displacement, ref.max_displacement)
                assert_array_equal(o.min_displacement, ref.min_displacement)
                assert_array_equal(o.max_tension, ref.max_tension)
                assert_array_equal(o.min_tension, ref.min_tension)
                assert o.governing_member == ref.governing_member
    finally:
        if cluster is not None:
            cluster.close()
    if LocalCluster is None:
        pytest.skip("distributed is not installed: the Dask run was not compared")


# -- case file ---------------------------------------------------------------------------------

@pytest.mark.parametrize("block, key, words", [
    (dict(name='"a"', kind='"patch"', path=LANE, load="[0, 0, -5]", colour='"red"'), "studies[0].colour",
     "unknown key"),
    (dict(name='"a"', kind='"patch"', path=LANE, load="[0, 0, -5]", samples=5), "studies[0].samples",
     "does not apply"),
    (dict(name='"a"', kind='"patch"', path=LANE), "studies[0].load", "missing"),
    (dict(name='"a"', kind='"wave"'), "studies[0].kind", "expected one of"),
    (dict(name='"a"', kind='"patch"', path=LANE, load="[0, 0, -5]", base='"storm"'), "studies[0].base",
     "permanent"),
    (dict(name='"a"', kind='"patch"', path='["D0", "D2"]', load="[0, 0, -5]"), "studies[0].path[1]",
     "not joined"),
    (dict(name='"a"', kind='"sweep"', path=LANE, load="[0, 0, -5]", steps=1), "studies[0].steps", ">= 2"),
    (dict(name='"a"', kind='"sweep"', path=LANE, load="[0, 0, -5]", steps=3, length='"30 m"'),
     "studies[0].length", "longer than the lane"),
    (dict(name='"a"', kind='"tolerance"', samples=5), "studies[0].sigma", "exactly one"),
    (dict(name='"a"', kind='"tolerance"', sigma='"2 kN"', samples=5), "studies[0].sigma", ""),
    (dict(name='"a"', kind='"influence"', path=LANE, watch='["Q*"]'), "studies[0].watch[0]", "matches no"),
    (dict(name='"a"', kind='"patch"', path=LANE, load='[0, 0, "5 kN"]'), "studies[0].load[2]", ""),
])
def test_bad_studies_are_rejected_with_their_key(block, key, words):
    with pytest.raises(CaseError) as exc:
        _spec(deck_case(_study_block(**block)))
    assert exc.value.key == key
    assert words in exc.value.message


def test_studies_are_read_in_si_units():
    spec = _spec(deck_case(
        _study_block(name='"s"', kind='"sweep"', path='"D*"', load="[0, 0, -5]", steps=3, length='"4000 mm"')
        + _study_block(name='"t"', kind='"tolerance"', sigma='"0.05 %"', samples=3)
        + _study_block(name='"u"', kind='"tolerance"', range=0.003, samples=3)))
    s, t, u = spec.studies
    assert s.path == ("D*",) and s.path_pattern and s.length == 4.0 and s.load == (0.0, 0.0, -5000.0)
    assert t.relative and t.sigma == pytest.approx(5e-4) and t.seed == 0
    assert not u.relative and u.range == 0.003


def test_member_pattern_lane_follows_the_case_order():
    text = deck_case(_study_block(name='"i"', kind='"influence"', path='"D*"', watch='["D3"]'))
    results = _solved(text)
    session = session_for(make_context(results, results.model.spec.studies[0]))
    assert [results.model.node_ids[n] for n in session.lane.nodes] == [f"D{k}" for k in range(7)]
    assert_allclose(session.lane.s, np.arange(7) * 4.0)


def test_study_command_writes_every_output(tmp_path):
    from cablefe.cli import main
    case = tmp_path / "deck.toml"
    case.write_text(deck_case(
        _study_block(name='"crowd"', kind='"patch"', path=LANE, load="[0, 0, -5]", watch='["D3", "H*"]')
        + _study_block(name='"walk"', kind='"sweep"', path=LANE, load="[0, 0, -20]", steps=3,
                       watch='["D3", "H3"]')))
    out = tmp_path / "out"
    assert main(["study", str(case), "-o", str(out), "--workers", "1"]) == 0
    folder = out / "studies" / "crowd"
    for name in ("envelope.json", "envelope.csv", "envelope.vtu", "influence.csv", "envelope.png",
                 "influence.png"):
        assert (folder / name).stat().st_size > 0
    env = json.loads((folder / "envelope.json").read_text())
    assert env["kind"] == "patch" and env["base"] == "permanent" and env["solves"] >= 1
    assert set(env["members"]["H3"]) >= {"max_tension", "min_tension", "slack", "governing"}
    header = (folder / "influence.csv").read_text().splitlines()[0].split(",")
    assert header[0] == "position" and "D3 uz" in header and "H3 tension" in header
    walk = json.loads((out / "studies" / "walk" / "envelope.json").read_text())
    assert walk["members"]["H3"]["governing"]["max"].keys() == {"position"}
    summary = json.loads((out / "results.json").read_text())["studies"]
    assert set(summary) == {"crowd", "walk"}
    assert main(["study", str(case), "-o", str(out), "--only", "nothing"]) == 2


def test_influence_lines_without_beams_agree_by_either_side_and_with_central_differences(monkeypatch):
    """A cable-and-bar model (symmetric tangent) with more responses than lane
    points: the lines formed per lane point (Maxwell-Betti reciprocity) equal
    the adjoint ones, and both the central differences of nonlinear solves
    (Burden & Faires, Numerical Analysis, sec. 4.1)."""
    from pathlib import Path
    import cablefe.studies.influence as influence
    src = (Path(__file__).parent.parent / "cases" / "hanger_deck.toml").read_text()
    block = _study_block(name='"i"', kind='"influence"', path='"D*"', watch='["D*", "H*", "C*"]')
    text = src.replace("[analysis]", block + "\n[analysis]")
    results = _solved(text)
    study = results.model.spec.studies[0]
    ctx = make_context(results, study)
    session = session_for(ctx)
    one = influence_lines(session, session.lane, study.load)
    assert len(one.names) > len(session.lane.s)
    monkeypatch.setattr(influence, "RECIPROCITY", False)
    other = influence_lines(session, session.lane, study.load)
    # the two differ by round-off of two solve orders: compare each kind of
    # response against the largest influence of that kind
    for kind in ("displacement", "tension", "reaction"):
        rows = [k for k, x in enumerate(one.kind) if x == kind]
        scale = np.abs(one.values[rows]).max()
        assert_allclose(one.values[rows], other.values[rows], rtol=0, atol=1e-9 * scale)
    names = {n: k for k, n in enumerate(one.names)}
    h = 500.0
    node_pos = {results.model.node_ids[n]: k for k, n in enumerate(ctx.watch.nodes)}
    mem_pos = {results.model.members[k].id: j for j, k in enumerate(ctx.watch.members)}
    for j in (3, 6):
        s = float(session.lane.s[j])
        plus = session.solve(0, point_load(session.model, session.lane, s, (0, 0, -h)))
        minus = session.solve(1, point_load(session.model, session.lane, s, (0, 0, h)))
        fd = (plus.displacements[node_pos["D6"], 2] - minus.displacements[node_pos["D6"], 2]) / (2 * h)
        assert_allclose(one.values[names["D6 uz"], j], fd, rtol=1e-3)
        for member in ("H3", "H6"):
            fd = (plus.max_tension[mem_pos[member]] - minus.max_tension[mem_pos[member]]) / (2 * h)
            assert_allclose(one.values[names[f"{member} tension"], j], fd, rtol=1e-3, atol=1e-6)


def test_a_failed_solve_is_marked_not_dropped(tmp_path, monkeypatch):
    from dataclasses import replace
    from cablefe.cli import main
    from cablefe.studies.base import Session
    real = Session.solve

    def failing(self, index, added, model=None):
        r = real(self, index, added, model)
        return replace(r, converged=False, message="made to fail") if index == 1 else r

    monkeypatch.setattr(Session, "solve", failing)
    case = tmp_path / "deck.toml"
    case.write_text(deck_case(_study_block(name='"walk"', kind='"sweep"', path=LANE, load="[0, 0, -20]",
                                           steps=3, watch='["D3", "H3"]')))
    out = tmp_path / "out"
    assert main(["run", str(case), "-o", str(out), "--workers", "1"]) == 1
    env = json.loads((out / "studies" / "walk" / "envelope.json").read_text())
    assert env["converged"] is False and env["solves"] == 3
    assert env["failures"] == [{"position": 12.0, "message": "made to fail"}]
    # the envelope comes from the solves that converged, never from the failed one
    assert env["members"]["H3"]["governing"]["max"] != {"position": 12.0}
    data = json.loads((out / "results.json").read_text())
    assert data["studies"]["walk"]["failed"] == 1 and "permanent" in data["results"]


def test_an_unreachable_scheduler_is_one_line_exit_2(tmp_path, capsys, monkeypatch):
    pytest.importorskip("distributed")
    import cablefe.studies.runner as runner
    from cablefe.cli import main
    monkeypatch.setattr(runner, "CONNECT_TIMEOUT", 2)
    case = tmp_path / "deck.toml"
    case.write_text(deck_case(_study_block(name='"walk"', kind='"sweep"', path=LANE, load="[0, 0, -20]",
                                           steps=2, watch='["D3"]')))
    code = main(["study", str(case), "-o", str(tmp_path / "out"), "--scheduler", "tcp://127.0.0.1:9"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "no Dask scheduler" in err[0]


def test_influence_lines_by_the_schur_complement_equal_those_by_solves(monkeypatch):
    """The same C K^-1 F by two routes of the linear layer (block elimination
    is exact in exact arithmetic: Golub & Van Loan 2013, Matrix Computations,
    sec. 3.2, from memory): only round-off may separate them."""
    from cablefe.solvers.linear import schur
    from cablefe.studies import influence
    text = deck_case(_study_block(name='"i"', kind='"influence"', path=LANE, watch='["D3", "H3", "MC3"]'))
    results = _solved(text)
    study = results.model.spec.studies[0]
    session = session_for(make_context(results, study))
    taken = []
    original = schur.schur_product

    def counted(*args):
        out = original(*args)
        taken.append(out is not None)
        return out
    monkeypatch.setattr(schur, "WORTH", 1e9)
    monkeypatch.setattr("cablefe.solvers.linear.solver.schur_product", counted)
    by_schur = influence_lines(session, session.lane, study.load)
    monkeypatch.setattr(influence, "SCHUR", False)
    by_solves = influence_lines(session, session.lane, study.load)
    assert taken == [True]
    scale = np.abs(by_solves.values).max(axis=1, keepdims=True)
    assert_allclose(by_schur.values, by_solves.values, rtol=0, atol=1e-10 * scale.max())
    for row, s in zip(np.abs(by_schur.values - by_solves.values), scale[:, 0]):
        assert row.max() <= 1e-9 * s
