"""The modes step as library calls: ``cablefe modes`` and the modes step of ``cablefe run``."""
from __future__ import annotations

import logging
from pathlib import Path

from .errors import CaseError
from .model import Model
from .solvers.modes import ModesError, ModesResult, compute_modes

log = logging.getLogger(__name__)


class NotConverged(ModesError):
    """The result the modes are taken about did not converge."""


def about_name(model: Model) -> str:
    """The result the modes are taken about: ``[modes] about`` or the first result."""
    spec = model.spec.modes
    if spec is None:
        raise CaseError("modes", "the case has no [modes] table")
    return spec.about or model.results_to_run()[0][0]


def modes(model: Model, results=None, linear_solver: str | None = None, progress=None) -> ModesResult:
    """Natural modes (and the comfort check) of a model about its ``[modes] about`` result.

    Parameters
    ----------
    model : Model with ``spec.modes``
    results : Results, optional; the ``about`` result is solved when absent
    linear_solver : backend name overriding ``[analysis] solver``

    Raises
    ------
    NotConverged
        The ``about`` result did not converge.
    ModesError
        A singular or unstable state, or no mass.
    """
    from .analysis import solve
    name = about_name(model)
    if results is None or name not in results.names:
        results = solve(model, names=[name], progress=progress, linear_solver=linear_solver)
    res = results[name]
    if not res.converged:
        raise NotConverged(f'the result "{name}" the modes are taken about did not converge '
                           f"({res.outcome.message}); no modes were computed")
    return compute_modes(model, res, model.spec.modes, linear_solver)


def run_modes(model: Model, folder, results=None, linear_solver: str | None = None,
              progress=None) -> tuple[ModesResult, list[Path]]:
    """Compute the modes and write ``modes.json``, ``modes.vtu``, ``modes.pvd`` and ``modes.png``."""
    from .io.modes_io import write_modes
    found = modes(model, results, linear_solver, progress)
    return found, write_modes(model, found, folder)
