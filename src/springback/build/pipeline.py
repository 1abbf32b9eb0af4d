"""Orchestration: load the study, compute, check safety, render, write atomically, archive.

`build()` reads as the recipe. Per-participant work is one picklable function so it can run in
this process, in a `spawn` process pool, or on a Dask cluster (see `springback.build.runner`); each
worker warms its engines once (`warm_engines`). Each participant's files are written into the
build's staging folder as soon as they arrive (`springback.build.output`), so the parent never
holds every booklet at once; unchanged participants are copied from the last archived build.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator
from pathlib import Path

from springback.build.fingerprints import (
    catalogue_files,
    fingerprint,
    settings_hash,
    template_files,
    templates_hash,
)
from springback.build.history import History
from springback.build.jobs import run_job, warm_engines
from springback.build.output import (
    MARKER_TEXT,
    OUT_MARKER,
    archive_staged,
    check_out_dir,
    stage_files,
    study_tables,
    write_files,
)
from springback.build.overview import overview
from springback.build.records import BuildReport, Job, ParticipantOutcome
from springback.build.runner import Workers
from springback.model import Study
from springback.settings import StudySettings
from springback.study import study_files

Progress = Callable[[str, str], None]
"""Called as progress(participant, stage); the stages are listed in `springback.build.progress`."""


def build(
    project: Path,
    *,
    out: Path | None = None,
    participants: list[str] | None = None,
    jobs: int | None = None,
    force: bool = False,
    backend: str = "local",
    scheduler: str | None = None,
    progress: Progress | None = None,
    workers: Workers | None = None,
) -> BuildReport:
    """Build every selected participant's booklets, the study tables and the overview.

    `workers`: a local pool started earlier (`springback.build.ahead`); the jobs run there."""
    from springback import intake
    from springback.archive import manifest as archive
    from springback.build.preflight import require_buildable
    from springback.build.runner import run_jobs
    from springback.files import BuildLock, clean_stale, staging_dir
    from springback.safety.rules import study_end

    project = Path(project).resolve()
    study = intake.load_study(project)
    require_buildable(project, study)
    settings = study.settings
    out_dir = (project / (out or settings.output.out_dir)).resolve()
    archive_dir = project / settings.output.archive_dir
    check_out_dir(project, out_dir, archive_dir)
    report = progress or (lambda _p, _s: None)
    with BuildLock(archive_dir):
        started = archive.build_time()
        selected = _select(study, participants)
        tmpl = template_files(project)
        s_hash, t_hash = settings_hash(settings), templates_hash(tmpl + catalogue_files())
        # The one read of earlier builds and reviews; jobs get plain values from it.
        history = History.read(project, with_last=not force or bool(participants))
        end = study_end(study)
        clean_stale(out_dir.parent)
        # Files go to disk as they arrive; the folder replaces out/ only once it is archived.
        with staging_dir(out_dir) as staging:
            report("", f"start:{len(selected)}")
            reused: dict[str, ParticipantOutcome] = {}

            def jobs_to_run() -> Iterator[Job]:
                # Made one at a time as the workers take them, so the first participant is
                # being built while the others are still being fingerprinted.
                for pid in heaviest_first(study, selected, settings):
                    data = study.slice(pid)
                    fp = fingerprint(data, s_hash, t_hash, end)
                    job = Job(project, data, settings, fp, history.version(pid, fp), started,
                              end, history.decision(pid, fp), history.unreadable)
                    again = None if force else history.reused(
                        pid, staging, fingerprint=fp, version=job.version)
                    if again is None:
                        yield job
                    else:
                        reused[pid] = again
                        report(pid, "unchanged")

            fresh = run_jobs(
                jobs_to_run(), run_job, jobs_n=jobs, backend=backend, scheduler=scheduler,
                progress=report, initializer=warm_engines,
                on_result=lambda o: stage_files(o, staging),
                finished=lambda o: "failed" if o.status == "failed" else "done",
                total=len(selected), workers=workers,
            )
            by_id = {**reused, **{o.participant: o for o in fresh}}
            if participants:
                by_id.update(_carried(history, study, selected, staging))
            outcomes = [by_id[pid] for pid in study.participants() if pid in by_id]
            report("", "writing the overview, tables and archive")
            tables = study_tables(study, outcomes)
            tables.update(study_files(study, tables))
            page, actions = overview(project, study, outcomes, started)
            write_files({**tables, "actions.csv": actions, "index.html": page.encode("utf-8")},
                        staging)
            ended = archive.build_time(now=True)
            build_id = archive_staged(
                project, out_dir, staging, study=study, outcomes=outcomes, started=started,
                ended=ended, templates=tmpl,
            )
            # Written after archiving, so the archived outputs stay the booklets and tables.
            (staging / OUT_MARKER).write_text(MARKER_TEXT, encoding="utf-8")
            # out/release/ belongs to `springback release`: a build carries it over untouched.
            released = out_dir / "release"
            if released.is_dir() and not released.is_symlink():
                os.replace(released, staging / "release")
    return BuildReport(out_dir, build_id, tuple(outcomes), tuple(study.warnings))


def _carried(history: History, study: Study, selected: list[str],
             staging: Path) -> dict[str, ParticipantOutcome]:
    """Everyone a partial build leaves out, as the last build had them (`History.reused`);
    so `build --participant X` never makes review or release lose the others' booklets."""
    out = {}
    for pid in study.participants():
        if pid not in selected and (o := history.reused(pid, staging)) is not None:
            out[pid] = o
    return out


def heaviest_first(study: Study, selected: list[str], settings: StudySettings) -> list[str]:
    """The participants in the order their work is handed out: the longest jobs first.

    A booklet's PDF is most of a participant's time, so the estimate is the number of
    editions, then the number of prompts. Handing out the longest jobs first keeps the last
    minutes of a parallel build from waiting on one long job while the other workers idle
    (longest-processing-time-first scheduling). Output never depends on this order.
    """
    roster = study.roster.set_index("participant")
    both = "therapist" in settings.booklet.editions

    def cost(pid: str) -> tuple[int, int, str]:
        row = roster.loc[pid]
        if row["consent"] != "yes" or not bool(row["feedback"]):
            return (0, 0, pid)  # metrics at most, no booklet
        editions = 2 if both and bool(row["therapist"]) else 1
        return (-editions, -study.rows_of(pid), pid)

    return sorted(selected, key=cost)


def _select(study: Study, participants: list[str] | None) -> list[str]:
    everyone = study.participants()
    if not participants:
        return everyone
    unknown = [p for p in participants if p not in everyone]
    if unknown:
        from springback.errors import DataError, error

        raise DataError(
            [error("--participant", f"participant '{p}' is not in the roster",
                   expected="one of: " + ", ".join(everyone), code="unknown-participant")
             for p in unknown]
        )
    return sorted(set(participants))
