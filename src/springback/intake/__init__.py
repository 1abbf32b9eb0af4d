"""Data intake: read a project folder's files, check them in one pass, return a `Study`.

`load_study` raises with every problem found; `check_study` never raises for a user's mistake
and returns the problems instead. Input files are only ever opened for reading.
"""

from __future__ import annotations

import errno
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow

from springback.errors import DataError, Problem, SettingsError, error, warning
from springback.frames import DiskFrames
from springback.intake import stream
from springback.intake.events import event_frame, read_events
from springback.intake.momentary import read_momentary
from springback.intake.numbers import from_numbers, roster_first_days
from springback.intake.problems import Sink, Slot
from springback.intake.quality import quality_frame, quality_table
from springback.intake.questionnaires import questionnaire_frame, read_questionnaires
from springback.intake.readers import (
    Table,
    TableChunks,
    as_number,
    as_text,
    read_chunks,
    read_table,
)
from springback.intake.roster import read_roster
from springback.intake.stream import Momentary, check_momentary
from springback.memory import release_free_memory
from springback.model import Study, latest_time
from springback.settings import SETTINGS_FILE, StudySettings, load_settings
from springback.settings.data_files import IdFile

__all__ = ["CheckReport", "check_study", "load_study", "quality_table", "read_prompts"]


@dataclass(frozen=True)
class CheckReport:
    """What `check` found: every problem, and the loaded study when there was no error."""

    problems: tuple[Problem, ...]
    study: Study | None
    strict: bool = False

    @property
    def errors(self) -> tuple[Problem, ...]:
        return tuple(p for p in self.problems if p.is_error)

    @property
    def warnings(self) -> tuple[Problem, ...]:
        return tuple(p for p in self.problems if not p.is_error)

    @property
    def ok(self) -> bool:
        """No errors (and, in strict mode, no warnings either)."""
        return not self.errors and not (self.strict and self.warnings)


def load_study(project: Path, *, strict: bool = False) -> Study:
    """Read and check a project folder; raise with every problem if any is an error."""
    study, problems = _working(project)
    if study is not None:
        study.index()  # made now, among the study's other lasting objects, not after them
    release_free_memory()  # checking needed several times the data's size; keep only the data
    fatal = any(p.is_error for p in problems) or (strict and problems)
    if fatal or study is None:
        from_settings = all(p.where.startswith(SETTINGS_FILE) for p in problems)
        raise (SettingsError if from_settings else DataError)(problems)
    return study


def check_study(project: Path, *, strict: bool = False) -> CheckReport:
    """Check a project folder and return every problem found; never raises for user mistakes."""
    try:
        study, problems = _working(project)
    except DataError as exc:
        return CheckReport(tuple(exc.problems), None, strict)
    except SettingsError as exc:
        return CheckReport(tuple(exc.problems), None, strict)
    if any(p.is_error for p in problems):
        study = None
    return CheckReport(tuple(problems), study, strict)


def read_prompts(project: Path) -> pd.DataFrame:
    """Every row of the momentary file as read, ratings as numbers, before any row is resolved.

    For audits and published counts (missing cells, repeated prompts); `load_study` is the
    checked path. Columns: source_row, participant, then one float column per item key (wide
    layout) or item and value (long layout).
    """
    project = Path(project)
    settings, _ = load_settings(project)
    data = settings.data
    table = read_table(_path(project, data.momentary), data.momentary.as_posix(),
                       sheet=data.sheet)
    sink = Sink("set aside")
    if read_momentary(table, settings, sink) is None:
        raise DataError(sink.problems)
    frame = table.frame
    out = pd.DataFrame({"source_row": table.rows,
                        "participant": as_text(frame[data.columns.participant],
                                               data.missing_values)})
    if data.layout == "long":
        out["item"] = as_text(frame[data.columns.item], data.missing_values)
        out["value"] = as_number(frame[data.columns.value], data.missing_values)[0]
        return out
    for key, item in settings.items.items():
        out[key] = as_number(frame[item.column or key], data.missing_values)[0]
    return out


def _working(project: Path) -> tuple[Study | None, list[Problem]]:
    """`_load`, with a failure of the private working files (a full disk) told plainly."""
    try:
        return _load(Path(project))
    except OSError as exc:
        if exc.errno in (errno.ENOSPC, errno.EDQUOT):
            folder = tempfile.gettempdir()
            raise DataError([error(
                "working files", f"the study's working files could not be written in "
                f"{folder}: {exc.strerror or exc}",
                fix="free some space there (or set TMPDIR to a folder with more room) and run "
                "the command again; no input file was changed", code="working-files")]) from None
        name = f"{exc.filename}: " if exc.filename else ""
        raise DataError([error(
            "files", f"a file could not be read or written: {name}{exc.strerror or exc}",
            fix="check that the folder is readable and writable, then run the command again",
            code="working-files")]) from None


def _path(project: Path, path: Path) -> Path:
    return path if path.is_absolute() else project / path


def _load(project: Path) -> tuple[Study | None, list[Problem]]:
    """Load everything; return the study (None if it cannot be built) and every problem."""
    # Text columns live in Arrow buffers. Arrow's default allocator (mimalloc) keeps freed
    # memory for reuse, so the many short-lived buffers of checking a large file stay in the
    # process; the C library's allocator returns them (10% lower peak at 2000 participants).
    pyarrow.set_memory_pool(pyarrow.system_memory_pool())
    settings, settings_problems = load_settings(project)
    sink = Sink(settings.data.on_bad_rows)
    sink.add(settings_problems)
    data = settings.data
    read: list[Path] = [(project / SETTINGS_FILE).resolve()]

    def table(path: Path | None, key: str, slot: Slot | None = None) -> Table | None:
        """Read a whole file; its problems go to `slot` (a place kept in the list) if given."""
        out = slot or sink
        if path is None:
            return None
        full = _path(project, path)
        if key in ("events", "questionnaires") and not full.exists():
            # Optional files: silently skipped at their default place, but a path the study
            # names itself that leads nowhere is worth a word (it may be a typo).
            if key in data.model_fields_set:
                out.add(warning(path.as_posix(), f"the {key} file is missing; the study "
                                 f"goes on without {key}", fix=f"correct {key} under [data], "
                                 "or remove the line", code="missing-optional-file"))
            return None
        try:
            got = read_table(full, path.as_posix(), sheet=data.sheet)
        except DataError as exc:
            out.add(exc.problems)
            return None
        read.append(full.resolve())
        out.add(list(got.notes))
        if got.frame.empty and key == "participants":  # momentary: stream.check_momentary
            out.add(error(got.where, "the file has a header but no rows",
                           fix="export the data again", code="no-rows"))
            return None
        return got

    def chunked(path: Path) -> TableChunks | None:
        full = _path(project, path)
        try:
            got = read_chunks(full, path.as_posix(), sheet=data.sheet, rows=stream.CHUNK_ROWS)
        except DataError as exc:
            sink.add(exc.problems)
            return None
        read.append(full.resolve())
        sink.add(list(got.notes))
        return got

    roster_table = table(data.participants, "participants")
    momentary_chunks = chunked(data.momentary)
    # Events and scores are read after the momentary rows (so the two never take memory at
    # once); their reading problems keep the place they would have had.
    events_slot, scores_slot = sink.slot(), sink.slot()
    roster_problems: list[Problem] = []
    roster = read_roster(roster_table, settings, roster_problems) if roster_table else None
    sink.add(roster_problems)
    roster_where = data.participants.as_posix()
    consent_sink = Sink(settings.data.on_bad_rows)  # told after the other files' problems
    consent = None
    if roster is not None:
        consenting = set(roster.loc[roster["consent"] == "yes", "participant"])
        withdrawn = set(roster.loc[roster["consent"] == "withdrawn", "participant"])
        listed = set(roster["participant"])

        def consent(frame: pd.DataFrame, out: Sink, where: str = "",
                    file: IdFile = "momentary") -> pd.DataFrame:
            return _consent_rules(where or data.momentary.as_posix(), frame, consenting,
                                  withdrawn, listed, roster_where, data.columns.id_column(file),
                                  out)

    first_days = roster_first_days(roster_table, settings, sink)
    momentary = check_momentary(momentary_chunks, settings, sink, consent, consent_sink,
                                first_days) if momentary_chunks else None
    events_table = table(data.events, "events", events_slot)
    events = read_events(events_table, settings, sink) if events_table else None
    events_where = events_table.where if events_table else ""
    del events_table
    scores_table = table(data.questionnaires, "questionnaires", scores_slot)
    scores = read_questionnaires(scores_table, settings, sink) if scores_table else None
    scores_where = scores_table.where if scores_table else ""
    del scores_table
    if roster is None or momentary is None or consent is None:
        return None, sink.problems
    if events is not None:
        events = consent(events, consent_sink, events_where, "events")
    if scores is not None:
        scores = consent(scores, consent_sink, scores_where, "questionnaires")
    sink.take(consent_sink)
    _late_and_absent(data.momentary.as_posix(), momentary, roster, roster_where, settings, sink)
    zone = settings.study.timezone
    event_rows = _spill(event_frame(events if events is not None else _no_events(), zone))
    scores_out = questionnaire_frame(scores if scores is not None else _no_scores(), zone)
    last_score = latest_time(scores_out)
    score_rows = _spill(scores_out)
    del events, scores, scores_out
    set_aside = sink.set_aside_frame()
    schedule = momentary.schedule
    schedule = schedule[schedule["participant"].isin(set(roster["participant"]))]
    schedule = schedule.sort_values(["participant", "study_day"]).reset_index(drop=True)
    quality = quality_frame(roster, momentary.summary, momentary.late["late"], schedule,
                            set_aside)
    study = Study(
        root=project.resolve(), settings=settings,
        roster=roster.drop(columns="_row").sort_values("participant").reset_index(drop=True),
        momentary_rows=momentary.rows, event_rows=event_rows, questionnaire_rows=score_rows,
        set_aside=set_aside, quality=quality,
        warnings=tuple(p for p in sink.problems if not p.is_error),
        input_files=tuple(read), last_prompt=momentary.last_prompt, last_score=last_score,
        schedule=schedule, times_scheduled=from_numbers(settings),
    )
    return study, sink.problems


def _spill(frame: pd.DataFrame) -> DiskFrames:
    """Timed rows kept in a private file, read back one participant at a time."""
    rows = DiskFrames()
    rows.append(frame, frame["participant"])
    return rows.seal()


def _no_events() -> pd.DataFrame:
    """An empty events table with the contract's column types (the file is optional)."""
    return pd.DataFrame({"participant": pd.Series(dtype="str"),
                         "time": pd.Series(dtype="datetime64[ns, UTC]"),
                         "kind": pd.Series(dtype="str"), "intensity": pd.Series(dtype=float),
                         "upsetting": pd.Series(dtype=bool)})


def _no_scores() -> pd.DataFrame:
    """An empty questionnaire table with the contract's column types (the file is optional)."""
    return pd.DataFrame({"participant": pd.Series(dtype="str"),
                         "time": pd.Series(dtype="datetime64[ns, UTC]"),
                         "questionnaire": pd.Series(dtype="str"),
                         "score": pd.Series(dtype=float)})


def _consent_rules(where: str, frame: pd.DataFrame, consenting: set[str], withdrawn: set[str],
                   listed: set[str], roster_where: str, column: str,
                   sink: Sink) -> pd.DataFrame:
    """Rows of people not on the roster are errors; withdrawn people's rows are set aside."""
    who = frame["participant"]
    # Membership of each distinct id, then spread to the rows: Series.isin with a set of
    # thousands of ids rebuilt that set for every call (a third of loading 20,000 people).
    codes, ids = pd.factorize(who)

    def member(group: set[str]) -> pd.Series:
        known = np.array([i in group for i in ids] + [False], dtype=bool)
        return pd.Series(known[codes], index=who.index)  # code -1 (no id) reads the False

    stranger = ~member(listed)
    for person, rows in frame.loc[stranger, "source_row"].groupby(who[stranger]):
        sink.add(error(where, f"participant '{person}' is not in the roster (no consent record)",
                       found=f"{len(rows)} row{'s' if len(rows) > 1 else ''}",
                       row=int(rows.min()), column=column,
                       fix=f"add '{person}' to {roster_where} with their consent, or remove "
                       "their rows", code="not-in-roster"))
    gone = member(withdrawn)
    for person, rows in frame.loc[gone, "source_row"].groupby(who[gone]):
        sink.add(warning(where, f"participant '{person}' withdrew consent; their {len(rows)} "
                         f"row{'s are' if len(rows) > 1 else ' is'} set aside",
                         row=int(rows.min()), column=column,
                         fix="delete their rows from the file to silence this",
                         code="withdrawn"))
        sink.aside(where, rows.tolist(), [person] * len(rows), "participant withdrew consent")
    return frame[member(consenting)].reset_index(drop=True)


def _late_and_absent(where: str, momentary: Momentary, roster: pd.DataFrame,
                     roster_where: str, settings: StudySettings, sink: Sink) -> None:
    """Warn about late answers and about consenting people with no answers at all."""
    minutes = settings.data.late_after_minutes
    for person, (n, row) in momentary.late[["late", "row"]].iterrows():
        sink.add(warning(where, f"{n} answer{'s' if n > 1 else ''} of participant '{person}' "
                         f"came more than {minutes:g} minutes after the prompt",
                         row=int(row),
                         fix="check the device clocks; late answers are counted in the quality "
                         "report (late_after_minutes under [data] sets the limit)",
                         code="late-answers"))
    has_data = set(momentary.summary.index)
    for person, row in roster.loc[roster["consent"] == "yes", ["participant", "_row"]].itertuples(
            index=False):
        if person not in has_data:
            sink.add(warning(roster_where, f"participant '{person}' has no momentary answers",
                             row=int(row),
                             column=settings.data.columns.id_column("participants"),
                             fix="check that the id is written the same in both files; "
                             "no booklet is made without data", code="no-data"))
