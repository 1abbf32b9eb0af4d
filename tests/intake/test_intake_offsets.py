"""Offsets written in the times themselves, compared with the study's zone at that instant.

The expected local times are computed with the standard library's zoneinfo (the IANA tz
database: Europe/Amsterdam is +01:00 in winter and +02:00 from the last Sunday of March),
never with the code under test.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta, timezone
from pathlib import Path
from zoneinfo import ZoneInfo

from springback.intake import load_study
from springback.intake.offsets import hhmm
from springback.model import Study
from tests.support.intake_project import make_project

AMSTERDAM = ZoneInfo("Europe/Amsterdam")
ROSTER = "participant,language,consent\np1,en,yes\np2,en,yes\np3,en,yes\n"


def _local(year: int, month: int, day: int, hour: int, minutes_ahead: int) -> str:
    """The Amsterdam local time of a clock time written with an offset (zoneinfo's answer)."""
    written = datetime(year, month, day, hour, tzinfo=timezone(timedelta(minutes=minutes_ahead)))
    return written.astimezone(AMSTERDAM).strftime("%Y-%m-%d %H:%M")


def _study(root: Path, rows: str, extra: str = "") -> Study:
    return load_study(make_project(root, extra_toml=extra, files={
        "data/momentary.csv": "participant,timestamp,sad,calm\n" + rows,
        "data/participants.csv": ROSTER}))


def test_an_offset_other_than_the_studys_is_converted_and_warned_once(tmp_path: Path) -> None:
    rows = ("p1,2024-07-04T09:00:00+05:00,3,5\n"   # row 2: +05:00, Amsterdam had +02:00
            "p1,2024-07-04T13:00:00+02:00,4,4\n"   # row 3: Amsterdam's own offset then
            "p1,2024-07-05 09:00 +05:00,2,6\n"     # row 4: the offset after a space
            "p1,2024-07-05T20:00:00-03:00,2,6\n"   # row 5: another offset
            "p2,2024-03-04T09:00:00+01:00,3,5\n"   # winter: +01:00 is Amsterdam's
            "p2,2024-07-04T09:00:00+01:00,3,5\n"   # summer: +01:00 is not (row 7)
            "p3,2024-07-04T07:00:00Z,3,5\n"        # a UTC export: not warned
            "p3,2024-07-04T11:00:00+00:00,3,5\n")
    study = _study(tmp_path / "p", rows)
    warned = [w for w in study.warnings if w.code == "zone-offset"]
    assert [w.message() for w in warned] == [
        "data/momentary.csv, row 2, column 'timestamp': 3 answers of participant 'p1' carry "
        "the offset +05:00 (row 2 the first; also -03:00), the study's zone Europe/Amsterdam "
        "had +02:00 then; times are converted to the study's zone. Fix: nothing, if the "
        "participant was in another zone then; otherwise correct the device's time zone in "
        "the export, or the study's timezone under [study]",
        "data/momentary.csv, row 7, column 'timestamp': 1 answer of participant 'p2' carries "
        "the offset +01:00 (row 7 the first), the study's zone Europe/Amsterdam had +02:00 "
        "then; times are converted to the study's zone. Fix: nothing, if the participant was "
        "in another zone then; otherwise correct the device's time zone in the export, or the "
        "study's timezone under [study]"]
    # Written offsets are not told a second time as a far zone.
    assert not [w for w in study.warnings if w.code == "zone-far-off"]
    m = study.momentary
    local = {(p, r): t.strftime("%Y-%m-%d %H:%M")
             for p, r, t in zip(m["participant"], m["source_row"], m["local_time"], strict=True)}
    assert local == {
        ("p1", 2): _local(2024, 7, 4, 9, 300), ("p1", 3): _local(2024, 7, 4, 13, 120),
        ("p1", 4): _local(2024, 7, 5, 9, 300), ("p1", 5): _local(2024, 7, 5, 20, -180),
        ("p2", 6): _local(2024, 3, 4, 9, 60), ("p2", 7): _local(2024, 7, 4, 9, 60),
        ("p3", 8): _local(2024, 7, 4, 7, 0), ("p3", 9): _local(2024, 7, 4, 11, 0)}
    assert local[("p1", 2)] == "2024-07-04 06:00"  # 09:00 at +05:00 is 04:00 UTC


def test_naive_times_stay_local_times_of_the_study_zone(tmp_path: Path) -> None:
    study = _study(tmp_path / "p", "p1,2024-07-04 09:00,3,5\np2,2024-03-04 09:00,3,5\n")
    assert not [w for w in study.warnings
                if w.code in ("zone-offset", "zone-far-off")]
    m = study.momentary
    assert [t.strftime("%H:%M") for t in m["local_time"]] == ["09:00", "09:00"]
    utc = [t.tz_convert("UTC").strftime("%H:%M") for t in m["local_time"]]
    expected = [datetime(2024, 7, 4, 9, tzinfo=AMSTERDAM), datetime(2024, 3, 4, 9,
                                                                    tzinfo=AMSTERDAM)]
    assert utc == [e.astimezone(UTC).strftime("%H:%M") for e in expected]


def test_an_offset_in_a_timestamp_format_is_compared_too(tmp_path: Path) -> None:
    rows = "p1,04.07.2024 09:00+0530,3,5\np1,04.07.2024 10:00+0200,3,5\n"
    study = _study(tmp_path / "p", rows, '[data]\ntimestamp_format = "%d.%m.%Y %H:%M%z"\n')
    [w] = [w for w in study.warnings if w.code == "zone-offset"]
    assert (w.row, w.column) == (2, "timestamp")
    assert "1 answer of participant 'p1' carries the offset +05:30 (row 2 the first)" in w.what
    m = study.momentary
    assert [t.strftime("%Y-%m-%d %H:%M") for t in m["local_time"]] == [
        _local(2024, 7, 4, 9, 330), _local(2024, 7, 4, 10, 120)]


def test_offsets_are_written_as_iso_8601() -> None:
    # The reference is Python's own ISO 8601 writer (datetime.isoformat).
    for minutes in (300, 330, -180, 0, -570, 840):
        zone = timezone(timedelta(minutes=minutes))
        assert hhmm(minutes) == datetime(2024, 7, 4, 9, tzinfo=zone).isoformat()[-6:]
