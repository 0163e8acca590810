"""Speed of the modes: the 12 lowest modes of a ~100k-DOF model against one factorisation.

Run by hand (not a test)::

    python benchmarks/bench_modes.py                    # N = 185: 100 467 free DOFs
    python benchmarks/bench_modes.py 100 185 --solver superlu

The model is the prestressed saddle net of ``cases.saddle_net`` (tension-only
bars, their own weight as mass plus the snow load's 0.5 kN/m / g as added
mass, so that the mass is not negligible against the prestress).  After the
static solve (not timed here) the script measures, in one process:

* ``factor``: one factorisation of the shifted tangent ``K - sigma M`` by
  cablefe's linear layer (the same backend the modes use), a fresh solver
  object so that nothing is reused;
* ``modes``: the whole :func:`cablefe.solvers.modes.compute_modes` call:
  tangent and mass assembly, the factorisation, shift-invert Lanczos for 12
  modes (ARPACK), mass normalisation, orthogonality check, effective masses
  and kinds;
* the number of solves with the factors, and ``modes / factor``.

The target of issue 11 is ``modes / factor < 5`` on 2 cores.  A JSON goes
to ``benchmarks/results/`` (git-ignored).
"""
from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
RESULTS = HERE / "results"
sys.path[:0] = [str(ROOT), str(HERE)]


def measure(N: int, solver: str) -> dict:
    import tomli as tomllib

    import numpy as np
    import scipy.sparse as sp

    import cablefe
    from cablefe.assembly import assemble_mass
    from cablefe.io.case import parse_case
    from cablefe.solvers import linear
    from cablefe.solvers.modes import GRAVITY, compute_modes, tangent_at
    from cases import saddle_net

    text, info = saddle_net(N, solver=solver)
    text += '\n[modes]\ncount = 12\nmasses = [{ members = "*", per_length = "51 kg/m" }]\n'
    model = cablefe.build_model(parse_case(tomllib.loads(text)))
    t = time.perf_counter()
    results = cablefe.solve(model)
    solve_s = time.perf_counter() - t
    res = results.items[0]
    assert res.converged
    spec = model.spec.modes

    # one factorisation of the shifted tangent, as the modes do it
    K, _ = tangent_at(model, res)
    per_length = {f: np.full(len(tab), 51.0) for f, tab in model.families.items()}
    M = assemble_mass(model, False, per_length, None, None, GRAVITY)[model.free][:, model.free]
    d = K.diagonal() / np.maximum(M.diagonal(), 1e-300)
    sigma = -1e-6 * float(np.median(d[d > 0]))
    A = (K - sigma * M).tocsr()
    factor = []
    for _ in range(2):
        fresh = linear.make_linear_solver(solver, symmetric=True)
        t = time.perf_counter()
        fact = fresh.factorize(A)
        factor.append(time.perf_counter() - t)
    backend = fact.backend

    t = time.perf_counter()
    found = compute_modes(model, res, spec, solver)
    modes_s = time.perf_counter() - t
    row = dict(info, solver=solver, backend=backend, solve_s=round(solve_s, 3),
               factor_s=round(min(factor), 3), modes_s=round(modes_s, 3),
               modes_factor_s=round(found.factorization_seconds, 3), solves=found.solves,
               ratio=round(modes_s / min(factor), 2), orthogonality=found.orthogonality,
               f_Hz=[round(m.frequency, 5) for m in found.modes], nnz=int(sp.csr_matrix(K).nnz))
    return row


def main(argv=None) -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("N", nargs="*", type=int, default=[185])
    p.add_argument("--solver", default="auto")
    args = p.parse_args(argv)
    rows = [measure(N, args.solver) for N in args.N]
    RESULTS.mkdir(exist_ok=True)
    stamp = time.strftime("%Y%m%d-%H%M%S")
    (RESULTS / f"modes-{stamp}.json").write_text(json.dumps(rows, indent=1))
    print("| N | free DOFs | backend | static solve s | one factor s | 12 modes s | solves | modes / factor |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- |")
    for r in rows:
        print(f"| {r['N']} | {r['free_dofs']} | {r['backend']} | {r['solve_s']} | {r['factor_s']} | "
              f"{r['modes_s']} | {r['solves']} | {r['ratio']} |")
    for r in rows:
        print(f"N = {r['N']}: f = {r['f_Hz'][:4]} ... Hz, orthogonality {r['orthogonality']:.1e}")


if __name__ == "__main__":
    main()
