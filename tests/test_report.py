"""`cablefe run` report and plots."""
import json
from pathlib import Path

import numpy as np

from cablefe import CAUTION
from cablefe.cli import main

CASES = Path(__file__).resolve().parent.parent / "cases"


def test_run_writes_report_and_plots_that_agree_with_results(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(CASES / "hanger_deck.toml"), "-o", str(out)]) == 0
    text = (out / "report.md").read_text()
    assert text.count(CAUTION) == 2          # at the top and at the end
    data = json.loads((out / "results.json").read_text())
    for name, res in data["results"].items():
        disp = {n: np.linalg.norm(v["displacement"]) for n, v in res["nodes"].items()}
        node = max(disp, key=disp.get)
        row = [line for line in text.splitlines() if line.startswith(f"| {name} |")][0]
        cells = [c.strip() for c in row.strip("|").split("|")]
        assert cells[1] == "yes"
        assert float(cells[4]) == float(f"{disp[node]:.4g}") and cells[5] == node
        assert (out / f"plot-{name}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert f"(plot-{name}.png)" in text
    assert (out / "tension-envelope.png").exists()
    assert "[m]" in text and "[kN]" in text


def test_solve_writes_no_report(tmp_path):
    assert main(["solve", str(CASES / "heavy_cable.toml"), "-o", str(tmp_path)]) == 0
    assert not (tmp_path / "report.md").exists()
