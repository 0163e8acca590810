"""Newton iterations of every shipped and generated case, before and after
the whole-load first increment.

Run by hand (not a test)::

    python benchmarks/bench_iterations.py            # shipped cases + nets 30, 100
    python benchmarks/bench_iterations.py --nets 30  # smaller generated nets only

Every result (combination, or load case when there are none) of every
``cases/*.toml`` is solved twice in this process: "before" with
``NewtonSettings.whole_load_first = False`` (increments from
``1/[analysis] increments``, growing by half after an easy one: the driver
as it was), "after" with the default (the whole load tried first in one
increment).  Generated cases: the benchmark saddle nets of ``cases.py`` in
the ordinary ``[[members]]`` form with the default ``[analysis]``.  Prints a
Markdown table: iterations and converged increments before -> after, and
whether the converged positions agree (max difference, m).
"""
from __future__ import annotations

import argparse
import dataclasses
import logging
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path[:0] = [str(ROOT), str(HERE)]

import cablefe  # noqa: E402
from cablefe.solvers import newton, static  # noqa: E402


def _run(path: Path, whole: bool):
    original = newton.follow_load_path

    def patched(problem, settings=newton.NewtonSettings(), progress=None):
        return original(problem, dataclasses.replace(settings, whole_load_first=whole), progress)

    static.follow_load_path = patched
    try:
        model = cablefe.load_model(path)
        res = cablefe.solve(model)
    finally:
        static.follow_load_path = original
    return {r.name: r for r in res.items}


def main(argv=None) -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--nets", nargs="*", type=int, default=[30, 100])
    args = p.parse_args(argv)
    logging.disable(logging.WARNING)
    from cases import saddle_net
    tmp = Path(tempfile.mkdtemp())
    paths = sorted((ROOT / "cases").glob("*.toml"))
    for N in args.nets:
        text, _ = saddle_net(N, form="ordinary", increments=None, tolerance=None, solver=None)
        f = tmp / f"saddle-net-{N}x{N}-ordinary.toml"
        f.write_text(text)
        paths.append(f)
    print("| case | result | iterations before | after | increments before | after | converged | max position difference m |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- |")
    total = [0, 0]
    for path in paths:
        before, after = _run(path, False), _run(path, True)
        for name, b in before.items():
            a = after[name]
            ob, oa = b.outcome, a.outcome
            total[0] += ob.iterations
            total[1] += oa.iterations
            diff = (float(np.abs(b.state.positions - a.state.positions).max())
                    if ob.converged and oa.converged else float("nan"))
            label = path.name if path.parent == ROOT / "cases" else f"(generated) {path.name}"
            print(f"| {label} | {name} | {ob.iterations} | {oa.iterations} | {len(ob.increments)} | "
                  f"{len(oa.increments)} | {ob.converged} / {oa.converged} | {diff:.1e} |")
    print(f"| total | | {total[0]} | {total[1]} | | | | |")


if __name__ == "__main__":
    main()
