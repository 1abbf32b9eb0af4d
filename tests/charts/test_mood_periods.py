"""The mood chart and calendar of a person measured in two periods, the composite's items named,
and captions that phrase the course finding instead of comparing numbers with cut-offs.

The two-period person is the first of the vendored open data of Bringmann et al. 2013 ("A
network approach to psychopathology", PLoS ONE 8:e60188, S4): six days a period, ten prompts a
day, the two periods ten weeks apart (tests/intake/test_intake_bringmann.py).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest

from springback import findings, intake, metrics
from springback.charts import make_charts
from springback.charts.common import Inputs
from springback.charts.mood import mood_chart
from springback.charts.palette import CHART
from springback.charts.svg import PLOT_WIDTH
from springback.findings.records import Finding, Findings
from springback.i18n.language import translations
from springback.safety import rules as safety
from tests.charts.test_charts import make_data, make_results, make_settings
from tests.intake.test_intake_bringmann import DAYS_PER_PERIOD, PERIOD_STARTS, _project

SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def two_periods(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    study = intake.load_study(_project(Path(tmp_path_factory.mktemp("periods")) / "study"))
    settings = study.settings
    data = study.slice(study.participants()[0])
    results = metrics.compute(data, settings)
    found = findings.decide(results, safety.evaluate(data, results, settings), settings)
    return data, results, settings, found


def _charts(two_periods, language: str = "en"):  # type: ignore[no-untyped-def]
    data, results, settings, found = two_periods
    return make_charts(data, results, settings, language, translations(language).gettext, found)


def _gap_days() -> int:
    """Days without prompts between the periods, from the design (day 1 of each, six days)."""
    first_end = pd.Timestamp(PERIOD_STARTS[0]) + pd.Timedelta(days=DAYS_PER_PERIOD - 1)
    return (pd.Timestamp(PERIOD_STARTS[1]) - first_end).days - 1


def _texts(svg: str) -> list[str]:
    return [t.text or "" for t in ET.fromstring(svg).iter(f"{SVG}text")]


def test_the_calendar_names_the_gap_instead_of_showing_missed_days(two_periods):
    calendar = _charts(two_periods)["calendar"]
    label = f"{round(_gap_days() / 7)} weeks without prompts"
    assert _gap_days() == 64 and label == "9 weeks without prompts"
    assert label in _texts(calendar.svg)  # written in the picture, not only in its text
    table = calendar.table
    weeks = table[table.columns[0]].tolist()
    assert weeks == ["1 March", label, "10 May"]
    assert (table.iloc[1, 1:] == "").all()
    # Only the twelve days of the two periods count; none of the gap is a day answered 0/10.
    assert f"over {2 * DAYS_PER_PERIOD} days" in calendar.description
    assert "answered none" not in calendar.description
    assert "From 7 March to 9 May there were no prompts (9 weeks without prompts)." \
        in calendar.description


def test_the_gap_is_named_in_the_booklet_language(two_periods):
    nl = _charts(two_periods, "nl")["calendar"]
    de = _charts(two_periods, "de")["calendar"]
    assert "9 weken zonder meldingen" in _texts(nl.svg)
    assert "9 Wochen ohne Abfragen" in _texts(de.svg)


def _placed(svg: str, stroke: str, width: str) -> list[list[float]]:
    """The x of every point of each path drawn with that stroke, in the picture's own
    coordinates (the translations of the groups around it added)."""
    out: list[list[float]] = []

    def walk(node: ET.Element, dx: float) -> None:
        shift = re.match(r"translate\(([-\d.]+)", node.get("transform", ""))
        dx += float(shift.group(1)) if shift else 0.0
        if node.tag == f"{SVG}path" and node.get("stroke") == stroke and \
                node.get("stroke-width") == width:
            out.append([dx + float(v) for v in re.findall(r"[ML]([-\d.]+),", node.get("d", ""))])
        for child in node:
            walk(child, dx)

    walk(ET.fromstring(svg), 0.0)
    return out


def test_the_mood_line_breaks_between_the_periods(two_periods):
    mood = _charts(two_periods)["mood"]
    lines = _placed(mood.svg, CHART.primary, "3")
    assert len(lines) == 2  # one line per period, none across the gap
    first, second = sorted(lines)
    assert len(first) == len(second) == DAYS_PER_PERIOD  # a point per day of each period
    assert max(first) < min(second)


def test_the_periods_are_drawn_side_by_side_with_the_gap_named(two_periods):
    mood = _charts(two_periods)["mood"]
    texts = _texts(mood.svg)
    # Each period has an axis of its own days: none of the 64 days between is labelled.
    assert {"1 Mar", "3 Mar", "5 Mar", "10 May", "12 May", "14 May"} <= set(texts)
    assert not {"15 Mar", "29 Mar", "12 Apr", "26 Apr"} & set(texts)
    assert "9 weeks without prompts" in texts  # the gap, named between the two panels
    assert "From 7 March to 9 May there were no prompts (9 weeks without prompts)." \
        in mood.description
    # The daily lines take most of the width: each spans five of its panel's six days, and
    # the two panels share the plot width but the strip naming the gap. On one axis from
    # 1 March to 16 May they took 2 x 5 of 76 days: 71 px of the 540.
    first, second = sorted(_placed(mood.svg, CHART.primary, "3"))
    drawn = (max(first) - min(first)) + (max(second) - min(second))
    assert drawn > 0.75 * PLOT_WIDTH
    assert abs((max(first) - min(first)) - (max(second) - min(second))) < 1  # equal periods
    # The data table still lists each day answered, in both periods, and nothing between.
    assert len(mood.table) == 2 * DAYS_PER_PERIOD
    nl = _charts(two_periods, "nl")["mood"]
    assert "9 weken zonder meldingen" in _texts(nl.svg)


def test_the_items_of_the_composite_are_named():
    data, series = make_data()
    settings = make_settings()
    mood = make_charts(data, make_results(series), settings, "en", lambda m: m)["mood"]
    assert mood.description.startswith(
        "Low mood is the average of your answers to feeling down and tense.")
    nl = make_charts(data, make_results(series), settings, "nl",
                     translations("nl").gettext)["mood"]
    assert nl.description.startswith("Somberheid is het gemiddelde van je antwoorden op ")


def test_reverse_scored_items_are_named_as_counted_the_other_way():
    data, series = make_data()
    settings = make_settings()
    turned = settings.items["tense"].model_copy(update={"reverse": True})
    settings = settings.model_copy(update={"items": {**settings.items, "tense": turned}})
    mood = make_charts(data, make_results(series), settings, "en", lambda m: m)["mood"]
    assert mood.description.startswith("Low mood is the average of your answers to feeling "
                                       "down and to tense, counted the other way round.")


def _with_course(reading: str, **numbers: object) -> Findings:
    return Findings("p01", (Finding("p01", "course", reading, "clear", dict(numbers)),))


@pytest.mark.parametrize(("reading", "direction", "sentence"), [
    ("gradual_change", "worse", "Over the study, your mood slowly got worse."),
    ("gradual_change", "better", "Over the study, your mood slowly got better."),
    ("passing_episode", "worse",
     "For a while your mood was worse than usual, and then it came back."),
    ("switching", "", "Your mood moved back and forth between two levels."),
    ("no_clear_change", "", "We found no clear lasting change in your mood during the study."),
])
def test_the_caption_phrases_the_course_finding(reading, direction, sentence):
    data, series = make_data()
    results = make_results(series)
    settings = make_settings()
    ctx = Inputs(data, results, settings, "en", lambda m: m,
                 _with_course(reading, direction=direction))
    chart = mood_chart(ctx)
    assert chart is not None and sentence in chart.description
    # The same data with another reading: the words follow the finding, not the numbers.
    other = mood_chart(replace(ctx, findings=_with_course("no_clear_change")))
    assert other is not None and (sentence in other.description) == (reading == "no_clear_change")


def test_the_indicator_lines_break_between_the_periods(two_periods):
    warnings = _charts(two_periods)["warnings"]
    texts = _texts(warnings.svg)
    # Rolling windows are taken within each period, so each indicator has a line per period.
    for colour in (CHART.primary, CHART.secondary):
        lines = _placed(warnings.svg, colour, "2.5")
        assert len(lines) == 2
        first, second = sorted(lines)
        assert max(first) < min(second)
    assert {"1 Mar", "10 May"} <= set(texts)
    assert not {"15 Mar", "29 Mar", "12 Apr", "26 Apr"} & set(texts)
    lines_of = [[s.text for s in t.iter(f"{SVG}tspan")]
                for t in ET.fromstring(warnings.svg).iter(f"{SVG}text")]
    assert ["9 weeks", "without prompts"] in lines_of  # the gap, in two lines on a low panel
    assert warnings.description.endswith(
        "From 7 March to 9 May there were no prompts (9 weeks without prompts).")
