"""Speed of live-load studies against solving the same loads as combinations.

Run by hand (not a test)::

    python benchmarks/bench_studies.py                 # both models, 100 positions
    python benchmarks/bench_studies.py --only net --steps 20

Models: a suspension footbridge from ``cablefe new suspension`` with 200
hangers (2 planes of 100, 202 m span, shaped first with ``cablefe shape``)
and the 100 x 100 saddle net of ``cases.saddle_net``.  On each, a sweep of
a patch of a tenth of the lane in ``steps`` positions is timed

* as ``steps`` combinations (base + one patch each) solved by the
  ``cablefe solve`` command, in its own process, and by ``cablefe.solve``;
* as a ``sweep`` study from the base state (``run_study``) with 1 and 2
  local processes and on a local Dask cluster of 2 single-threaded
  worker processes; and by the ``cablefe study`` command (2 workers);

and the influence lines of the lane's nodes and members against one
factorization of the base tangent.  A JSON goes to ``benchmarks/results/``.
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path[:0] = [str(ROOT), str(HERE)]


def _cli(*args, cwd=None) -> float:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    t = time.perf_counter()
    r = subprocess.run([sys.executable, "-m", "cablefe", *map(str, args)], env=env, capture_output=True, text=True)
    if r.returncode not in (0, 1):
        raise RuntimeError(r.stderr)
    return time.perf_counter() - t


def bridge_case(folder: Path) -> tuple[str, list, float, list]:
    """Shaped generated bridge: (case text, lane node ids, crowd kN/m, watched patterns)."""
    gen = folder / "bridge.toml"
    _cli("new", "suspension", "--span", "202 m", "--sag", "20 m", "--hanger-spacing", "2 m",
         "--tower-height", "25 m", "-o", gen)
    _cli("shape", gen, "-o", folder / "shaped.toml")
    text = (folder / "shaped.toml").read_text()
    lane = [f"DL{i}" for i in range(102)]
    return text, lane, 12.0, lane + ["HL*"]


def net_case(folder: Path, N: int = 100) -> tuple[str, list, float, list]:
    from cases import saddle_net
    text, _ = saddle_net(N, solver="superlu")
    j = N // 2
    lane = [f"N{i * N + j}" for i in range(N)]
    members = [f"X{i * N + j}" for i in range(N - 1)]
    text = text.replace('[[loads]]\ncase = "snow"', '[[combinations]]\nname = "permanent"\nfactors = { snow = 1.0 }\n\n'
                        '[[loads]]\ncase = "snow"')
    return text, lane, 1.0, lane + members


def _quote(items) -> str:
    return "[" + ", ".join(f'"{x}"' for x in items) + "]"


def measure(name: str, text: str, lane: list, load: float, watch: list, steps: int, folder: Path,
            dask: bool) -> dict:
    import numpy as np
    import cablefe
    from cablefe.io.case import read_case
    from cablefe.studies.base import session_for
    from cablefe.studies.influence import influence_lines
    from cablefe.studies.run import make_context, run_study, sweep_positions
    from cablefe.studies.runner import Runner
    from cablefe.solvers import linear
    row = {"model": name, "steps": steps}
    # lane length from a first read
    base_case = folder / f"{name}-base.toml"
    base_case.write_text(text)
    spec = read_case(base_case)
    model = cablefe.build_model(spec)
    idx = [model.node_index[n] for n in lane]
    total = float(np.linalg.norm(np.diff(model.coordinates[idx], axis=0), axis=1).sum())
    length = total / 10.0
    starts = sweep_positions(total, steps, length)
    import tomli
    import tomli_w
    data = tomli.loads(text)
    data.pop("studies", None)
    studied = dict(data, studies=[
        {"name": "sweep", "kind": "sweep", "base": "permanent", "path": lane, "load": [0, 0, -load],
         "length": length, "steps": steps, "watch": watch},
        {"name": "influence", "kind": "influence", "base": "permanent", "path": lane, "watch": watch}])
    case = folder / f"{name}-study.toml"
    case.write_text(tomli_w.dumps(studied))
    # the same positions as combinations
    permanent = {c.name: c for c in spec.combinations}["permanent"]
    combos = dict(data)
    combos["loads"] = list(data["loads"]) + [
        {"case": f"p{k}", "path": lane, "per_length": [0, 0, -load], "start": float(a), "end": float(a + length)}
        for k, a in enumerate(starts)]
    combos["combinations"] = list(data.get("combinations", [])) + [
        {"name": f"s{k}", "factors": {**permanent.factors, f"p{k}": 1.0}} for k in range(steps)]
    combo_case = folder / f"{name}-combos.toml"
    combo_case.write_text(tomli_w.dumps(combos))

    row["cli_solve_combinations_s"] = _cli("solve", combo_case, "-o", folder / f"{name}-combos")
    cm = cablefe.load_model(combo_case)
    t = time.perf_counter()
    combo_results = cablefe.solve(cm, names=[f"s{k}" for k in range(steps)])
    row["library_solve_combinations_s"] = time.perf_counter() - t

    m = cablefe.load_model(case)
    t = time.perf_counter()
    results = cablefe.solve(m, names=["permanent"])
    row["base_solve_s"] = time.perf_counter() - t
    sweep, infl = m.spec.studies
    row["free_dofs"] = int((~m.restrained).sum())
    for label, runner in (("1", Runner(workers=1)), ("2", Runner(workers=2))):
        t = time.perf_counter()
        out = run_study(results, sweep, runner)
        row[f"sweep_workers_{label}_s"] = time.perf_counter() - t
        row[f"sweep_workers_{label}_failed"] = len(out.failures)
    if dask:
        from distributed import LocalCluster
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cl:
            t = time.perf_counter()
            run_study(results, sweep, Runner(scheduler=cl.scheduler_address))
            row["sweep_dask_2_s"] = time.perf_counter() - t
    row["cli_study_sweep_2_workers_s"] = _cli("study", case, "-o", folder / f"{name}-study", "--only", "sweep",
                                             "--workers", "2")
    # agreement with the combinations (lane displacements)
    lane_idx = np.array([m.node_index[n] for n in lane])
    w = make_context(results, sweep).watch
    pos = {n: k for k, n in enumerate(w.nodes.tolist())}
    diffs = []
    ctx = make_context(results, sweep)
    ses = session_for(ctx)
    from cablefe.studies.lane import patch_loads
    for k in (0, steps // 2, steps - 1):
        r = ses.solve(k, patch_loads(ses.model, ses.lane, [(starts[k], starts[k] + length)], (0, 0, -load * 1e3)))
        ref = combo_results.displacements(f"s{k}")[lane_idx]
        diffs.append(float(np.abs(r.displacements[[pos[i] for i in lane_idx]] - ref).max()))
    row["max_lane_displacement_difference_m"] = max(diffs)
    # influence lines against one factorization of the base tangent
    ctx = make_context(results, infl)
    ses = session_for(ctx)
    K = ses.assembler.evaluate(ses.base_state, ses.base_loads, 1.0, True).tangent
    fresh = linear.make_linear_solver(ctx.solver, symmetric=not m.has_rotations)
    t = time.perf_counter()
    fresh.factorize(K)
    row["one_factorization_s"] = time.perf_counter() - t
    t = time.perf_counter()
    lines = influence_lines(ses, ses.lane, infl.load)
    row["influence_lines_s"] = time.perf_counter() - t
    row["influence_responses"] = len(lines.names)
    row["influence_over_factorization"] = row["influence_lines_s"] / row["one_factorization_s"]
    row["speedup_library_2_workers"] = row["library_solve_combinations_s"] / row["sweep_workers_2_s"]
    row["speedup_cli_2_workers"] = row["cli_solve_combinations_s"] / row["cli_study_sweep_2_workers_s"]
    return row


def main(argv=None) -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--steps", type=int, default=100)
    p.add_argument("--only", choices=["bridge", "net"])
    p.add_argument("--no-dask", action="store_true")
    args = p.parse_args(argv)
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for name, make in (("bridge", bridge_case), ("net", net_case)):
            if args.only and args.only != name:
                continue
            text, lane, load, watch = make(folder)
            row = measure(name, text, lane, load, watch, args.steps, folder, not args.no_dask)
            rows.append(row)
            print(json.dumps(row, indent=1), flush=True)
    out = HERE / "results"
    out.mkdir(exist_ok=True)
    (out / f"studies-{time.strftime('%Y%m%d-%H%M%S')}.json").write_text(json.dumps(rows, indent=1))


if __name__ == "__main__":
    main()
