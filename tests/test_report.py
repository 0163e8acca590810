"""`cablefe run` report (report.html), plots and the design outputs."""
import csv
import json
import os
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import meshio
import numpy as np
import pytest

from cablefe import CAUTION
from cablefe.cli import main
from cablefe.report.html import SECTIONS, _design

CASES = Path(__file__).resolve().parent.parent / "cases"


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.ids, self.refs, self.tags, self.text = set(), [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for k, v in attrs:
            if k == "id":
                self.ids.add(v)
            if k in ("src", "href", "srcset", "data", "action", "poster") and v is not None:
                self.refs.append((tag, k, v))

    def handle_data(self, data):
        self.text.append(data)


def _parse(text):
    p = _Collect()
    p.feed(text)
    p.close()
    return p


@pytest.fixture(scope="module")
def sized_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("sized")
    assert main(["run", str(CASES / "sized_hangers.toml"), "-o", str(out)]) == 0
    return out


def test_report_is_self_contained_with_every_section(sized_run):
    text = (sized_run / "report.html").read_text()
    p = _parse(text)
    assert set(SECTIONS) <= p.ids
    # no reference leaves the file: images are data URIs, links are in-page anchors
    for tag, attr, value in p.refs:
        if tag == "img":
            assert value.startswith("data:image/"), (tag, attr, value[:40])
        else:
            assert value.startswith("#"), (tag, attr, value)
    assert "script" not in p.tags and "link" not in p.tags and "iframe" not in p.tags
    assert "http://" not in text and "https://" not in text and "url(" not in text
    assert text.count(CAUTION) == 2
    assert "placeholder default" in text


def test_report_agrees_with_results_file(sized_run):
    text = (sized_run / "report.html").read_text()
    data = json.loads((sized_run / "results.json").read_text())
    for name, res in data["results"].items():
        assert f'id="result-{name}"' in text
        deck = {n: np.linalg.norm(v["displacement"]) for n, v in res["nodes"].items() if n.startswith("D")}
        node = max(deck, key=deck.get)
        assert f"{deck[node]:.4g} m</b> at node {node}" in text
        assert (sized_run / f"plot-{name}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_design_outputs_and_meshes(sized_run):
    design = json.loads((sized_run / "design.json").read_text())
    assert design["placeholders"] == ["cable_factor", "min_tension", "deflection_limit", "yield_factor"]
    assert design["sizing"]["final"]["H*"]["passes"]
    hangers = {k: v for k, v in design["members"].items() if k.startswith("H")}
    assert len(hangers) == 15 and all(0 < v["utilization"] <= 1 for v in hangers.values())
    # governing cable check, against its definition from the written numbers
    h = hangers["H1"]["checks"]["cable"]
    results = json.loads((sized_run / "results.json").read_text())["results"]
    tmax = max(r["members"]["H1"]["max_tension"] for r in results.values())
    assert h["utilization"] == pytest.approx(design["factors"]["cable_factor"] * tmax / h["capacity"], rel=1e-12)
    rows = list(csv.DictReader(open(sized_run / "design.csv")))
    assert {r["check"] for r in rows} >= {"cable", "slack", "stress", "deflection-down", "deflection-up"}
    mesh = meshio.read(sized_run / "crowd-left.vtu")
    util = mesh.cell_data["utilization"][0]
    lookup = list(csv.DictReader(open(sized_run / "members.csv")))
    member = mesh.cell_data["member"][0]
    cells_h1 = [k for k, m in enumerate(member) if lookup[m]["member"] == "H1"]
    assert cells_h1 and lookup[member[cells_h1[0]]]["section"] == design["members"]["H1"]["section"]
    mine = [c for c in rows if c["item"] == "H1" and c["result"] == "crowd-left"]
    np.testing.assert_allclose(util[cells_h1], max(float(c["utilization"]) for c in mine), rtol=1e-12)
    sized = (sized_run / "sized.toml").read_text()
    assert "[catalogues.example-strands]" in sized and CAUTION.split(";")[0] in sized.replace("\n# ", " ")


def test_sizing_names_a_check_no_section_passes_in_json_and_report(sized_run):
    # The example deck lifts off its end bearing under the half-span crowd
    # whatever hanger is chosen: the probe with the largest catalogue section
    # still shows uplift, so sizing says so in design.json and the report
    # instead of driving the hangers to the largest section.
    design = json.loads((sized_run / "design.json").read_text())
    sizing = design["sizing"]
    entries = {e["check"]: e for e in sizing["no_section_passes"]}
    assert set(entries) == {"uplift"} and entries["uplift"]["largest_uplift"] > 0
    assert "no catalogue section removes the support uplift" in sizing["message"]
    assert sizing["final"]["H*"]["no_section_passes"] == ["uplift"]
    assert sizing["analyses"] == len(sizing["history"]) + sizing["probe_analyses"]
    text = (sized_run / "report.html").read_text()
    sizing_html = text[text.index('<section id="sizing">'):]
    assert "no catalogue section passes" in sizing_html and "uplift" in sizing_html


def test_design_table_lists_every_member_not_only_the_first_60():
    members = {f"M{k}": {"utilization": k / 200, "check": "cable", "result": "r", "section": "s"} for k in range(150)}
    text = _design(Path("."), {"factors": {}, "placeholders": [], "members": members}, None)
    p = _parse(text)
    body = "".join(p.text)
    assert all(f"M{k}" in body.split() or f"M{k}" in body for k in range(150))
    assert "<details>" in text and text.index("M149") < text.index("M0<")


def test_solve_writes_no_report(tmp_path):
    assert main(["solve", str(CASES / "heavy_cable.toml"), "-o", str(tmp_path)]) == 0
    assert not (tmp_path / "report.html").exists()


def _browser():
    for name in ("chromium-headless-shell", "chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    return None


def test_report_renders_in_a_headless_browser(sized_run, tmp_path):
    browser = _browser()
    if browser is None:
        pytest.skip("no headless Chromium found (Debian package chromium-headless-shell; .ci/run installs it "
                    "where apt-get is available)")
    url = (sized_run / "report.html").resolve().as_uri()
    flags = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
             f"--user-data-dir={tmp_path / 'profile'}"]
    env = {**os.environ, "HOME": str(tmp_path)}
    dom = subprocess.run(flags + ["--dump-dom", url], capture_output=True, text=True, timeout=120, env=env)
    assert dom.returncode == 0, dom.stderr[-2000:]
    p = _parse(dom.stdout)
    assert set(SECTIONS) <= p.ids
    assert sum(1 for t in p.tags if t == "img") >= 4
    shot = tmp_path / "report.png"
    run = subprocess.run(flags + ["--window-size=1200,3000", f"--screenshot={shot}", url],
                         capture_output=True, text=True, timeout=120, env=env)
    assert run.returncode == 0, run.stderr[-2000:]
    data = shot.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 50_000   # a rendered page, not a blank one


def test_report_shows_study_envelopes_and_modes_when_present(tmp_path):
    import cablefe
    from cablefe.report.html import write_report
    results = cablefe.solve(cablefe.load_model(CASES / "hanger_deck.toml"))
    cablefe.write_results(results, tmp_path)
    study = tmp_path / "studies" / "crowd"
    study.mkdir(parents=True)
    (study / "envelope.json").write_text(json.dumps({
        "name": "crowd", "kind": "patch", "base": "permanent", "solves": 4,
        "members": {"H5": {"max_tension": 31.2, "min_tension": 4.1, "slack": False,
                           "governing": {"max": {"intervals": [[0, 30]]}, "min": {"intervals": [[30, 60]]}}}},
        "nodes": {"D5": {"max_displacement": [0, 0, 0.01], "min_displacement": [0, 0, -0.2]}}}))
    write_report(results, tmp_path, "case.toml", CAUTION)
    shutil.copy(tmp_path / "tension-envelope.png", study / "envelope.png")
    shutil.copy(tmp_path / "tension-envelope.png", tmp_path / "modes.png")
    (tmp_path / "modes.json").write_text(json.dumps({
        "about": "permanent", "total_mass": 12000.0,
        "modes": [{"number": 1, "frequency": 1.9, "period": 0.526, "generalised_mass": 1.0,
                   "effective_mass_ratio": [0, 0, 0.7], "kind": "vertical",
                   "pedestrians": {"critical": True, "acceleration": 0.61, "comfort_class": 2}}]}))
    write_report(results, tmp_path, "case.toml", CAUTION)
    text = (tmp_path / "report.html").read_text()
    studies = text[text.index('id="studies"'):text.index('id="modes"')]
    modes = text[text.index('id="modes"'):text.index('id="design"')]
    assert "crowd" in studies and "31.2" in studies and studies.count("<img") == 1
    assert "1.9" in modes and "critical" in modes and "0.61" in modes and modes.count("<img") == 1
    assert "no [design] table" in text


def test_reactions_lose_round_off_and_guy_sag_nodes_do_not_count_as_the_structure():
    import cablefe
    from cablefe.io.case import parse_case
    from cablefe.report.groups import round_relative, structure_nodes
    # six significant digits of the largest value (300.000): round-off goes, 12.3456789 keeps 0.001
    r = round_relative([300.0, 1e-13, -2.5e-12, 12.3456789])
    assert r[1] == 0.0 and r[2] == 0.0 and not np.signbit(r[2])
    np.testing.assert_allclose(r[[0, 3]], [300.0, 12.346], rtol=1e-15)
    # a mast (beam) held by a guy divided into sag nodes: the sag nodes are not "the structure"
    data = {"materials": {"s": {"E": "200 GPa", "unit_weight": "78.5 kN/m^3"}},
            "sections": {"g": {"material": "s", "area": "100 mm^2"},
                         "m": {"material": "s", "area": "5000 mm^2", "Iy": "1e8 mm^4", "Iz": "1e8 mm^4", "J": "2e8 mm^4"}},
            "nodes": {"B": [0, 0, 0], "T": [0, 0, 20], "A": [15, 0, 0]},
            "supports": {"B": "all", "A": "pin"},
            "members": [{"id": "M", "type": "beam", "nodes": ["B", "T"], "section": "m"},
                        {"id": "G", "type": "cable", "nodes": ["T", "A"], "section": "g", "divide": 4}],
            "loads": [{"case": "w", "self_weight": True}]}
    model = cablefe.build_model(parse_case(data))
    nodes, what = structure_nodes(model)
    assert what == "structure" and sorted(model.node_ids[k] for k in nodes) == ["A", "B", "T"]
    # a single cable between two anchors: its interior nodes are the structure
    lone = cablefe.build_model(parse_case({**data, "members": data["members"][1:], "supports": {"T": "all", "A": "pin"},
                                           "nodes": {"T": [0, 0, 20], "A": [15, 0, 0]}}))
    assert len(structure_nodes(lone)[0]) == len(lone.node_ids)
