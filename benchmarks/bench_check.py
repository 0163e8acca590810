"""Time of ``cablefe check`` on generated saddle nets N x N (id pattern matching at scale).

Run by hand (not a test)::

    python benchmarks/bench_check.py              # N = 50 100 150 200
    python benchmarks/bench_check.py 50 100

Each net is written by the layout generator (``cablefe new net``, 2 m grid,
spans 2N m); its load cases list every member id of the net explicitly, so
``check`` exercises the matching of long id lists against all members.  For
each N the whole ``cablefe check`` command is run in a fresh process and
timed (wall clock and the process's own CPU time, best of ``--repeat``), with
its peak memory (``ru_maxrss`` of the check process).  CPU time is what the
fit uses: on a shared machine wall time varies several-fold with the load of
other processes.  The exponent of CPU time against member count is
fitted with ``np.polyfit`` on log-log data: about 1 means the check is
linear (one dict lookup per listed id); matching every listed id against
every member, as before, gave 2.  A JSON goes to ``benchmarks/results/``.
"""
from __future__ import annotations

import argparse
import json
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
RESULTS = HERE / "results"
sys.path.insert(0, str(HERE))
from cases import cli_environment  # noqa: E402


# the whole command in a fresh interpreter, then its own peak memory on stderr
_CHECK = ("import resource, sys\nfrom cablefe.cli import main\nstatus = main(['check', sys.argv[1]])\n"
          "r = resource.getrusage(resource.RUSAGE_SELF)\n"
          "print(r.ru_maxrss, r.ru_utime + r.ru_stime, file=sys.stderr)\nsys.exit(status)")


def _cablefe(args, **kw):
    env = cli_environment(ROOT)
    return subprocess.run([sys.executable, "-m", "cablefe", *args], env=env, capture_output=True,
                          text=True, check=True, **kw)


def measure(N: int, folder: Path, repeat: int) -> dict:
    case = folder / f"net{N}.toml"
    _cablefe(["new", "net", "--span-x", str(2 * N), "--span-y", str(2 * N), "--spacing", "2",
              "-o", str(case), "--force"])
    best, best_cpu = float("inf"), float("inf")
    env = cli_environment(ROOT)   # the "new" above wrote the bytecode cache
    for _ in range(repeat):
        t = time.perf_counter()
        done = subprocess.run([sys.executable, "-c", _CHECK, str(case)], env=env, capture_output=True,
                              text=True, check=True)
        best = min(best, time.perf_counter() - t)
        rss_kb, cpu = done.stderr.strip().splitlines()[-1].split()   # of the check process itself
        peak_mb, best_cpu = int(rss_kb) / 1024, min(best_cpu, float(cpu))
    members = int(re.search(r"members: (\d+)", done.stdout).group(1))
    dofs = int(re.search(r"degrees of freedom: (\d+)", done.stdout).group(1))
    return {"N": N, "members": members, "dofs": dofs, "file_mb": case.stat().st_size / 2**20,
            "check_s": best, "cpu_s": best_cpu, "peak_rss_mb": peak_mb}


def main(argv=None) -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("sizes", nargs="*", type=int, default=[50, 100, 150, 200])
    p.add_argument("--repeat", type=int, default=2, help="runs per size; the best is kept")
    args = p.parse_args(argv)
    rows = []
    with tempfile.TemporaryDirectory() as folder:
        for N in args.sizes:
            rows.append(measure(N, Path(folder), args.repeat))
            r = rows[-1]
            print(f"N={N:4d}  members {r['members']:7d}  DOFs {r['dofs']:8d}  file {r['file_mb']:6.1f} MB  "
                  f"check {r['check_s']:6.2f} s wall, {r['cpu_s']:6.2f} s CPU  peak RSS {r['peak_rss_mb']:6.0f} MB", flush=True)
    if len(rows) >= 2:
        m = np.log([r["members"] for r in rows])
        t = np.log([r["cpu_s"] for r in rows])
        slope = float(np.polyfit(m, t, 1)[0])
        print(f"CPU time ~ members^{slope:.2f} (log-log fit over N = {', '.join(str(r['N']) for r in rows)})")
    RESULTS.mkdir(exist_ok=True)
    out = RESULTS / f"check-{time.strftime('%Y%m%d-%H%M%S')}.json"
    out.write_text(json.dumps({"rows": rows, "python": sys.version, "cpus": os.cpu_count()}, indent=1))
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
