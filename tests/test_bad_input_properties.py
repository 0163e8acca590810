"""Property tests: no input file, however broken, gives a traceback.

Random bytes, random truncations of the shipped cases and random values put
in place of the values of the shipped cases must end in exit status 0, 1 or
2, and a 2 comes with exactly one line on stderr naming the file.  Most run
``cablefe.cli.main`` in-process (fast); a few run the installed command in a
subprocess, where a traceback would be printed, and solve into an output
folder that must stay empty on a 2.
"""
import contextlib
import copy
import io
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest
import tomli
from hypothesis import HealthCheck, given, settings, strategies as st

from cablefe.cli import main
from cablefe.errors import CaseError
from cablefe.io.case import parse_case
from cablefe.model import build_model

ROOT = Path(__file__).resolve().parent.parent
SHIPPED = sorted((ROOT / "cases").glob("*.toml"))
TEXTS = {p.name: p.read_bytes() for p in SHIPPED}
PARSED = {p.name: tomli.loads(p.read_text(encoding="utf-8")) for p in SHIPPED}

# CABLEFE_FUZZ=2000 python -m pytest tests/test_bad_input_properties.py fuzzes longer by hand
SCALE = int(os.environ.get("CABLEFE_FUZZ", "0")) or 1
FAST = settings(max_examples=40 * SCALE, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _check_file(data: bytes, command=("check",)):
    """Run ``cablefe check`` (in-process) on ``data``; returns (status, stderr, case path)."""
    with tempfile.TemporaryDirectory() as folder:
        case = Path(folder) / "case.toml"
        case.write_bytes(data)
        err = io.StringIO()
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
            code = main([*command, str(case)])
        return code, err.getvalue(), str(case)


def _assert_clean(code, err, case):
    assert code in (0, 1, 2), (code, err)
    assert "Traceback" not in err
    if code == 2:
        lines = err.strip().splitlines()
        assert len(lines) == 1, err
        assert lines[0].startswith(f"cablefe: {case}: "), lines[0]


@FAST
@given(st.binary(max_size=300))
def test_junk_bytes_never_give_a_traceback(data):
    _assert_clean(*_check_file(data))


@FAST
@given(st.binary(min_size=1, max_size=40).map(lambda b: b"title = \"x\"\n[nodes]\nA = [0, 0, 0]\n" + b))
def test_junk_after_a_valid_start_never_gives_a_traceback(data):
    _assert_clean(*_check_file(data))


@FAST
@given(name=st.sampled_from(sorted(TEXTS)), fraction=st.floats(0.0, 1.0))
def test_truncated_shipped_cases_never_give_a_traceback(name, fraction):
    text = TEXTS[name]
    _assert_clean(*_check_file(text[: int(fraction * len(text))]))


JUNK_VALUES = st.one_of(
    st.none(), st.booleans(), st.integers(-2**63, 2**63 - 1), st.sampled_from([10**8, 0, -1, 2]),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from(["", " ", "x", "1 m", "nan m", "-inf kN", "1e400 m", "*", "[", "?", "all", "rx ry rz",
                     "pin", "C1.4", "D*", "25 degC", "3 kN/m", "-5 kN"]),
    st.lists(st.sampled_from([0, 1.5, float("nan"), "a", "1 m"]), max_size=4),
    st.dictionaries(st.sampled_from(["a", "x", "z", "deck"]), st.sampled_from([1, "y", [1, 2, 3]]), max_size=2),
)


def _paths(obj, path=()):
    """Every key path into a parsed TOML document (tables and arrays included)."""
    if path:
        yield path
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _paths(v, path + (k,))
    elif isinstance(obj, list) and len(obj) <= 40:  # big coordinate arrays: a sample is enough
        for i, v in enumerate(obj):
            yield from _paths(v, path + (i,))


PATHS = {name: list(_paths(data)) for name, data in PARSED.items()
         if len(TEXTS[name]) < 200_000}


@settings(max_examples=120 * SCALE, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(name=st.sampled_from(sorted(PATHS)), data=st.data())
def test_any_value_anywhere_is_read_or_rejected_with_its_key(name, data):
    """Wrong types, non-finite numbers, absurd sizes, deleted keys: CaseError or a valid model."""
    doc = copy.deepcopy(PARSED[name])
    path = data.draw(st.sampled_from(PATHS[name]))
    parent = doc
    for part in path[:-1]:
        parent = parent[part]
    if data.draw(st.booleans().map(lambda b: b and len(path) > 1), label="delete"):
        del parent[path[-1]]
    else:
        parent[path[-1]] = data.draw(JUNK_VALUES, label="value")
    try:
        build_model(parse_case(doc, "case.toml"))
    except CaseError as exc:
        assert "\n" not in str(exc)
        assert exc.file == "case.toml"


def _run_command(args, cwd):
    return subprocess.run([sys.executable, "-m", "cablefe", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=300, env={**os.environ, "PYTHONPATH": str(ROOT)})


@pytest.mark.parametrize("name,data", [
    ("junk", bytes(range(200, 256)) * 3),
    ("nested", b"a = " + b"[" * 5000 + b"]" * 5000),
    ("truncated", TEXTS["heavy_cable.toml"][:700]),
    ("truncated-mid-member", TEXTS["stiffened_footbridge.toml"][: len(TEXTS["stiffened_footbridge.toml"]) // 2]),
])
def test_subprocess_solve_of_broken_files(tmp_path, name, data):
    """The real command: status 2, one line, no traceback, no output folder."""
    case = tmp_path / f"{name}.toml"
    case.write_bytes(data)
    out = tmp_path / "out"
    done = _run_command(["solve", str(case), "-o", str(out)], tmp_path)
    assert done.returncode == 2, done.stderr
    assert "Traceback" not in done.stderr
    assert len(done.stderr.strip().splitlines()) == 1, done.stderr
    assert done.stderr.startswith(f"cablefe: {case}: ")
    assert not out.exists()
