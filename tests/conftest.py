import numpy as np
import pytest

from cablefe.spec import (AnalysisSettings, CaseSpec, Combination, Material, Member, NodalLoad,
                          Section, SelfWeight, UnitSystem)


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
