"""Run per-participant jobs: in this process, in a `spawn` process pool, or on a Dask cluster.

A `fork` pool hangs once the chart engine has run in the parent, so local pools always use
`spawn`. Each worker process runs `initializer` once (the build warms its chart and PDF engines
there), after tying its life to the parent's: on Linux the kernel sends it SIGTERM when the
parent dies (PR_SET_PDEATHSIG), and everywhere a watchdog thread ends it once its parent
process is gone, so a killed build leaves no workers (nor, with them, the resource tracker).
A pool can also be started before its jobs are known (`Workers`): its workers start and warm
up while the parent still imports its modules and loads the study. Jobs are taken from an
iterable and submitted a few at a time, and every result passes
through `on_result` as soon as it arrives (the build writes its files to disk there), so memory
stays flat as the study grows. Results are returned in the order of the jobs, so the output does
not depend on scheduling.
"""

from __future__ import annotations

import ctypes
import functools
import gc
import itertools
import multiprocessing
import os
import signal
import sys
import threading
import time
from collections.abc import Callable, Iterable, Iterator, Sized
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import Any, TypeVar

from springback.errors import SpringbackError

J = TypeVar("J")
R = TypeVar("R")

Report = Callable[[str, str], None]

_NO_JOB: Any = object()

_stage_report: Callable[[str], None] | None = None
"""Where `stage()` reports, while a job runs in this process (None in worker processes)."""


def default_jobs() -> int:
    """All cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def stage(name: str) -> None:
    """Report the stage the current job reached; only heard when it runs in this process."""
    # A worker process cannot call back into the parent mid-job, so there this is silent and
    # the parent only sees 'queued' and the finish.
    if _stage_report is not None:
        _stage_report(name)


PARENT_CHECK_SECONDS = 0.5
_PR_SET_PDEATHSIG = 1


def _watch_parent(parent: int) -> None:
    while True:
        time.sleep(PARENT_CHECK_SECONDS)
        if os.getppid() != parent:
            os._exit(1)  # the build is gone: nobody will read this worker's results


def _worker_start(parent: int, initializer: Callable[[], None] | None) -> None:
    """Run first in every worker: end with the parent, then the caller's initializer."""
    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(_PR_SET_PDEATHSIG, signal.SIGTERM, 0, 0, 0)
        except (OSError, AttributeError):
            pass  # the watchdog below still ends the worker
    if os.getppid() != parent:
        os._exit(1)  # the parent died before the signal was set up
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True,
                     name="springback-parent-watch").start()
    if initializer is not None:
        initializer()
    # What is alive now (modules, the warmed engines) lives as long as the worker: out of the
    # cyclic collector's reach, each full collection (one after every PDF) walks only the
    # jobs' own objects (0.34 s a collection before, on a warmed worker).
    gc.freeze()


def _named(where: str) -> Callable[[], None]:
    """The function at 'package.module:name', imported in the process that calls this."""
    import importlib

    module, _, name = where.partition(":")
    fn: Callable[[], None] = getattr(importlib.import_module(module), name)
    return fn


def _run_named(where: str) -> None:
    _named(where)()


def _spawn_pool(n: int, initializer: Callable[[], None] | None) -> ProcessPoolExecutor:
    """A `spawn` pool of n workers, each tied to this process, then warmed by `initializer`."""
    start = functools.partial(_worker_start, os.getpid(), initializer)
    return ProcessPoolExecutor(max_workers=n, mp_context=multiprocessing.get_context("spawn"),
                               initializer=start)


def _ready() -> None:
    """A job that does nothing: submitted once per worker, it makes the pool start them all."""


class Workers:
    """A local `spawn` pool of n workers, started now, before the jobs are known.

    Starting a worker (the interpreter, the imports, the warm-up named by `initializer` as
    'package.module:function', imported only in the workers) takes about 2 s of its own core;
    started here it overlaps the parent's own imports and the loading of the study, where a
    pool made by `run_jobs` starts only once the first job exists. Use as a context manager
    and pass to `run_jobs(workers=...)`; on leaving, the pool is shut down (waiting for any
    worker still warming up).
    """

    def __init__(self, n: int, initializer: str | None = None) -> None:
        self.n = n
        self.pool = _spawn_pool(n, functools.partial(_run_named, initializer)
                                if initializer else None)
        for _ in range(n):  # one submit per worker: the pool starts each one now
            self.pool.submit(_ready)

    def __enter__(self) -> Workers:
        return self

    def __exit__(self, *_exc: object) -> None:
        self.pool.shutdown(wait=True, cancel_futures=True)


def _participant(job: Any) -> str:
    return str(getattr(getattr(job, "data", job), "participant", job))


def run_jobs(
    jobs: Iterable[J],
    fn: Callable[[J], R],
    *,
    jobs_n: int | None = None,
    backend: str = "local",
    scheduler: str | None = None,
    progress: Report | None = None,
    name: Callable[[J], str] = _participant,
    initializer: Callable[[], None] | None = None,
    on_result: Callable[[R], R] | None = None,
    finished: Callable[[R], str] = lambda _r: "done",
    total: int | None = None,
    workers: Workers | None = None,
) -> list[R]:
    """Apply `fn` to every job and return the (on_result-passed) results in job order.

    With `workers` (a pool started earlier) the local backend runs the jobs there; the pool
    stays open for its owner to close.

    `progress(name, stage)` hears 'queued' or 'computing'/'rendering' (in-process only) and
    then `finished(result)` ('done' unless told otherwise) for each job. `total` sizes the
    pool when `jobs` is a generator (jobs are then made only as they are submitted).
    """
    report = progress or (lambda _p, _s: None)
    keep = on_result or (lambda r: r)
    if backend == "dask":
        return _run_dask(jobs, fn, scheduler, report, name, initializer, keep, finished)
    if backend != "local":
        raise SpringbackError(f"unknown backend '{backend}'; use 'local' or 'dask'")
    size = total if total is not None else (len(jobs) if isinstance(jobs, Sized) else None)
    queue = iter(jobs)
    first = next(queue, _NO_JOB)
    if first is _NO_JOB:  # nothing to do (every participant reused): start no workers
        return []
    jobs = itertools.chain([first], queue)
    if workers is not None:
        return _run_pool(jobs, fn, workers.n, report, name, keep, finished, workers.pool)
    n = jobs_n or default_jobs()
    if size is not None:
        n = min(n, max(1, size))
    if n <= 1:
        return _run_here(jobs, fn, report, name, keep, finished)
    with _spawn_pool(n, initializer) as pool:
        return _run_pool(jobs, fn, n, report, name, keep, finished, pool)


def _run_here(jobs: Iterable[J], fn: Callable[[J], R], report: Report,
              name: Callable[[J], str], keep: Callable[[R], R],
              finished: Callable[[R], str]) -> list[R]:
    global _stage_report
    out: list[R] = []
    for job in jobs:
        who = name(job)
        _stage_report = lambda s, who=who: report(who, s)  # noqa: E731
        try:
            result = keep(fn(job))
        finally:
            _stage_report = None
        out.append(result)
        report(who, finished(result))
    return out


def _run_pool(jobs: Iterable[J], fn: Callable[[J], R], n: int, report: Report,
              name: Callable[[J], str], keep: Callable[[R], R], finished: Callable[[R], str],
              pool: ProcessPoolExecutor) -> list[R]:
    results: dict[int, R] = {}
    names: dict[int, str] = {}
    queue: Iterator[tuple[int, J]] = enumerate(jobs)
    pending: dict[Future[R], int] = {}
    more = True
    # A bounded number in flight: jobs (and their results) do not pile up in memory.
    while more or pending:
        while more and len(pending) < 2 * n:
            nxt = next(queue, None)
            if nxt is None:
                more = False
                break
            i, job = nxt
            names[i] = name(job)
            report(names[i], "queued")
            pending[pool.submit(fn, job)] = i
        if not pending:
            break
        done, _ = wait(pending, return_when=FIRST_COMPLETED)
        for fut in done:
            i = pending.pop(fut)
            results[i] = keep(fut.result())
            report(names.pop(i), finished(results[i]))
    return [results[i] for i in range(len(results))]


def _run_dask(jobs: Iterable[J], fn: Callable[[J], R], scheduler: str | None, report: Report,
              name: Callable[[J], str], initializer: Callable[[], None] | None,
              keep: Callable[[R], R], finished: Callable[[R], str]) -> list[R]:
    if not scheduler:
        raise SpringbackError("--backend dask needs --scheduler ADDRESS (e.g. tcp://host:8786)")
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise SpringbackError(
            "the Dask backend needs dask.distributed: pip install 'springback[cluster]'"
        ) from None
    try:
        client = Client(scheduler, timeout="20s")
    except OSError as exc:
        raise SpringbackError(f"cannot reach the Dask scheduler at {scheduler}: {exc}") from None
    try:
        if initializer is not None:
            client.run(initializer)  # once on every worker the cluster has now
        window = 2 * max(1, sum(client.nthreads().values()))
        queue: Iterator[tuple[int, J]] = enumerate(jobs)
        index: dict[object, int] = {}
        names: dict[int, str] = {}
        flow = as_completed()

        def submit() -> bool:
            nxt = next(queue, None)
            if nxt is None:
                return False
            i, job = nxt
            names[i] = name(job)
            fut = client.submit(fn, job, pure=False)
            index[fut.key] = i
            report(names[i], "queued")
            flow.add(fut)
            return True

        more = all(submit() for _ in range(window))
        results: dict[int, Any] = {}
        for fut in flow:
            i = index.pop(fut.key)
            results[i] = keep(fut.result())
            fut.release()
            report(names.pop(i), finished(results[i]))
            more = more and submit()
        return [results[i] for i in range(len(results))]
    finally:
        client.close()
