import numpy as np
import pytest

from cablefe.spec import AnalysisSettings, CaseSpec, Material, Section, UnitSystem


def make_spec(nodes, members, supports, loads=(), combinations=(), sections=None, materials=None,
              analysis=None, units=UnitSystem("m", "N", 1.0, 1.0)):
    """A CaseSpec built in code, in SI units (the Python API route)."""
    materials = materials or {"steel": Material("steel", E=2.0e11, G=2.0e11 / 2.6, unit_weight=7.85e4)}
    sections = sections or {"s": Section("s", "steel", area=1.0e-3)}
    return CaseSpec(title="test", units=units, materials=materials, sections=sections,
                    nodes=dict(nodes), supports=dict(supports), members=tuple(members),
                    loads=tuple(loads), combinations=tuple(combinations),
                    analysis=analysis or AnalysisSettings(increments=4, tolerance=1e-10, max_iterations=40))


@pytest.fixture
def spec_factory():
    return make_spec


def solve_counting_factorisations(monkeypatch, path):
    """``(results, factorisations made)`` of solving the case at ``path``
    (new factorisations of the static problems, stability counts included)."""
    import cablefe
    from cablefe.solvers import static
    made = []
    original = static.StaticProblem._factorize

    def counted(self, K):
        before = self._factorized
        fact = original(self, K)
        made.append(self._factorized is not before)
        return fact
    monkeypatch.setattr(static.StaticProblem, "_factorize", counted)
    try:
        results = cablefe.solve(cablefe.load_model(path))
    finally:
        monkeypatch.setattr(static.StaticProblem, "_factorize", original)
    return results, sum(made)


# ---------------------------------------------------------------------------
# The verification manual (docs/verification.md) is generated from the tests:
# each outside check calls ``verify.check(...)``, which asserts and records
# the problem, its published source, the reference value and cablefe's value.
# ``python docs/make_verification.py`` runs the suite with
# CABLEFE_VERIFICATION set and writes the manual from the records, and
# tests/test_verification_manual.py fails when the manual and the tests
# disagree on which checks exist.

_VERIFICATION_RECORDS: list[dict] = []
_RECORD_INDEX: dict[tuple[str, str], int] = {}
# appended to a record's problem when the test repeats the check on several
# cases (hypothesis examples): the values shown are the first case's, the
# relative difference the worst over all cases
_REPEATED = " (repeated on several cases: first shown, worst difference)"


def _summary(values) -> float | list[float]:
    a = np.asarray(values, dtype=float)
    return float(a) if a.ndim == 0 else [float(v) for v in a.ravel()[:6]]


class Verification:
    """Assert a computed value against an outside reference and record both."""

    def __init__(self, nodeid: str):
        self.nodeid = nodeid

    def check(self, problem: str, source: str, computed, reference, *, rtol: float = 0.0,
              atol: float = 0.0, unit: str = "") -> None:
        """``assert_allclose(computed, reference, rtol, atol)``, recorded for the manual.

        ``problem`` says what is checked; ``source`` names the outside
        reference (author, year, title, equation or table; ``from memory``
        or ``common practice`` where that applies). A check repeated with
        the same problem in one test (a hypothesis test runs its body once
        per drawn example) is one record: the first case's values and the
        worst relative difference.
        """
        from numpy.testing import assert_allclose
        computed_a = np.asarray(computed, dtype=float)
        reference_a = np.asarray(reference, dtype=float)
        # normwise: the largest difference over the largest reference value,
        # so that reference entries of zero (or round-off) do not blow it up;
        # None when the reference is all zero (then the absolute difference tells)
        difference = float(np.max(np.abs(computed_a - reference_a))) if reference_a.size else 0.0
        size = float(np.max(np.abs(reference_a))) if reference_a.size else 0.0
        worst = difference / size if size > 0.0 else None
        key = (self.nodeid, problem)
        if key in _RECORD_INDEX:
            record = _VERIFICATION_RECORDS[_RECORD_INDEX[key]]
            known = [v for v in (record["relative_difference"], worst) if v is not None]
            record["relative_difference"] = max(known) if known else None
            record["absolute_difference"] = max(record["absolute_difference"], difference)
            if not record["problem"].endswith(_REPEATED):
                record["problem"] += _REPEATED
        else:
            _RECORD_INDEX[key] = len(_VERIFICATION_RECORDS)
            _VERIFICATION_RECORDS.append({
                "test": self.nodeid, "problem": problem, "source": source, "unit": unit,
                "reference": _summary(reference_a), "computed": _summary(computed_a),
                "relative_difference": worst, "absolute_difference": difference,
                "rtol": rtol, "atol": atol})
        assert_allclose(computed_a, reference_a, rtol=rtol, atol=atol, err_msg=problem)


@pytest.fixture
def verify(request) -> Verification:
    return Verification(request.node.nodeid)


def pytest_sessionfinish(session, exitstatus):
    import json
    import os
    out = os.environ.get("CABLEFE_VERIFICATION")
    if out and _VERIFICATION_RECORDS:
        with open(out, "w", encoding="utf-8") as f:
            json.dump(_VERIFICATION_RECORDS, f, indent=1)
