"""The job runner: in-process, a spawn pool, and a real Dask cluster give the same bytes."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from springback.build import runner
from springback.build.pipeline import build
from springback.build.runner import run_jobs

pytestmark = pytest.mark.xdist_group("example")


def _square(x: int) -> int:
    return x * x


def test_pool_returns_results_in_job_order() -> None:
    """Check a spawn pool gives results in the order of the jobs, whatever finishes first."""
    jobs = list(range(12))
    assert run_jobs(jobs, _square, jobs_n=2) == [x * x for x in jobs]
    assert run_jobs(jobs, _square, jobs_n=1) == [x * x for x in jobs]


_WARMED: list[str] = []


def _warm() -> None:
    _WARMED.append("warm")


def _warm_count(x: int) -> tuple[int, int]:
    """The job's number and how often this worker process ran the initializer."""
    return x, len(_WARMED)


def test_pool_runs_the_initializer_once_per_worker() -> None:
    """Check every spawn worker ran the initializer exactly once, before its first job."""
    out = run_jobs(range(8), _warm_count, jobs_n=2, initializer=_warm, total=8)
    assert [x for x, _ in out] == list(range(8))
    assert {warmed for _, warmed in out} == {1}


def _staged(x: int) -> int:
    runner.stage("computing")
    runner.stage("rendering")
    return x


def test_in_process_run_reports_stages_and_passes_each_result_on() -> None:
    """Check in-process jobs report their stages, results pass on_result as they arrive, and
    the finishing label comes from the result."""
    heard: list[tuple[str, str]] = []
    passed: list[int] = []

    def keep(r: int) -> int:
        passed.append(r)
        return -r

    out = run_jobs(
        (x for x in (1, 2)), _staged, jobs_n=1, progress=lambda p, s: heard.append((p, s)),
        name=str, on_result=keep, finished=lambda r: "failed" if r == -2 else "done",
    )
    assert out == [-1, -2] and passed == [1, 2]
    assert heard == [("1", "computing"), ("1", "rendering"), ("1", "done"),
                     ("2", "computing"), ("2", "rendering"), ("2", "failed")]
    runner.stage("outside a job")  # heard by nobody, and no error


def test_pool_reports_queued_then_finished_for_every_job() -> None:
    """Check a pool reports each job queued and then finished (workers cannot report mid-job)."""
    heard: list[tuple[str, str]] = []
    run_jobs(list(range(5)), _staged, jobs_n=2, name=str,
             progress=lambda p, s: heard.append((p, s)))
    for x in map(str, range(5)):
        mine = [s for p, s in heard if p == x]
        assert mine == ["queued", "done"]


def _digest(folder: Path) -> dict[str, str]:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*")) if p.is_file()
    }


@pytest.mark.slow
def test_dask_cluster_build_equals_local_build(
    quick_example: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Check a build on a two-worker Dask LocalCluster equals a local build byte for byte."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    distributed = pytest.importorskip("dask.distributed")
    import shutil

    other = tmp_path / "other"
    shutil.copytree(quick_example, other)
    from springback.intake import load_study

    chosen = load_study(quick_example).participants()[:2]
    local = build(quick_example, participants=chosen, jobs=1)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        remote = build(other, participants=chosen, backend="dask",
                       scheduler=cluster.scheduler_address)
    assert [o.status for o in local.outcomes] == [o.status for o in remote.outcomes]
    assert not any(o.files for o in remote.outcomes)  # streamed to disk as they arrived
    a, b = _digest(local.out_dir / "booklets"), _digest(remote.out_dir / "booklets")
    assert a and a == b


def _never(x: int) -> int:
    raise AssertionError("no job should have run")


def test_no_jobs_start_no_workers(monkeypatch: pytest.MonkeyPatch) -> None:
    """Check an empty job stream (every participant reused) returns at once without a pool."""

    def refuse(*_a: object, **_k: object) -> None:
        raise AssertionError("a process pool was started for no jobs")

    monkeypatch.setattr(runner, "ProcessPoolExecutor", refuse)
    assert run_jobs((x for x in ()), _never, jobs_n=2, initializer=_warm, total=12) == []


def test_jobs_are_made_only_as_they_are_taken() -> None:
    """Check a generator of jobs is consumed as the pool takes jobs, not all before it starts
    (a build fingerprints later participants while the first are already being built)."""
    made: list[int] = []

    def jobs() -> object:
        for x in range(20):
            made.append(x)
            yield x

    seen: list[int] = []

    def keep(r: int) -> int:
        seen.append(len(made))  # how many jobs existed when this result arrived
        return r

    out = run_jobs(jobs(), _square, jobs_n=2, on_result=keep, total=20)  # type: ignore[arg-type]
    assert out == [x * x for x in range(20)]
    assert seen[0] < 20  # the first result came back before the last job was made
