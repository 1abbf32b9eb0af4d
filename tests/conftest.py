"""Shared fixtures: the example study, copied and built once per test session.

With pytest-xdist the build is shared between workers through a lock file, so the whole suite
builds the example only once.
"""

from __future__ import annotations

import fcntl
import os
import shutil
from pathlib import Path

import pytest

from tests.support.project import copy_example

pytest_plugins = ["tests.support.browser"]
"""The headless-browser fixture of the accessibility tests."""


@pytest.fixture
def example_copy(tmp_path: Path) -> Path:
    """A fresh, unbuilt copy of the example study in a temporary folder."""
    return copy_example(tmp_path / "study")


@pytest.fixture
def quick_example(tmp_path: Path) -> Path:
    """A copy of the example with 99 surrogates per test (for tests about the build, not the
    statistics: the whole pipeline runs, only the Monte Carlo p-values are coarser)."""
    project = copy_example(tmp_path / "study")
    toml = project / "study.toml"
    text = toml.read_text(encoding="utf-8")
    assert "surrogates = 1000\n" in text
    toml.write_text(text.replace("surrogates = 1000\n", "surrogates = 99\n"), encoding="utf-8")
    return project


@pytest.fixture(scope="session")
def built_example(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A copy of the example study, built once for the whole session (read-only for tests)."""
    from springback.build.pipeline import build

    # Under xdist every worker's base folder sits in the run's own folder, which the workers
    # share; a run without xdist keeps the build in its own base folder (never a stale one).
    base = tmp_path_factory.getbasetemp()
    shared = (base.parent if os.environ.get("PYTEST_XDIST_WORKER") else base) / \
        "springback-built-example"
    shared.mkdir(parents=True, exist_ok=True)
    lock = shared / ".lock"
    project = shared / "study"
    done = shared / ".done"
    with lock.open("w") as handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        try:
            if not done.exists():
                if project.exists():
                    shutil.rmtree(project)
                copy_example(project)
                report = build(project, jobs=2)
                assert not report.failed, [(o.participant, o.reason) for o in report.failed]
                done.write_text(report.build_id)
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)
    return project
