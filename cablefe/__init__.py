"""cablefe: nonlinear analysis and form-finding of cable-supported structures.

Results are an aid to design and must be checked independently, against the
governing local codes, by a licensed engineer.

Typical use from Python::

    import cablefe
    case = cablefe.read_case("cases/heavy_cable.toml")
    model = cablefe.build_model(case)
    results = cablefe.solve(model)
    results.tension("self-weight", "C1")        # N at both ends
    cablefe.write_results(results, "out")
"""
from __future__ import annotations

from pathlib import Path

from .analysis import solve
from .errors import CaseError, MechanismError
from .model import Model, build_model
from .results import Results

__version__ = "0.1.0"

CAUTION = ("Results must be checked independently and against the governing local codes by a "
           "licensed engineer; default safety factors are placeholders for the engineer to set.")


def read_case(path):
    """Read and validate a TOML case file; returns a :class:`cablefe.spec.CaseSpec`."""
    from .io.case import read_case as _read
    return _read(path)


def load_model(path) -> Model:
    """Read a case file and build its model; CaseError names file and key."""
    case = read_case(path)
    try:
        return build_model(case)
    except CaseError as exc:
        raise exc.with_file(str(path)) from None


def write_results(results: Results, folder, utilization=None, extra=None) -> list[Path]:
    """Write ``results.json``, one ``.vtu`` per result and ``results.pvd`` as one set.

    The files are written into a staging folder inside ``folder`` and put in
    place together; files of an earlier set in ``folder`` that are not part
    of this one are removed (only files cablefe wrote, listed in
    ``folder/.cablefe-manifest.json``), as are temporaries of killed runs.
    An exception or interrupt while writing leaves the earlier set as it was.

    Parameters
    ----------
    results : Results
    folder : output folder (created if missing)
    utilization : result name -> {member id: utilization}, optional
    extra : dict, optional, entries added at the top of ``results.json``

    Returns
    -------
    list of Path, the files written (final names).

    Raises
    ------
    cablefe.io.atomic.OutputError
        ``folder`` is a file, read-only, or cannot be made; nothing written.
    """
    from .io.atomic import ResultFolder
    from .io.results_io import write_result_files
    with ResultFolder(folder) as out:
        write_result_files(results, out.staging, utilization, extra)
    return out.committed


__all__ = ["CAUTION", "CaseError", "MechanismError", "Model", "Results", "build_model",
           "load_model", "read_case", "solve", "write_results"]
