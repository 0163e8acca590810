"""Benchmark of the sparse linear-solver backends on a prestressed cable net.

Run by hand (not a test)::

    python benchmarks/bench_linear.py            # N = 50 100 200
    python benchmarks/bench_linear.py 50 100 400 --backends superlu pardiso

The test matrix is the tangent stiffness of a square N x N cable net on a
hyperbolic-paraboloid surface: every node is linked to its four neighbours by
a prestressed bar, 3 DOFs per node, the boundary nodes fixed.  Each bar has
the usual tangent stiffness of a prestressed bar (elastic plus geometric
part, e.g. Crisfield 1991, Non-linear Finite Element Analysis of Solids and
Structures, vol. 1, ch. 3; from memory)::

    k = EA/L e e^T + T/L (I - e e^T),   K_e = [[k, -k], [-k, k]]

which is SPD on the free DOFs of a taut net.

Each (N, backend) pair runs in a fresh Python process so that memory freed
by one backend does not hide the peak of the next.  Reported per pair: DOFs,
nnz of K, time of the first factorization (ordering/analysis included), time
of a refactorization with new values on the same pattern (the Newton case;
minimum of ``--repeat`` runs), time of one solve, peak resident memory of the first factorization above the
memory held before it (Linux ``VmHWM`` after resetting it through
``/proc/self/clear_refs``; ``ru_maxrss`` otherwise), nnz of the factors and
the relative residual.  Results are printed as a table and written as JSON
into ``benchmarks/results/`` (git-ignored).

On machines that set OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE for old OpenBLAS
builds, SuperLU's dense kernels may run slower than they could; the JSON
records both variables.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import scipy
import scipy.sparse as sp

ROOT = Path(__file__).resolve().parents[1]
RESULTS = ROOT / "benchmarks" / "results"


def net_stiffness(N: int, *, EA: float = 1.0e7, T: float = 1.0e4, spacing: float = 1.0,
                  rise: float = 0.02) -> sp.csr_matrix:
    """Tangent stiffness of the free DOFs of an N x N prestressed cable net.

    Parameters
    ----------
    N : int
        Nodes per side (N >= 3); DOFs = 3 (N - 2)^2.
    EA : float
        Axial stiffness of every cable segment (N).
    T : float
        Tension of every cable segment (N).
    spacing : float
        Grid spacing in plan (m).
    rise : float
        Curvature of the surface z = rise (x'^2 - y'^2) / L_side (1/m), with
        x', y' measured from the centre.

    Returns
    -------
    scipy.sparse.csr_matrix
        Stiffness (N/m), shape (3 (N-2)^2, 3 (N-2)^2).
    """
    if N < 3:
        raise ValueError(f"N must be >= 3, got {N}")
    side = (N - 1) * spacing
    x, y = np.meshgrid(np.arange(N) * spacing, np.arange(N) * spacing, indexing="ij")
    z = rise * ((x - side / 2) ** 2 - (y - side / 2) ** 2) / side
    X = np.stack([x.ravel(), y.ravel(), z.ravel()], axis=1)
    idx = np.arange(N * N).reshape(N, N)
    bars = np.concatenate([
        np.stack([idx[:-1, :].ravel(), idx[1:, :].ravel()], axis=1),
        np.stack([idx[:, :-1].ravel(), idx[:, 1:].ravel()], axis=1),
    ])
    d = X[bars[:, 1]] - X[bars[:, 0]]
    L = np.linalg.norm(d, axis=1)
    e = d / L[:, None]
    ee = np.einsum("bi,bj->bij", e, e)
    k = (EA / L)[:, None, None] * ee + (T / L)[:, None, None] * (np.eye(3) - ee)
    ke = np.concatenate([np.concatenate([k, -k], axis=2),
                         np.concatenate([-k, k], axis=2)], axis=1)      # (bars, 6, 6)
    dofs = np.concatenate([3 * bars[:, [0]] + np.arange(3),
                           3 * bars[:, [1]] + np.arange(3)], axis=1)     # (bars, 6)
    rows = np.repeat(dofs, 6, axis=1).ravel()
    cols = np.tile(dofs, (1, 6)).ravel()
    K = sp.csr_matrix((ke.ravel(), (rows, cols)), shape=(3 * N * N,) * 2)
    fixed = np.zeros((N, N), dtype=bool)
    fixed[0, :] = fixed[-1, :] = fixed[:, 0] = fixed[:, -1] = True
    free = np.flatnonzero(np.repeat(~fixed.ravel(), 3))
    return K[free][:, free].tocsr()


def _status_kb(field: str) -> int | None:
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith(field + ":"):
                    return int(line.split()[1])
    except OSError:
        return None
    return None


def _reset_peak() -> bool:
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def worker(N: int, backend: str, check: bool, repeat: int = 3) -> dict:
    """Measure one backend on one net size (runs in its own process)."""
    sys.path.insert(0, str(ROOT))
    from cablefe.solvers.linear import available_backends, make_linear_solver

    t = time.perf_counter()
    K = net_stiffness(N)
    t_build = time.perf_counter() - t
    K2 = net_stiffness(N, T=1.3e4)          # same pattern, new values
    b = np.random.default_rng(1).standard_normal(K.shape[0])
    available_backends()                     # load MKL before the baseline

    solver = make_linear_solver(backend, check=check)
    have_hwm = _reset_peak()
    rss0 = _status_kb("VmRSS") if have_hwm else None
    maxrss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    t = time.perf_counter()
    fact = solver.factorize(K)
    t_factor = time.perf_counter() - t
    if have_hwm:
        peak_mb = (_status_kb("VmHWM") - rss0) / 1024.0
        method = "VmHWM"
    else:
        peak_mb = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - maxrss0) / 1024.0
        method = "ru_maxrss"
    t = time.perf_counter()
    x = fact.solve(b)
    t_solve = time.perf_counter() - t
    res = float(np.linalg.norm(K @ x - b) / np.linalg.norm(b))
    record = dict(N=N, dof=int(K.shape[0]), nnz=int(K.nnz), backend=backend,
                  engine=fact.backend, fallback=fact.fallback, t_build=t_build,
                  t_factor=t_factor, t_solve=t_solve, peak_mb=peak_mb,
                  memory_method=method, nnz_factor=fact.stats.get("nnz_factor"),
                  residual=res, check=check)
    del fact, x
    # refactorizations with new values on the same pattern (the Newton
    # case); the minimum over repeats filters out other load on the machine
    times = []
    for i in range(repeat):
        Ki = K2 if i % 2 == 0 else K
        t = time.perf_counter()
        fact2 = solver.factorize(Ki)
        times.append(time.perf_counter() - t)
        x2 = fact2.solve(b)
        del fact2
    record["t_refactor"] = min(times)
    record["t_refactor_all"] = times
    record["residual_refactor"] = float(np.linalg.norm(Ki @ x2 - b) / np.linalg.norm(b))
    return record


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("sizes", nargs="*", type=int, default=[50, 100, 200],
                    help="nodes per side of the net (default: 50 100 200)")
    ap.add_argument("--backends", nargs="+", default=None,
                    help="backends to time (default: all available)")
    ap.add_argument("--no-check", action="store_true",
                    help="switch off the probe/residual checks (raw backend speed)")
    ap.add_argument("--repeat", type=int, default=3,
                    help="refactorizations timed per backend; the minimum is shown")
    ap.add_argument("--out", type=Path, default=None, help="JSON output file")
    ap.add_argument("--worker", nargs=2, metavar=("N", "BACKEND"), help=argparse.SUPPRESS)
    args = ap.parse_args(argv)

    if args.worker:
        rec = worker(int(args.worker[0]), args.worker[1], not args.no_check,
                     max(1, args.repeat))
        print(json.dumps(rec))
        return 0

    sys.path.insert(0, str(ROOT))
    from cablefe.solvers.linear import available_backends
    backends = args.backends or available_backends()

    records = []
    header = (f"{'N':>5} {'DOF':>9} {'nnz(K)':>10} {'backend':<13} {'engine':<19} "
              f"{'factor s':>9} {'refact s':>9} {'solve s':>8} {'peak MB':>8} "
              f"{'nnz(LU)':>11} {'resid':>8}")
    print(header)
    print("-" * len(header))
    for N in args.sizes:
        for backend in backends:
            cmd = [sys.executable, str(Path(__file__).resolve()), "--worker", str(N), backend]
            cmd += ["--repeat", str(args.repeat)]
            if args.no_check:
                cmd.append("--no-check")
            proc = subprocess.run(cmd, capture_output=True, text=True)
            if proc.returncode != 0:
                print(f"{N:>5} {backend:<13} FAILED: {proc.stderr.strip().splitlines()[-1:]}")
                continue
            r = json.loads(proc.stdout.strip().splitlines()[-1])
            records.append(r)
            print(f"{r['N']:>5} {r['dof']:>9} {r['nnz']:>10} {r['backend']:<13} "
                  f"{r['engine']:<19} {r['t_factor']:>9.3f} {r['t_refactor']:>9.3f} "
                  f"{r['t_solve']:>8.4f} {r['peak_mb']:>8.1f} "
                  f"{(r['nnz_factor'] or 0):>11} {r['residual']:>8.1e}", flush=True)

    try:
        import pypardiso  # noqa: F401
        from importlib.metadata import version
        pardiso_version = version("pypardiso")
    except Exception:
        pardiso_version = None
    meta = dict(python=platform.python_version(), numpy=np.__version__,
                scipy=scipy.__version__, pypardiso=pardiso_version, cpus=os.cpu_count(),
                machine=platform.machine(), check=not args.no_check,
                load_average=os.getloadavg(),
                openblas_env={k: os.environ.get(k) for k in
                              ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE")},
                time=time.strftime("%Y-%m-%dT%H:%M:%S"))
    out = args.out or RESULTS / f"bench_linear_{time.strftime('%Y%m%d_%H%M%S')}.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps({"meta": meta, "results": records}, indent=2))
    print(f"\nwritten {out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
