"""Write docs/verification.md from the outside checks recorded by the tests.

Run from the repository root::

    python docs/make_verification.py

It runs the test suite with ``CABLEFE_VERIFICATION`` set, so that every
``verify.check(...)`` call (tests/conftest.py) records its problem, source,
reference value and computed value, and renders those records as the
verification manual. tests/test_verification_manual.py checks that the
manual lists exactly the tests that make such checks.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
from collections import defaultdict
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
MANUAL = ROOT / "docs" / "verification.md"

HEAD = """# Verification manual

Each row is a check that cablefe's tests assert on every run: the problem,
the published source of the reference (author, year, title, equation or
table; `from memory` where the value was recalled rather than read,
`common practice` for a trade rule of thumb), the reference value, cablefe's
value, their largest difference relative to the largest reference value
(the absolute difference, marked "abs.", where the reference is zero) and
the tolerance the test allows, and the test that asserts it. For arrays the
first values are shown.

This file is generated: `python docs/make_verification.py` runs the suite
and rewrites it; `tests/test_verification_manual.py` fails when a check is
added to or removed from the tests without regenerating it. The numbers were
produced on the machine that last generated the file; the tests assert them
on every machine.

Passing these checks shows that cablefe solves the equations it states; it
does not show that a model is right for a structure. Results must be checked
independently, and against the governing local codes, by a licensed
engineer.
"""


def _fmt(v) -> str:
    if isinstance(v, list):
        body = ", ".join(f"{x:.6g}" for x in v)
        return f"[{body}{', …' if len(v) == 6 else ''}]"
    return f"{v:.8g}"


def _cell(text: str) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def _difference(r: dict) -> str:
    if r["relative_difference"] is None:    # the reference is zero: only an absolute difference
        return f"{r['absolute_difference']:.1e} abs."
    return f"{r['relative_difference']:.1e}"


def render(records: list[dict]) -> str:
    by_file: dict[str, list[dict]] = defaultdict(list)
    for r in records:
        by_file[r["test"].split("::")[0]].append(r)
    lines = [HEAD]
    for path in sorted(by_file):
        lines += [f"\n## `{path}`\n",
                  "| problem | source | reference | cablefe | rel. difference | tolerance | test |",
                  "| --- | --- | --- | --- | --- | --- | --- |"]
        for r in by_file[path]:
            unit = f" {r['unit']}" if r["unit"] else ""
            tol = ", ".join(t for t in (f"rtol {r['rtol']:.0e}" if r["rtol"] else "",
                                         f"atol {r['atol']:.0e}" if r["atol"] else "") if t) or "exact"
            lines.append("| " + " | ".join(_cell(c) for c in (
                r["problem"], r["source"], _fmt(r["reference"]) + unit, _fmt(r["computed"]) + unit,
                _difference(r), tol, f"`{r['test'].split('::', 1)[1]}`")) + " |")
    return "\n".join(lines) + "\n"


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "records.json"
        env = dict(os.environ, CABLEFE_VERIFICATION=str(out))
        code = subprocess.call([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider",
                                "--ignore=tests/test_verification_manual.py"],
                               cwd=ROOT, env=env)
        if code != 0:
            print("tests failed; the manual was not rewritten", file=sys.stderr)
            return code
        records = json.loads(out.read_text(encoding="utf-8"))
    MANUAL.write_text(render(records), encoding="utf-8")
    print(f"wrote {MANUAL} ({len(records)} checks)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
