"""Read the event markers, and the part every timed file shares: who, and when."""

from __future__ import annotations

import difflib

import numpy as np
import pandas as pd

from springback.errors import error
from springback.intake.momentary import LOCAL_TIME_CODES, TIME_PROBLEMS, _expected, _time_fix
from springback.intake.problems import Sink, column_name
from springback.intake.readers import Table, as_number, as_text, labelled, missing_mask
from springback.intake.times import parse_times, zone_texts
from springback.model import EVENT_COLUMNS
from springback.settings import StudySettings
from springback.settings.data_files import IdFile


def read_timed(table: Table, settings: StudySettings, sink: Sink, required: dict[str, str],
               file: IdFile = "events",
               ) -> tuple[pd.DataFrame, np.ndarray] | None:
    """Participant, UTC time and source row of each row, plus a mask of rows still usable."""
    cols = settings.data.columns
    missing = settings.data.missing_values
    id_column = cols.id_column(file)
    id_key = f"{file}_participant" if id_column != cols.participant else "participant"
    wanted = {id_column: id_key, cols.timestamp: "timestamp"} | required
    present = list(table.frame.columns)
    absent = [n for n in wanted if n not in present]
    for name in absent:
        close = difflib.get_close_matches(name, present, n=1)
        sink.add(error(table.where, f"column '{name}' is missing",
                       expected=f"a column named '{name}' ({wanted[name]})",
                       found="columns " + ", ".join(column_name(c) for c in present[:8]),
                       fix=(f"did you mean '{close[0]}'? " if close else "")
                       + f'rename the column, or set {wanted[name]} = "..." under [data.columns]',
                       column=name, code="missing-column"))
    if absent:
        return None
    frame = table.frame
    rows = table.rows
    pid = as_text(labelled(table, id_column), missing)
    who = pid.fillna("").to_numpy()
    nobody = pid.isna().to_numpy()
    sink.bad_rows(table.where, rows[nobody], who[nobody], [""] * int(nobody.sum()),
                  what="the participant id is missing", column=id_column,
                  expected="an id from the roster", code="missing-participant")
    zones = zone_texts(frame[cols.timezone]) if cols.timezone in present else None
    gone = missing_mask(frame[cols.timestamp], missing)
    times = parse_times(frame[cols.timestamp], study_zone=settings.study.timezone,
                        row_zones=zones, fmt=settings.data.timestamp_format, missing=gone)
    usable = ~nobody
    no_time = usable & gone.to_numpy()
    sink.bad_rows(table.where, rows[no_time], who[no_time], [""] * int(no_time.sum()),
                  what="the time is missing", column=cols.timestamp,
                  expected="when it happened", code="missing-time")
    usable &= ~no_time
    for code, what in TIME_PROBLEMS.items():
        hit = usable & (times.problem == code).to_numpy()
        found = [f"'{v}'" + (f" in {z}" if code in LOCAL_TIME_CODES else "")
                 for v, z in zip(frame[cols.timestamp][hit], times.zone[hit], strict=True)]
        sink.bad_rows(table.where, rows[hit], who[hit], found, what=what, column=cols.timestamp,
                      expected=_expected(code, settings.data.timestamp_format),
                      fix=_time_fix(code), code=code)
        usable &= ~hit
    out = pd.DataFrame({"participant": pid.fillna(""), "time": times.utc, "source_row": rows})
    return out, usable


def read_events(table: Table, settings: StudySettings, sink: Sink) -> pd.DataFrame | None:
    """Check the events and mark the upsetting ones as the settings define them."""
    cols = settings.data.columns
    missing = settings.data.missing_values
    got = read_timed(table, settings, sink, {cols.kind: "kind"})
    if got is None:
        return None
    out, usable = got
    rows = table.rows
    who = out["participant"].to_numpy()
    kind = as_text(labelled(table, cols.kind), missing)
    no_kind = usable & kind.isna().to_numpy()
    sink.bad_rows(table.where, rows[no_kind], who[no_kind], [""] * int(no_kind.sum()),
                  what="the event kind is missing", column=cols.kind,
                  expected="a word for what happened", code="missing-kind")
    usable &= ~no_kind
    if cols.intensity in table.frame.columns:
        intensity, wrong = as_number(table.frame[cols.intensity], missing)
        hit = usable & wrong.to_numpy()
        sink.bad_rows(table.where, rows[hit], who[hit],
                      [f"'{v}'" for v in table.frame[cols.intensity][hit]], what="not a number",
                      column=cols.intensity, expected="a number or an empty cell",
                      code="not-a-number")
        usable &= ~hit
    else:
        intensity = pd.Series(np.nan, index=table.frame.index)
    out["kind"] = kind.fillna("").astype(str)
    out["intensity"] = intensity.astype(float).to_numpy()
    spec = settings.events
    upsetting = np.ones(len(out), bool)
    if spec.upsetting is not None:
        upsetting &= out["kind"].isin(spec.upsetting).to_numpy()
    if spec.min_intensity is not None:
        upsetting &= (out["intensity"] >= spec.min_intensity).to_numpy()
    out["upsetting"] = upsetting
    out = out[usable].reset_index(drop=True)
    return out[["participant", "time", "kind", "intensity", "upsetting", "source_row"]]


def event_frame(events: pd.DataFrame, zone: str) -> pd.DataFrame:
    """The events by the column contract, sorted by participant and time."""
    out = events.sort_values(["participant", "time"], kind="stable").reset_index(drop=True)
    out["local_time"] = out["time"].dt.tz_convert(zone)
    return out[list(EVENT_COLUMNS)]
