"""Charts of a booklet: altair/Vega-Lite specs rendered to accessible inline SVG.

Each builder reads one participant's results (and events from the data), returns a `Chart`
or None when there is nothing to draw, and never fails a booklet over a missing family.
"""

from __future__ import annotations

from collections.abc import Callable

from springback.charts.calendar import calendar_chart
from springback.charts.change import grid_chart, recovery_chart, warnings_chart
from springback.charts.common import Chart, Inputs, checked_gettext
from springback.charts.landscape import landscape_chart, load_chart
from springback.charts.mood import mood_chart
from springback.charts.questionnaires import questionnaire_charts
from springback.findings import Findings
from springback.metrics.results import ParticipantResults
from springback.model import Edition, ParticipantData
from springback.settings import StudySettings

__all__ = ["Chart", "make_charts"]


def make_charts(
    data: ParticipantData,
    results: ParticipantResults,
    settings: StudySettings,
    language: str,
    gettext: Callable[[str], str],
    findings: Findings | None = None,
    edition: Edition = "participant",
) -> dict[str, Chart]:
    """Build every chart that has data, keyed 'mood', 'calendar', ..., 'questionnaire_<q>',
    with its words in the edition's voice."""
    ctx = Inputs(data, results, settings, language, checked_gettext(gettext), findings, edition)
    charts: dict[str, Chart] = {}
    for build in (mood_chart, calendar_chart, recovery_chart, warnings_chart):
        chart = build(ctx)
        if chart is not None:
            charts[chart.key] = chart
    for chart in questionnaire_charts(ctx):
        charts[chart.key] = chart
    for build in (grid_chart, landscape_chart, load_chart):
        chart = build(ctx)
        if chart is not None:
            charts[chart.key] = chart
    return charts
