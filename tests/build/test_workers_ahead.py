"""A pool started before its jobs: the same results, each worker warmed once, and started only
for a build that will need it (a first or a forced build of everyone)."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from springback.build import ahead, jobs, runner
from springback.build.runner import Workers, run_jobs

pytestmark = pytest.mark.xdist_group("example")

_WARMED: list[str] = []


def warm() -> None:
    _WARMED.append("warm")


def _job(x: int) -> tuple[int, int, int]:
    return x * x, len(_WARMED), os.getpid()


def test_jobs_run_in_the_pool_started_ahead_each_worker_warmed_once() -> None:
    with Workers(2, initializer=f"{__name__}:warm") as workers:
        first = run_jobs(range(6), _job, workers=workers)
        again = run_jobs(range(6, 9), _job, workers=workers)  # the same pool, still open
    assert [sq for sq, _, _ in first + again] == [x * x for x in range(9)]
    assert {warmed for _, warmed, _ in first + again} == {1}
    assert len({pid for _, _, pid in first + again}) <= 2
    assert os.getpid() not in {pid for _, _, pid in first}


def test_the_warm_up_is_named_as_the_build_s_own() -> None:
    assert runner._named(ahead.WARM_UP) is jobs.warm_engines


def test_workers_start_ahead_only_for_a_first_or_forced_build_of_everyone(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    started: list[int] = []

    class Counted:
        def __init__(self, n: int, initializer: str | None = None) -> None:
            started.append(n)

    monkeypatch.setattr(ahead, "Workers", Counted)
    project = tmp_path / "study"
    project.mkdir()

    def ahead_for(**kw: object) -> bool:
        before = len(started)
        args: dict[str, object] = dict(jobs=2, backend="local", force=False, participants=None)
        args.update(kw)
        ahead.workers_ahead(project, **args)  # type: ignore[arg-type]
        return len(started) > before

    assert not ahead_for()  # not a project: its error comes without waiting on workers
    (project / "study.toml").write_text("", encoding="utf-8")
    assert ahead_for() and started[-1] == 2
    assert not ahead_for(jobs=1)
    assert not ahead_for(participants=["P01"])
    assert not ahead_for(backend="dask")
    (project / "archive").mkdir()
    (project / "archive" / "audit.jsonl").write_text("{}\n", encoding="utf-8")
    assert not ahead_for()  # built before: perhaps nothing needs building
    assert ahead_for(force=True)
    shutil.rmtree(project / "archive")
    (project / "study.toml").write_text('[output]\narchive_dir = "kept"\n', encoding="utf-8")
    (project / "kept").mkdir()
    (project / "kept" / "audit.jsonl").write_text("{}\n", encoding="utf-8")
    assert not ahead_for()  # the archive named in [output]
