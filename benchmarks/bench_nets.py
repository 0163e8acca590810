"""Speed and memory of a whole analysis of big saddle cable nets.

Run by hand (not a test)::

    python benchmarks/bench_nets.py                 # N = 50 100 200
    python benchmarks/bench_nets.py 50 100 --big    # adds 400 and 577
    python benchmarks/bench_nets.py 100 --no-dr     # skip the baseline
    python benchmarks/bench_nets.py 100 200 --no-dr --solver superlu

For each N a prestressed N x N net (``cases.saddle_net``, compact case form,
written to a temporary folder) is measured in a fresh process: reading,
model building, the pattern and one assembly, one factorization of the
tangent with the default backend, the Newton solve (iterations), writing
results.json and the meshes, and the peak resident memory (``ru_maxrss``).
Beside it: the wall time of the whole ``cablefe solve`` command, one default
``scipy.sparse.linalg.splu`` factorization of the same tangent (the floor)
and, unless ``--no-dr``, the dynamic-relaxation baseline
(``dynamic_relaxation.py``) to the same residual.  The scaling exponent of
each phase against the DOF count is fitted with ``np.polyfit`` on log-log
data.  A JSON goes to ``benchmarks/results/`` (git-ignored).
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
RESULTS = HERE / "results"


def worker(N: int, folder: str, dr: bool, backend: str = "auto") -> dict:
    sys.path[:0] = [str(ROOT), str(HERE)]
    from cases import saddle_net
    text, info = saddle_net(N)
    case = Path(folder) / f"net{N}.toml"
    case.write_text(text)
    row = dict(info)
    t = time.perf_counter()
    import cablefe
    from cablefe.assembly import Assembler, initial_state
    from cablefe.io.case import read_case
    from cablefe.io.results_io import write_json, write_meshes
    from cablefe.model import build_model
    from cablefe.solvers import linear
    linear.available_backends()
    row["import_s"] = time.perf_counter() - t
    t = time.perf_counter(); spec = read_case(case); row["read_s"] = time.perf_counter() - t
    t = time.perf_counter(); model = build_model(spec); row["build_s"] = time.perf_counter() - t
    t = time.perf_counter(); asm = Assembler(model); row["pattern_s"] = time.perf_counter() - t
    loads = model.combined_loads({"snow": 1.0})
    state = initial_state(model)
    t = time.perf_counter(); ev = asm.evaluate(state, loads, 1.0); row["assemble_s"] = time.perf_counter() - t
    solver = linear.make_linear_solver(backend)
    t = time.perf_counter(); fact = solver.factorize(ev.tangent); row["factor_s"] = time.perf_counter() - t
    row["backend"] = fact.backend
    t = time.perf_counter(); fact = solver.factorize(ev.tangent); row["refactor_s"] = time.perf_counter() - t
    del fact, solver
    from scipy.sparse.linalg import splu
    t = time.perf_counter(); lu = splu(ev.tangent.tocsc()); row["splu_default_s"] = time.perf_counter() - t
    del lu
    t = time.perf_counter(); res = cablefe.solve(model, linear_solver=backend); row["solve_s"] = time.perf_counter() - t
    o = res.items[0].outcome
    row.update(converged=o.converged, iterations=o.iterations, residual=o.residual)
    out = Path(folder) / "out"
    out.mkdir(exist_ok=True)
    t = time.perf_counter(); write_json(res, out / "results.json"); row["write_json_s"] = time.perf_counter() - t
    t = time.perf_counter(); write_meshes(res, out); row["write_vtu_s"] = time.perf_counter() - t
    row["peak_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    if dr:
        from dynamic_relaxation import solve_bars
        r = solve_bars(model, {"snow": 1.0}, tolerance=model.spec.analysis.tolerance, time_limit=900.0)
        row.update(dr_s=r["seconds"], dr_steps=r["steps"], dr_converged=r["converged"],
                   dr_residual=r["residual"],
                   dr_max_difference_m=float(np.abs(r["positions"] - res.items[0].state.positions).max()))
    return row


def cli_time(N: int, folder: str, backend: str = "auto") -> float:
    """Wall time of the whole ``cablefe solve`` command, s."""
    case = Path(folder) / f"net{N}.toml"
    t = time.perf_counter()
    subprocess.run([sys.executable, "-m", "cablefe", "solve", str(case), "-o", str(Path(folder) / "cli"),
                    "--solver", backend],
                   check=True, capture_output=True, cwd=ROOT)
    return time.perf_counter() - t


def machine() -> dict:
    info = {"nproc": os.cpu_count(), "python": sys.version.split()[0]}
    try:
        cpu = Path("/proc/cpuinfo").read_text()
        info["cpu"] = next(l.split(":", 1)[1].strip() for l in cpu.splitlines() if l.startswith("model name"))
        mem = Path("/proc/meminfo").read_text().splitlines()[0]
        info["memory_gb"] = round(int(mem.split()[1]) / 2**20, 1)
    except (OSError, StopIteration):
        pass
    import scipy
    info.update(numpy=np.__version__, scipy=scipy.__version__)
    try:
        import threadpoolctl
        info["blas"] = [{k: p.get(k) for k in ("internal_api", "version", "num_threads")}
                        for p in threadpoolctl.threadpool_info()]
    except ImportError:
        info["blas"] = "threadpoolctl not installed"
    return info


def main(argv=None) -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("sizes", nargs="*", type=int, default=[50, 100, 200])
    p.add_argument("--big", action="store_true", help="add N = 400 and 577 (about 1e6 DOFs)")
    p.add_argument("--no-dr", action="store_true", help="skip the dynamic-relaxation baseline")
    p.add_argument("--dr-max", type=int, default=100, help="largest N for the baseline (default 100)")
    p.add_argument("--solver", default="auto", choices=["auto", "superlu", "splu-default", "pardiso"],
                   help="linear solver backend of the Newton solve and the command (default auto)")
    p.add_argument("--worker", nargs=4, help=argparse.SUPPRESS)
    args = p.parse_args(argv)
    if args.worker:
        N, folder, dr = int(args.worker[0]), args.worker[1], args.worker[2] == "1"
        print(json.dumps(worker(N, folder, dr, args.worker[3])))
        return
    sizes = args.sizes + ([400, 577] if args.big else [])
    rows = []
    for N in sizes:
        with tempfile.TemporaryDirectory() as folder:
            dr = not args.no_dr and N <= args.dr_max
            done = subprocess.run([sys.executable, __file__, "--worker", str(N), folder, "1" if dr else "0",
                                   args.solver],
                                  check=True, capture_output=True, text=True)
            row = json.loads(done.stdout.strip().splitlines()[-1])
            row["cli_s"] = cli_time(N, folder, args.solver)
            rows.append(row)
            print(f"N={N}: {json.dumps({k: (round(v, 3) if isinstance(v, float) else v) for k, v in row.items()})}",
                  flush=True)
    fits = {}
    if len(rows) >= 2:
        dofs = np.log([r["free_dofs"] for r in rows])
        for phase in ("read_s", "build_s", "pattern_s", "factor_s", "solve_s", "write_json_s", "cli_s"):
            fits[phase] = float(np.polyfit(dofs, np.log([r[phase] for r in rows]), 1)[0])
    RESULTS.mkdir(exist_ok=True)
    path = RESULTS / f"bench_nets_{time.strftime('%Y%m%d_%H%M%S')}.json"
    path.write_text(json.dumps({"machine": machine(), "rows": rows, "exponents": fits}, indent=1))
    head = ("N", "DOFs", "read", "build", "pattern", "factor", "Newton", "it", "write", "cli", "splu", "DR",
            "DR/cli", "cli/splu", "(r+w)/solve", "RSS MB")
    print(" | ".join(head))
    for r in rows:
        rw = r["read_s"] + r["write_json_s"] + r["write_vtu_s"]
        dr = r.get("dr_s")
        print(" | ".join(str(v) for v in (
            r["N"], r["free_dofs"], f"{r['read_s']:.2f}", f"{r['build_s']:.2f}", f"{r['pattern_s']:.2f}",
            f"{r['factor_s']:.2f}", f"{r['solve_s']:.2f}", r["iterations"],
            f"{r['write_json_s'] + r['write_vtu_s']:.2f}", f"{r['cli_s']:.2f}", f"{r['splu_default_s']:.2f}",
            "-" if dr is None else f"{dr:.1f}", "-" if dr is None else f"{dr / r['cli_s']:.1f}",
            f"{r['cli_s'] / r['splu_default_s']:.1f}", f"{rw / r['solve_s']:.2f}", f"{r['peak_rss_mb']:.0f}")))
    print("scaling exponents vs DOFs:", {k: round(v, 2) for k, v in fits.items()})
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
