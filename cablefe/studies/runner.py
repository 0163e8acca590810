"""Where the independent solves of a study run: in this process, in local
processes or on a Dask cluster.

This is the only module that knows about processes or Dask.  A study hands
the runner a picklable :class:`~cablefe.studies.base.StudyContext` and a
list of picklable tasks; every worker builds one
:class:`~cablefe.studies.base.Session` from the context and runs its tasks
with it.  Each task starts from the same base state and warm starts, so the
results are the same arrays whichever way, and however many workers, they
were computed; they come back in task order.
"""
from __future__ import annotations

import logging
import os
import time
from concurrent.futures import ProcessPoolExecutor, as_completed

from .base import StudyContext, TaskResult, forget_session, run_task, session_for

log = logging.getLogger(__name__)


class RunnerError(RuntimeError):
    """The solves could not be started: no Dask cluster at the address, or
    the ``distributed`` package is missing."""


def default_workers() -> int:
    """All cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


class Runner:
    """Runs the tasks of a study.

    Parameters
    ----------
    workers : int, optional
        Local processes; 1 runs in this process; default all cores.
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``); takes
        precedence over ``workers``.  Needs the ``distributed`` package.
    progress : callable(done, total), optional
        Called after each finished task.
    """

    def __init__(self, workers: int | None = None, scheduler: str | None = None, progress=None):
        self.workers = default_workers() if workers is None else int(workers)
        if self.workers < 1:
            raise ValueError(f"workers must be >= 1, found {workers}")
        self.scheduler = scheduler
        self.progress = progress

    @property
    def description(self) -> str:
        if self.scheduler:
            return f"Dask cluster at {self.scheduler}"
        return "this process" if self.workers == 1 else f"{self.workers} local processes"

    def map(self, ctx: StudyContext, tasks: list) -> list[TaskResult]:
        """Results of ``tasks`` (in their order)."""
        if not tasks:
            return []
        if self.scheduler:
            return self._dask(ctx, tasks)
        if self.workers == 1 or len(tasks) == 1:
            return self._here(ctx, tasks)
        return self._processes(ctx, tasks)

    def _tick(self, done, total):
        if self.progress is not None:
            self.progress(done, total)

    def _here(self, ctx, tasks):
        out = []
        try:
            for k, task in enumerate(tasks):
                out.append(run_task(ctx, task))
                self._tick(k + 1, len(tasks))
        finally:
            forget_session(ctx.token)
        return out

    def _processes(self, ctx, tasks):
        import multiprocessing as mp
        # forkserver/spawn: forking a process whose BLAS threads are running is unsafe
        method = "forkserver" if "forkserver" in mp.get_all_start_methods() else "spawn"
        n = min(self.workers, len(tasks))
        out: list = [None] * len(tasks)
        with ProcessPoolExecutor(max_workers=n, mp_context=mp.get_context(method),
                                 initializer=_init_worker, initargs=(ctx,)) as pool:
            futures = {pool.submit(_run_in_worker, task): k for k, task in enumerate(tasks)}
            for done, fut in enumerate(as_completed(futures), start=1):
                out[futures[fut]] = fut.result()
                self._tick(done, len(tasks))
        return out

    def _dask(self, ctx, tasks):
        try:
            from distributed import Client, as_completed as dask_completed
        except ImportError:  # pragma: no cover - depends on the installation
            raise RunnerError("--scheduler needs the distributed package: "
                              "pip install 'cablefe[distributed]'") from None
        out: list = [None] * len(tasks)
        try:
            client = Client(self.scheduler, set_as_default=False, timeout=CONNECT_TIMEOUT)
        except (OSError, TimeoutError, ValueError) as exc:
            raise RunnerError(f"no Dask scheduler reached at {self.scheduler}: {exc}") from None
        with client:
            shared = client.scatter(ctx, broadcast=True)
            futures = client.map(run_task, [shared] * len(tasks), tasks, pure=False)
            index = {f.key: k for k, f in enumerate(futures)}
            with client.as_current():
                for done, fut in enumerate(dask_completed(futures), start=1):
                    out[index[fut.key]] = fut.result()
                    self._tick(done, len(tasks))
            client.run(forget_session, ctx.token)
        return out


#: seconds to wait for a Dask scheduler
CONNECT_TIMEOUT = 20

_CONTEXT: StudyContext | None = None


def _init_worker(ctx: StudyContext) -> None:
    global _CONTEXT
    _CONTEXT = ctx
    session_for(ctx)


def _run_in_worker(task) -> TaskResult:
    return run_task(_CONTEXT, task)


class Progress:
    """Counts and time left of a running study, for a terminal line."""

    def __init__(self, label: str, write):
        self.label = label
        self.write = write
        self.t0 = time.perf_counter()

    def __call__(self, done: int, total: int) -> None:
        elapsed = time.perf_counter() - self.t0
        left = elapsed / done * (total - done) if done else 0.0
        width = 24
        bar = "#" * int(width * done / total) + "-" * (width - int(width * done / total))
        self.write(f"\r  {self.label} [{bar}] {done}/{total}, {left:.0f} s left "
                   + ("\n" if done == total else ""))
