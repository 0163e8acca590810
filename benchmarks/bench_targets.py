"""The speed targets of the whole command, measured side by side in one run.

Run by hand (not a test)::

    python benchmarks/bench_targets.py               # 100 ordinary, 200 compact, check 150
    python benchmarks/bench_targets.py --dr-limit 60

Measures, each in wall time and CPU time (the machine may be shared: CPU
time is the process's own user + system time, of every thread, and is what
to compare when others load the machine):

* the saddle net 100 x 100 written in the ordinary ``[nodes]`` /
  ``[[members]]`` form with the default ``[analysis]``: the whole
  ``cablefe solve`` command (a fresh process), one default
  ``scipy.sparse.linalg.splu`` of its initial tangent, the Newton solve in
  process with and without the whole-load first increment, and the
  dynamic-relaxation baseline (``dynamic_relaxation.py``) to the same
  residual;
* the same net 200 x 200 in the compact form: the whole command, and the
  baseline, run for at most ``--dr-limit`` seconds; when it does not finish
  its time is estimated as its measured cost per step times the steps it
  needs, taken as the 100 x 100 count times 2 (the step count of dynamic
  relaxation grows as N: the lowest mode's period over the stable time
  step; stated as an estimate in the output);
* ``cablefe check`` of the 150 x 150 net from the layout generator
  (``cablefe new net``).

A JSON goes to ``benchmarks/results/`` (git-ignored).
"""
from __future__ import annotations

import argparse
import dataclasses
import json
import logging
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
RESULTS = HERE / "results"
sys.path[:0] = [str(ROOT), str(HERE)]


def _children_cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def command(args: list[str], repeat: int = 1) -> tuple[float, float]:
    """Wall and CPU time (s) of ``python -m cablefe ARGS`` in a fresh process:
    one run to write the bytecode cache (see ``cases.cli_environment``),
    then the best of ``repeat``."""
    from cases import cli_environment
    env = cli_environment(ROOT)
    subprocess.run([sys.executable, "-m", "cablefe", *args], check=True, capture_output=True, cwd=ROOT, env=env)
    best = (float("inf"), float("inf"))
    for _ in range(repeat):
        c0, t0 = _children_cpu(), time.perf_counter()
        subprocess.run([sys.executable, "-m", "cablefe", *args], check=True, capture_output=True, cwd=ROOT, env=env)
        wall, cpu = time.perf_counter() - t0, _children_cpu() - c0
        best = min(best, (wall, cpu))
    return best


def timed(fn):
    c0, t0 = time.process_time(), time.perf_counter()
    value = fn()
    return value, time.perf_counter() - t0, time.process_time() - c0


def solve_in_process(model, whole: bool):
    import cablefe
    from cablefe.solvers import newton, static
    original = newton.follow_load_path

    def patched(problem, settings=newton.NewtonSettings(), progress=None):
        return original(problem, dataclasses.replace(settings, whole_load_first=whole), progress)

    static.follow_load_path = patched
    try:
        return timed(lambda: cablefe.solve(model))
    finally:
        static.follow_load_path = original


def net(N: int, folder: Path, dr_limit: float, dr_steps_hint: int | None = None, form: str = "ordinary",
        repeat: int = 3) -> dict:
    from cases import saddle_net

    import cablefe
    from cablefe.assembly import Assembler, initial_state
    from dynamic_relaxation import solve_bars
    from scipy.sparse.linalg import splu
    if form == "ordinary":
        text, info = saddle_net(N, form="ordinary", increments=None, tolerance=None, solver=None)
    else:
        text, info = saddle_net(N, increments=None, tolerance=None, solver=None)
    case = folder / f"net{N}-{form}.toml"
    case.write_text(text)
    row = dict(info, form=form, file_mb=round(case.stat().st_size / 1e6, 2))
    row["cli_wall_s"], row["cli_cpu_s"] = command(["solve", str(case), "-o", str(folder / f"out{N}")], repeat)
    model = cablefe.load_model(case)
    ev = Assembler(model).evaluate(initial_state(model), model.combined_loads({"snow": 1.0}), 1.0)
    K = ev.tangent.tocsc()
    best = min(timed(lambda: splu(K))[1:] for _ in range(repeat))
    row["splu_wall_s"], row["splu_cpu_s"] = best
    for whole, tag in ((False, "before"), (True, "after")):
        res, wall, cpu = solve_in_process(model, whole)
        o = res.items[0].outcome
        row[f"solve_{tag}_wall_s"], row[f"solve_{tag}_cpu_s"] = wall, cpu
        row[f"iterations_{tag}"] = o.iterations
        row[f"increments_{tag}"] = len(o.increments)
    positions = res.items[0].state.positions
    dr, row["dr_wall_s"], row["dr_cpu_s"] = timed(
        lambda: solve_bars(model, {"snow": 1.0}, tolerance=model.spec.analysis.tolerance, time_limit=dr_limit))
    row.update(dr_steps=dr["steps"], dr_converged=dr["converged"])
    if dr["converged"]:
        import numpy as np
        row["dr_max_difference_m"] = float(np.abs(dr["positions"] - positions).max())
        row["dr_estimated"] = False
    else:
        needed = dr_steps_hint or dr["steps"]
        row["dr_steps_needed_estimate"] = needed
        row["dr_wall_s"] *= needed / dr["steps"]
        row["dr_cpu_s"] *= needed / dr["steps"]
        row["dr_estimated"] = True
    row["cli_over_splu_cpu"] = row["cli_cpu_s"] / row["splu_cpu_s"]
    row["cli_over_splu_wall"] = row["cli_wall_s"] / row["splu_wall_s"]
    row["dr_over_cli_cpu"] = row["dr_cpu_s"] / row["cli_cpu_s"]
    row["dr_over_cli_wall"] = row["dr_wall_s"] / row["cli_wall_s"]
    return row


def main(argv=None) -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--dr-limit", type=float, default=120.0, help="wall seconds for one baseline run")
    p.add_argument("--repeat", type=int, default=3, help="timed runs of the command and of splu (best kept)")
    args = p.parse_args(argv)
    logging.disable(logging.WARNING)
    folder = Path(tempfile.mkdtemp())
    rows = []
    r100 = net(100, folder, 900.0, repeat=args.repeat)
    rows.append(r100)
    hint = 2 * r100["dr_steps"] if r100["dr_converged"] else None
    rows.append(net(200, folder, args.dr_limit, hint, form="compact", repeat=args.repeat))
    gen = folder / "gen150.toml"
    subprocess.run([sys.executable, "-m", "cablefe", "new", "net", "--span-x", "300", "--span-y", "300",
                    "--spacing", "2", "-o", str(gen), "--force"], check=True, capture_output=True, cwd=ROOT)
    check_wall, check_cpu = command(["check", str(gen)], args.repeat)
    print("| N | form | file MB | it. before -> after | solve before s (CPU) | solve after s (CPU) | cli s (CPU) | "
          "splu s (CPU) | DR s (CPU) | cli / splu (CPU) | DR / cli (CPU) |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    for r in rows:
        est = " (estimate)" if r["dr_estimated"] else ""
        print(f"| {r['N']} | {r['form']} | {r['file_mb']} | {r['iterations_before']} -> {r['iterations_after']} | "
              f"{r['solve_before_wall_s']:.2f} ({r['solve_before_cpu_s']:.2f}) | "
              f"{r['solve_after_wall_s']:.2f} ({r['solve_after_cpu_s']:.2f}) | "
              f"{r['cli_wall_s']:.2f} ({r['cli_cpu_s']:.2f}) | {r['splu_wall_s']:.2f} ({r['splu_cpu_s']:.2f}) | "
              f"{r['dr_wall_s']:.1f} ({r['dr_cpu_s']:.1f}){est} | {r['cli_over_splu_wall']:.1f} "
              f"({r['cli_over_splu_cpu']:.1f}) | {r['dr_over_cli_wall']:.1f} ({r['dr_over_cli_cpu']:.1f}) |")
    print(f"cablefe check of the generated 150 x 150 net: {check_wall:.2f} s wall, {check_cpu:.2f} s CPU")
    RESULTS.mkdir(exist_ok=True)
    out = RESULTS / f"targets-{time.strftime('%Y%m%d-%H%M%S')}.json"
    out.write_text(json.dumps({"nets": rows, "check150": {"wall_s": check_wall, "cpu_s": check_cpu}}, indent=1))
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
