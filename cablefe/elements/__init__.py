"""Element families.

Every family is a module (or a package split by responsibility) with
batched kernels: the first axis of every array is the element.  All
quantities are SI (N, m, Pa, N/m).  Conventions shared by all families,
relied on by :mod:`cablefe.assembly`:

* Element nodal DOFs are ordered ``[node i DOFs, node j DOFs]``; a node carries
  ``[ux, uy, uz]`` (bar, cable) or ``[ux, uy, uz, rx, ry, rz]`` (beam).
* ``force`` is the internal force vector ``f_int``: the force each node exerts
  on the element.  Equilibrium at a free DOF reads ``sum f_int = f_ext``.  A
  taut straight tie of tension N from i to j with unit vector e has
  ``f_i = -N e`` and ``f_j = +N e``.  Loads an element carries inside itself
  (the catenary's distributed weight) appear in ``f_int``: for a catenary of
  total weight W, ``f_i + f_j = (0, 0, W)``.
* ``tangent`` is ``d force / d u`` of shape (n, k, k).  For rotational DOFs the
  increment is spatial: ``R_new = expm(skew(dtheta)) @ R_old``.
* Tension is positive.  z is up; weight acts in -z.

Each family's module (a package's ``__init__``) registers its family
(:func:`register`, a :class:`Family` with its ``evaluate``, ``mass`` and
optional ``warm_start``) at its end; the
assembler looks kernels up by family name (:func:`family`), so a new element
touches only this folder (and the model's table builder).
"""

from dataclasses import dataclass
from typing import Any, Callable

__all__ = ["Family", "FAMILIES", "family", "register"]


@dataclass(frozen=True)
class Family:
    """One element family as the assembler sees it.

    Attributes
    ----------
    name : str
        Key of the family's table in ``Model.families`` (``"bar"``,
        ``"cable"``, ``"beam"``).
    evaluate : callable
        ``evaluate(table, state, loads, lam, want_tangent, guess)`` -> the
        family's response (``force`` (n, k), ``tangent`` (n, k, k) or None)
        for its :class:`~cablefe.model.ElementTable` at the assembler's
        ``State``, ``LoadVectors`` and load factor ``lam``; ``guess`` is what
        ``warm_start`` kept from an earlier response (None at first).
    mass : callable
        ``mass(table, own, added, lumped, frames)`` -> (n, k, k) element mass
        matrices (kg, kg m, kg m²); ``own`` and ``added`` are masses per
        unstressed length (kg/m), ``frames`` the beams' current frames or None.
    warm_start : callable or None
        ``warm_start(response)`` -> what to keep as the next ``guess``.
    """

    name: str
    evaluate: Callable[..., Any]
    mass: Callable[..., Any]
    warm_start: Callable[[Any], Any] | None = None


#: the registered families by name, filled by the element modules on import
FAMILIES: dict[str, Family] = {}


def register(entry: Family) -> Family:
    """Add an element family (called once by its module)."""
    FAMILIES[entry.name] = entry
    return entry


def family(name: str) -> Family:
    """The registered family ``name`` (KeyError names the known ones)."""
    try:
        return FAMILIES[name]
    except KeyError:
        raise KeyError(f"no element family {name!r} (registered: {', '.join(FAMILIES)})") from None


# importing the modules registers their families
from . import bar, beam, catenary  # noqa: E402,F401
