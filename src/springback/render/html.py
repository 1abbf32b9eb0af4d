"""Render a booklet edition and the study overview to HTML text."""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Mapping
from typing import Any

import jinja2

from springback.charts import palette
from springback.render.context import EDITIONS, BookletContext
from springback.settings import StudySettings

OVERVIEW_STATUSES = ("built", "unchanged", "withdrawn", "no feedback", "not enough data", "failed")
"""What the build did for a participant; the overview explains each one in words."""


def render_edition(env: jinja2.Environment, context: BookletContext, edition: str) -> str:
    """Render one edition (`participant.html` or `therapist.html`) of a booklet."""
    if edition not in EDITIONS:
        raise ValueError(f"edition must be one of {', '.join(EDITIONS)}, got {edition!r}")
    if context["edition"] != edition:
        raise ValueError(
            f"the context was built for the {context['edition']} edition, not {edition}"
        )
    return env.get_template(f"{edition}.html").render(**context)


def render_overview(
    env: jinja2.Environment,
    rows: Iterable[Mapping[str, Any]],
    settings: StudySettings,
    built_at: dt.datetime,
    *,
    actions: Iterable[Any] = (),
    data_end: dt.date | None = None,
) -> str:
    """Render the research team's overview: open actions first, then one row per
    participant, booklets linked (held ones marked as held)."""
    rows = sorted(rows, key=lambda r: str(r["participant"]))
    with_booklet = [r for r in rows if r.get("status") in ("built", "unchanged")]
    without = [r for r in rows if r.get("status") not in ("built", "unchanged")]
    return env.get_template("overview.html").render(
        study_title=settings.study.title,
        study_team=settings.study.team,
        with_booklet=with_booklet,
        without_booklet=without,
        built_at=built_at,
        actions=list(actions),
        data_end=data_end,
        large_print=False,
        paper=settings.booklet.paper,
        palette_css=palette.css_variables(),
    )

