"""Models drawn far from the origin (projected survey grids) give the results
of the same model drawn at the origin.

Reference: statics is invariant under a rigid translation of the whole
structure (loads, supports and members move with it), so forces, reactions
and displacements of the translated model are those of the original one,
exactly.  The translated geometry is made so that it is the same model: the
site coordinates are rounded once (as a survey file stores them) and the
origin model is that rounded geometry moved back by the (integer) offset,
which is exact in floating point.  Any difference is then the solver's own
round-off, which must stay at the level of the model's size: 1e-8 relative
is the issue's requirement (measured before the local origin: 2.3e-5 on the
half-span crowd of the generated suspension span at (5e5, 5e6, 300) m and
1.3e-3 at 1e9 m; after: 1e-10).
"""
import dataclasses
import json
from pathlib import Path

import meshio
import numpy as np
import pytest
from numpy.testing import assert_allclose

import cablefe
from cablefe.model import build_model, local_origin

CASES = Path(__file__).resolve().parent.parent / "cases"
OFFSETS = [(5e5, 5e6, 300.0), (1e9, 1e9, 1e9)]


def translate(spec, offset):
    """The case with every position (nodes, interior points, beam references) moved by ``offset`` m."""
    off = np.asarray(offset, dtype=float)

    def move(p):
        return tuple((np.asarray(p, dtype=float) + off).tolist())
    nodes = {k: move(v) for k, v in spec.nodes.items()}
    members = tuple(dataclasses.replace(m, interior=None if m.interior is None
                                        else tuple(move(p) for p in m.interior)) for m in spec.members)
    reference = {k: dataclasses.replace(b, position=move(b.position)) for k, b in spec.beam_reference.items()}
    return dataclasses.replace(spec, nodes=nodes, members=members, beam_reference=reference)


def pair(case, offset):
    far = translate(cablefe.read_case(CASES / case), offset)
    near = translate(far, -np.asarray(offset))     # exact: the same rounded geometry at the origin
    return near, far


def assert_same(ra, rb, names):
    for name in names:
        assert ra[name].converged and rb[name].converged
        fa, fb = ra.member_forces(name), rb.member_forces(name)
        scale = float(np.abs(fa.tension).max())
        for a, b in ((fa.tension, fb.tension), (fa.max_tension, fb.max_tension), (fa.min_tension, fb.min_tension)):
            assert_allclose(b, a, rtol=1e-8, atol=1e-8 * scale)
        reac_a, reac_b = ra[name].reactions, rb[name].reactions
        assert_allclose(reac_b, reac_a, rtol=1e-8, atol=1e-8 * float(np.abs(reac_a).max()))
        da, db = ra.displacements(name), rb.displacements(name)
        assert_allclose(db, da, rtol=1e-8, atol=1e-8 * float(np.abs(da).max()))


@pytest.mark.parametrize("offset", OFFSETS)
@pytest.mark.parametrize("case, names", [
    ("generated-suspension.toml", ["crowd-half", "cold"]),   # half-span crowd patch, beams and catenaries
    ("generated-net.toml", ["permanent"]),                   # a cable net
    ("stiffened_footbridge.toml", ["crowd-left"]),           # a beam deck
    ("heavy_cable.toml", ["trolley"]),                       # long catenaries
])
def test_translated_model_gives_the_same_results(case, names, offset):
    near, far = pair(case, offset)
    mn, mf = build_model(near), build_model(far)
    assert not np.any(mn.origin)            # drawn near the origin: local coordinates are the case's
    assert np.all(np.abs(mf.coordinates) < 64 * max(mf.size, 1.0))   # far: local ones stay small
    assert_same(cablefe.solve(mn, names), cablefe.solve(mf, names), names)


def test_outputs_stay_in_site_coordinates(tmp_path):
    offset = OFFSETS[0]
    _, far = pair("heavy_cable.toml", offset)
    model = build_model(far)
    res = cablefe.solve(model, ["trolley"])
    cablefe.write_results(res, tmp_path)
    data = json.loads((tmp_path / "results.json").read_text())
    L = model.spec.units.length_scale
    nodes = data["results"]["trolley"]["nodes"]
    for nid, xyz in far.nodes.items():
        entry = nodes[nid]
        # position = site coordinate + displacement, to the site's resolution
        assert_allclose(entry["position"], np.asarray(xyz) / L + np.asarray(entry["displacement"]),
                        rtol=0, atol=4 * np.spacing(5e6) / L)
    mesh = meshio.read(tmp_path / "trolley.vtu")
    site = res.positions("trolley") / L
    assert_allclose(mesh.points[:len(site)], site, rtol=0, atol=np.spacing(5e6))
    # interior curve points lie between the site extremes, not near the origin
    assert np.all(mesh.points[:, 1] > 4.9e6)


def test_local_origin_is_a_power_of_two_grid_point():
    # the origin is a multiple of a power of two, so local = site - origin is exact
    site = np.array([[5e5 + 0.1, 5e6 - 3.3, 300.7], [5e5 + 60.2, 5e6 + 2.1, 312.9]])
    o = local_origin(site)
    assert np.all(np.abs(site - o) < 16 * 64)
    assert_allclose((site - o) + o, site, rtol=0, atol=0)
    assert not np.any(local_origin(site - o))


def test_form_finding_on_a_survey_grid():
    # the shaped case (site coordinates, unstressed lengths) is the origin
    # model's, moved: targets are site coordinates too
    from cablefe.solvers.formfind import find_shape
    offset = np.asarray(OFFSETS[0])
    near, far = pair("generated-suspension.toml", offset)
    targets = {n: {a: v + offset["xyz".index(a)] for a, v in c.items()} for n, c in far.shape.targets.items()}
    far = dataclasses.replace(far, shape=dataclasses.replace(far.shape, targets=targets))
    a, b = find_shape(near), find_shape(far)
    xa = np.array([a.spec.nodes[k] for k in a.spec.nodes])
    xb = np.array([b.spec.nodes[k] for k in a.spec.nodes]) - offset
    # 10 ulp of a coordinate of 5e6 m: the resolution the shaped file is written with
    assert_allclose(xb, xa, rtol=0, atol=10 * np.spacing(5e6))
    assert_allclose(b.member_length0, a.member_length0, rtol=1e-9)
