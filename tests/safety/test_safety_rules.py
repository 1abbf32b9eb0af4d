"""Safety rules: each rule kind raises a flag with the action set, and only when it should."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest

from springback.metrics.results import Family, ParticipantResults, SeriesDescription
from springback.model import ParticipantData
from springback.safety.rules import Flag, evaluate, flags_rows, study_end
from springback.settings import from_mapping

TZ = "Europe/Amsterdam"
BASE: dict[str, Any] = {
    "study": {"timezone": TZ},
    "items": {"sad": {"scale": [1, 7]}, "hopeless": {"scale": [1, 7]}},
    "composites": {"low_mood": {"items": ["sad", "hopeless"], "higher_is": "worse"}},
    "questionnaires": {"mood_q": {"range": [0, 27], "label": {"en": "mood questionnaire"}}},
}


def _settings(*rules: dict[str, Any]) -> Any:
    settings, problems = from_mapping({**BASE, "safety": {"rules": list(rules)}})
    assert not [p for p in problems if p.is_error]
    return settings


def _data(days: int = 20, hopeless: dict[int, float] | None = None,
          scores: dict[int, float] | None = None, stop_after: int | None = None) -> ParticipantData:
    """Three answers a day from 1 March 2026; `hopeless` sets one day's noon rating."""
    start = pd.Timestamp("2026-03-01 09:00", tz=TZ)
    local = pd.DatetimeIndex([start + pd.Timedelta(days=d, hours=h)
                              for d in range(days) for h in (0, 4, 9)])
    n = len(local)
    item = np.full(n, 2.0)
    for day, value in (hopeless or {}).items():
        item[3 * day + 1] = value
    answered = np.ones(n, dtype=bool)
    if stop_after is not None:
        answered[3 * stop_after:] = False
    momentary = pd.DataFrame({
        "participant": "P01", "time": local.tz_convert("UTC"), "local_time": local,
        "study_day": local.tz_localize(None).normalize(), "scheduled": local.tz_convert("UTC"),
        "source_row": np.arange(2, n + 2), "sad": 3.0, "hopeless": item,
    })
    momentary.loc[~answered, ["sad", "hopeless"]] = np.nan
    q_days = sorted((scores or {}).items())
    q_local = pd.DatetimeIndex([start + pd.Timedelta(days=d, hours=10) for d, _ in q_days],
                               tz=TZ)
    questionnaires = pd.DataFrame({
        "participant": "P01", "time": q_local.tz_convert("UTC"), "local_time": q_local,
        "questionnaire": "mood_q", "score": [float(s) for _, s in q_days]})
    empty = pd.DataFrame({"participant": pd.Series([], dtype=str)})
    return ParticipantData("P01", "en", "default", "yes", True, True, momentary, empty,
                           questionnaires, empty, empty)


def _results(change_points: pd.DataFrame | None = None) -> ParticipantResults:
    families = {} if change_points is None else {
        "shifts": Family(tables={"change_points": change_points})}
    return ParticipantResults("P01", "low_mood", families, enough_data=True,
                              series=SeriesDescription("low_mood", True, (1.0, 7.0)))


@pytest.mark.parametrize("action", ["hold", "refer"])
def test_item_rule(action: str) -> None:
    """Check that a rating at the bound gives one flag with the action and the latest hit."""
    settings = _settings({"name": "hopeless high", "item": "hopeless", "at_least": 6,
                          "action": action})
    flags = evaluate(_data(hopeless={3: 6.0, 8: 7.0}), _results(), settings)
    assert flags == [Flag("P01", "hopeless high", action, 7.0, "2026-03-09",
                          "2 ratings of 'hopeless' at 6 or more; the latest was 7 on 2026-03-09")]
    assert evaluate(_data(hopeless={3: 5.9}), _results(), settings) == []


def test_within_days_keeps_only_recent_data() -> None:
    """Check that within_days counts only the last days before the end of the data period."""
    rule = {"name": "recent", "item": "hopeless", "at_least": 6, "action": "hold"}
    data = _data(days=20, hopeless={5: 7.0})  # 14.5 days before the last prompt
    assert evaluate(data, _results(), _settings({**rule, "within_days": 14})) == []
    [flag] = evaluate(data, _results(), _settings({**rule, "within_days": 15}))
    assert flag.when == "2026-03-06" and "in the last 15 days" in flag.detail


@pytest.mark.parametrize(("bound", "scores", "expected"), [
    ({"at_least": 20}, {2: 12, 9: 21, 16: 17}, (21.0, "2026-03-10")),
    ({"at_least": 20}, {2: 12, 9: 19}, None),
    ({"at_most": 4}, {2: 12, 9: 4, 16: 3}, (3.0, "2026-03-17")),
])
def test_questionnaire_rule(bound: dict[str, float], scores: dict[int, float],
                            expected: tuple[float, str] | None) -> None:
    """Check questionnaire rules with at_least and at_most, flagging the latest crossing."""
    settings = _settings({"name": "score", "questionnaire": "mood_q", "action": "refer", **bound})
    flags = evaluate(_data(scores=scores), _results(), settings)
    if expected is None:
        assert flags == []
    else:
        assert [(f.value, f.when, f.action) for f in flags] == [(*expected, "refer")]
        assert flags[0].detail.startswith("1 mood questionnaire score at") or \
            flags[0].detail.startswith("2 mood questionnaire scores at")


def _cp(*rows: tuple[str, str, float, bool]) -> pd.DataFrame:
    return pd.DataFrame({
        "study_day": pd.to_datetime([r[0] for r in rows]), "direction": [r[1] for r in rows],
        "size": [r[2] for r in rows], "method": "PELT", "exceeds_swings": [r[3] for r in rows]})


def test_shift_rule() -> None:
    """Check that only a worsening that exceeds the usual swings raises the shift rule."""
    settings = _settings({"name": "abrupt worsening", "shift": True, "action": "hold"})
    data = _data()
    hit = _cp(("2026-03-05", "better", -1.5, True), ("2026-03-12", "worse", 1.2, True))
    assert [(f.value, f.when, f.action) for f in evaluate(data, _results(hit), settings)] == [
        (1.2, "2026-03-12", "hold")]
    small = _cp(("2026-03-12", "worse", 0.2, False))
    better = _cp(("2026-03-12", "better", -1.2, True))
    for table in (small, better, _cp()):
        assert evaluate(data, _results(table), settings) == []
    assert evaluate(data, _results(None), settings) == []  # too little data for shifts
    recent = _settings({"name": "w", "shift": True, "action": "hold", "within_days": 5})
    assert evaluate(data, _results(hit), recent) == []


def test_silence_rule() -> None:
    """Check silence: no answers in the last N days before the end of the data period."""
    # Answers stop after day 14 of 20; prompts go on being sent (unanswered rows) to day 19.
    data = _data(days=20, stop_after=15)
    last_answer = pd.Timestamp("2026-03-15 18:00", tz=TZ)
    end = pd.Timestamp("2026-03-20 18:00", tz=TZ)
    gap = (end - last_answer) / pd.Timedelta(days=1)
    [flag] = evaluate(data, _results(), _settings(
        {"name": "stopped", "silence_days": 5, "action": "refer"}))
    assert (flag.value, flag.when) == (round(gap, 1), "2026-03-15")
    assert evaluate(data, _results(), _settings(
        {"name": "stopped", "silence_days": 6, "action": "refer"})) == []


def test_silence_uses_the_study_end() -> None:
    """Check that a study-wide end catches a participant who stopped (no unanswered rows)."""
    settings = _settings({"name": "stopped", "silence_days": 7, "action": "hold"})
    data = _data(days=5)
    assert evaluate(data, _results(), settings) == []
    later = pd.Timestamp("2026-03-20 21:00", tz=TZ)
    [flag] = evaluate(data, _results(), settings, period_end=later)
    # Last answer 5 March 18:00, end 20 March 21:00: 15 days and 3 hours.
    assert flag.when == "2026-03-05" and flag.value == 15.1
    naive = pd.Timestamp("2026-03-20 21:00")  # read in the study's time zone
    assert evaluate(data, _results(), settings, period_end=naive) == [flag]


def test_no_answers_at_all() -> None:
    """Check that a participant with prompts but no answers is flagged by a silence rule."""
    settings = _settings({"name": "stopped", "silence_days": 3, "action": "refer"})
    [flag] = evaluate(_data(days=5, stop_after=0), _results(), settings)
    assert flag.value is None and flag.when == "" and "no answered prompts" in flag.detail


def test_every_rule_is_evaluated_in_order() -> None:
    """Check that several rules give one flag each, in the order of the settings."""
    settings = _settings(
        {"name": "q", "questionnaire": "mood_q", "at_least": 20, "action": "refer"},
        {"name": "i", "item": "hopeless", "at_least": 6, "action": "hold"},
    )
    flags = evaluate(_data(hopeless={2: 7.0}, scores={4: 22}), _results(), settings)
    assert [(f.rule, f.action) for f in flags] == [("q", "refer"), ("i", "hold")]
    assert flags_rows(flags) == [
        {"participant": "P01", "rule": "q", "action": "refer", "value": 22.0,
         "when": "2026-03-05"},
        {"participant": "P01", "rule": "i", "action": "hold", "value": 7.0,
         "when": "2026-03-03"},
    ]


@pytest.mark.parametrize(("rule", "key", "code"), [
    ({"questionnaire": "phq8", "at_least": 1}, "safety.rules[0].questionnaire",
     "unknown-questionnaire"),
    ({"item": "hopeles", "at_least": 1}, "safety.rules[0].item", "unknown-item"),
    ({"item": "sad"}, "safety.rules[0]", "rule-threshold"),
    ({"item": "sad", "shift": True, "at_least": 1}, "safety.rules[0]", "rule-sources"),
])
def test_bad_rules_are_settings_errors_naming_the_key(rule: dict[str, Any], key: str,
                                                      code: str) -> None:
    """Check that a rule naming an unknown questionnaire or item is an error at its key."""
    _, problems = from_mapping({**BASE, "safety": {"rules": [
        {"name": "bad", "action": "hold", **rule}]}})
    errors = [p for p in problems if p.is_error]
    assert [(p.where, p.code) for p in errors] == [(f"study.toml: {key}", code)]


def test_study_end() -> None:
    """Check that the study's end is its latest prompt or score, in the study's zone."""
    from springback.model import Study

    data = _data(days=4, scores={6: 3})
    study = Study(root=None, settings=_settings(), roster=pd.DataFrame(),  # type: ignore[arg-type]
                  momentary_rows=data.momentary, event_rows=data.events,
                  questionnaire_rows=data.questionnaires, set_aside=data.set_aside,
                  quality=data.quality)
    assert study_end(study) == pd.Timestamp("2026-03-07 19:00", tz=TZ)
