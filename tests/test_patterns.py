"""One id pattern matcher, with the rules of the standard library's fnmatchcase
and a cost linear in the number of ids and patterns."""
import fnmatch
import os
import re
import subprocess
import sys
from pathlib import Path

from hypothesis import given, settings, strategies as st

import cablefe.patterns as patterns
from cablefe import load_model
from cablefe.io.case import read_case
from cablefe.patterns import PatternIndex, match_ids, match_indices

ROOT = Path(__file__).resolve().parent.parent


def reference(pats, ids):
    """Outside reference: Python's fnmatch.fnmatchcase (an entry equal to an id always matches it)."""
    if isinstance(pats, str):
        pats = [pats]
    return [k for k, name in enumerate(ids) if any(p == name or fnmatch.fnmatchcase(name, p) for p in pats)]


def test_examples():
    ids = ["H1", "H2", "H10", "D1", "D[1]", "M1.4", "h1"]
    assert match_ids("H*", ids) == ["H1", "H2", "H10"]
    assert match_ids(["H?"], ids) == ["H1", "H2"]
    assert match_ids(["D[0-9]"], ids) == ["D1"]
    assert match_ids(["D[1]"], ids) == ["D1", "D[1]"]      # the id itself, and the pattern matching D1
    assert match_ids(["M1.4", "h1"], ids) == ["M1.4", "h1"]  # case-sensitive, dots are literal
    assert match_ids(["X*"], ids) == []
    assert PatternIndex(ids).unmatched(["H1", "Q*", "D*", "nope"]) == [1, 3]


ALPHABET = "ab1.*?[]!-"


@settings(max_examples=200, deadline=None)
@given(ids=st.lists(st.text("ab1.[]*", min_size=1, max_size=4), unique=True, max_size=12),
       pats=st.lists(st.text(ALPHABET, min_size=1, max_size=5), min_size=1, max_size=5))
def test_same_rules_as_fnmatchcase(ids, pats):
    assert match_indices(pats, ids) == reference(pats, ids)
    assert PatternIndex(ids).unmatched(pats) == [k for k, p in enumerate(pats) if not reference([p], ids)]


class _Counter:
    """Counts fnmatch translations and regular-expression evaluations made by cablefe.patterns."""

    def __init__(self, monkeypatch):
        self.translations = 0
        self.evaluations = 0
        counter = self
        real_translate = fnmatch.translate

        def translate(p):
            counter.translations += 1
            return real_translate(p)

        class CountingRegex:
            def __init__(self, rx):
                self.rx = rx

            def match(self, text):
                counter.evaluations += 1
                return self.rx.match(text)

        class FakeRe:
            @staticmethod
            def compile(text):
                return CountingRegex(re.compile(text))

        def guarded(real):
            def call(*args):  # cablefe may not match ids one pair at a time any more
                assert not sys._getframe(1).f_globals.get("__name__", "").startswith("cablefe"), \
                    f"fnmatch.{real.__name__} called from cablefe"
                return real(*args)
            return call

        monkeypatch.setattr(fnmatch, "translate", translate)
        for name in ("fnmatch", "fnmatchcase", "filter"):
            monkeypatch.setattr(fnmatch, name, guarded(getattr(fnmatch, name)))
        monkeypatch.setattr(patterns, "re", FakeRe)

    @property
    def total(self):
        return self.translations + self.evaluations


def test_plain_ids_are_looked_up_not_matched(monkeypatch):
    ids = [f"M{k}" for k in range(20000)]
    count = _Counter(monkeypatch)
    hit = match_indices(ids[::2], ids)           # 10 000 explicit ids against 20 000 members
    assert hit == list(range(0, 20000, 2))
    assert count.total == 0


def test_wildcards_cost_one_pass_over_the_ids(monkeypatch):
    ids = [f"M{k}" for k in range(5000)]
    expected = reference(["M1*", "M2?", *ids[:100]], ids)
    count = _Counter(monkeypatch)
    hit = match_indices(["M1*", "M2?", *ids[:100]], ids)
    assert hit == expected
    assert count.translations == 2                # each wildcard pattern translated once
    assert count.evaluations == len(ids)          # one combined expression, one evaluation per id


def _net(tmp_path, n):
    """A generated n x n saddle net; its loads list every member id explicitly."""
    case = tmp_path / f"net{n}.toml"
    subprocess.run([sys.executable, "-m", "cablefe", "new", "net", "--span-x", str(2 * n), "--span-y",
                    str(2 * n), "--spacing", "2", "-o", str(case)], check=True, capture_output=True,
                   cwd=ROOT, env={**os.environ, "PYTHONPATH": str(ROOT)})
    return case


def test_reading_and_building_a_net_matches_linearly(tmp_path, monkeypatch):
    """Pattern work for reading and building a whole generated net grows like its member count.

    Quadratic matching (every listed id tried against every member) would
    grow 4x faster from 10 x 10 to 20 x 20 than the member count does.
    """
    work = {}
    for n in (10, 20):
        case = _net(tmp_path, n)
        with monkeypatch.context() as patch:
            count = _Counter(patch)
            model = load_model(case)
            work[n] = (count.total, len(model.members))
            assert len(read_case(case).loads) >= 3
    (w10, m10), (w20, m20) = work[10], work[20]
    assert m20 > 3.5 * m10
    # linear: work per member the same within a small constant share (patterns, fixed ids)
    assert w20 / m20 <= 1.25 * w10 / m10 + 10 / m10, work


def test_one_matcher_in_the_package():
    """fnmatch appears in cablefe.patterns only: every other module matches ids through it."""
    users = [p.relative_to(ROOT).as_posix() for p in (ROOT / "cablefe").rglob("*.py")
             if "fnmatch" in p.read_text(encoding="utf-8") and p.name != "patterns.py"]
    assert users == []
