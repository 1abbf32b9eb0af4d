"""The `[data]` table of `study.toml`: where the files are, what their columns are called, and
how prompt times are found (clock times, or day and prompt numbers with the design's times).
"""

from __future__ import annotations

from datetime import date
from pathlib import Path
from typing import Literal

from pydantic import Field, field_validator

from springback.errors import Problem, error, warning
from springback.settings.sections import Section

IdFile = Literal["momentary", "participants", "events", "questionnaires"]
"""The files that name their own participant id column."""


class Columns(Section):
    participant: str = Field(
        "participant", description="Column with the participant id in the momentary file."
    )
    roster_participant: str | None = Field(
        None, description="Roster column with the participant id (default: `participant`)."
    )
    events_participant: str | None = Field(
        None, description="Events column with the participant id (default: `participant`)."
    )
    questionnaires_participant: str | None = Field(
        None,
        description="Questionnaires column with the participant id (default: `participant`).",
    )
    timestamp: str = Field("timestamp", description="Column with the time of the answer.")
    scheduled: str = Field("scheduled", description="Optional column: when the prompt was sent.")
    answered: str = Field("answered", description="Optional column: when it was answered.")
    day: str | None = Field(
        None,
        description="Optional, for files without clock times: column with the study day number "
        "(1 = the first day; each measurement period counts its own days). Needs `prompt`, "
        "prompt_times and the date of day 1 (first_day or period_starts under [data], or a "
        "roster column first_day); booklets then say that times are the scheduled times.",
    )
    prompt: str | None = Field(
        None, description="With `day`: column with the prompt number within the day (1, 2, ...)."
    )
    period: str | None = Field(
        None,
        description="Optional: column naming the measurement period of each row (with `day`, "
        "each period has its own day numbers and its own day 1).",
    )
    date: str | None = Field(
        None,
        description="Optional, instead of `timestamp`: column with the date of each prompt, "
        "when its clock time is in the `clock` column.",
    )
    clock: str | None = Field(
        None, description="With `date`: column with the clock time (HH:MM or HH:MM:SS)."
    )
    first_day: str = Field(
        "first_day",
        description="Optional roster column: the date of each participant's day 1 "
        "(YYYY-MM-DD), used with `day` when [data] has no first_day or period_starts.",
    )
    item: str = Field("item", description="Long layout only: column naming the item.")
    value: str = Field("value", description="Long layout only: column holding the rating.")
    language: str = Field("language", description="Roster column with the booklet language.")
    consent: str = Field("consent", description="Roster column: 'yes' or 'withdrawn'.")
    feedback: str = Field("feedback", description="Roster column: wants a booklet, yes/no.")
    therapist: str = Field("therapist", description="Roster column: therapist edition, yes/no.")
    region: str = Field("region", description="Roster column selecting the referral texts.")
    kind: str = Field("kind", description="Events column: what kind of event.")
    intensity: str = Field("intensity", description="Events column: how upsetting (number).")
    questionnaire: str = Field("questionnaire", description="Questionnaires column: which one.")
    score: str = Field("score", description="Questionnaires column: the total score.")
    timezone: str = Field(
        "timezone",
        description="Optional column giving each row's time zone for times written without "
        "one: an IANA name (Europe/Paris), an offset (+03, +02:00), a fixed-offset abbreviation "
        "(CET, CEST, EET, MSK) or a time ending in one (a device's own clock).",
    )

    def id_column(self, file: IdFile) -> str:
        """The participant id column of one file (each file may name its own)."""
        own = {"participants": self.roster_participant, "events": self.events_participant,
               "questionnaires": self.questionnaires_participant}.get(file)
        return own or self.participant


class DataFiles(Section):
    momentary: Path = Field(
        Path("data/momentary.csv"),
        description="Momentary ratings, one row per answered prompt (CSV, XLSX, Parquet or SAV).",
    )
    participants: Path = Field(Path("data/participants.csv"), description="The roster.")
    events: Path | None = Field(
        Path("data/events.csv"), description="Optional: event markers (skipped if absent)."
    )
    questionnaires: Path | None = Field(
        Path("data/questionnaires.csv"),
        description="Optional: periodic questionnaires (skipped if absent).",
    )
    layout: Literal["wide", "long"] = Field(
        "wide",
        description="'wide': one column per item; 'long': one row per item with item/value "
        "columns.",
    )
    sheet: str | None = Field(None, description="Excel only: the sheet to read (default: first).")
    on_bad_rows: Literal["error", "set aside"] = Field(
        "error",
        description="What to do with rows that cannot be used: 'error' stops the build; "
        "'set aside' goes on and lists each row in the quality report.",
    )
    missing_values: list[str] = Field(
        default_factory=lambda: ["", "NA", "N/A", "NaN", "nan", "NULL", "null", "."],
        description="Cell texts that mean 'no answer' (compared after trimming spaces), e.g. "
        "add 'Expired' or '-99' if the export writes those.",
    )
    timestamp_format: str | None = Field(
        None,
        description="Pattern for times that are not ISO 8601, e.g. '%d/%m/%Y %H:%M' "
        "(Python strftime codes). Default: ISO 8601 (2024-03-04 09:15, with an optional "
        "offset or zone after it).",
    )
    late_after_minutes: float = Field(
        60.0, gt=0, description="An answer this long after its prompt is reported as late."
    )
    prompt_times: list[str] = Field(
        default_factory=list,
        description="With [data.columns] day and prompt: the scheduled clock time of each "
        "prompt number, in order, e.g. [\"09:00\", \"12:00\", \"15:00\"] (prompt 1 at 09:00).",
    )
    first_day: date | None = Field(
        None, description="With [data.columns] day: the date of day 1 (YYYY-MM-DD) for everyone."
    )
    period_starts: list[date] = Field(
        default_factory=list,
        description="With [data.columns] day and period: the date of day 1 of each measurement "
        "period, one per period in the sorted order of the period column.",
    )
    study_days: int | None = Field(
        None, ge=1, le=10_000,
        description="Days per measurement period by design. Prompts sent are prompts_per_day "
        "for each day from a period's day 1 to this day, or to the last answered day if later "
        "(rows after it that hold no answer are padding, not prompts sent).",
    )
    new_period_after_days: float = Field(
        7.0, gt=0,
        description="Without a period column: this many days with no prompt start a new "
        "measurement period.",
    )
    columns: Columns = Field(default_factory=Columns, description="Column names in the files.")

    @field_validator("prompt_times")
    @classmethod
    def _clocks(cls, v: list[str]) -> list[str]:
        for text in v:
            if parse_clock(text) is None:
                raise ValueError(f"'{text}' is not a clock time like 09:30")
        return v


def parse_clock(text: str) -> tuple[int, int, int] | None:
    """Hours, minutes and seconds of 'HH:MM' or 'HH:MM:SS'; None when it is not a clock time."""
    parts = text.strip().split(":")
    if len(parts) not in (2, 3) or not all(p.isdigit() and len(p) <= 2 for p in parts):
        return None
    hh, mm, ss = (int(p) for p in [*parts, "0"][:3])
    return (hh, mm, ss) if hh < 24 and mm < 60 and ss < 60 else None


def data_checks(data: DataFiles, where: str) -> list[Problem]:
    """Rules across the keys of [data] that say how prompt times are found."""
    cols = data.columns
    out: list[Problem] = []
    if (cols.day is None) != (cols.prompt is None):
        given, lacking = ("day", "prompt") if cols.prompt is None else ("prompt", "day")
        out.append(error(where + f"data.columns.{given}",
                         f"[data.columns] {given} needs {lacking} as well",
                         fix=f'add {lacking} = "..." under [data.columns] (the column with the '
                         f"{'prompt number within the day' if lacking == 'prompt' else 'day'})",
                         code="times-from-numbers"))
    if cols.day is not None and not data.prompt_times:
        out.append(error(where + "data.prompt_times",
                         "times built from day and prompt numbers need the prompts' times",
                         fix='add prompt_times = ["09:00", "13:00", ...] under [data], one '
                         "clock time per prompt number", code="times-from-numbers"))
    if data.period_starts and cols.period is None:
        out.append(error(where + "data.period_starts",
                         "period_starts needs the column that names each row's period",
                         fix='add period = "..." under [data.columns]',
                         code="times-from-numbers"))
    if (cols.date is None) != (cols.clock is None):
        given, lacking = ("date", "clock") if cols.clock is None else ("clock", "date")
        out.append(error(where + f"data.columns.{given}",
                         f"[data.columns] {given} needs {lacking} as well",
                         fix=f'add {lacking} = "..." under [data.columns]',
                         code="date-and-clock"))
    if cols.date is not None and cols.day is not None:
        out.append(error(where + "data.columns.date",
                         "times come either from date and clock or from day and prompt, "
                         "not both", fix="remove one pair under [data.columns]",
                         code="date-and-clock"))
    if cols.day is None:
        for key in ("prompt_times", "first_day", "period_starts"):
            if getattr(data, key):
                out.append(warning(where + f"data.{key}",
                                   f"{key} is only used with [data.columns] day and prompt",
                                   fix="remove it, or name the day and prompt columns",
                                   code="unused-setting"))
    return out
