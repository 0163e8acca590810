"""Newton iterations and factorisations of every shipped and generated case,
with the driver as it was (increments only) and as it is.

Run by hand (not a test)::

    python benchmarks/bench_iterations.py            # shipped cases + nets 30, 100
    python benchmarks/bench_iterations.py --nets 30  # smaller generated nets only

Every result (combination, or load case when there are none) of every
``cases/*.toml`` is solved twice in this process: "before" with
``NewtonSettings.whole_load_first = False`` (increments from
``1/[analysis] increments``, growing by half after an easy one), no
modified or inexact Newton steps (``modified_ratio = krylov_ratio = 0``) and the stability counted by
one more factorisation at every converged state (``PIVOT_REUSE_RATIO``
off): the driver as it was; "after" with the defaults (the whole load
tried first in one increment, inexact Newton steps by conjugate gradients
preconditioned with the last factors near the solution, or modified
Newton steps for beam models, the count read from the last iteration
where it may).  Factorisations are the
calls of ``LinearSolver.factorize`` (Newton steps and stability counts).  Generated cases: the benchmark saddle nets of ``cases.py`` in
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
from cablefe.solvers import linear, newton, static  # noqa: E402

FACTORISATIONS = [0]


def _counting(factorize):
    def counted(self, K):
        FACTORISATIONS[0] += 1
        return factorize(self, K)
    return counted


def _run(path: Path, now: bool):
    original = newton.follow_load_path
    reuse = newton.PIVOT_REUSE_RATIO

    def patched(problem, settings=newton.NewtonSettings(), progress=None):
        if not now:
            settings = dataclasses.replace(settings, whole_load_first=False, modified_ratio=0.0,
                                           krylov_ratio=0.0)
        return original(problem, settings, progress)

    static.follow_load_path = patched
    newton.PIVOT_REUSE_RATIO = reuse if now else -1.0
    factorize = linear.LinearSolver.factorize
    linear.LinearSolver.factorize = _counting(factorize)
    counts = {}
    try:
        model = cablefe.load_model(path)
        out = {}
        for name, _ in model.results_to_run():
            FACTORISATIONS[0] = 0
            out[name] = cablefe.solve(model, names=[name])[name]
            counts[name] = FACTORISATIONS[0]
    finally:
        static.follow_load_path = original
        newton.PIVOT_REUSE_RATIO = reuse
        linear.LinearSolver.factorize = factorize
    return out, counts


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
    print("| case | result | iterations before | after | factorisations before | after | increments before "
          "| after | converged | max position difference m |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    total = [0, 0, 0, 0]
    for path in paths:
        (before, fb), (after, fa) = _run(path, False), _run(path, True)
        for name, b in before.items():
            a = after[name]
            ob, oa = b.outcome, a.outcome
            total[0] += ob.iterations
            total[1] += oa.iterations
            total[2] += fb[name]
            total[3] += fa[name]
            diff = (float(np.abs(b.state.positions - a.state.positions).max())
                    if ob.converged and oa.converged else float("nan"))
            label = path.name if path.parent == ROOT / "cases" else f"(generated) {path.name}"
            print(f"| {label} | {name} | {ob.iterations} | {oa.iterations} | {fb[name]} | {fa[name]} | "
                  f"{len(ob.increments)} | {len(oa.increments)} | {ob.converged} / {oa.converged} | {diff:.1e} |")
    print(f"| total | | {total[0]} | {total[1]} | {total[2]} | {total[3]} | | | | |")


if __name__ == "__main__":
    main()
