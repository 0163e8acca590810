"""The studies step as a library call: run a case's ``[[studies]]`` on solved
results and write their outputs (``cablefe study`` and ``cablefe run``)."""
from __future__ import annotations

import logging
from dataclasses import dataclass
from pathlib import Path

from ..errors import CaseError
from ..results import Results
from .runner import Progress, Runner

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class StudiesDone:
    """What the studies step did.

    written : paths of the files written
    summary : study name -> entry for results.json ``"studies"``
    outcomes : study name -> :class:`cablefe.studies.run.StudyOutcome`
    failed : names of studies with at least one failed solve
    skipped : (name, reason) of studies not run (their base was not solved)
    """

    written: list
    summary: dict
    outcomes: dict
    failed: list
    skipped: list


def select_studies(spec, only=None) -> list:
    """The studies to run: all, or those named in ``only`` (CaseError for an unknown name)."""
    if not only:
        return list(spec.studies)
    known = [s.name for s in spec.studies]
    for name in only:
        if name not in known:
            raise CaseError("studies", f'no study named "{name}" (known: {", ".join(known) or "none"})')
    return [s for s in spec.studies if s.name in only]


def base_names(model, studies) -> list:
    """Results the studies start from (to be solved first)."""
    first = model.results_to_run()[0][0] if model.results_to_run() else None
    return list(dict.fromkeys(s.base or first for s in studies))


def run_studies(results: Results, out, studies=None, workers: int | None = None, scheduler: str | None = None,
                progress_stream=None, solver: str | None = None) -> StudiesDone:
    """Run ``studies`` (default all of the case's) and write ``OUT/studies/<name>/``.

    Parameters
    ----------
    results : solved results holding every study's base result
    out : output folder
    workers, scheduler : see :class:`cablefe.studies.runner.Runner`
    progress_stream : a text stream for a progress line (give one only for a terminal)
    solver : linear solver backend overriding ``[analysis] solver``
    """
    from ..io.studies_io import summary, write_study
    from .run import run_study
    model = results.model
    studies = list(model.spec.studies) if studies is None else list(studies)
    written, summ, outcomes, failed, skipped = [], {}, {}, [], []
    first = model.results_to_run()[0][0] if model.results_to_run() else None
    for st in studies:
        if (st.base or first) not in results.names:
            skipped.append((st.name, f'its base result "{st.base or first}" was not solved'))
            log.warning("study %s skipped: %s", st.name, skipped[-1][1])
            continue
        bar = None
        if progress_stream is not None:
            def write(text, _s=progress_stream):
                _s.write(text)
                _s.flush()
            bar = Progress(st.name, write)
        runner = Runner(workers=workers, scheduler=scheduler, progress=bar)
        outcome = run_study(results, st, runner, solver)
        written += write_study(outcome, model, Path(out) / "studies" / st.name)
        summ[st.name] = summary(outcome, model.spec.units)
        outcomes[st.name] = outcome
        if not outcome.converged:
            failed.append(st.name)
            log.warning("study %s: %d solve(s) failed (marked in its envelope.json)", st.name, len(outcome.failures))
    return StudiesDone(written, summ, outcomes, failed, skipped)


def study_case(case, out, only=None, workers=None, scheduler=None, solver=None, progress_stream=None):
    """``cablefe study``: solve the base results the studies need, run them,
    write their outputs and ``results.json`` (base results + ``"studies"``).

    Returns ``(results, StudiesDone, written)``.
    """
    from .. import load_model
    from ..analysis import solve
    from ..io.results_io import write_json
    model = load_model(case)
    studies = select_studies(model.spec, only)
    if not studies:
        raise CaseError("studies", "the case has no [[studies]] to run")
    results = solve(model, names=base_names(model, studies), linear_solver=solver)
    done = run_studies(results, out, studies, workers, scheduler, progress_stream, solver)
    written = [write_json(results, Path(out) / "results.json", {"studies": done.summary})] + done.written
    return results, done, written


def add_to_results(results, out, done: StudiesDone) -> Path:
    """Rewrite ``OUT/results.json`` with the studies' summary under ``"studies"``."""
    from ..io.results_io import write_json
    return write_json(results, Path(out) / "results.json", {"studies": done.summary})
