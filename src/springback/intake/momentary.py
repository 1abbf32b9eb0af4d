"""Validate the momentary file: columns, ratings, times and repeated prompts, in one pass."""

from __future__ import annotations

import difflib
from collections import Counter
from dataclasses import dataclass
from typing import Any, cast

import numpy as np
import pandas as pd

from springback.errors import Problem, error, warning
from springback.intake.numbers import (
    DayOne,
    build_times,
    period_of,
    sorted_periods,
    time_columns,
)
from springback.intake.offsets import far_zone_warnings, offset_warnings
from springback.intake.problems import Sink, column_name, rows_list
from springback.intake.readers import Table, as_number, as_text, missing_mask
from springback.intake.times import ISO_EXAMPLE, parse_times, zone_texts
from springback.settings import StudySettings

TIME_PROBLEMS = {
    "bad-time": "the time cannot be read",
    "unknown-zone": "the time zone is unknown",
    "nonexistent-time": "this local time does not exist (the clocks were put forward)",
    "ambiguous-time": "this local time happens twice (the clocks were put back)",
}
LOCAL_TIME_CODES = ("nonexistent-time", "ambiguous-time")
EARLY = pd.Timedelta(minutes=1)
"""An answer more than this before its prompt was sent is reported (device clocks)."""
ZONE_EXPECTED = ("an IANA zone such as Europe/Amsterdam, an offset such as +02:00, or a "
                 "fixed-offset abbreviation such as CET")


@dataclass(frozen=True)
class Prompts:
    """Every usable prompt row (answered or not), repeated prompts resolved, before the roster.

    Columns: participant, time (UTC, answer time), scheduled (UTC or NaT), source_row,
    answered (bool), late (bool), early (bool: answered over a minute before the prompt was
    sent), then one float column per item key; with a period column `period` (its 1-based
    place in the sorted periods), with day numbers `_day_number`.
    """

    frame: pd.DataFrame
    from_rows: bool
    """True when the rows list unanswered prompts too (rows with a time and no answer)."""
    has_scheduled: bool
    """True when the file has a column saying when each prompt was sent."""


def read_momentary(table: Table, settings: StudySettings, sink: Sink) -> Prompts | None:
    """Check and convert the momentary rows; None when required columns are missing."""
    if not has_momentary_columns(table.where, list(table.frame.columns), settings, sink):
        return None
    unknown: Counter[str | None] = Counter()
    prompts = check_prompts(table, settings, sink, unknown)
    sink.add(unknown_items(table.where, unknown, settings))
    return prompts


def has_momentary_columns(where: str, present: list[str], settings: StudySettings,
                          sink: Sink) -> bool:
    """Whether the file has every column the study needs (each missing one is an error)."""
    cols = settings.data.columns
    needed = {cols.participant: "participant"} | time_columns(settings)
    if settings.data.layout == "long":
        wanted = needed | {cols.item: "item", cols.value: "value"}
    else:
        wanted = needed | {(v.column or k): f"items.{k}" for k, v in settings.items.items()}
    ok = True
    for name, role in wanted.items():
        if name in present:
            continue
        ok = False
        close = difflib.get_close_matches(name, present, n=1)
        if role.startswith("items."):
            how = f'set column = "..." under [{role}] in study.toml'
        else:
            how = f'set {role} = "..." under [data.columns] in study.toml'
        hint = f"did you mean '{close[0]}'? Rename the column, or {how}" if close else \
            f"add the column, or {how}"
        sink.add(error(where, f"column '{name}' is missing",
                       expected=f"a column named '{name}' ({_role(role)})",
                       found="columns " + _names(present), fix=hint, column=name,
                       code="missing-column"))
    return ok


def check_prompts(table: Table, settings: StudySettings, sink: Sink,
                  unknown: Counter[str | None], day_one: DayOne | None = None) -> Prompts:
    """Check and convert rows of a momentary file that has every needed column.

    The rows may be all of the file or every row of some participants; rows of items the
    study does not define (long layout) are counted in `unknown` for `unknown_items`.
    `day_one` places day numbers on the calendar (see `intake.numbers`).
    """
    cols = settings.data.columns
    item_cols = {k: (v.column or k) for k, v in settings.items.items()}
    timed = time_columns(settings)
    needed = {cols.participant, *timed}
    if settings.data.layout == "long":
        needed |= {cols.item, cols.value}
    frame = table.frame
    raw = pd.DataFrame({"participant": frame[cols.participant]})
    for name, key in timed.items():
        raw[key] = frame[name]
    for name, key in ((cols.scheduled, "scheduled"), (cols.answered, "answered"),
                      (cols.timezone, "zone")):
        if name in frame.columns and name not in needed:
            raw[key] = frame[name]
    raw["source_row"] = table.rows
    if "timestamp" not in timed.values():
        missing = settings.data.missing_values
        values = [frame[cols.value]] if settings.data.layout == "long" else \
            [frame[c] for c in item_cols.values()]
        given = np.zeros(len(frame), bool)
        for v in values:
            given |= ~missing_mask(v, missing).to_numpy()
        raw["_bad_time"] = build_times(table.where, raw, given, settings, day_one or DayOne(),
                                       sink)
        if "day" in raw.columns:
            raw["_day_number"] = as_number(raw["day"], missing)[0].to_numpy()
        raw = raw.drop(columns=[c for c in ("day", "prompt", "date", "clock") if c in raw])
    if cols.period is not None and cols.period in frame.columns:
        missing = settings.data.missing_values
        order = list((day_one or DayOne()).periods) or sorted_periods(frame[cols.period],
                                                                       missing)
        raw["period"] = period_of(frame[cols.period], order, missing)
    if settings.data.layout == "long":
        raw = _widen(table, raw, item_cols, settings, sink, unknown)
    else:
        for key, c in item_cols.items():
            raw[key] = frame[c]
    return _check_rows(table.where, raw, settings, sink)


def unknown_items(where: str, unknown: Counter[str | None],
                  settings: StudySettings) -> list[Problem]:
    """One warning per item the study does not define, with its number of rows (long layout).

    Such rows are like unused columns in the wide layout: named once per item, not row by row.
    """
    out = []
    for name, n in unknown.most_common():
        label = "(empty)" if name is None else f"'{name}'"
        out.append(warning(where, f"item {label} is not defined in study.toml; its {n} "
                           f"row{'s are' if n > 1 else ' is'} not used",
                           fix="add it under [items] if it should be used",
                           column=settings.data.columns.item, code="unknown-item-rows"))
    return out


def _role(role: str) -> str:
    return f"ratings of item '{role[6:]}'" if role.startswith("items.") else role


def _names(names: list[str], limit: int = 8) -> str:
    shown = ", ".join(column_name(n) for n in names[:limit])
    return shown + (f" and {len(names) - limit} more" if len(names) > limit else "")


def _widen(table: Table, raw: pd.DataFrame, item_cols: dict[str, str],
           settings: StudySettings, sink: Sink, unknown: Counter[str | None]) -> pd.DataFrame:
    """Turn long rows (one per item) into one row per prompt."""
    cols = settings.data.columns
    missing = settings.data.missing_values
    by_column = {c: k for k, c in item_cols.items()}
    item = as_text(table.frame[cols.item], missing)
    known = item.isin(list(by_column)).to_numpy()
    for name, n in item[~known].value_counts(dropna=False).items():
        unknown[None if pd.isna(cast(Any, name)) else str(name)] += int(n)
    long = raw[known].copy()
    long["item"] = item[known].map(by_column)
    long["value"] = table.frame[cols.value][known]
    keys = [c for c in ("participant", "timestamp", "scheduled") if c in long.columns]
    prompt = as_text(long[keys[0]], missing).fillna("")
    for c in keys[1:]:
        prompt = prompt + "\x1f" + as_text(long[c], missing).fillna("")
    long["_prompt"] = prompt
    value_text = as_text(long["value"], missing).fillna("")
    cell = long["_prompt"] + "\x1e" + long["item"]
    twice = cell.duplicated(keep=False).to_numpy()
    if twice.any():
        for _, group in long[twice].groupby(cell[twice], sort=False):
            _repeated_cell(table.where, group, value_text[group.index], cols.value, missing,
                           sink)
        long = long.loc[~cell.duplicated()]
        clashing = cell[twice][value_text[twice].groupby(cell[twice]).transform("nunique") > 1]
        long = long[~long.index.isin(cell.index[cell.isin(clashing)])]
    first = long.groupby("_prompt", sort=False).first()
    wide = long.pivot(index="_prompt", columns="item", values="value")
    out = first.drop(columns=["item", "value"]).join(wide)
    out["source_row"] = long.groupby("_prompt", sort=False)["source_row"].min()
    for key in item_cols:
        if key not in out.columns:
            out[key] = np.nan
    return out.sort_values("source_row").reset_index(drop=True)


def _repeated_cell(where: str, group: pd.DataFrame, values: pd.Series, column: str,
                   missing: list[str], sink: Sink) -> None:
    """Report one item of one prompt given on several long rows (same value: kept once)."""
    rows = group["source_row"].tolist()
    who = as_text(group["participant"], missing).fillna("").tolist()
    if values.nunique() > 1:
        sink.bad_rows(where, rows[:1], who[:1], [", ".join(f"'{v}'" for v in values)],
                      what=f"{rows_list(rows)} give different values for the same item and "
                      "prompt", column=column, expected="one value per participant, time and "
                      "item", code="conflicting-rows")
        sink.aside(where, rows[1:], who[1:], "different values for the same item and prompt")
        return
    sink.add(warning(where, f"{rows_list(rows)} repeat the same value for the same item and "
                     f"prompt; row {rows[0]} is kept", fix="remove the extra rows to silence "
                     "this", row=rows[0], column=column, code="duplicate-row"))
    sink.aside(where, rows[1:], who[1:], f"a copy of row {rows[0]}")


def _check_rows(where: str, raw: pd.DataFrame, settings: StudySettings,
                sink: Sink) -> Prompts:
    missing = settings.data.missing_values
    cols = settings.data.columns
    rows = raw["source_row"].to_numpy()
    participant = as_text(raw["participant"], missing)
    pid = participant.fillna("").array  # compact text; only rows with problems become str
    bad = np.zeros(len(raw), bool)
    out = pd.DataFrame({"participant": participant.fillna("")})
    given = np.zeros(len(raw), bool)
    for key, item in settings.items.items():
        column = item.column or key
        number, wrong = as_number(raw[key], missing)
        given |= ~missing_mask(raw[key], missing).to_numpy()
        low, high = item.scale
        scale = f"a number from {low:g} to {high:g}"
        w = wrong.to_numpy()
        sink.bad_rows(where, rows[w], pid[w], [f"'{v}'" for v in raw[key][w]],
                      what="not a number", column=column, expected=scale + " or an empty cell",
                      fix="enter the rating as a number; texts that mean 'no answer' go in "
                      "missing_values under [data]",
                      code="not-a-number")
        outside = ((number < low) | (number > high)).to_numpy()
        sink.bad_rows(where, rows[outside], pid[outside],
                      [f"{v:g}" for v in number[outside]], what="value outside the item's scale",
                      column=column, expected=scale,
                      fix="correct the value, or the item's scale in study.toml",
                      code="value-out-of-scale")
        bad |= w | outside
        out[key] = number.to_numpy()
    nobody = participant.isna().to_numpy() & given
    sink.bad_rows(where, rows[nobody], pid[nobody], [""] * int(nobody.sum()),
                  what="the participant id is missing", column=cols.participant,
                  expected="an id from the roster", code="missing-participant")
    bad |= participant.isna().to_numpy()
    built = "_bad_time" in raw.columns  # times made from numbers, their problems told
    placed = raw["_bad_time"].to_numpy(dtype=bool) if built else np.zeros(len(raw), bool)
    bad |= placed
    zones = zone_texts(raw["zone"].mask(missing_mask(raw["zone"], missing))) \
        if "zone" in raw.columns else None  # an empty zone cell: the study's zone
    times = {}
    for key in ("timestamp", "scheduled", "answered"):
        if key in raw.columns:
            gone = missing_mask(raw[key], missing)
            times[key] = (parse_times(raw[key], study_zone=settings.study.timezone,
                                      row_zones=zones, fmt=settings.data.timestamp_format,
                                      missing=gone), gone.to_numpy())
    for key, (parsed, _gone) in times.items():
        name = getattr(cols, key) if not (built and key == "timestamp") else \
            (cols.prompt or cols.clock)
        for code, what in TIME_PROBLEMS.items():
            # An unanswered row's unreadable time is told too: it decides what was sent.
            hit = (given | participant.notna().to_numpy()) & (parsed.problem == code).to_numpy()
            found = [f"'{v}'" + (f" in {z}" if code in LOCAL_TIME_CODES else "")
                     for v, z in zip(raw[key][hit], parsed.zone[hit], strict=True)]
            sink.bad_rows(where, rows[hit], pid[hit], found, what=what, column=name,
                          expected=_expected(code, settings.data.timestamp_format),
                          fix=_time_fix(code), code=code)
            bad |= hit
    stamp, stamp_gone = times["timestamp"]
    zone = settings.study.timezone
    far_zone_warnings(where, stamp, given & ~bad, participant, rows, zone, sink)
    offset_warnings(where, [(getattr(cols, k), t) for k, (t, _) in times.items()],
                    given & ~bad, participant, rows, zone, sink)
    answer = stamp.utc
    if "answered" in times:
        answer = times["answered"][0].utc.fillna(stamp.utc)
        stamp_gone = stamp_gone & times["answered"][1]
    no_time = given & stamp_gone & ~placed
    sink.bad_rows(where, rows[no_time], pid[no_time], [""] * int(no_time.sum()),
                  what="the time is missing", column=cols.timestamp,
                  expected="when the prompt was answered", code="missing-time")
    bad |= no_time
    out["time"] = answer
    if "scheduled" in times:
        out["scheduled"] = times["scheduled"][0].utc
    elif "answered" in times or (built and settings.data.columns.day is not None):
        out["scheduled"] = stamp.utc
    else:
        out["scheduled"] = pd.Series(pd.NaT, index=out.index, dtype="datetime64[ns, UTC]")
    out["source_row"] = rows
    out["answered"] = given
    if "period" in raw.columns:
        out["period"] = raw["period"].to_numpy(dtype=np.int64)
    key_col = "scheduled" if "scheduled" in raw.columns else "timestamp"
    key_text = as_text(raw[key_col], missing)
    no_key = key_text.isna().to_numpy()
    if no_key.any():  # a prompt without a time is its own prompt (named by its row)
        key_text = key_text.copy()
        key_text[no_key] = [f"row {r}" for r in rows[no_key]]
    out["_key"] = key_text
    if "_day_number" in raw.columns:
        out["_day_number"] = raw["_day_number"].to_numpy(dtype=float)
    keep = ~bad & (participant.notna().to_numpy())
    empty = participant.isna().to_numpy() & ~given
    sink.aside(where, rows[empty], [""] * int(empty.sum()), "an empty row")
    listed = ~given & (out["time"].notna() | out["scheduled"].notna()).to_numpy() & keep
    from_rows = bool(listed.any())
    kept = out[keep].reset_index(drop=True)
    del out  # large studies: never hold the checked rows twice while repeats are resolved
    frame = _resolve_repeats(where, kept, settings, sink)
    del kept
    late_after = pd.Timedelta(minutes=settings.data.late_after_minutes)
    frame["late"] = (frame["answered"] & ((frame["time"] - frame["scheduled"]) > late_after))
    frame["early"] = (frame["answered"] & ((frame["scheduled"] - frame["time"]) > EARLY))
    frame = frame.drop(columns="_key")
    return Prompts(frame, from_rows, "scheduled" in raw.columns)


def _expected(code: str, fmt: str | None) -> str:
    if code in ("unknown-zone",):
        return ZONE_EXPECTED
    if code == "bad-time":
        return f"a time written as '{fmt}'" if fmt else ISO_EXAMPLE
    return "a local time that exists once, or a time with its UTC offset"


def _time_fix(code: str) -> str:
    if code == "bad-time":
        return "correct the value, or set timestamp_format under [data]"
    if code == "unknown-zone":
        return "write the zone as an IANA name or an offset such as +02:00"
    return "add the UTC offset to the time (e.g. +01:00); the tool does not guess"


def _resolve_repeats(where: str, frame: pd.DataFrame, settings: StudySettings,
                     sink: Sink) -> pd.DataFrame:
    """Keep one row per prompt: answered over unanswered; identical copies once; clashes fail."""
    items = list(settings.items)
    # Duplicates of the (participant, prompt) pair, found column by column (factorised), not
    # on a joined text: that made a Python string for every row.
    repeated = frame.duplicated(["participant", "_key"], keep=False).to_numpy()
    if not repeated.any():
        return frame
    drop: list[int] = []
    for _, group in frame[repeated].groupby(["participant", "_key"], sort=False):
        drop += _one_repeat(where, group, items, settings, sink)
    # A prompt whose rows clash was still sent: its first row stays, without the answers.
    sent = [i for i in drop if i < 0]
    if sent:
        blank = [-1 - i for i in sent]
        frame.loc[blank, items] = np.nan
        frame.loc[blank, "answered"] = False
    return frame.drop(index=[i for i in drop if i >= 0]).reset_index(drop=True)


def _one_repeat(where: str, group: pd.DataFrame, items: list[str], settings: StudySettings,
                sink: Sink) -> list[int]:
    """Decide which rows of one repeated prompt to drop, and report it.

    A row to keep without its answers (the first of clashing rows) comes as -1 - its index.
    """
    who = group["participant"].iloc[0]
    when = group["_key"].iloc[0]
    rows = group["source_row"].tolist()
    answered = group[group["answered"]]
    column = settings.data.columns.participant
    if len(answered) > 1:
        values = answered[items]
        same = bool((values.nunique(dropna=False) <= 1).all())
        if not same:
            differ = [settings.items[c].column or c for c in items
                      if values[c].nunique(dropna=False) > 1]
            # The text of a kind is shared by all its lines; what tells one clash from another
            # (participant, prompt, rows) goes in each line's `found`.
            sink.bad_rows(where, rows[:1], [who],
                          [f"{rows_list(rows)} for participant '{who}' at {when}, with "
                           f"different values in {_names(differ)}"],
                          what="one prompt has several rows with different answers", column=None,
                          expected="one row per participant and prompt",
                          fix="remove the wrong row, or set on_bad_rows = \"set aside\" "
                          "under [data]",
                          code="conflicting-rows")
            sink.aside(where, rows[1:], [who] * (len(rows) - 1),
                       "the same prompt with different answers")
            return [-1 - group.index[0], *group.index[1:].tolist()]
    kept = (answered if len(answered) else group).index[0]
    dropped = [i for i in group.index if i != kept]
    kept_row = int(group.loc[kept, "source_row"])
    if len(answered) > 1:
        what = (f"participant '{who}' has {len(group)} rows for the prompt at {when} "
                f"({rows_list(rows)}) with the same answers; row {kept_row} is kept")
        code, reason = "duplicate-row", f"a copy of row {kept_row}"
    else:
        state = "answered" if len(answered) else "first"
        what = (f"participant '{who}' has {len(group)} rows for the prompt at {when} "
                f"({rows_list(rows)}); the {state} one, row {kept_row}, is kept")
        code, reason = "duplicate-prompt", f"the same prompt as row {kept_row}"
    sink.add(warning(where, what, fix="remove the extra rows to silence this", row=kept_row,
                     column=column, code=code))
    sink.aside(where, group.loc[dropped, "source_row"].tolist(), [who] * len(dropped), reason)
    return dropped
