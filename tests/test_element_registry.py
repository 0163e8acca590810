"""The element registry: every family the model builds has registered kernels."""
import pytest

from cablefe import elements
from cablefe.model import FAMILIES


def test_every_model_family_is_registered():
    assert set(elements.FAMILIES) == set(FAMILIES)
    for name in FAMILIES:
        entry = elements.family(name)
        assert entry.name == name and callable(entry.evaluate) and callable(entry.mass)


def test_unknown_family_names_the_registered_ones():
    with pytest.raises(KeyError, match="registered: .*bar"):
        elements.family("membrane")
