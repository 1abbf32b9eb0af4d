"""Frozen records that carry a study's cleaned data between stages.

Intake produces a `Study`; metrics, safety and rendering only read it. Frames follow the
column contract below, so downstream code never re-validates.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from springback.errors import Problem
from springback.settings import StudySettings

MOMENTARY_COLUMNS = ("participant", "time", "local_time", "study_day", "scheduled", "source_row")
"""Fixed columns of `Study.momentary`; then one float column per item, then one per composite.

- participant: str
- time: datetime64[ns, UTC], when the prompt was answered
- local_time: the same instant in the study's time zone (tz-aware)
- study_day: datetime64[ns] (naive midnight) of the local date after shifting by day_start
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

SET_ASIDE_COLUMNS = ("file", "row", "column", "participant", "reason")
QUALITY_COLUMNS = (
    "participant", "answered", "scheduled", "compliance", "first_day", "last_day",
    "days_covered", "longest_gap_hours", "late_answers", "rows_set_aside",
)


@dataclass(frozen=True)
class Study:
    """A loaded, validated study: settings plus tidy frames (see the column contracts)."""

    root: Path
    settings: StudySettings
    roster: pd.DataFrame
    momentary: pd.DataFrame
    events: pd.DataFrame
    questionnaires: pd.DataFrame
    set_aside: pd.DataFrame
    quality: pd.DataFrame
    warnings: tuple[Problem, ...] = ()
    input_files: tuple[Path, ...] = field(default=())
    """Every file that was read (absolute paths), for the archive manifest."""

    @property
    def about(self) -> str:
        return self.settings.about

    def participants(self) -> list[str]:
        """Roster ids in sorted order."""
        return sorted(self.roster["participant"].astype(str))

    def slice(self, participant: str) -> ParticipantData:
        """One participant's rows of every frame."""
        def rows(df: pd.DataFrame) -> pd.DataFrame:
            return df[df["participant"] == participant].reset_index(drop=True)

        roster = self.roster.set_index("participant").loc[participant]
        return ParticipantData(
            participant=participant,
            language=str(roster["language"]),
            region=str(roster["region"]),
            consent=str(roster["consent"]),
            feedback=bool(roster["feedback"]),
            therapist=bool(roster["therapist"]),
            momentary=rows(self.momentary),
            events=rows(self.events),
            questionnaires=rows(self.questionnaires),
            quality=rows(self.quality),
            set_aside=rows(self.set_aside),
        )


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
