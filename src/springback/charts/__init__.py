"""Charts of a booklet: altair/Vega-Lite specs rendered to accessible inline SVG.

Each builder reads one participant's results (and events from the data), returns a `Chart`
or None when there is nothing to draw, and never fails a booklet over a missing family.
"""

from __future__ import annotations

from collections.abc import Callable, Collection

from springback.charts.calendar import calendar_chart
from springback.charts.change import grid_chart, recovery_chart, warnings_chart
from springback.charts.common import Chart, Inputs, checked_gettext
from springback.charts.landscape import landscape_chart, load_chart
from springback.charts.mood import mood_chart
from springback.charts.questionnaires import questionnaire_charts
from springback.charts.svg import checked_whole
from springback.findings import Findings
from springback.metrics.results import ParticipantResults
from springback.model import Edition, ParticipantData
from springback.settings import StudySettings

__all__ = ["Chart", "make_charts"]


@checked_whole
def make_charts(
    data: ParticipantData,
    results: ParticipantResults,
    settings: StudySettings,
    language: str,
    gettext: Callable[[str], str],
    findings: Findings | None = None,
    edition: Edition = "participant",
    wanted: Collection[str] | None = None,
) -> dict[str, Chart]:
    """Build every chart that has data, keyed 'mood', 'calendar', ..., 'questionnaire_<q>',
    with its words in the edition's voice; with `wanted`, only the charts it names (a name
    ending in '_' stands for every key it starts, as 'questionnaire_')."""
    ctx = Inputs(data, results, settings, language, checked_gettext(gettext), findings, edition)

    def drawn(key: str) -> bool:
        return wanted is None or key in wanted

    charts: dict[str, Chart] = {}
    for key, build in (("mood", mood_chart), ("calendar", calendar_chart),
                       ("recovery", recovery_chart), ("warnings", warnings_chart)):
        chart = build(ctx) if drawn(key) else None
        if chart is not None:
            charts[chart.key] = chart
    if drawn("questionnaire_"):
        for chart in questionnaire_charts(ctx):
            charts[chart.key] = chart
    for key, build in (("grid", grid_chart), ("landscape", landscape_chart),
                       ("load", load_chart)):
        chart = build(ctx) if drawn(key) else None
        if chart is not None:
            charts[chart.key] = chart
    return charts
