"""Command line: exit codes, messages, outputs."""
import json
import subprocess
import sys
from pathlib import Path

import meshio
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cablefe.cli import main

CASES = Path(__file__).resolve().parent.parent / "cases"


def run(*args):
    return subprocess.run([sys.executable, "-m", "cablefe.cli", *map(str, args)],
                          capture_output=True, text=True)


def test_check_prints_summary_with_units(capsys):
    assert main(["check", str(CASES / "hanger_deck.toml")]) == 0
    out = capsys.readouterr().out
    assert "total self-weight:" in out and " kN" in out
    assert "load cases: dead, deck, crowd-left, crowd-full" in out


@pytest.mark.parametrize("case", sorted(p.name for p in CASES.glob("*.toml")))
def test_every_shipped_case_runs(case, tmp_path, capsys):
    code = main(["run", str(CASES / case), "-o", str(tmp_path / "out")])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "caution:" in out and "licensed engineer" in out
    data = json.loads((tmp_path / "out" / "results.json").read_text())
    assert all(r["converged"] for r in data["results"].values())
    # the shipped structures are stable: no indefinite tangent on the way
    assert all(r["warnings"] == [] for r in data["results"].values())
    assert (tmp_path / "out" / "results.pvd").exists()


def test_meshes_agree_with_results_json(tmp_path):
    assert main(["solve", str(CASES / "hanger_deck.toml"), "-o", str(tmp_path)]) == 0
    data = json.loads((tmp_path / "results.json").read_text())
    res = data["results"]["crowd-left"]
    mesh = meshio.read(tmp_path / "crowd-left.vtu")
    ids = list(res["nodes"])
    # the first points of the mesh are the model's nodes, in results order
    pos = np.array([res["nodes"][n]["position"] for n in ids])
    disp = np.array([res["nodes"][n]["displacement"] for n in ids])
    assert_allclose(mesh.points[:len(ids)], pos, rtol=0, atol=1e-9)
    assert_allclose(mesh.point_data["displacement"][:len(ids)], disp, rtol=0, atol=1e-9)
    # the cell tension of each hanger (a straight bar) equals its member tension
    member = mesh.cell_data["member"][0]
    tension = mesh.cell_data["tension"][0]
    names = list(res["members"])
    for k, name in enumerate(names):
        if name.startswith("H"):
            assert_allclose(tension[member == k], res["members"][name]["tension"][0], rtol=1e-12)
    # the pvd lists every result
    pvd = (tmp_path / "results.pvd").read_text()
    for name in data["results"]:
        assert f'name="{name}"' in pvd


def test_nonconvergence_exits_1_and_keeps_results(tmp_path):
    case = tmp_path / "loose.toml"
    case.write_text("""
[materials.s]
E = "200 GPa"
[sections.s]
material = "s"
area = "1000 mm^2"
[nodes]
A = [0, 0, 0]
B = [10, 0, 0]
C = [20, 0, 0]
[supports]
A = "all"
C = "all"
[[members]]
id = "T1"
type = "bar"
nodes = ["A", "B"]
section = "s"
[[members]]
id = "T2"
type = "bar"
nodes = ["B", "C"]
section = "s"
[[loads]]
case = "p"
node = "B"
force = [0, 0, -1]
[analysis]
max_cuts = 2
""")
    r = run("solve", case, "-o", tmp_path / "out")
    assert r.returncode == 1
    assert "not converged" in r.stderr and "Traceback" not in r.stderr
    data = json.loads((tmp_path / "out" / "results.json").read_text())
    assert data["results"]["p"]["converged"] is False
    assert "mechanism" in data["results"]["p"]["message"]


def test_bad_input_exits_2_with_one_line_and_writes_nothing(tmp_path):
    case = tmp_path / "bad.toml"
    case.write_text((CASES / "heavy_cable.toml").read_text().replace('section = "rope"', 'section = "rpoe"'))
    r = run("solve", case, "-o", tmp_path / "out")
    assert r.returncode == 2
    assert r.stderr.strip().count("\n") == 0
    assert "bad.toml" in r.stderr and "members[0].section" in r.stderr and "rpoe" in r.stderr
    assert "Traceback" not in r.stderr
    assert not (tmp_path / "out").exists()


def test_usage_errors_exit_2(tmp_path):
    r = run("solve", CASES / "heavy_cable.toml")
    assert r.returncode == 2 and "Traceback" not in r.stderr
    r = run("check", tmp_path / "missing.toml")
    assert r.returncode == 2 and "missing.toml" in r.stderr
