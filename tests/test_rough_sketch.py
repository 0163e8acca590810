"""Target form-finding from a rough sketch: nodes off by up to a metre, no pretension, hangers at zero strain."""
import copy
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import tomli_w
from numpy.testing import assert_allclose

import cablefe
from cablefe.cli import main
from cablefe.model import build_model
from cablefe.solvers import formfind as ff
from cablefe.solvers.formfind import ShapeError, find_shape
from cablefe.spec import AdjustGroup, AnalysisSettings, Member, NodalLoad, Section, ShapeSpec
from conftest import make_spec

CASES = Path(__file__).resolve().parent.parent / "cases"


# ---------------------------------------------------------------------------
# rough sketches of the shipped shaped cases
# ---------------------------------------------------------------------------

def rough_sketch(case: Path, seed: int, offset: float = 1.0, tolerance: float | None = None) -> dict:
    """The case's TOML tables redrawn roughly, as an engineer's first sketch.

    Every node not on a beam is moved by a random offset of up to ``offset``
    (m) in its free directions (beams stay: their drawn shape is their
    stress-free shape, part of the problem); the adjusted cables and bars
    lose ``length0``/``pretension`` (zero strain as drawn) -- except members
    adjusted *together*, whose common factor acts on their relative lengths:
    these get the good drawing's lengths 2 % too long, so that the sketch
    poses the same equilibrium problem.  Members that are not adjusted keep
    their unstressed length (it is part of the problem too).
    """
    spec = cablefe.read_case(case)
    model = build_model(spec)
    raw = copy.deepcopy(dict(spec.raw))
    scale = spec.units.length_scale
    owner, _ = ff.target._adjust_owner(model, spec.shape)
    L0 = ff.member_lengths(model)
    counts = np.bincount(owner[owner >= 0])
    rng = np.random.default_rng(seed)
    turning = {model.node_ids[n] for n in np.flatnonzero(model.dof[:, 3] >= 0)}
    held = {}
    for name, value in raw.get("supports", {}).items():
        words = value.split() if isinstance(value, str) else list(value)
        held[name] = {"x", "y", "z"} if {"all", "pin"} & set(words) else set(words)
    for name, p in raw["nodes"].items():
        fixed = {"x", "y", "z"} if name in turning else held.get(name, set())
        d = rng.uniform(-1.0, 1.0, 3)
        d *= offset * rng.uniform(0.3, 1.0) / np.linalg.norm(d)
        raw["nodes"][name] = [float(p[k]) + (0.0 if a in fixed else float(d[k]) / scale)
                              for k, a in enumerate("xyz")]
    for k, (mem, entry) in enumerate(zip(spec.members, raw["members"])):
        assert entry["id"] == mem.id
        if mem.type not in ("cable", "bar"):
            continue
        entry.pop("pretension", None)
        entry.pop("length0", None)
        if owner[k] < 0:
            entry["length0"] = float(L0[k]) / scale
        elif counts[owner[k]] > 1:
            entry["length0"] = 1.02 * float(L0[k]) / scale
    if tolerance is not None:
        raw["shape"]["tolerance"] = tolerance
    return raw


def _read(raw: dict, path: Path):
    path.write_text(tomli_w.dumps(raw), encoding="utf-8")
    return cablefe.read_case(path)


def _length_bound(found, tol):
    """Largest change of each member's unstressed length that target misses of ``tol`` allow, m.

    Two shapes that both meet the targets within ``tol`` differ in the
    reached coordinates by at most 2 tol; to first order their unknown
    factors differ by at most ``|J^+| 2 tol`` (J the sensitivity of the
    targets to the factors at the found equilibrium), and a member's
    length by its length times that.  Doubled for the second-order terms
    of a step that large.
    """
    m = found.model
    owner, labels = ff.target._adjust_owner(m, m.spec.shape)
    tn, ta, _, _ = ff.target._target_list(m, m.spec.shape)
    start = {f: m.families[f].props["unstressed_length"].copy() for f in ("bar", "cable")}
    J = ff.target._target_jacobian(m, found.equilibrium, m.combined_loads(ff.permanent_factors(m.spec.shape)),
                            owner, start, m.dof[tn, ta], len(labels), "auto")
    per_factor = np.abs(np.linalg.pinv(J)).sum(axis=1) * 2.0 * tol
    out = np.zeros(len(m.members))
    adj = owner >= 0
    out[adj] = 2.0 * found.member_length0[adj] * per_factor[owner[adj]]
    return out


@pytest.mark.parametrize("name, seed, tolerance", [
    ("shaped_footbridge.toml", 7, None),
    ("generated-stayed.toml", 3, None),
    ("generated-arch.toml", 5, None),
    ("generated-suspension.toml", 1, 1e-8),
])
def test_rough_sketch_reaches_the_targets_and_the_same_lengths(name, seed, tolerance, tmp_path):
    case = CASES / name
    good_raw = copy.deepcopy(dict(cablefe.read_case(case).raw))
    if tolerance is not None:
        good_raw["shape"]["tolerance"] = tolerance
    good_spec = _read(good_raw, tmp_path / "good.toml")
    rough_spec = _read(rough_sketch(case, seed, tolerance=tolerance), tmp_path / "rough.toml")
    tol = good_spec.shape.tolerance
    good = find_shape(good_spec)
    rough = find_shape(rough_spec)
    # every target within the case's tolerance
    assert max(abs(t.miss) for t in rough.targets) <= tol
    assert [(t.node, t.axis) for t in rough.targets] == [(t.node, t.axis) for t in good.targets]
    # same equilibrium problem, same answer: the unstressed lengths agree
    # within what the target tolerance leaves open
    bound = _length_bound(good, tol)
    adjusted = bound > 0
    diff = np.abs(rough.member_length0 - good.member_length0)
    assert np.all(diff[adjusted] <= bound[adjusted]), (
        [(good.model.members[k].id, diff[k], bound[k]) for k in np.flatnonzero(diff > bound)][:5])
    # lengths that were not adjusted are the problem's, unchanged
    fixed = ~adjusted & np.isfinite(good.member_length0)
    assert_allclose(rough.member_length0[fixed], good.member_length0[fixed], rtol=1e-12)
    # the shaped case from the sketch stays put when solved again
    assert rough.largest_movement <= 1e-6 * ff.model_size(rough.model)
    assert rough.iterations >= 1 and rough.log


# ---------------------------------------------------------------------------
# closed form: a parabolic cable with vertical hangers under equal loads
# ---------------------------------------------------------------------------

def _hung_cable(n=8, a=5.0, P=2.0e4, sag=3.0, deck=-6.0, rough=0.0, seed=0, pretension=None,
                straight=False, tolerance=1e-9, rough_cable=True):
    """Main cable of bars C0..Cn between fixed ends, hangers Ci-Di, deck nodes Di loaded by P.

    Only y is held (a plane model): each deck node hangs from its hanger
    alone, so the hangers are vertical and the cable carries exactly P at
    each panel point.  Targets: the
    deck nodes at ``deck``, the cable's mid node at ``-sag``; unknowns: each
    hanger, one common factor on the main cable.
    """
    rng = np.random.default_rng(seed)
    nodes, supports = {}, {}
    for i in range(n + 1):
        z = 0.0 if straight else -sag * 4.0 * i * (n - i) / n**2
        dz = rng.uniform(-rough, rough) if 0 < i < n and rough_cable else 0.0
        nodes[f"C{i}"] = (i * a, 0.0, z + dz)
        supports[f"C{i}"] = (True,) * 6 if i in (0, n) else (False, True, False, True, True, True)
    for i in range(1, n):
        nodes[f"D{i}"] = (i * a, 0.0, deck + rng.uniform(-rough, rough))
        supports[f"D{i}"] = (False, True, False, True, True, True)
    hanger_pre = None if pretension is None else 0.1 * pretension
    members = [Member(f"S{i}", "bar", (f"C{i}", f"C{i + 1}"), "s", pretension=pretension) for i in range(n)]
    members += [Member(f"H{i}", "bar", (f"C{i}", f"D{i}"), "h", tension_only=True, pretension=hanger_pre)
                for i in range(1, n)]
    loads = [NodalLoad("p", f"D{i}", (0.0, 0.0, -P)) for i in range(1, n)]
    spec = make_spec(nodes, members, supports, loads=loads,
                     sections={"s": Section("s", "steel", area=2.0e-3), "h": Section("h", "steel", area=3.0e-4)},
                     analysis=AnalysisSettings(increments=4, tolerance=1e-11, max_iterations=40))
    targets = {f"C{n // 2}": {"z": -sag}}
    targets.update({f"D{i}": {"z": deck} for i in range(1, n)})
    return replace(spec, shape=ShapeSpec(method="target", permanent=("p",), tolerance=tolerance, targets=targets,
                                         adjust=(AdjustGroup(("S*",), together=True), AdjustGroup(("H*",)))))


@pytest.mark.parametrize("drawing, equal_panels", [
    (dict(), True),                                             # the parabola drawn, zero strain
    (dict(straight=True), False),                               # the cable drawn straight
    (dict(rough=1.0, seed=2, rough_cable=False), True),         # deck nodes off by up to a metre
    (dict(rough=1.0, seed=4, rough_cable=False, pretension=5e4), True),   # ... pretensions given
    (dict(rough=1.0, seed=3), False),                           # cable nodes off too
    (dict(rough=1.0, seed=4, pretension=5e4), False),
])
def test_rough_hung_cable_gives_the_parabolic_thrust(drawing, equal_panels, verify):
    n, a, P, d = 8, 5.0, 2.0e4, 3.0
    spec = _hung_cable(n, a, P, d, **drawing)
    found = find_shape(spec)
    res = found.equilibrium
    t = found.model.families["bar"]
    X = res.state.positions
    r = res.responses["bar"]
    main_cable = np.array([found.model.members[k].id.startswith("S") for k in t.member])
    dx = X[t.nodes[:, 1], 0] - X[t.nodes[:, 0], 0]
    H = (r.tension * dx / r.length)[main_cable]
    w, L = P / a, n * a
    x = X[:, 0]
    cable_nodes = np.array([nid.startswith("C") for nid in found.model.node_ids])
    xc = np.sort(x[cable_nodes])
    xs = xc[1:-1]
    # hangers hang plumb: each deck node right below its cable node
    for i in range(1, n):
        k, j = found.model.node_index[f"C{i}"], found.model.node_index[f"D{i}"]
        assert abs(X[k, 0] - X[j, 0]) <= 1e-9 * L
    # source: Irvine 1981, Cable Structures, ch. 2: a cable under vertical loads is the funicular of
    # the simply supported beam carrying them, H z(x) = -M(x) (exact statics), here with the loads P
    # at the found panel points; the sag is met to 1e-9 m of 3 m and equilibrium to 1e-11 of the
    # load, so 1e-8 relative
    R = P * np.sum(L - xs) / L
    x_mid = X[found.model.node_index[f"C{n // 2}"], 0]
    M_mid = R * x_mid - P * np.sum(np.clip(x_mid - xs, 0.0, None))
    verify.check(f"cable of 8 bar panels with hangers, 20 kN per deck node, shaped from a rough drawing "
                 f"({drawing or 'the parabola'}): horizontal force M_mid/d in every panel",
                 "Irvine 1981, Cable Structures, ch. 2: funicular of the simply supported beam, "
                 "H z(x) = -M(x) (exact statics)", H, M_mid / d, rtol=1e-8, unit="N")
    # source: Irvine 1981, ch. 2: H = w L^2 / (8 d), w per horizontal length; equal panel loads
    # P = w a give exactly that on panel points a apart (M_mid = P a n^2 / 8, n even): the only
    # departure is the shift of the panel points by the cable's stretch N/EA.  A cable drawn
    # otherwise than on the parabola keeps the proportions of its drawn segments (one common
    # factor on its lengths): its panel points are not a apart, and only the exact statics
    # above apply
    if equal_panels:
        strain = np.max(r.tension[main_cable]) / (2.0e11 * 2.0e-3)
        verify.check("same cable with equal panels: thrust wL^2/8d (tolerance 5 x the strain)",
                     "Irvine 1981, Cable Structures, ch. 2 (H = wL^2/8d)", H, w * L**2 / (8 * d),
                     rtol=5 * strain, unit="N")
    # hangers carry the deck loads, none slack in the final (exact) equilibrium
    hangers = ~main_cable
    assert not r.slack[hangers].any()
    verify.check("same cable: every hanger carries its deck load P", "statics of a deck node hung from "
                 "one vertical hanger", r.tension[hangers], P, rtol=1e-8, unit="N")
    assert max(abs(tr.miss) for tr in found.targets) <= spec.shape.tolerance


def test_old_failures_of_rough_drawings_are_gone_and_reported(caplog):
    # zero strain, cable of bars: Newton on the drawing stops at once on a mechanism
    found = find_shape(_hung_cable(rough=1.0, seed=3))
    assert found.log[0].startswith("start: no equilibrium of the drawing as given")
    assert "mechanism" in found.log[0]
    assert any(line.startswith("search:") for line in found.log)
    assert found.log[-1].startswith(f"{found.iterations} iteration(s) in all")
    # a good drawing starts from itself
    good = find_shape(_hung_cable(pretension=2.7e5))
    assert good.log[0] == "start: the drawing as given"


def test_a_target_that_needs_a_slack_hanger_fails_cleanly():
    # the deck asked above the cable: only a pushing hanger could hold it
    spec = _hung_cable()
    shape = replace(spec.shape, targets={**spec.shape.targets, "D4": {"z": 1.0}}, max_iterations=12)
    with pytest.raises(ShapeError) as err:
        find_shape(replace(spec, shape=shape))
    assert "D4 z" in str(err.value)


def test_cli_prints_how_the_rough_sketch_was_shaped(tmp_path, capsys):
    raw = rough_sketch(CASES / "shaped_footbridge.toml", seed=7)
    case = tmp_path / "sketch.toml"
    case.write_text(tomli_w.dumps(raw), encoding="utf-8")
    assert main(["shape", str(case), "-o", str(tmp_path / "shaped.toml")]) == 0
    out = capsys.readouterr().out
    assert "iteration 0: largest target miss" in out
    assert "start:" in out and "search:" in out and "iteration(s) in all" in out
    assert (tmp_path / "shaped.toml").exists() and (tmp_path / "shaped-cutting.csv").exists()


def test_warnings_of_intermediate_shapes_are_held_back(caplog, tmp_path):
    # this sketch passes through indefinite tangents on the way (logged as warnings by the
    # solver for a result); the found shape has none, and they are no warnings about it
    import logging
    spec = _read(rough_sketch(CASES / "shaped_footbridge.toml", seed=7), tmp_path / "rough.toml")
    with caplog.at_level(logging.INFO):
        found = find_shape(spec)
    assert found.equilibrium.converged and not found.equilibrium.outcome.warnings
    assert not [r for r in caplog.records if r.name.startswith("cablefe.solvers.") and r.levelno >= logging.WARNING]
    held = [r for r in caplog.records if "while searching:" in r.getMessage()]
    assert held and all(r.levelno == logging.INFO for r in held)
