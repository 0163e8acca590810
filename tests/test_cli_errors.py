"""Bad input through the command line: one line on stderr naming file and
key, exit status 2, nothing written."""
from pathlib import Path

import pytest

from cablefe.cli import main

CASES = Path(__file__).resolve().parent.parent / "cases"
BASE = (CASES / "heavy_cable.toml").read_text()

BAD = [
    # (replace this, with that, expected key path, expected words)
    ('length0 = 229.0', 'length0 = -229.0', "members[0].length0", "positive"),
    ('E = "160 GPa"', 'E = "160 m"', "materials.strand.E", "is a length, expected a stress"),
    ('E = "160 GPa"', 'E = "160 GPaa"', "materials.strand.E", "unit"),
    ('West = "all"', 'West = "everything"', "supports.West", "support"),
    ('force = [0, 0, -18]', 'force = [0, -18]', "loads[1].force", "3"),
    ('force = [0, 0, -18]', 'force = [0, 0, "heavy"]', "loads[1].force", ""),
    ('factors = { self-weight = 1.0, trolley = 1.0 }', 'factors = { self-weight = 1.0, trolly = 1.0 }',
     "combinations[1].factors", "trolly"),
    ('divide = 10 ', 'divid = 10 ', "members[0].divid", "unknown"),
    ('nodes = ["West", "East"]', 'nodes = ["West", "Est"]', "members[0].nodes", "Est"),
    ('East = [220, 0, 65]', 'East = [0, 0, 40]', "members[0]", "zero length"),
    ('area = "2200 mm^2"', 'area = nan', "sections.rope.area", ""),
    ('title = "Gorge', 'title = = "Gorge', "", "line 4"),
]


@pytest.mark.parametrize("old,new,key,words", BAD)
def test_bad_input_message(tmp_path, capsys, old, new, key, words):
    assert old in BASE
    case = tmp_path / "case.toml"
    case.write_text(BASE.replace(old, new, 1))
    out = tmp_path / "out"
    assert main(["solve", str(case), "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err
    assert str(case) in err
    assert key in err
    assert words in err
    assert not out.exists()
