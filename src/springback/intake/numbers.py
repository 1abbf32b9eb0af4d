"""Prompt times of exports without clock times: from day and prompt numbers, or date and clock.

Research files often give a study day number and a prompt number instead of a time. The time
of each row is then built from the design: the date of day 1 (`[data] first_day`, one
`period_starts` date per measurement period, or the roster's `first_day` column), plus the day
number minus one, at the scheduled clock time of the prompt number (`[data] prompt_times`).
These are scheduled times, not answer times; the study record says so (`times_scheduled`).
Files with a date column and a separate clock-time column are joined into one local time.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date

import numpy as np
import pandas as pd

from springback.errors import error
from springback.intake.problems import Sink
from springback.intake.readers import Table, as_number, as_text
from springback.settings import StudySettings
from springback.settings.data_files import parse_clock

MAX_DAY = 36_600
"""The largest day number read (about a hundred years)."""

TIME_KEY = "timestamp"
"""The raw column the built times go into (as local ISO text, read like any timestamp)."""


@dataclass(frozen=True)
class DayOne:
    """What places day numbers on the calendar, besides the study's settings."""

    roster: Mapping[str, date] = field(default_factory=dict)
    """Each participant's date of day 1 from the roster's first_day column."""
    periods: Sequence[str] = ()
    """Every value of the period column in the whole file, in sorted order."""


def from_numbers(settings: StudySettings) -> bool:
    """Whether the study's prompt times are built from day and prompt numbers."""
    return settings.data.columns.day is not None


def time_columns(settings: StudySettings) -> dict[str, str]:
    """Columns that give the time of a prompt, by role (instead of the timestamp column)."""
    cols = settings.data.columns
    if cols.day is not None and cols.prompt is not None:
        out = {cols.day: "day", cols.prompt: "prompt"}
        if cols.period is not None:
            out[cols.period] = "period"
        return out
    if cols.date is not None and cols.clock is not None:
        return {cols.date: "date", cols.clock: "clock"}
    return {cols.timestamp: "timestamp"}


def sorted_periods(values: pd.Series, missing: list[str]) -> list[str]:
    """Distinct period texts in sorted order: as numbers when every one is a number."""
    texts = [str(v) for v in as_text(values, missing).dropna().unique()]
    numbers = pd.to_numeric(pd.Series(texts, dtype=object), errors="coerce")
    if len(texts) and numbers.notna().all():
        return [t for _, t in sorted(zip(numbers.tolist(), texts, strict=True))]
    return sorted(texts)


def period_of(values: pd.Series, order: Sequence[str], missing: list[str]) -> np.ndarray:
    """Each row's period as its 1-based place in `order` (0 where the cell is empty)."""
    place = {text: i + 1 for i, text in enumerate(order)}
    codes, uniques = pd.factorize(as_text(values, missing))
    lookup = np.array([place.get(str(u), 0) for u in uniques] + [0], dtype=np.int64)
    return lookup[codes]


def build_times(where: str, raw: pd.DataFrame, given: np.ndarray, settings: StudySettings,
                day_one: DayOne, sink: Sink) -> np.ndarray:
    """Put local ISO times into raw['timestamp'] from the number or date/clock columns.

    Rows whose numbers cannot be placed are reported (when they hold an answer) and returned
    as a mask of bad rows; rows without a time and without an answer are no prompt at all.
    """
    data = settings.data
    if data.columns.day is not None:
        return _from_day_numbers(where, raw, given, settings, day_one, sink)
    missing = data.missing_values
    day = pd.to_datetime(as_text(raw["date"], missing), errors="coerce", format="ISO8601")
    clock = as_text(raw["clock"], missing)
    seconds = _clock_seconds(clock)
    named = as_text(raw["participant"], missing).notna().to_numpy()
    bad_day = named & day.isna().to_numpy() & as_text(raw["date"], missing).notna().to_numpy()
    bad_clock = named & np.isnan(seconds) & clock.notna().to_numpy()
    rows, who = raw["source_row"].to_numpy(), _who(raw, missing)
    sink.bad_rows(where, rows[bad_day], who[bad_day], [f"'{v}'" for v in raw["date"][bad_day]],
                  what="the date cannot be read", column=data.columns.date,
                  expected="a date such as 2024-03-04", code="bad-time")
    sink.bad_rows(where, rows[bad_clock], who[bad_clock],
                  [f"'{v}'" for v in raw["clock"][bad_clock]], what="the clock time cannot be "
                  "read", column=data.columns.clock, expected="a clock time such as 09:15",
                  code="bad-time")
    local = day.to_numpy(dtype="datetime64[ns]") + (seconds * 1e9).astype("timedelta64[ns]")
    _put(raw, local)
    return bad_day | bad_clock


def _from_day_numbers(where: str, raw: pd.DataFrame, given: np.ndarray,
                      settings: StudySettings, day_one: DayOne, sink: Sink) -> np.ndarray:
    data = settings.data
    cols = data.columns
    missing = data.missing_values
    rows, who = raw["source_row"].to_numpy(), _who(raw, missing)
    day, day_wrong = as_number(raw["day"], missing)
    prompt, prompt_wrong = as_number(raw["prompt"], missing)
    times = [parse_clock(t) for t in data.prompt_times]
    offsets = np.array([h * 3600 + m * 60 + s for h, m, s in (t for t in times if t)], dtype=float)
    bad = np.zeros(len(raw), bool)

    named = as_text(raw["participant"], missing).notna().to_numpy()

    def report(hit: np.ndarray, column: str | None, values: pd.Series, what: str,
               expected: str, code: str, fix: str | None = None, unanswered: bool = False
               ) -> None:
        # An unreadable number is told on unanswered rows too (it decides what was sent);
        # a missing one only with an answer (rows with no time and no answer are no prompt).
        hit = hit & (named if unanswered else given) & ~bad
        extra = {"fix": fix} if fix else {}
        sink.bad_rows(where, rows[hit], who[hit], [f"'{v}'" for v in values[hit]], what=what,
                      column=column, expected=expected, code=code, **extra)
        bad[:] |= hit

    d = day.to_numpy()
    p = prompt.to_numpy()
    day_ok = np.isfinite(d) & (d >= 1) & (d <= MAX_DAY) & (d == np.round(d))
    report(day_wrong.to_numpy() | (np.isfinite(d) & ~day_ok), cols.day, raw["day"],
           f"the day number is not a whole number from 1 to {MAX_DAY:,}",
           "a study day number (1 = day 1)", "bad-day-number", unanswered=True)
    report(np.isnan(d) & ~day_wrong.to_numpy(), cols.day, raw["day"],
           "the day number is missing", "a study day number (1 = day 1)", "missing-time")
    n = len(offsets)
    prompt_ok = np.isfinite(p) & (p >= 1) & (p <= n) & (p == np.round(p))
    report(prompt_wrong.to_numpy() | (np.isfinite(p) & ~prompt_ok), cols.prompt,
           raw["prompt"], "the prompt number has no time in prompt_times",
           f"a whole number from 1 to {n} (prompt_times under [data] lists {n} times)",
           "bad-prompt-number", fix="correct the value, or list every prompt's time in "
           "prompt_times under [data]", unanswered=True)
    report(np.isnan(p) & ~prompt_wrong.to_numpy(), cols.prompt, raw["prompt"],
           "the prompt number is missing, so the answer has no time",
           "the number of the prompt within its day", "missing-time")
    start = _day_one(where, raw, given & ~bad, settings, day_one, rows, who, sink)
    bad |= given & np.isnat(start) & day_ok & prompt_ok
    ok = day_ok & prompt_ok & ~np.isnat(start)
    local = np.full(len(raw), np.datetime64("NaT"), dtype="datetime64[ns]")
    idx = np.where(ok)[0]
    seconds = (d[idx] - 1) * 86400 + offsets[p[idx].astype(np.int64) - 1]
    local[idx] = start[idx] + (seconds * 1e9).astype("timedelta64[ns]")
    _put(raw, local)
    return bad


def _day_one(where: str, raw: pd.DataFrame, given: np.ndarray, settings: StudySettings,
             day_one: DayOne, rows: np.ndarray, who: np.ndarray, sink: Sink) -> np.ndarray:
    """The local date of day 1 for every row (NaT where none is known; those are reported)."""
    data = settings.data
    missing = data.missing_values
    n = len(raw)
    nat = np.datetime64("NaT", "ns")
    if "period" in raw.columns:
        order = list(day_one.periods) or sorted_periods(raw["period"], missing)
        period = period_of(raw["period"], order, missing)
        if data.period_starts:
            if len(data.period_starts) < len(order):
                sink.add(error(
                    where, f"the period column has {len(order)} periods but "
                    f"period_starts under [data] gives {len(data.period_starts)} dates",
                    expected="one date of day 1 per period, in the sorted order of "
                    f"the periods: {', '.join(order[:8])}", column=data.columns.period,
                    fix="add the missing dates to period_starts", code="period-starts"))
                return np.full(n, nat)
            starts = np.array([np.datetime64(d, "ns") for d in data.period_starts] + [nat])
            out = starts[np.where(period > 0, period - 1, len(data.period_starts))]
            hit = given & (period == 0)
            sink.bad_rows(where, rows[hit], who[hit], [""] * int(hit.sum()),
                          what="the period is missing", column=data.columns.period,
                          expected="the row's measurement period", code="missing-period")
            return out
        if len(order) > 1 and (day_one.roster or data.first_day is not None):
            sink.add(error(where, f"the period column has {len(order)} periods, each with its "
                           "own day 1, but only one date of day 1 is known",
                           column=data.columns.period,
                           fix='give every period\'s day 1 in period_starts = ["YYYY-MM-DD", '
                           '...] under [data]', code="period-starts"))
            return np.full(n, nat)
    if data.first_day is not None:
        return np.full(n, np.datetime64(data.first_day, "ns"))
    if day_one.roster:
        ids = as_text(raw["participant"], missing).fillna("")
        codes, uniques = pd.factorize(ids)
        dates = [day_one.roster.get(str(u)) for u in uniques]
        lookup = np.array([np.datetime64(d, "ns") if d else nat for d in dates] + [nat])
        out = lookup[codes]
        hit = given & np.isnat(out)
        for person in pd.unique(who[hit]):
            first = int(rows[hit & (who == person)].min())
            sink.add(error(where, f"participant '{person}' has no date of day 1",
                           row=first, column=data.columns.day,
                           fix=f"fill in {data.columns.first_day} for '{person}' in the roster",
                           code="no-day-one"))
        return out
    if given.any():
        sink.add(error(where, "the day numbers cannot be placed on the calendar: the date of "
                       "day 1 is not known", column=data.columns.day,
                       fix='set first_day = "YYYY-MM-DD" (or period_starts) under [data], or '
                       f"add a {data.columns.first_day} column to the roster",
                       code="no-day-one"))
    return np.full(n, nat)


def _clock_seconds(clock: pd.Series) -> np.ndarray:
    """Seconds after midnight of 'HH:MM' or 'HH:MM:SS' texts (NaN where not a clock time)."""
    parts = clock.str.extract(r"^(\d{1,2}):(\d{2})(?::(\d{2}))?$")
    h, m = pd.to_numeric(parts[0]), pd.to_numeric(parts[1])
    s = pd.to_numeric(parts[2]).fillna(0)
    seconds = (h * 3600 + m * 60 + s).where((h < 24) & (m < 60) & (s < 60))
    return seconds.to_numpy(dtype=float)


def _who(raw: pd.DataFrame, missing: list[str]) -> np.ndarray:
    return as_text(raw["participant"], missing).fillna("").to_numpy(dtype=object)


def _put(raw: pd.DataFrame, local: np.ndarray) -> None:
    """Local times as ISO text (seconds), missing where NaT, in raw['timestamp']."""
    text = np.datetime_as_string(local.astype("datetime64[s]"), unit="s")
    raw[TIME_KEY] = pd.Series(text, index=raw.index, dtype="str").mask(np.isnat(local))


def roster_first_days(table: Table | None, settings: StudySettings,
                      sink: Sink) -> dict[str, date]:
    """Each participant's date of day 1 from the roster (only used with day numbers)."""
    cols = settings.data.columns
    if table is None or cols.day is None or cols.first_day not in table.frame.columns:
        return {}
    missing = settings.data.missing_values
    id_column = cols.id_column("participants")
    if id_column not in table.frame.columns:
        return {}
    ids = as_text(table.frame[id_column], missing)
    text = as_text(table.frame[cols.first_day], missing)
    days = pd.to_datetime(text, errors="coerce", format="ISO8601")
    out: dict[str, date] = {}
    for row, who, value, day in zip(table.rows, ids, text, days, strict=True):
        if pd.isna(who) or pd.isna(value):
            continue
        if pd.isna(day):
            sink.add(error(table.where, "the date of day 1 cannot be read", row=int(row),
                           column=cols.first_day, expected="a date such as 2024-03-04",
                           found=f"'{value}'", fix="write the date as YYYY-MM-DD",
                           code="bad-time"))
            continue
        out[str(who)] = pd.Timestamp(day).date()
    return out
