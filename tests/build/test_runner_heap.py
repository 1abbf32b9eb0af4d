"""A spawn worker's warmed heap is frozen: later full collections walk only the jobs' objects."""

from __future__ import annotations

import gc

from springback.build.runner import run_jobs

_KEPT: list[object] = []


def _warm() -> None:
    # Something the initializer leaves alive for the worker's whole life.
    _KEPT.append([[i] for i in range(1000)])


def _heap(x: int) -> tuple[int, int, bool]:
    """The job's number, how many objects the collector no longer walks, and whether the
    initializer's objects are among them (not tracked by any generation)."""
    tracked = {id(o) for generation in range(3) for o in gc.get_objects(generation)}
    return x, gc.get_freeze_count(), id(_KEPT[0]) in tracked


def test_a_worker_freezes_what_its_initializer_left() -> None:
    out = run_jobs(range(4), _heap, jobs_n=2, initializer=_warm, total=4)
    assert [x for x, _, _ in out] == list(range(4))
    assert all(frozen > 1000 for _, frozen, _ in out)
    assert not any(walked for _, _, walked in out)
