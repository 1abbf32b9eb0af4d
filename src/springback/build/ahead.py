"""Whether a build starts its workers before it loads the study.

A worker's start (interpreter, imports, warm-up) takes about 2 s of a core. A first build, or a
forced one, builds everyone, so its workers are started at once (`runner.Workers`) and warm up
while the parent imports its modules and loads the study. Any other build may reuse every
participant and need no worker at all; its pool starts, as before, with the first job that
needs building. One job (`--jobs 1`), a chosen few participants or a Dask cluster start none
ahead.
"""

from __future__ import annotations

from pathlib import Path

from springback.build.runner import Workers, default_jobs

WARM_UP = "springback.build.jobs:warm_engines"


def workers_ahead(project: Path, *, jobs: int | None, backend: str, force: bool,
                  participants: list[str] | None) -> Workers | None:
    """A started pool when this build will need one for everyone, else None."""
    from springback.archive.audit import LOG
    from springback.files import project_dirs

    n = jobs or default_jobs()
    if backend != "local" or n <= 1 or participants or not (project / "study.toml").is_file():
        return None  # (not a project: the build's own error comes at once, not after 2 s)
    if not force and (project_dirs(project).archive / LOG).is_file():
        return None  # built before: perhaps nothing to do
    return Workers(n, initializer=WARM_UP)
