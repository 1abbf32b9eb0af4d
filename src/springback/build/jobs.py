"""Per-participant work: one picklable function from a job to an outcome, run in this process,
in a `spawn` process pool or on a Dask cluster (see `springback.build.runner`). Each worker
warms its engines once (`warm_engines`)."""

from __future__ import annotations

import dataclasses
import gc
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import pandas as pd

from springback import __version__
from springback.build.records import BOOKLETS, Job, ParticipantOutcome
from springback.model import Edition, ParticipantData
from springback.settings import StudySettings


def warm_engines() -> None:
    """Start the chart engine and the PDF engine once in a worker process (pool initializer)."""
    try:
        import altair as alt

        import springback.metrics  # noqa: F401  (the statistics stack's import time)
        from springback.charts.svg import to_svg
        from springback.render import html_to_pdf

        line = (alt.Chart(alt.Data(values=[{"day": 0, "mood": 3.0}, {"day": 1, "mood": 4.0}]))
                .mark_line().encode(x=alt.X(field="day", type="quantitative"),
                                    y=alt.Y(field="mood", type="quantitative")))
        svg = to_svg(line, "warm", "Warm-up", "A two-point line.", "en")
        html_to_pdf(
            "<!doctype html><html lang='en'><head><meta charset='utf-8'><title>Warm-up</title>"
            f"</head><body><p>Warm-up.</p>{svg}</body></html>",
            base_url=Path.cwd(),
        )
    except Exception:  # a broken engine is reported by each participant's job, with the reason
        return


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
        from springback.errors import SpringbackError

        told = isinstance(exc, SpringbackError)  # already a message for the user
        return ParticipantOutcome(
            participant=job.data.participant,
            status="failed",
            reason=str(exc) if told else f"{type(exc).__name__}: {exc}",
            fingerprint=job.fingerprint,
            version=job.version,
        )


def _run_job(job: Job) -> ParticipantOutcome:
    from springback import findings, metrics
    from springback.build.history import review_state
    from springback.build.runner import stage
    from springback.metrics.shifts import shift_rows
    from springback.safety import rules as safety

    data, settings = job.data, job.settings
    pid = data.participant
    base: dict[str, Any] = {"participant": pid, "fingerprint": job.fingerprint,
                            "version": job.version,
            "period": _period(data)}
    if data.consent != "yes":
        return ParticipantOutcome(status="withdrawn", reason="consent withdrawn", **base)
    stage("computing")
    results = metrics.compute(data, settings)
    flags = safety.evaluate(data, results, settings, period_end=job.period_end)
    found = findings.decide(results, flags, settings)
    state = review_state(flags, job.decision, job.unreadable)
    common: dict[str, Any] = dict(
        metrics_rows=metrics.results_rows(results),
        shift_rows=shift_rows(results),
        finding_rows=found.rows(),
        review_state=state,
        compliance=_compliance(results),
        flags=tuple(flags),
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
    try:
        files = render_booklets(job, results, found, flags, state, editions)
    except Exception as exc:  # the flags still reach the overview and out/actions.csv
        return ParticipantOutcome(status="failed", reason=f"{type(exc).__name__}: {exc}",
                                  **common)
    return ParticipantOutcome(status="built", files=files, editions=editions, **common)


def render_booklets(
    job: Job, results: Any, found: Any, flags: list[Any], state: str,
    editions: Iterable[Edition],
) -> dict[str, bytes]:
    """Render the chosen editions of one participant to HTML and PDF bytes."""
    from springback import charts, render
    from springback.i18n.language import translations
    from springback.render.context import chart_names

    settings, language = job.settings, job.data.language
    data = _named_events(job.data, settings, language)
    env = render.make_environment(job.project / "templates", language,
                                  timezone=settings.study.timezone)
    gettext = translations(language).gettext
    files: dict[str, bytes] = {}
    folder = f"{BOOKLETS}/{data.participant}"
    for edition in editions:
        # Each edition's charts speak in its voice (to the participant, or about them); only
        # the charts the edition shows are drawn.
        chart_set = charts.make_charts(data, results, settings, language, gettext, found,
                                       edition, chart_names(edition))
        context = render.build_context(
            settings=settings, data=data, results=results, findings=found, flags=flags,
            review_state=state,
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

