"""Frozen records that carry a study's cleaned data between stages.

Intake produces a `Study`; metrics, safety and rendering only read it. Frames follow the
column contract below, so downstream code never re-validates.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
import pandas as pd

from springback.errors import Problem
from springback.frames import Frames, MemoryFrames
from springback.settings import StudySettings
from springback.settings.sections import EDITIONS as EDITIONS  # defined with the settings
from springback.settings.sections import Edition as Edition

MOMENTARY_COLUMNS = ("participant", "time", "local_time", "study_day", "period", "scheduled",
                     "source_row")
"""Fixed columns of `Study.momentary`; then one float column per item, then one per composite.

- participant: str
- time: datetime64[ns, UTC], when the prompt was answered (the scheduled time when the study's
  times come from day and prompt numbers: `Study.times_scheduled`)
- local_time: the same instant in the study's time zone (tz-aware)
- study_day: datetime64[ns] (naive midnight) of the local date after shifting by day_start
- period: int64, the measurement period (1, 2, ...): the place of the row's value in the sorted
  values of the period column, or else counted per participant, a new one after a gap of at
  least `[data] new_period_after_days` days with no prompt
- scheduled: datetime64[ns, UTC] or NaT, when the prompt was sent
- source_row: int, the 1-based row in the source file (header = 1), for error messages
- <item>: float, raw rating as given (NaN = not answered)
- <composite>: float, mean of its items after reverse scoring (NaN if too few items)
Sorted by participant, then time; one row per answered prompt.
"""

EVENT_COLUMNS = ("participant", "time", "local_time", "kind", "intensity", "upsetting")
QUESTIONNAIRE_COLUMNS = ("participant", "time", "local_time", "questionnaire", "score")
ROSTER_COLUMNS = ("participant", "language", "consent", "feedback", "therapist", "region")
"""Roster: participant str; language str; consent 'yes'|'withdrawn'; feedback bool;
therapist bool; region str ('default' when absent)."""

SCHEDULE_COLUMNS = ("participant", "period", "study_day", "answered", "sent")
"""Prompts per participant and day (`Study.schedule`), by the rule in `intake.schedule`:
participant str; period int64; study_day datetime64[ns] (naive midnight); answered int64;
sent float (NaN when the number sent is not known). Days with nothing sent or answered are
left out; `quality` sums these rows and its compliance is answered / sent."""

SET_ASIDE_COLUMNS = ("file", "row", "column", "participant", "reason")
QUALITY_COLUMNS = (
    "participant", "answered", "scheduled", "compliance", "first_day", "last_day",
    "days_covered", "longest_gap_hours", "late_answers", "rows_set_aside",
)


_SLICED_FRAMES = ("quality", "set_aside", "schedule")


@dataclass(frozen=True)
class Study:
    """A loaded, validated study: settings plus tidy frames (see the column contracts).

    The timed rows (momentary, events, questionnaires), which grow with every prompt, are held
    as `Frames` read one participant at a time (`load_study` keeps them in private files, see
    `springback.frames`); `momentary`, `events` and `questionnaires` give all rows as one frame.
    Frames passed instead are kept in memory.
    """

    root: Path
    settings: StudySettings
    roster: pd.DataFrame
    momentary_rows: Frames | pd.DataFrame
    event_rows: Frames | pd.DataFrame
    questionnaire_rows: Frames | pd.DataFrame
    set_aside: pd.DataFrame
    quality: pd.DataFrame
    warnings: tuple[Problem, ...] = ()
    input_files: tuple[Path, ...] = field(default=())
    """Every file that was read (absolute paths), for the archive manifest."""
    last_prompt: pd.Timestamp | None = None
    """The latest answer or scheduled prompt time of anyone (UTC), or None without prompts."""
    last_score: pd.Timestamp | None = None
    """The latest questionnaire time of anyone (UTC), or None without scores."""
    schedule: pd.DataFrame = field(default_factory=lambda: empty_schedule())
    """Prompts sent and answered per participant and day (`SCHEDULE_COLUMNS`)."""
    times_scheduled: bool = False
    """True when prompt times were built from day and prompt numbers: they are the scheduled
    times of the design, not the moments of answering (booklets say so)."""

    def __post_init__(self) -> None:
        for name, latest in (("momentary_rows", "last_prompt"),
                             ("questionnaire_rows", "last_score"), ("event_rows", None)):
            frame = getattr(self, name)
            if isinstance(frame, pd.DataFrame):
                object.__setattr__(self, name, MemoryFrames(frame))
                if latest and getattr(self, latest) is None:
                    object.__setattr__(self, latest, latest_time(frame))

    @property
    def momentary(self) -> pd.DataFrame:
        """Every momentary row as one frame (sorted by participant, then time)."""
        return self._rows("momentary_rows").frame()

    @property
    def events(self) -> pd.DataFrame:
        """Every event as one frame (sorted by participant, then time)."""
        return self._rows("event_rows").frame()

    @property
    def questionnaires(self) -> pd.DataFrame:
        """Every questionnaire score as one frame (sorted by participant, then time)."""
        return self._rows("questionnaire_rows").frame()

    def _rows(self, name: str) -> Frames:
        rows = getattr(self, name)
        assert isinstance(rows, Frames)  # frames are wrapped when the study is made
        return rows

    @property
    def about(self) -> str:
        return self.settings.about

    def participants(self) -> list[str]:
        """Roster ids in sorted order."""
        return sorted(self.roster["participant"].astype(str))

    @cached_property
    def _positions(self) -> dict[str, dict[str, np.ndarray]]:
        """Row positions of each participant in every sliced frame, found in one pass each.

        Slicing by a boolean mask per participant would scan every frame once per
        participant, which grows with the square of the study's size.
        """
        return {
            name: {str(k): v for k, v in getattr(self, name).groupby(
                "participant", sort=False, observed=True).indices.items()}
            for name in _SLICED_FRAMES
        }

    @cached_property
    def _roster_rows(self) -> dict[str, dict[str, object]]:
        return {str(r["participant"]): cast(dict[str, object], r)
                for r in self.roster.to_dict("records")}

    def index(self) -> None:
        """Find every participant's rows now (otherwise done by the first `slice`)."""
        _ = self._positions, self._roster_rows
        for name in ("momentary_rows", "event_rows", "questionnaire_rows"):
            self._rows(name).names()

    def slice(self, participant: str) -> ParticipantData:
        """One participant's rows of every frame (in their order in the study's frames)."""
        empty = np.empty(0, dtype=np.intp)

        def rows(name: str) -> pd.DataFrame:
            where = self._positions[name].get(participant, empty)
            return getattr(self, name).iloc[where].reset_index(drop=True)

        roster = self._roster_rows[participant]
        return ParticipantData(
            participant=participant,
            language=str(roster["language"]),
            region=str(roster["region"]),
            consent=str(roster["consent"]),
            feedback=bool(roster["feedback"]),
            therapist=bool(roster["therapist"]),
            momentary=self._rows("momentary_rows").rows(participant),
            events=self._rows("event_rows").rows(participant),
            questionnaires=self._rows("questionnaire_rows").rows(participant),
            quality=rows("quality"),
            set_aside=rows("set_aside"),
            schedule=rows("schedule"),
            times_scheduled=self.times_scheduled,
        )

    def rows_of(self, participant: str) -> int:
        """How many momentary rows the participant has (a cheap estimate of their work)."""
        return self._rows("momentary_rows").count(participant)


def latest_time(frame: pd.DataFrame) -> pd.Timestamp | None:
    """The latest time in timed rows (answer, local or scheduled; UTC), None when none."""
    times = [frame[c].max() for c in ("time", "local_time", "scheduled") if c in frame.columns]
    times = [pd.Timestamp(t) for t in times if pd.notna(t)]
    if not times:
        return None
    return max(t.tz_convert("UTC") if t.tzinfo else t.tz_localize("UTC") for t in times)


@dataclass(frozen=True)
class ParticipantData:
    """One participant's slice of a study: what the per-participant stages receive."""

    participant: str
    language: str
    region: str
    consent: str
    feedback: bool
    therapist: bool
    momentary: pd.DataFrame
    events: pd.DataFrame
    questionnaires: pd.DataFrame
    quality: pd.DataFrame
    set_aside: pd.DataFrame
    schedule: pd.DataFrame = field(default_factory=lambda: empty_schedule())
    """The participant's prompts sent and answered per day (`SCHEDULE_COLUMNS`)."""
    times_scheduled: bool = False
    """True when times are the design's scheduled times (built from day and prompt numbers)."""


def empty_schedule() -> pd.DataFrame:
    """A schedule table without rows, with the contract's column types."""
    return pd.DataFrame({"participant": pd.Series(dtype="str"),
                         "period": pd.Series(dtype="int64"),
                         "study_day": pd.Series(dtype="datetime64[ns]"),
                         "answered": pd.Series(dtype="int64"), "sent": pd.Series(dtype=float)})


FLAG_FIELDS = ("participant", "rule", "action", "value", "when", "detail")
"""A flag's fields, the keys of its row (`Flag.to_row`)."""


@dataclass(frozen=True)
class Flag:
    """One safety rule that one participant's data crossed (made by `springback.safety`,
    read by the findings, the booklets, the review gate and the open actions)."""

    participant: str
    rule: str
    action: Literal["refer", "hold"]
    value: float | None
    """The triggering value (score, rating, shift size, days without answers)."""
    when: str
    """Local date (YYYY-MM-DD) of the triggering data; '' when there is none."""
    detail: str
    """Plain words: what was found, for the therapist edition and the overview."""

    def to_row(self, keys: tuple[str, ...] = FLAG_FIELDS) -> dict[str, Any]:
        """The flag as one row of plain values, with these of its fields: out/flags.csv takes
        `FLAG_CSV_COLUMNS`, an archived build's manifest `FLAG_RECORD_KEYS` (the participant
        is the key of the record the flags sit in)."""
        return {k: getattr(self, k) for k in keys}

    @classmethod
    def from_row(cls, row: Mapping[str, Any], participant: str | None = None) -> Flag:
        """The flag a row holds (`to_row`); a manifest's row takes its participant from the
        record it sits in."""
        value = row.get("value")
        return cls(
            participant=str(row["participant"] if participant is None else participant),
            rule=str(row.get("rule", "")),
            action=cast(Literal["refer", "hold"], str(row.get("action", ""))),
            value=None if value is None or value == "" else float(value),
            when=str(row.get("when", "") or ""),
            detail=str(row.get("detail", "")),
        )
