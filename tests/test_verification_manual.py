"""The verification manual lists exactly the tests that make outside checks."""
from __future__ import annotations

import ast
import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _tests_using_verify() -> set[str]:
    found = set()
    for path in sorted((ROOT / "tests").glob("test_*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.FunctionDef) and node.name.startswith("test"):
                if any(a.arg == "verify" for a in node.args.args):
                    found.add(f"tests/{path.name}::{node.name}")
    return found


def _tests_in_manual() -> set[str]:
    text = (ROOT / "docs" / "verification.md").read_text(encoding="utf-8")
    found = set()
    for section in re.split(r"^## ", text, flags=re.M)[1:]:
        path = re.match(r"`([^`]+)`", section).group(1)
        for name in re.findall(r"\| `(test[^`\[]*)(?:\[[^`]*\])?` \|$", section, flags=re.M):
            found.add(f"{path}::{name}")
    return found


def test_manual_lists_every_outside_check():
    in_tests, in_manual = _tests_using_verify(), _tests_in_manual()
    assert in_tests, "no test records an outside check"
    missing, stale = in_tests - in_manual, in_manual - in_tests
    assert not missing and not stale, (
        f"docs/verification.md is out of step with the tests; run python docs/make_verification.py "
        f"(missing: {sorted(missing)}, stale: {sorted(stale)})")
