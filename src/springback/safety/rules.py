"""Safety rules from study.toml turned into flags, and the referral-text checks for `check`.

Public functions (pure; no file access):

    evaluate(data: ParticipantData, results: ParticipantResults, settings: StudySettings,
             period_end: pd.Timestamp | None = None) -> list[Flag]
    study_end(study: Study) -> pd.Timestamp | None     # pass as period_end for silence rules
    referral_problems(study: Study) -> list[Problem]
    flags_rows(flags: list[Flag]) -> list[dict]        # rows of out/flags.csv

`Flag` is the one record of a flag (defined in `springback.model`, so the findings stage
before this one reads it too); `Flag.to_row` / `Flag.from_row` are its one row conversion.

Rule sources and what "hit" means (one flag per rule and participant, for the latest hit):

- questionnaire: a total score at or above `at_least`, or at or below `at_most`;
- item: a momentary rating of that item at or above `at_least` (or at or below `at_most`);
- shift: a step towards worse found by the shifts family (direction 'worse') that is larger than
  the person's usual day-to-day swing (`exceeds_swings`);
- silence_days = N: no answered prompt in the last N days of the data period, that is
  last answer <= period end - N days. The period end is `period_end` when given (the study's
  last prompt, from `study_end`), or else the participant's last prompt, answered or not.

`within_days = D` keeps only data from the last D days before the period end (for the shift
rule: change points on study days in that window). It has no effect on silence rules.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from springback.errors import Problem, error, warning
from springback.metrics.results import ParticipantResults
from springback.model import Flag, ParticipantData, Study
from springback.settings import SETTINGS_FILE, SafetyRule, StudySettings

EXAMPLE_NUMBER = "+99 "
"""Every phone number in the example study starts like this (no such country code exists)."""
EXAMPLE_MARK = "(fictional)"
REFERRAL_FIELDS = ("questions", "feeling_worse", "self_harm", "emergency")


FLAG_CSV_COLUMNS = ("participant", "rule", "action", "value", "when")
"""Columns of out/flags.csv, in order."""
FLAG_RECORD_KEYS = ("rule", "action", "value", "when", "detail")
"""Keys of a flag's row in an archived build's manifest (`Flag.from_row(row, participant)`
reads it back)."""
__all__ = ["FLAG_CSV_COLUMNS", "FLAG_RECORD_KEYS", "Flag", "evaluate", "flags_rows",
           "referral_problems", "study_end"]


def _local(times: pd.Series, timezone: str) -> pd.Series:
    times = pd.to_datetime(times)
    if times.dt.tz is None:
        return times.dt.tz_localize(timezone)
    return times.dt.tz_convert(timezone)


def _in_zone(moment: Any, timezone: str) -> pd.Timestamp:
    moment = pd.Timestamp(moment)
    return moment.tz_convert(timezone) if moment.tzinfo else moment.tz_localize(timezone)


def _answered(momentary: pd.DataFrame, settings: StudySettings) -> pd.Series:
    if "answered" in momentary.columns:
        return momentary["answered"].fillna(False).astype(bool)
    items = [c for c in settings.items if c in momentary.columns]
    if not items:
        return pd.Series(True, index=momentary.index)
    return momentary[items].notna().any(axis=1)


def _participant_end(data: ParticipantData, settings: StudySettings) -> pd.Timestamp | None:
    """The participant's last moment of data: latest prompt (answered or not) or score."""
    tz = settings.study.timezone
    candidates: list[pd.Timestamp] = []
    m = data.momentary
    if len(m):
        candidates.append(_local(m["local_time"], tz).max())
        if "scheduled" in m.columns and m["scheduled"].notna().any():
            candidates.append(_local(m["scheduled"].dropna(), tz).max())
    q = data.questionnaires
    if len(q):
        candidates.append(_local(q["local_time"], tz).max())
    candidates = [c for c in candidates if pd.notna(c)]
    return max(candidates) if candidates else None


def study_end(study: Study) -> pd.Timestamp | None:
    """The study's last prompt or score, in the study's time zone (the data period's end)."""
    tz = study.settings.study.timezone
    ends: list[pd.Timestamp] = []
    for end in (study.last_prompt, study.last_score):  # found while the study was read
        if end is not None and pd.notna(end):
            ends.append(_in_zone(end, tz))
    return max(ends) if ends else None


def _bound_words(rule: SafetyRule) -> str:
    parts = []
    if rule.at_least is not None:
        parts.append(f"{rule.at_least:g} or more")
    if rule.at_most is not None:
        parts.append(f"{rule.at_most:g} or less")
    return " or ".join(parts)


def _window_words(rule: SafetyRule) -> str:
    return f" in the last {rule.within_days:g} days" if rule.within_days else ""


def _threshold_flag(pid: str, rule: SafetyRule, times: pd.Series, values: pd.Series,
                    nouns: tuple[str, str], end: pd.Timestamp | None) -> Flag | None:
    """Flag the latest value crossing the rule's bound, counting every crossing."""
    keep = values.notna()
    if rule.within_days and end is not None:
        keep &= times > end - pd.Timedelta(days=rule.within_days)
    hit = pd.Series(False, index=values.index)
    if rule.at_least is not None:
        hit |= values >= rule.at_least
    if rule.at_most is not None:
        hit |= values <= rule.at_most
    hit &= keep
    if not hit.any():
        return None
    order = times[hit].sort_values(kind="stable")
    last = order.index[-1]
    value, day = float(values[last]), times[last].date().isoformat()
    count = int(hit.sum())
    detail = (f"{count} {nouns[count != 1]} at {_bound_words(rule)}{_window_words(rule)}; "
              f"the latest was {value:g} on {day}")
    return Flag(pid, rule.name, rule.action, value, day, detail)


def _shift_flag(pid: str, rule: SafetyRule, results: ParticipantResults,
                end: pd.Timestamp | None, variable: str) -> Flag | None:
    family = results.families.get("shifts")
    if family is None or "change_points" not in family.tables:
        return None
    cp = family.tables["change_points"]
    if not len(cp):
        return None
    hit = (cp["direction"] == "worse") & cp["exceeds_swings"].astype(bool)
    days = pd.to_datetime(cp["study_day"])
    if rule.within_days and end is not None:
        first_day = (end - pd.Timedelta(days=rule.within_days)).tz_localize(None).normalize()
        hit &= days >= first_day
    if not hit.any():
        return None
    last = days[hit].sort_values(kind="stable").index[-1]
    size, day = float(cp.loc[last, "size"]), days[last].date().isoformat()
    detail = (f"a step towards worse in the daily average {variable} of {abs(size):.2g} "
              f"scale points from {day}, larger than the usual day-to-day swing"
              f"{_window_words(rule)}")
    return Flag(pid, rule.name, rule.action, size, day, detail)


def _silence_flag(pid: str, rule: SafetyRule, data: ParticipantData, settings: StudySettings,
                  end: pd.Timestamp | None) -> Flag | None:
    assert rule.silence_days is not None
    if end is None:
        return None
    m = data.momentary
    answered = m[_answered(m, settings)] if len(m) else m
    if not len(answered):
        return Flag(pid, rule.name, rule.action, None, "",
                    "no answered prompts at all in the data period")
    last = _local(answered["local_time"], settings.study.timezone).max()
    days = (end - last) / pd.Timedelta(days=1)
    if days < rule.silence_days:
        return None
    day = last.date().isoformat()
    detail = (f"no answers for {days:.1f} days before the end of the data period "
              f"(rule: {rule.silence_days} days); the last answer was on {day}")
    return Flag(pid, rule.name, rule.action, round(days, 1), day, detail)


def evaluate(data: ParticipantData, results: ParticipantResults, settings: StudySettings,
             period_end: pd.Timestamp | None = None) -> list[Flag]:
    """Apply every safety rule to one participant; return a flag per rule that was hit.

    A participant who withdrew consent is not analysed, so raises no flag.
    """
    pid = data.participant
    if data.consent != "yes":
        return []
    tz = settings.study.timezone
    ends = [_in_zone(x, tz) for x in (period_end, _participant_end(data, settings))
            if x is not None]
    end = max(ends) if ends else None
    flags: list[Flag] = []
    for rule in settings.safety.rules:
        flag: Flag | None = None
        if rule.questionnaire is not None:
            q = data.questionnaires
            rows = q[q["questionnaire"] == rule.questionnaire] if len(q) else q
            if len(rows):
                label = settings.questionnaires[rule.questionnaire].label.get(
                    "en", rule.questionnaire)
                flag = _threshold_flag(pid, rule, _local(rows["local_time"], tz),
                                       rows["score"].astype(float),
                                       (f"{label} score", f"{label} scores"), end)
        elif rule.item is not None:
            m = data.momentary
            if len(m) and rule.item in m.columns:
                label = settings.label_of(rule.item, "en")
                flag = _threshold_flag(pid, rule, _local(m["local_time"], tz),
                                       m[rule.item].astype(float),
                                       (f"rating of '{label}'", f"ratings of '{label}'"), end)
        elif rule.shift:
            flag = _shift_flag(pid, rule, results, end,
                               settings.label_of(results.series.variable, "en"))
        elif rule.silence_days is not None:
            flag = _silence_flag(pid, rule, data, settings, end)
        if flag is not None:
            flags.append(flag)
    return flags


def flags_rows(flags: list[Flag]) -> list[dict[str, Any]]:
    """Rows of out/flags.csv, one per flag."""
    return [f.to_row(FLAG_CSV_COLUMNS) for f in flags]


def referral_problems(study: Study) -> list[Problem]:
    """Errors for missing referral texts; warnings for the example's fictional numbers."""
    settings = study.settings
    out: list[Problem] = []
    missing: dict[tuple[str, str], list[str]] = {}
    roster = study.roster
    for row in roster.itertuples(index=False):
        if str(row.consent) != "yes" or not bool(row.feedback):
            continue
        language, region = str(row.language), str(row.region)
        if settings.referral_for(region, language) is None:
            missing.setdefault((language, region), []).append(str(row.participant))
    for (language, region), people in sorted(missing.items()):
        shown = ", ".join(people[:5]) + (f" and {len(people) - 5} more" if len(people) > 5
                                         else "")
        out.append(error(
            f"{SETTINGS_FILE}: referral",
            f"no referral text for language '{language}' and region '{region}'",
            expected="a [[referral]] table for this language and region, or for region "
            "'default'", found=f"{len(people)} participant(s) who need it: {shown}",
            fix=f"add [[referral]] with language = \"{language}\" and region = \"{region}\" "
            "(or region = \"default\"), listing local services", code="no-referral"))
    for i, ref in enumerate(settings.referral):
        for name in REFERRAL_FIELDS:
            text = getattr(ref, name)
            if EXAMPLE_NUMBER in text or EXAMPLE_MARK in text.lower():
                out.append(warning(
                    f"{SETTINGS_FILE}: referral[{i}].{name}",
                    "this referral text still holds the example study's fictional services",
                    found=text if len(text) <= 80 else text[:77] + "...",
                    fix="replace it with real local services and numbers before any booklet "
                    "is given to a participant", code="fictional-referral"))
    return out
