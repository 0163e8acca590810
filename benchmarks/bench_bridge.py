"""Speed of a whole analysis of a long suspension bridge.

Run by hand (not a test)::

    python benchmarks/bench_bridge.py               # 400 panels: 798 hangers
    python benchmarks/bench_bridge.py --panels 800 --divide 4

The bridge (``cases.suspension_bridge``: main cables of catenary elements,
tension-only hangers, a deck truss of bars) is written in the compact case
form to a temporary folder and timed phase by phase in this process:
reading, model building, pattern, one assembly, one factorization, the
Newton solve (iterations) and writing; peak resident memory from
``ru_maxrss``.  A JSON goes to ``benchmarks/results/`` (git-ignored).
"""
from __future__ import annotations

import argparse
import json
import resource
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path[:0] = [str(HERE.parent), str(HERE)]


def main(argv=None) -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--panels", type=int, default=400)
    p.add_argument("--divide", type=int, default=1, help="divide of each main-cable segment")
    args = p.parse_args(argv)
    from cases import suspension_bridge
    import cablefe
    from cablefe.assembly import Assembler, initial_state
    from cablefe.io.case import read_case
    from cablefe.io.results_io import write_json, write_meshes
    from cablefe.model import build_model
    from cablefe.solvers import linear
    linear.available_backends()
    text, row = suspension_bridge(args.panels, cable_divide=args.divide)
    with tempfile.TemporaryDirectory() as folder:
        case = Path(folder) / "bridge.toml"
        case.write_text(text)
        t = time.perf_counter(); spec = read_case(case); row["read_s"] = time.perf_counter() - t
        t = time.perf_counter(); model = build_model(spec); row["build_s"] = time.perf_counter() - t
        t = time.perf_counter(); asm = Assembler(model); row["pattern_s"] = time.perf_counter() - t
        loads = model.combined_loads(dict(model.results_to_run()[0][1]))
        t = time.perf_counter(); ev = asm.evaluate(initial_state(model), loads, 1.0)
        row["assemble_s"] = time.perf_counter() - t
        solver = linear.make_linear_solver("auto")
        t = time.perf_counter(); fact = solver.factorize(ev.tangent); row["factor_s"] = time.perf_counter() - t
        row["backend"], row["free_dofs"] = fact.backend, int(ev.tangent.shape[0])
        t = time.perf_counter(); res = cablefe.solve(model); row["solve_s"] = time.perf_counter() - t
        o = res.items[0].outcome
        row.update(converged=o.converged, iterations=o.iterations, increments=len(o.increments),
                   residual=o.residual)
        t = time.perf_counter(); write_json(res, Path(folder) / "results.json"); write_meshes(res, folder)
        row["write_s"] = time.perf_counter() - t
        row["slack_hangers"] = int(res.member_forces(res.names[0]).slack.sum())
    row["peak_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    out = HERE / "results"
    out.mkdir(exist_ok=True)
    path = out / f"bench_bridge_{time.strftime('%Y%m%d_%H%M%S')}.json"
    path.write_text(json.dumps(row, indent=1))
    for k, v in row.items():
        print(f"{k:>20}: {round(v, 3) if isinstance(v, float) else v}")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
