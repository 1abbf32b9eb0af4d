"""Warnings about times read in another zone than the study's: once per participant and file.

Every time becomes a UTC instant (intake.times) and is shown as a local time of the study's
zone; these warnings say where a time itself claimed another zone, so a coordinator can tell
a participant who travelled from a device with a wrong clock.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from springback.errors import warning
from springback.intake.problems import Sink
from springback.intake.times import FAR_ZONE_HOURS, Times, far_zones, zone_offsets


def far_zone_warnings(where: str, stamp: Times, usable: np.ndarray, participant: pd.Series,
                      rows: np.ndarray, study_zone: str, sink: Sink) -> None:
    """Warn once per participant about answers read in a zone named far from the study's.

    The zone is a word (JST) or comes from a zone column; an offset written in the time itself
    is told by `offset_warnings` instead.
    """
    own = stamp.zone.to_numpy(dtype=object) != study_zone
    own &= stamp.offset.isna().to_numpy()
    if not (own & usable).any():
        return
    far = usable & own & far_zones(stamp.utc, stamp.zone, study_zone)
    for person, hit in pd.Series(rows[far]).groupby(participant[far].to_numpy()):
        n, first = len(hit), int(hit.min())
        shown = stamp.zone.to_numpy(dtype=object)[rows == first][0]
        sink.add(warning(where, f"{n} time{'s' if n > 1 else ''} of participant '{person}' "
                         f"carry a time zone {FAR_ZONE_HOURS} or more hours from the study's "
                         f"{study_zone} (row {first}: {shown}); they are read in their own "
                         "zone", row=first, fix="check the device's time zone, or the study's "
                         "timezone under [study]", code="zone-far-off"))


def offset_warnings(where: str, times: list[tuple[str, Times]], usable: np.ndarray,
                    participant: pd.Series, rows: np.ndarray, study_zone: str,
                    sink: Sink) -> None:
    """Warn once per participant whose times carry an offset the study's zone did not have.

    `times` are the file's time columns (header, parsed times) in the order they are named.
    Each such time is the instant it says (the offset is applied) and is shown in the study's
    zone. A participant whose written offsets are all zero ('Z', '+00:00') is not warned: an
    export in UTC, not a device in another zone.
    """
    found = []
    for column, parsed in times:
        written = parsed.offset.to_numpy(dtype=float)
        has = usable & ~np.isnan(written)
        if not has.any():
            continue
        study = np.full(len(written), np.nan)
        here = pd.Series(study_zone, index=parsed.utc.index, dtype=object)
        study[has] = np.round(zone_offsets(parsed.utc, here).to_numpy()[has] * 60)
        found.append(pd.DataFrame({
            "person": participant.to_numpy()[has], "row": rows[has], "column": column,
            "own": written[has], "study": study[has]}))
    if not found:
        return
    table = pd.concat(found, ignore_index=True)
    for person, theirs in table.groupby("person", sort=False):
        if (theirs["own"] == 0).all():
            continue
        off = theirs[theirs["own"] != theirs["study"]].sort_values("row", kind="stable")
        if off.empty:
            continue
        first = off.iloc[0]
        n = int(off["row"].nunique())
        others = sorted(set(off["own"]) - {first["own"]})
        also = f"; also {', '.join(hhmm(o) for o in others)}" if others else ""
        sink.add(warning(
            where, f"{n} answer{'s' if n > 1 else ''} of participant '{person}' "
            f"carr{'y' if n > 1 else 'ies'} the offset {hhmm(first['own'])} "
            f"(row {int(first['row'])} the first{also}), the study's zone {study_zone} had "
            f"{hhmm(first['study'])} then; times are converted to the study's zone",
            row=int(first["row"]), column=str(first["column"]),
            fix="nothing, if the participant was in another zone then; otherwise correct the "
            "device's time zone in the export, or the study's timezone under [study]",
            code="zone-offset"))


def hhmm(minutes: float) -> str:
    """An offset of minutes ahead of UTC as written in ISO 8601 ('+05:30', '-03:00')."""
    m = round(minutes)
    sign = "-" if m < 0 else "+"
    return f"{sign}{abs(m) // 60:02d}:{abs(m) % 60:02d}"
