"""Output folders: checked before any work, one consistent set, kept on interrupt, umask, field data."""
import json
import os
import signal
import stat
import subprocess
import sys
from pathlib import Path

import meshio
import numpy as np
import pytest

import cablefe
import cablefe.analysis
from cablefe.cli import main
from cablefe.io.atomic import MANIFEST, ResultFolder, atomic_path, clean_stale_temporaries

CASES = Path(__file__).resolve().parent.parent / "cases"
CASE = CASES / "heavy_cable.toml"          # three results: self-weight, trolley, trolley-cold
NAMES = ["self-weight", "trolley", "trolley-cold"]


def run(*args, **kw):
    return subprocess.run([sys.executable, "-m", "cablefe.cli", *map(str, args)],
                          capture_output=True, text=True, **kw)


def _one_line(stderr: str) -> str:
    lines = stderr.strip().splitlines()
    assert len(lines) == 1, stderr
    assert "Traceback" not in stderr
    return lines[0]


def _listing(folder: Path) -> dict:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


# ---------------------------------------------------------------------------
# the output path is checked before any solving or shaping
# ---------------------------------------------------------------------------

@pytest.fixture
def no_solving(monkeypatch):
    """Fail the test if anything is solved or shaped (the check must come first)."""
    def boom(*a, **k):
        raise AssertionError("solved before the output folder was checked")
    monkeypatch.setattr(cablefe.analysis, "solve_combination", boom)
    import cablefe.solvers.formfind as ff
    monkeypatch.setattr(ff, "find_shape", boom)


def test_output_that_is_a_file_is_refused_before_solving(tmp_path, capsys, no_solving):
    target = tmp_path / "out"
    target.write_text("my notes")
    assert main(["solve", str(CASE), "-o", str(target)]) == 2
    line = _one_line(capsys.readouterr().err)
    assert str(target) in line and "existing file" in line
    assert target.read_text() == "my notes"


def test_output_under_a_file_is_refused(tmp_path, capsys, no_solving):
    (tmp_path / "f").write_text("x")
    target = tmp_path / "f" / "deeper" / "out"
    assert main(["run", str(CASE), "-o", str(target)]) == 2
    line = _one_line(capsys.readouterr().err)
    assert str(target) in line and "is a file" in line
    assert sorted(p.name for p in tmp_path.iterdir()) == ["f"]


def test_read_only_folder_and_unwritable_parent_are_refused(tmp_path, capsys, no_solving):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(stat.S_IRUSR | stat.S_IXUSR)
    try:
        assert main(["solve", str(CASE), "-o", str(ro)]) == 2
        line = _one_line(capsys.readouterr().err)
        assert str(ro) in line and "not writable" in line
        # a folder to be made inside it
        assert main(["solve", str(CASE), "-o", str(ro / "new" / "out")]) == 2
        line = _one_line(capsys.readouterr().err)
        assert str(ro / "new" / "out") in line and "not writable" in line and str(ro) in line
        # the shaped case of `shape -o`
        shaped = ro / "bridge.toml"
        assert main(["shape", str(CASES / "shaped_footbridge.toml"), "-o", str(shaped)]) == 2
        line = _one_line(capsys.readouterr().err)
        assert str(shaped) in line and "not writable" in line
        assert list(ro.iterdir()) == []
    finally:
        ro.chmod(stat.S_IRWXU)


def test_shape_output_that_is_a_folder_is_refused(tmp_path, capsys, no_solving):
    (tmp_path / "bridge.toml").mkdir()
    assert main(["shape", str(CASES / "shaped_footbridge.toml"), "-o", str(tmp_path / "bridge.toml")]) == 2
    line = _one_line(capsys.readouterr().err)
    assert "bridge.toml" in line and "existing folder" in line


def test_bad_input_writes_nothing_into_an_existing_folder(tmp_path):
    out = tmp_path / "out"
    assert main(["solve", str(CASE), "-o", str(out)]) == 0
    before = _listing(out)
    bad = tmp_path / "bad.toml"
    bad.write_text(CASE.read_text().replace('section = "rope"', 'section = "rpoe"'))
    r = run("solve", bad, "-o", out)
    assert r.returncode == 2
    assert "members[0].section" in _one_line(r.stderr)
    assert _listing(out) == before
    assert [p.name for p in out.iterdir() if p.is_dir()] == []


# ---------------------------------------------------------------------------
# what converged is written when a later result fails or is stopped
# ---------------------------------------------------------------------------

def _stop_after(monkeypatch, count, exc):
    real = cablefe.analysis.solve_combination
    calls = []

    def solve_combination(*a, **k):
        if len(calls) == count:
            raise exc
        calls.append(a[1])
        return real(*a, **k)

    monkeypatch.setattr(cablefe.analysis, "solve_combination", solve_combination)


def test_interrupt_after_the_first_result_keeps_it_and_marks_the_rest(tmp_path, capsys, monkeypatch):
    out = tmp_path / "out"
    _stop_after(monkeypatch, 1, KeyboardInterrupt())
    assert main(["solve", str(CASE), "-o", str(out)]) == 130
    err = capsys.readouterr().err
    line = _one_line(err)
    assert "interrupted while solving trolley" in line and "trolley-cold" in line
    data = json.loads((out / "results.json").read_text())
    assert list(data["results"]) == ["self-weight"]
    assert data["results"]["self-weight"]["converged"] is True
    assert data["incomplete"]["not_solved"] == ["trolley", "trolley-cold"]
    assert "interrupted" in data["incomplete"]["reason"]
    # the set is consistent: one mesh, the pvd lists only it, no staging or temporaries left
    assert sorted(p.name for p in out.iterdir()) == sorted([MANIFEST, "results.json", "results.pvd",
                                                            "self-weight.vtu"])
    assert 'name="trolley"' not in (out / "results.pvd").read_text()


def test_interrupted_overwrite_leaves_no_old_meshes_beside_new_results(tmp_path, capsys, monkeypatch):
    out = tmp_path / "out"
    assert main(["solve", str(CASE), "-o", str(out)]) == 0
    assert {p.name for p in out.glob("*.vtu")} == {f"{n}.vtu" for n in NAMES}
    user = out / "my-notes.txt"
    user.write_text("keep me")
    _stop_after(monkeypatch, 1, KeyboardInterrupt())
    assert main(["solve", str(CASE), "-o", str(out)]) == 130
    # the old trolley meshes belonged to the previous set: removed with it
    assert {p.name for p in out.glob("*.vtu")} == {"self-weight.vtu"}
    assert user.read_text() == "keep me"
    manifest = json.loads((out / MANIFEST).read_text())
    assert manifest["state"] == "complete"
    assert sorted(manifest["files"]) == ["results.json", "results.pvd", "self-weight.vtu"]


def test_a_result_that_raises_keeps_what_was_solved(tmp_path, capsys, monkeypatch):
    out = tmp_path / "out"
    # an unexpected error (a defect, not a numerical failure) stops the run
    _stop_after(monkeypatch, 2, TypeError("element 17: frame lost"))
    assert main(["solve", str(CASE), "-o", str(out)]) == 1
    line = _one_line(capsys.readouterr().err)
    assert "trolley-cold" in line and "frame lost" in line
    data = json.loads((out / "results.json").read_text())
    assert list(data["results"]) == ["self-weight", "trolley"]
    assert data["incomplete"]["not_solved"] == ["trolley-cold"]
    # a numerical failure is that result's failure (here of every result after the first):
    # the run goes on, and all are written
    monkeypatch.undo()
    _stop_after(monkeypatch, 1, ValueError("element 17: frame lost"))
    assert main(["solve", str(CASE), "-o", str(out)]) == 1
    assert "not converged: trolley" in capsys.readouterr().err
    data = json.loads((out / "results.json").read_text())
    assert list(data["results"]) == NAMES and "incomplete" not in data
    assert [data["results"][n]["converged"] for n in NAMES] == [True, False, False]


def test_interrupt_before_any_result_keeps_the_earlier_set(tmp_path, capsys, monkeypatch):
    out = tmp_path / "out"
    assert main(["solve", str(CASE), "-o", str(out)]) == 0
    before = _listing(out)
    _stop_after(monkeypatch, 0, KeyboardInterrupt())
    assert main(["solve", str(CASE), "-o", str(out)]) == 130
    assert "nothing written" in capsys.readouterr().err
    assert _listing(out) == before


def test_sigterm_writes_what_was_solved(tmp_path):
    # a run slowed down after its first result, then terminated
    out = tmp_path / "out"
    script = tmp_path / "slow.py"
    script.write_text(f"""
import sys, time
import cablefe.analysis
from cablefe.cli import main
real = cablefe.analysis.solve_combination
def slow(*a, **k):
    if a[1] != "self-weight":
        print("first done", flush=True)
        time.sleep(60)
    return real(*a, **k)
cablefe.analysis.solve_combination = slow
sys.exit(main(["solve", {str(CASE)!r}, "-o", {str(out)!r}]))
""")
    env = dict(os.environ, PYTHONPATH=str(Path(cablefe.__file__).parent.parent))
    p = subprocess.Popen([sys.executable, str(script)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                         text=True, env=env)
    try:
        assert p.stdout.readline().strip() == "first done"
        p.send_signal(signal.SIGTERM)
        _, err = p.communicate(timeout=60)
    finally:
        if p.poll() is None:
            p.kill()
    assert p.returncode == 130, err
    assert "interrupted while solving trolley" in err and "Traceback" not in err
    data = json.loads((out / "results.json").read_text())
    assert list(data["results"]) == ["self-weight"]


# ---------------------------------------------------------------------------
# stale files of killed runs, umask, field data
# ---------------------------------------------------------------------------

def test_temporaries_and_staging_of_killed_runs_are_cleaned(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    # a process id that is not running: the child of a finished subprocess
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    stale = [out / f".results.json.{dead}-0123abcd.cablefe-tmp.json",
             out / f".trolley.vtu.{dead}-89abcdef.cablefe-tmp.vtu.mesh",
             out / ".results.json.k2j4h5g6.json"]          # the earlier mkstemp naming
    for p in stale:
        p.write_text("half")
    staging = out / f".cablefe-staging-{dead}-00ff00ff"
    staging.mkdir()
    (staging / "results.json").write_text("half")
    # the same names from a live process (this one) and a user's hidden file stay
    live = out / f".results.json.{os.getpid()}-0123abcd.cablefe-tmp.json"
    live.write_text("being written")
    user = out / ".notes.abcdefgh.txt"
    user.write_text("mine")
    # the earlier naming is only recognised beside files cablefe wrote
    (out / "results.pvd").write_text('<VTKFile><Collection><DataSet file="trolley.vtu"/></Collection></VTKFile>')
    removed = clean_stale_temporaries(out, ["results.json", "results.pvd"])
    assert set(removed) == {*stale, staging}
    assert main(["solve", str(CASE), "-o", str(out)]) == 0
    names = {p.name for p in out.iterdir()}
    assert not any(p.name in names for p in stale) and staging.name not in names
    assert live.exists() and user.exists()
    # the legacy pvd's files were cablefe's: replaced by the new set
    assert {p.name for p in out.glob("*.vtu")} == {f"{n}.vtu" for n in NAMES}


def test_written_files_follow_the_umask(tmp_path):
    old = os.umask(0o027)
    try:
        out = tmp_path / "out"
        assert main(["run", str(CASE), "-o", str(out)]) == 0
        with atomic_path(tmp_path / "single.txt") as tmp:
            tmp.write_text("x")
    finally:
        os.umask(old)
    files = [p for p in out.iterdir() if p.is_file()] + [tmp_path / "single.txt"]
    assert len(files) > 5
    for p in files:
        assert stat.S_IMODE(p.stat().st_mode) == 0o640, p
    assert stat.S_IMODE(out.stat().st_mode) == 0o750
    old = os.umask(0o002)
    try:
        out2 = tmp_path / "out2"
        cablefe.write_results(cablefe.solve(cablefe.load_model(CASE), names=["trolley"]), out2)
    finally:
        os.umask(old)
    assert {stat.S_IMODE(p.stat().st_mode) for p in out2.iterdir() if p.is_file()} == {0o664}


def test_not_converged_result_is_marked_in_its_mesh(tmp_path):
    results = cablefe.solve(cablefe.load_model(CASE))
    out = tmp_path / "out"
    # a tension-only hanger: carries the pull down, goes slack (a mechanism) when pushed up
    bad = tmp_path / "hanger.toml"
    bad.write_text("""
[materials.s]
E = "200 GPa"
[sections.s]
material = "s"
area = "1000 mm^2"
[nodes]
A = [0, 0, 10]
B = [0, 0, 0]
[supports]
A = "all"
B = "x y"
[[members]]
id = "T"
type = "bar"
nodes = ["A", "B"]
section = "s"
tension_only = true
[[loads]]
case = "down"
node = "B"
force = [0, 0, -1]
[[loads]]
case = "up"
node = "B"
force = [0, 0, 1]
[analysis]
max_cuts = 2
""")
    r = run("solve", bad, "-o", out)
    assert r.returncode == 1 and "not converged: up" in r.stderr
    data = json.loads((out / "results.json").read_text())
    for name in ("down", "up"):
        mesh = meshio.read(out / f"{name}.vtu")
        res = data["results"][name]
        assert int(mesh.field_data["converged"][0]) == int(res["converged"])
        assert float(mesh.field_data["load_factor"][0]) == res["load_factor"]
    assert data["results"]["down"]["converged"] is True and data["results"]["up"]["converged"] is False
    # and a converged library result reads back as converged, load factor 1
    cablefe.write_results(results, tmp_path / "lib")
    mesh = meshio.read(tmp_path / "lib" / "trolley.vtu")
    assert mesh.field_data["converged"].tolist() == [1]
    np.testing.assert_array_equal(mesh.field_data["load_factor"], [1.0])


def test_result_folder_discards_its_staging_on_error(tmp_path):
    out = tmp_path / "a" / "out"
    with pytest.raises(RuntimeError):
        with ResultFolder(out) as f:
            (f.staging / "results.json").write_text("{}")
            raise RuntimeError("writer failed")
    # the folders this run made are gone again; an existing one stays, with its files
    assert not (tmp_path / "a").exists() and tmp_path.exists()
    out.mkdir(parents=True)
    (out / "mine.txt").write_text("x")
    with pytest.raises(RuntimeError):
        with ResultFolder(out):
            raise RuntimeError("writer failed")
    assert sorted(p.name for p in out.iterdir()) == ["mine.txt"]


def test_folders_of_a_set_replace_the_previous_sets_and_keep_a_users(tmp_path):
    out = tmp_path / "out"
    (out / "studies").mkdir(parents=True)
    (out / "studies" / "notes.txt").write_text("a user's own folder of that name")
    with ResultFolder(out) as f:
        (f.staging / "studies" / "crowd").mkdir(parents=True)
        (f.staging / "studies" / "crowd" / "envelope.json").write_text("{}")
        (f.staging / "results.json").write_text("{}")
    assert (out / "studies" / "crowd" / "envelope.json").exists()
    kept = [p for p in out.iterdir() if p.name.startswith("studies.before-")]
    assert len(kept) == 1 and (kept[0] / "notes.txt").read_text().startswith("a user's")
    # the next set's studies replace this set's; a set without them removes them
    with ResultFolder(out) as f:
        (f.staging / "studies" / "wind").mkdir(parents=True)
        (f.staging / "studies" / "wind" / "envelope.json").write_text("{}")
    assert [p.name for p in (out / "studies").iterdir()] == ["wind"]
    with ResultFolder(out) as f:
        (f.staging / "results.json").write_text("{}")
    assert not (out / "studies").exists() and kept[0].exists()
    assert sorted(p.name for p in out.iterdir() if not p.name.startswith(".")) == sorted(["results.json", kept[0].name])


def test_section_diameters_reach_the_member_lookup_and_the_meshes(tmp_path):
    # hanger_deck.toml: main cables 70 mm, hangers 18 mm, a deck beam with none
    import csv
    out = tmp_path / "out"
    assert main(["run", str(CASES / "hanger_deck.toml"), "-o", str(out)]) in (0, 1)
    rows = {r["member"]: r for r in csv.DictReader(open(out / "members.csv"))}
    by_section = {r["section"]: r["diameter_m"] for r in rows.values()}
    assert by_section["main"] == "0.07" and by_section["hanger"] == "0.018" and by_section["deck"] == ""
    vtu = next(p for p in out.glob("*.vtu"))
    mesh = meshio.read(vtu)
    diameter = mesh.cell_data["diameter"][0]
    section = np.array([r["section"] for r in sorted(rows.values(), key=lambda r: int(r["index"]))])
    cells = section[mesh.cell_data["member"][0]]
    # 18 mm and 70 mm in m (the case's length unit), to the round-off of the unit conversion
    np.testing.assert_allclose(diameter[cells == "hanger"], 0.018, rtol=1e-12)
    np.testing.assert_allclose(diameter[cells == "main"], 0.07, rtol=1e-12)
    assert np.all(np.isnan(diameter[cells == "deck"]))


def test_modes_alone_adds_to_the_folder_set_and_study_alone_replaces_it(tmp_path):
    # cablefe modes -o OUT beside a solve: its files join OUT's manifest and
    # the solve's stay; cablefe study -o OUT writes its own set (results.json
    # of the base results and studies/), so the solve's meshes leave
    case = CASES / "generated-arch.toml"
    out = tmp_path / "out"
    assert main(["solve", str(case), "-o", str(out)]) in (0, 1)
    solved = set(json.loads((out / MANIFEST).read_text())["files"])
    assert "results.json" in solved and any(n.endswith(".vtu") for n in solved)
    assert main(["modes", str(case), "-o", str(out)]) == 0
    listed = set(json.loads((out / MANIFEST).read_text())["files"])
    assert listed == solved | {"modes.json", "modes.vtu", "modes.pvd", "modes.png"}
    assert all((out / n).exists() for n in listed)
    assert not [p for p in out.iterdir() if p.name.startswith(".cablefe-")and p.name != MANIFEST]
    assert main(["study", str(case), "-o", str(out), "--workers", "1"]) in (0, 1)
    listed = set(json.loads((out / MANIFEST).read_text())["files"])
    assert listed == {"results.json", "studies"}
    assert sorted(p.name for p in out.iterdir() if p.name != MANIFEST) == ["results.json", "studies"]
    assert (out / "studies").is_dir() and any((out / "studies").rglob("envelope.json"))
