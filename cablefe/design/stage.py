"""The design step of ``cablefe run``: checks (and sizing), then their files.

Reads the study envelopes that an earlier step wrote (``OUT/studies/*/envelope.json``),
checks every result and envelope named in ``[design] results``, writes
``design.json``, ``design.csv`` and the meshes again with cell data
``utilization``.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass, replace
from pathlib import Path

from .checks import DesignOutcome, run_checks

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class DesignRun:
    outcome: DesignOutcome
    results: object              # the Results checked (the sized ones after sizing)
    written: tuple[Path, ...]
    sized_case: Path | None = None
    settled: bool = True         # sizing: False when the choice oscillated or ran out of iterations


def design_stage(results, out, caution: str, case_path=None, linear_solver=None, progress=None,
                 read_from=None) -> DesignRun | None:
    """Run ``[design]`` of a solved model; None when the case has none.

    Files are written into ``out``; study envelopes are read from
    ``read_from`` (default ``out``: the command line writes into a staging
    folder and reads the output folder's ``studies/``).
    """
    from .. import write_results
    from ..io.design_io import read_envelopes, write_design
    spec = results.model.spec
    if spec.design is None:
        return None
    out = Path(out)
    envelopes = read_envelopes(out if read_from is None else read_from)
    sized_path, settled, sizing = None, True, None
    if spec.design.size:
        from .sizing import size_members, write_sized_case
        run = size_members(spec, results, envelopes=envelopes, linear_solver=linear_solver, progress=progress)
        results, settled, sizing = run.results, run.settled, run.history
        sized_path = write_sized_case(out / "sized.toml", run.spec, case_path, caution, run.cutting)
    outcome = run_checks(spec.design if sizing is None else results.model.spec.design, results, envelopes)
    if sizing is not None:
        from .sizing import with_final_checks
        outcome = replace(outcome, sizing=with_final_checks(sizing, outcome, results.model.spec))
    written = write_design(outcome, out, results.model.spec.units, caution)
    written += write_results(results, out, outcome.utilization_by_result())
    if sized_path is not None:
        written.append(sized_path)
    return DesignRun(outcome, results, tuple(written), sized_path, settled)
