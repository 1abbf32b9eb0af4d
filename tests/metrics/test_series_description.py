"""The series description is made once in metrics; charts, findings and booklets read it.

Expected values are written out from each configuration (the settings' polarity and scale
rules: a composite's `higher_is`, an item worse upwards unless reverse-scored, a composite's
scale the common range of its items) and from the simulated schedule (28 days from Monday
2 March 2026, prompts between 09:00 and 21:00, so study days 2 to 29 March).
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pytest

from springback.charts.common import Inputs
from springback.findings import decide
from springback.metrics import compute
from springback.metrics._series import description, prepare
from springback.metrics.results import ParticipantResults, SeriesDescription
from springback.model import ParticipantData
from springback.render.context import build_context
from springback.settings import StudySettings, from_mapping
from tests.support.metrics_sim import ZONE, participant, prompt_hours, settings_for

FIRST, LAST = dt.date(2026, 3, 2), dt.date(2026, 3, 29)


def _person(periods: bool = False) -> ParticipantData:
    rng = np.random.default_rng(11)
    hours = prompt_hours(28, 5, rng)
    data = participant(hours, np.clip(rng.normal(3.5, 0.8, len(hours)), 1, 7), rng=rng)
    if not periods:
        return data
    # Days 0-9 period 1, days 18-27 period 2, nothing answered in between.
    m = data.momentary.assign(period=np.where(hours < 14 * 24, 1, 2))
    m.loc[(hours >= 10 * 24) & (hours < 18 * 24), ["low_mood", "sad", "down", "cheerful"]] = \
        np.nan
    return dataclasses.replace(data, momentary=m)


def _wellbeing() -> StudySettings:
    """A composite where higher is better, of a 0-10 and a reverse-scored 1-7 item."""
    settings, _ = from_mapping({
        "study": {"timezone": ZONE, "prompts_per_day": 5},
        "items": {"sad": {"scale": [0, 10]}, "cheerful": {"scale": [1, 7], "reverse": True}},
        "composites": {"low_mood": {"items": ["sad", "cheerful"], "higher_is": "better"}},
        "booklet": {"about": "low_mood", "min_prompts": 30},
    })
    return settings


def test_reverse_scored_composite_is_described_as_the_settings_say() -> None:
    got = description(prepare(_person(), settings_for()))
    assert got == SeriesDescription("low_mood", True, (1.0, 7.0), FIRST, LAST, 1)


def test_composite_where_higher_is_better_takes_its_items_common_range() -> None:
    got = description(prepare(_person(), _wellbeing()))
    assert got == SeriesDescription("low_mood", False, (0.0, 10.0), FIRST, LAST, 1)


def test_reverse_scored_item_is_higher_is_better() -> None:
    got = description(prepare(_person(), settings_for(), "cheerful"))
    assert got == SeriesDescription("cheerful", False, (1.0, 7.0), FIRST, LAST, 1)


def test_two_periods_and_days_with_an_answer() -> None:
    data = _person(periods=True)
    last = (data.momentary["study_day"] == np.datetime64(LAST)).to_numpy()
    assert last.sum() == 5
    data.momentary.loc[last, "low_mood"] = np.nan  # the last day's prompts go unanswered
    got = description(prepare(data, settings_for()))
    assert got == SeriesDescription("low_mood", True, (1.0, 7.0), FIRST,
                                    LAST - dt.timedelta(days=1), 2)


def test_results_charts_findings_and_booklet_read_the_one_description() -> None:
    settings = _wellbeing()
    data = _person(periods=True)
    results = compute(data, settings)
    expected = SeriesDescription("low_mood", False, (0.0, 10.0), FIRST, LAST, 2)
    assert results.series == expected
    ctx = Inputs(data, results, settings, "en", lambda s: s)
    assert (ctx.variable, ctx.higher_is_worse, ctx.scale) == ("low_mood", False, (0.0, 10.0))
    assert ctx.value_axis_title() == "low mood (higher means better)"
    findings = decide(results, [], settings)
    assert findings.by_topic()["level"].numbers["scale_high"] == 10.0
    booklet = build_context(
        settings=settings, data=data, results=results, findings=findings, flags=[],
        review_state="approved", charts={}, edition="therapist", language="en", version=1,
        built_at=dt.datetime(2026, 4, 1, tzinfo=dt.UTC), tool_version="test")
    assert (booklet["scale_low"], booklet["scale_high"], booklet["higher_is_worse"]) == \
        (0.0, 10.0, False)
    assert (booklet["period_first"], booklet["period_last"]) == (FIRST, LAST)


def test_results_refuse_a_description_of_another_variable() -> None:
    with pytest.raises(ValueError, match="cheerful"):
        ParticipantResults("p01", "low_mood", {}, True,
                           series=SeriesDescription("cheerful", False, (1.0, 7.0)))
