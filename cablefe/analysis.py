"""The analysis steps as library calls: solve every result of a model."""
from __future__ import annotations

import logging

import numpy as np

from .assembly import Assembler
from .errors import CaseError, UnknownResultError
from .model import Model
from .results import Results
from .solvers.linear import make_linear_solver
from .solvers.static import StaticProblem, StaticResult, _unsolved, solve_combination

log = logging.getLogger(__name__)


def solve(model: Model, names=None, progress=None, linear_solver: str | None = None,
          on_result=None) -> Results:
    """Solve every combination (or every load case when there are none).

    Parameters
    ----------
    model : Model
    names : iterable of str, optional
        Solve only these results.
    progress : callable(name, load_factor, iterations), optional
    linear_solver : str, optional
        Backend name overriding ``[analysis] solver``.
    on_result : callable(StaticResult), optional
        Called with each result as soon as it is solved, so that a caller
        keeps what was solved when a later result raises or is interrupted.

    Returns
    -------
    Results
        Non-converged results are included, marked ``converged = False``
        with their last converged state; a result whose analysis fails with
        an error is included the same way (status ``"error"``), so one bad
        result never stops the others.
    """
    todo = model.results_to_run()
    if not todo:
        raise CaseError("loads", "the case defines no load case and no combination: there is nothing to solve")
    if names is not None:
        wanted = set(names)
        unknown = wanted - {n for n, _ in todo}
        if unknown:
            raise UnknownResultError("names", f"no result named {', '.join(map(repr, sorted(unknown)))} "
                                     f"(known: {', '.join(n for n, _ in todo)})")
        todo = tuple(t for t in todo if t[0] in wanted)
    items = []
    # one pattern and one solver for all results: the pattern and the
    # ordering / symbolic factorization are computed once per model
    assembler = Assembler(model)
    solver = make_linear_solver(linear_solver or model.spec.analysis.solver,
                                symmetric=not model.has_rotations) if todo else None
    for name, factors in todo:
        cb = None if progress is None else (lambda lam, it, _n=name: progress(_n, lam, it))
        try:
            items.append(solve_combination(model, name, factors, linear_solver=solver, progress=cb,
                                           assembler=assembler))
        except (ValueError, ArithmeticError, np.linalg.LinAlgError, RuntimeError) as exc:
            # one bad result never stops the others: it is marked failed
            log.debug("%s failed", name, exc_info=True)
            items.append(failed_result(model, name, factors, exc, assembler, solver))
        if on_result is not None:
            on_result(items[-1])
    return Results(model, tuple(items))


def failed_result(model: Model, name: str, factors, exc: BaseException, assembler: Assembler,
                  solver) -> StaticResult:
    """A result marked not converged, status ``"error"``, at the model's starting state."""
    message = f"the analysis stopped with an error: {exc}"
    log.warning("%s: %s", name, message)
    problem = StaticProblem(model, model.combined_loads(factors), assembler=assembler, linear_solver=solver)
    return _unsolved(problem, name, factors, "error", message)
