"""Run per-participant jobs: in this process, in a `spawn` process pool, or on a Dask cluster.

A `fork` pool hangs once the chart engine has run in the parent, so local pools always use
`spawn`. Each worker process warms its chart and PDF engines on its first job and keeps them.
Results come back in the order of the jobs, so output does not depend on scheduling.
"""

from __future__ import annotations

import multiprocessing
import os
from collections.abc import Callable, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import Any, TypeVar

from springback.errors import SpringbackError

J = TypeVar("J")
R = TypeVar("R")


def default_jobs() -> int:
    """All cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def run_jobs(
    jobs: Sequence[J],
    fn: Callable[[J], R],
    *,
    jobs_n: int | None = None,
    backend: str = "local",
    scheduler: str | None = None,
    progress: Callable[[str, str], None] | None = None,
    name: Callable[[J], str] = lambda j: str(getattr(getattr(j, "data", j), "participant", j)),
) -> list[R]:
    """Apply `fn` to every job and return the results in job order."""
    report = progress or (lambda _p, _s: None)
    if backend == "dask":
        return _run_dask(jobs, fn, scheduler, report, name)
    if backend != "local":
        raise SpringbackError(f"unknown backend '{backend}'; use 'local' or 'dask'")
    n = min(jobs_n or default_jobs(), max(1, len(jobs)))
    if n <= 1:
        out = []
        for job in jobs:
            report(name(job), "working")
            out.append(fn(job))
            report(name(job), "done")
        return out
    results: dict[int, R] = {}
    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=n, mp_context=ctx) as pool:
        pending: dict[Future[R], int] = {}
        queue = list(enumerate(jobs))
        # Submit a bounded number at a time so memory stays flat as the study grows.
        while queue or pending:
            while queue and len(pending) < 2 * n:
                i, job = queue.pop(0)
                report(name(job), "queued")
                pending[pool.submit(fn, job)] = i
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                i = pending.pop(fut)
                results[i] = fut.result()
                report(name(jobs[i]), "done")
    return [results[i] for i in range(len(jobs))]


def _run_dask(
    jobs: Sequence[J],
    fn: Callable[[J], R],
    scheduler: str | None,
    report: Callable[[str, str], None],
    name: Callable[[J], str],
) -> list[R]:
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
        futures = client.map(fn, list(jobs), pure=False)
        index = {f.key: i for i, f in enumerate(futures)}
        results: dict[int, Any] = {}
        for fut in as_completed(futures):
            i = index[fut.key]
            results[i] = fut.result()
            report(name(jobs[i]), "done")
        return [results[i] for i in range(len(jobs))]
    finally:
        client.close()
