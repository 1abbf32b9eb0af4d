"""Check the momentary file a few participants at a time, keeping the checked rows on disk.

The momentary file is most of a study's data: 2,000 people answering five prompts a day for
four months are 1.2 million rows. Reading and checking it at once took several times its size
in memory, and keeping the tidy rows kept memory growing with the study. Here the file is read
in blocks of rows, each row filed under its participant in a private spill file, and then
checked by groups of whole participants in file order; every check that looks at more than
one row (repeated prompts, consent, lateness) only compares rows of one participant, so the
problems found are those of checking the whole file at once. The checked rows go to another
spill file that `Study.slice` reads one participant at a time.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from datetime import date
from itertools import chain
from typing import Any, cast

import pandas as pd

from springback.errors import DataError, error
from springback.frames import DiskFrames, Frames, MemoryFrames
from springback.intake.momentary import check_prompts, has_momentary_columns, unknown_items
from springback.intake.numbers import DayOne, sorted_periods
from springback.intake.problems import Sink
from springback.intake.quality import SUMMARY_COLUMNS, momentary_frame, momentary_summary
from springback.intake.readers import Table, TableChunks, as_text
from springback.intake.schedule import add_periods, odd_times, prompt_days, sent_by_rule
from springback.model import latest_time
from springback.settings import StudySettings

CHUNK_ROWS = 20_000
"""Rows read from a CSV file at a time."""

GROUP_ROWS = 50_000
"""Rows checked together (whole participants are added until a group holds at least this)."""

_ROW = "\x00row"
_KEY = "\x00participant"


@dataclass(frozen=True)
class Momentary:
    """The checked momentary rows and what the study's tables need to know about them."""

    rows: Frames
    """Answered prompts by the column contract, one participant at a time."""
    summary: pd.DataFrame
    """`momentary_summary` of every participant with answered prompts."""
    late: pd.DataFrame
    """Per participant with late answers: how many (`late`) and the first one's row (`row`)."""
    schedule: pd.DataFrame
    """Prompts sent and answered per participant and day (`intake.schedule.sent_by_rule`)."""
    last_prompt: pd.Timestamp | None


Consent = Callable[[pd.DataFrame, Sink], pd.DataFrame]
"""Applies the roster's consent to checked rows: returns the consenting people's rows."""


def check_momentary(chunks: TableChunks, settings: StudySettings, sink: Sink,
                    consent: Consent | None, consent_sink: Sink,
                    first_days: Mapping[str, date] | None = None) -> Momentary | None:
    """Check every momentary row; None when the file cannot be used at all.

    Row problems go to `sink`; consent problems to `consent_sink` (they are reported after
    the other files' problems). Without `consent` (no usable roster) rows are only checked.
    `first_days` are the roster's dates of day 1 (for times built from day numbers).
    """
    if not has_momentary_columns(chunks.where, chunks.columns, settings, sink):
        return None
    periods: set[str] = set()
    try:
        raw = _by_participant(chunks, settings, periods)
    except DataError as exc:
        sink.add(exc.problems)
        return None
    if not len(raw):
        sink.add(error(chunks.where, "the file has a header but no rows",
                       fix="export the data again", code="no-rows"))
        return None
    unknown: Counter[str | None] = Counter()
    slot = sink.slot()  # item names the study lacks are told before the rows' problems
    tidy = DiskFrames()
    summaries, lates, days = [], [], []
    from_rows = has_scheduled = False
    missing = settings.data.missing_values
    day_one = DayOne(first_days or {}, sorted_periods(pd.Series(sorted(periods), dtype=object),
                                                      missing))
    last: list[pd.Timestamp] = []
    try:
        for keys in _groups(raw, GROUP_ROWS):
            part = raw.rows_of(keys).sort_values(_ROW, kind="stable")
            rows = part[_ROW].to_numpy()
            table = Table(chunks.where, chunks.path, part.drop(columns=[_ROW, _KEY]),
                          chunks.value_labels, (), rows)
            del part
            prompts = check_prompts(table, settings, sink, unknown, day_one)
            del table
            from_rows |= prompts.from_rows
            has_scheduled |= prompts.has_scheduled
            if consent is None:
                continue
            kept = consent(prompts.frame, consent_sink)
            del prompts
            kept = add_periods(odd_times(chunks.where, kept, sink), settings)
            days.append(prompt_days(kept, settings))
            late = kept[kept["answered"] & kept["late"]]
            lates.append(late.groupby("participant")["source_row"].agg(["size", "min"]))
            momentary = momentary_frame(kept, settings)
            del kept
            tidy.append(momentary, momentary["participant"])
            summaries.append(momentary_summary(momentary))
            when = latest_time(momentary)
            if when is not None:
                last.append(when)
    finally:
        if isinstance(raw, DiskFrames):
            raw.close()
    slot.problems += unknown_items(chunks.where, unknown, settings)
    if consent is None:
        tidy.close()
        return None
    if tidy.schema is None:  # every row set aside: an empty frame of the contract's types
        empty = momentary_frame(_no_prompts(settings), settings)
        tidy.append(empty, empty["participant"])
    late_table = pd.concat(lates) if lates else pd.DataFrame(columns=["size", "min"])
    return Momentary(
        rows=tidy.seal(),
        summary=pd.concat(summaries) if summaries else _no_summary(),
        late=late_table.rename(columns={"size": "late", "min": "row"}).sort_index(),
        schedule=sent_by_rule(pd.concat(days, ignore_index=True) if days else prompt_days(
            _no_prompts(settings), settings), settings, has_scheduled=has_scheduled,
            lists_prompts=from_rows),
        last_prompt=max(last) if last else None,
    )


def _by_participant(chunks: TableChunks, settings: StudySettings, periods: set[str]) -> Frames:
    """Every row of the file filed under its participant id (as checking will read it).

    A file read whole stays in memory; a file read in blocks is filed on disk block by block.
    Rows without an id are filed together under ''. The period column's values are added to
    `periods` (their order numbers the periods of the whole file).
    """
    column = settings.data.columns.participant
    missing = settings.data.missing_values
    period = settings.data.columns.period
    first = next(chunks.chunks, None)
    if first is None:
        return MemoryFrames(pd.DataFrame())

    def seen(table: Table) -> Table:
        if period is not None and period in table.frame.columns:
            periods.update(str(v) for v in as_text(table.frame[period], missing).dropna()
                           .unique())
        return table

    first = seen(first)
    second = next(chunks.chunks, None)
    if second is not None:
        second = seen(second)
    if second is None:
        frame = first.frame.assign(**cast(dict[str, Any], {
            _ROW: first.rows, _KEY: as_text(first.frame[column], missing).fillna("")}))
        return MemoryFrames(frame, key=_KEY)
    spill = DiskFrames()
    try:
        for table in chain([first, second], map(seen, chunks.chunks)):
            key = as_text(table.frame[column], missing).fillna("")
            columns = cast(dict[str, Any], {_ROW: table.rows, _KEY: key})
            spill.append(table.frame.assign(**columns), key)
    except BaseException:
        spill.close()
        raise
    return spill.seal()


def _groups(frames: Frames, rows: int) -> Iterator[list[str]]:
    """Participants in the order they first appear, in groups of about `rows` rows."""
    group: list[str] = []
    size = 0
    for key in frames.names():
        group.append(key)
        size += frames.count(key)
        if size >= rows:
            yield group
            group, size = [], 0
    if group:
        yield group


def _no_prompts(settings: StudySettings) -> pd.DataFrame:
    frame = pd.DataFrame({
        "participant": pd.Series(dtype="str"),
        "time": pd.Series(dtype="datetime64[ns, UTC]"),
        "scheduled": pd.Series(dtype="datetime64[ns, UTC]"),
        "source_row": pd.Series(dtype="int64"),
        "answered": pd.Series(dtype=bool),
    })
    for key in settings.items:
        frame[key] = pd.Series(dtype=float)
    return frame


def _no_summary() -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype="datetime64[ns]" if c.endswith("_day") else float)
                         for c in SUMMARY_COLUMNS}, index=pd.Index([], dtype=str))
