"""Orchestration: load the study, compute, check safety, render, write atomically, archive.

`build()` reads as the recipe. Per-participant work is one picklable function so it can run in
this process, in a `spawn` process pool, or on a Dask cluster (see `springback.runner`); each
worker warms its engines once (`warm_engines`). Each participant's files are written into the
build's staging folder as soon as they arrive (`springback.build_output`), so the parent never
holds every booklet at once; unchanged participants are copied from the last archived build.
"""

from __future__ import annotations

import dataclasses
import gc
import hashlib
import json
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

import pandas as pd

from springback import __version__
from springback.build_output import (
    Previous,
    archive_staged,
    render_overview,
    stage_files,
    study_tables,
    write_files,
)
from springback.model import ParticipantData, Study
from springback.settings import StudySettings, normalised

BOOKLETS = "booklets"
EDITIONS = ("participant", "therapist")


@dataclass(frozen=True)
class ParticipantOutcome:
    """What building one participant produced (files as bytes, rows for the study tables)."""

    participant: str
    status: str
    """'built', 'withdrawn', 'no feedback', 'not enough data', 'unchanged' or 'failed'."""
    reason: str = ""
    files: dict[str, bytes] = field(default_factory=dict)
    """Path relative to out/ -> content."""
    metrics_rows: list[dict[str, Any]] = field(default_factory=list)
    flag_rows: list[dict[str, Any]] = field(default_factory=list)
    shift_rows: list[dict[str, Any]] = field(default_factory=list)
    review_state: str = "not needed"
    fingerprint: str = ""
    version: int = 0
    period: tuple[str, str] = ("", "")
    compliance: float | None = None
    editions: tuple[str, ...] = ()
    flags: list[dict[str, Any]] = field(default_factory=list)
    reused: bool = False
    """True when nothing this participant's booklet depends on changed since the last build."""
    stored: tuple[str, ...] = ()
    """Files already written to the build's staging folder (paths relative to out/)."""

    @property
    def outputs(self) -> list[str]:
        """Every output file of this participant, staged or still in memory."""
        return sorted({*self.stored, *self.files})


@dataclass(frozen=True)
class BuildReport:
    """The result of one build: where it went and what happened to each participant."""

    out_dir: Path
    build_id: str
    outcomes: tuple[ParticipantOutcome, ...]
    warnings: tuple[Any, ...] = ()

    @property
    def failed(self) -> list[ParticipantOutcome]:
        return [o for o in self.outcomes if o.status == "failed"]

    def counts(self) -> dict[str, int]:
        """Participants per summary line (see OUTCOME_LABELS), in that order, zeros left out."""
        out = dict.fromkeys(OUTCOME_LABELS, 0)
        for o in self.outcomes:
            out[summary_key(o)] += 1
        return {k: n for k, n in out.items() if n}


OUTCOME_LABELS = {
    "built": "built",
    "held": "built, held for review",
    "unchanged": "skipped: unchanged since the last build",
    "withdrawn": "withdrawn (no booklet)",
    "no feedback": "no feedback wanted (no booklet)",
    "not enough data": "not enough data (no booklet)",
    "failed": "failed",
}
"""Summary lines of a build, in the order they are shown."""


def summary_key(o: ParticipantOutcome) -> str:
    """The summary line an outcome counts under."""
    if o.reused:
        return "unchanged"
    if o.status == "built" and o.review_state == "held":
        return "held"
    return o.status if o.status in OUTCOME_LABELS else "failed"


# ---------------------------------------------------------------------------------------
# Fingerprints: what a booklet depends on


def frame_digest(df: pd.DataFrame) -> bytes:
    """A digest of a frame's columns, types and values (for a participant's fingerprint).

    pandas' row hashes (`hash_pandas_object`, 64 bits a row) under SHA-256, with the column
    names and types: about 12 times faster than hashing the frame's CSV text, which at 2000
    participants made fingerprinting the longest part of a rebuild. A pandas release that
    hashed differently would only rebuild every booklet once.
    """
    h = hashlib.sha256()
    h.update(json.dumps([[str(c), str(t)] for c, t in df.dtypes.items()]).encode("utf-8"))
    h.update(pd.util.hash_pandas_object(df, index=False).to_numpy().tobytes())
    return h.digest()


BOOKLET_NEUTRAL_SETTINGS = ("delivery", "archive", "output")
"""Settings sections that cannot change a booklet's content: editing them keeps its version."""


def settings_hash(settings: StudySettings) -> str:
    """SHA-256 of the settings a booklet depends on (normalised, key-sorted)."""
    plain = normalised(settings)
    for key in BOOKLET_NEUTRAL_SETTINGS:
        plain.pop(key, None)
    text = json.dumps(plain, sort_keys=True, ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def templates_hash(files: Iterable[Path]) -> str:
    h = hashlib.sha256()
    for f in sorted(files, key=lambda p: (p.name, str(p))):
        h.update(f.name.encode() + b"\0" + f.read_bytes() + b"\0")
    return h.hexdigest()


def fingerprint(
    data: ParticipantData, settings_digest: str, templates_digest: str, period_end: Any = None
) -> str:
    """SHA-256 over one participant's data slice, the settings, the templates, the tool and
    the study's end (silence rules look back from it)."""
    h = hashlib.sha256()
    for part in (data.momentary, data.events, data.questionnaires):
        h.update(frame_digest(part))
    roster = f"{data.participant}|{data.language}|{data.region}|{data.consent}|"
    roster += f"{data.feedback}|{data.therapist}"
    for text in (roster, settings_digest, templates_digest, __version__, str(period_end)):
        h.update(text.encode("utf-8") + b"\0")
    return h.hexdigest()


def catalogue_files() -> list[Path]:
    """The compiled message catalogues: a changed translation changes the booklets too."""
    from springback.i18n import LOCALE_DIR

    return sorted(Path(LOCALE_DIR).rglob("*.mo"))


def template_files(project: Path) -> list[Path]:
    """Every template file that can be used: packaged ones and the project's overrides."""
    from springback.render.env import template_search_path

    files: list[Path] = []
    for folder in template_search_path(project / "templates"):
        files += [p for p in sorted(folder.rglob("*")) if p.is_file()]
    return files


# ---------------------------------------------------------------------------------------
# Per participant

WARM_CHART: dict[str, Any] = {
    "data": {"values": [{"day": 0, "mood": 3.0}, {"day": 1, "mood": 4.0}]},
    "mark": "line",
    "encoding": {"x": {"field": "day", "type": "quantitative"},
                 "y": {"field": "mood", "type": "quantitative"}},
}


def warm_engines() -> None:
    """Start the chart engine and the PDF engine once in a worker process (pool initializer)."""
    try:
        import springback.metrics  # noqa: F401  (the statistics stack's import time)
        from springback.charts.svg import to_svg
        from springback.render import html_to_pdf

        svg = to_svg(WARM_CHART, "warm", "Warm-up", "A two-point line.", "en")
        html_to_pdf(
            "<!doctype html><html lang='en'><head><meta charset='utf-8'><title>Warm-up</title>"
            f"</head><body><p>Warm-up.</p>{svg}</body></html>",
            base_url=Path.cwd(),
        )
    except Exception:  # a broken engine is reported by each participant's job, with the reason
        return


@dataclass(frozen=True)
class Job:
    """Everything one participant's work needs, picklable for a worker process."""

    project: Path
    data: ParticipantData
    settings: StudySettings
    fingerprint: str
    version: int
    built_at: datetime
    period_end: pd.Timestamp | None = None
    """The study's last prompt or score: silence rules look back from here."""


YOUNG_GENERATION_THRESHOLD = 50_000
"""Allocations between two young-generation collections while a participant is built."""


@contextmanager
def fewer_collections() -> Iterator[None]:
    """Run the cyclic garbage collector less often inside the block, and fully at its end.

    Laying out a booklet allocates millions of short-lived objects that reference counting
    frees; at CPython's default young-generation threshold (700) the cyclic collector still
    runs thousands of times per booklet, traversing them each time (a fifth of the PDF time in
    an alternating test of four booklets, 5% over the 200-participant benchmark's 271; see the
    README's Performance section). Memory stays bounded because the block
    ends with a full collection and `render_booklets` collects after every PDF. (The free heap
    is not handed back to the system between participants: the next one would only fault the
    same pages in again.)
    """
    before = gc.get_threshold()
    gc.set_threshold(YOUNG_GENERATION_THRESHOLD, *before[1:])
    try:
        yield
    finally:
        gc.set_threshold(*before)
        gc.collect()


def run_job(job: Job) -> ParticipantOutcome:
    """Build one participant; never raises (a failure is an outcome with the reason)."""
    try:
        with fewer_collections():
            return _run_job(job)
    except Exception as exc:  # one participant's failure never stops the others
        return ParticipantOutcome(
            participant=job.data.participant,
            status="failed",
            reason=f"{type(exc).__name__}: {exc}",
            fingerprint=job.fingerprint,
            version=job.version,
        )


def _run_job(job: Job) -> ParticipantOutcome:
    from springback import metrics, safety
    from springback.metrics.shifts import shift_rows
    from springback.review import review_state
    from springback.runner import stage

    data, settings = job.data, job.settings
    pid = data.participant
    base = {"participant": pid, "fingerprint": job.fingerprint, "version": job.version,
            "period": _period(data)}
    if data.consent != "yes":
        return ParticipantOutcome(status="withdrawn", reason="consent withdrawn", **base)
    stage("computing")
    results = metrics.compute(data, settings)
    flags = safety.evaluate(data, results, settings, period_end=job.period_end)
    state = review_state(job.project, pid, job.fingerprint, flags)
    common = dict(
        metrics_rows=metrics.results_rows(results),
        flag_rows=safety.flags_rows(flags),
        shift_rows=shift_rows(results),
        review_state=state,
        compliance=_compliance(results),
        flags=[_flag_dict(f) for f in flags],
        **base,
    )
    if not data.feedback:
        return ParticipantOutcome(status="no feedback", reason="no feedback wanted", **common)
    if not results.enough_data:
        return ParticipantOutcome(status="not enough data", reason=results.reason, **common)
    editions = tuple(
        e for e in settings.booklet.editions if e == "participant" or data.therapist
    )
    stage("rendering")
    files = render_booklets(job, results, flags, state, editions)
    return ParticipantOutcome(status="built", files=files, editions=editions, **common)


def render_booklets(
    job: Job, results: Any, flags: list[Any], state: str, editions: Iterable[str]
) -> dict[str, bytes]:
    """Render the chosen editions of one participant to HTML and PDF bytes."""
    from springback import charts, render
    from springback.i18n import translations

    settings, language = job.settings, job.data.language
    data = _named_events(job.data, settings, language)
    env = render.make_environment(job.project / "templates", language,
                                  timezone=settings.study.timezone)
    gettext = translations(language).gettext
    chart_set = charts.make_charts(data, results, settings, language, gettext)
    files: dict[str, bytes] = {}
    folder = f"{BOOKLETS}/{data.participant}"
    for edition in editions:
        context = render.build_context(
            settings=settings, data=data, results=results, flags=flags, review_state=state,
            charts=chart_set, edition=edition, language=language, version=job.version,
            built_at=job.built_at, tool_version=__version__,
        )
        html = render.render_edition(env, context, edition)
        if "html" in settings.booklet.formats:
            files[f"{folder}/{edition}.html"] = html.encode("utf-8")
        if "pdf" in settings.booklet.formats:
            files[f"{folder}/{edition}.pdf"] = render.html_to_pdf(html, base_url=job.project)
            gc.collect()  # the layout's reference cycles go now, not with the next booklet's
    return files


def _named_events(data: ParticipantData, settings: StudySettings, language: str) -> ParticipantData:
    """The participant's data with event kinds named in the booklet's language."""
    if data.events.empty or not settings.events.labels:
        return data
    kinds = data.events["kind"].map(
        lambda k: settings.event_label(k, language) if isinstance(k, str) else k
    )
    return dataclasses.replace(data, events=data.events.assign(kind=kinds))


def _period(data: ParticipantData) -> tuple[str, str]:
    days = data.momentary["study_day"] if len(data.momentary) else pd.Series([], dtype=object)
    if len(days) == 0:
        return ("", "")
    first, last = pd.Timestamp(days.min()), pd.Timestamp(days.max())
    return (first.date().isoformat(), last.date().isoformat())


def _compliance(results: Any) -> float | None:
    try:
        est = results.estimate("compliance")
    except KeyError:
        return None
    return est.value if est.ok else None


def _flag_dict(flag: Any) -> dict[str, Any]:
    return {k: getattr(flag, k) for k in ("rule", "action", "value", "when", "detail")}


# ---------------------------------------------------------------------------------------
# The recipe


Progress = Callable[[str, str], None]
"""Called as progress(participant, stage); the stages are listed in `springback.progress`."""


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
) -> BuildReport:
    """Build every selected participant's booklets, the study tables and the overview."""
    from springback import archive, intake
    from springback.fsutil import BuildLock, clean_stale, staging_dir
    from springback.preflight import require_buildable
    from springback.runner import run_jobs
    from springback.safety import study_end

    project = Path(project).resolve()
    study = intake.load_study(project)
    require_buildable(project, study)
    settings = study.settings
    out_dir = (project / (out or settings.output.out_dir)).resolve()
    archive_dir = project / settings.output.archive_dir
    report = progress or (lambda _p, _s: None)
    with BuildLock(archive_dir):
        started = archive.build_time()
        selected = _select(study, participants)
        tmpl = template_files(project)
        s_hash, t_hash = settings_hash(settings), templates_hash(tmpl + catalogue_files())
        previous = None if force else Previous.load(project)
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
                    version = archive.booklet_version(project, pid, fp)
                    job = Job(project, data, settings, fp, version, started, end)
                    again = previous.outcome(job, staging) if previous else None
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
                total=len(selected),
            )
            by_id = {**reused, **{o.participant: o for o in fresh}}
            outcomes = [by_id[pid] for pid in selected]
            report("", "writing the overview, tables and archive")
            tables = study_tables(study, outcomes)
            overview = render_overview(project, study, outcomes, started)
            write_files({**tables, "index.html": overview.encode("utf-8")}, staging)
            ended = archive.build_time(now=True)
            build_id = archive_staged(
                project, out_dir, staging, study=study, outcomes=outcomes, started=started,
                ended=ended, templates=tmpl,
            )
    return BuildReport(out_dir, build_id, tuple(outcomes), tuple(study.warnings))


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
