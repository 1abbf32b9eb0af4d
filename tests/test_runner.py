"""The job runner: in-process, a spawn pool, and a real Dask cluster give the same bytes."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from springback.build import build
from springback.runner import run_jobs

pytestmark = pytest.mark.xdist_group("example")


def _square(x: int) -> int:
    return x * x


def test_pool_returns_results_in_job_order() -> None:
    """Check a spawn pool gives results in the order of the jobs, whatever finishes first."""
    jobs = list(range(12))
    assert run_jobs(jobs, _square, jobs_n=2) == [x * x for x in jobs]
    assert run_jobs(jobs, _square, jobs_n=1) == [x * x for x in jobs]


def _digest(folder: Path) -> dict[str, str]:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*")) if p.is_file()
    }


@pytest.mark.slow
def test_dask_cluster_build_equals_local_build(
    example_copy: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Check a build on a two-worker Dask LocalCluster equals a local build byte for byte."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    distributed = pytest.importorskip("dask.distributed")
    import shutil

    other = tmp_path / "other"
    shutil.copytree(example_copy, other)
    from springback.intake import load_study

    chosen = load_study(example_copy).participants()[:2]
    local = build(example_copy, participants=chosen, jobs=1)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        remote = build(other, participants=chosen, backend="dask",
                       scheduler=cluster.scheduler_address)
    assert [o.status for o in local.outcomes] == [o.status for o in remote.outcomes]
    a, b = _digest(local.out_dir / "booklets"), _digest(remote.out_dir / "booklets")
    assert a and a == b
