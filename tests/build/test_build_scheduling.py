"""How a build hands out and carries out its per-participant work (order, slicing, memory)."""

from __future__ import annotations

import gc
import itertools
from pathlib import Path

import pandas as pd
import pytest

from springback.build.jobs import fewer_collections
from springback.build.pipeline import heaviest_first
from springback.intake import load_study


def test_slice_equals_boolean_mask_selection(example_copy: Path) -> None:
    """Check each participant's slice holds exactly the rows a plain pandas boolean mask selects,
    in the same order with the same dtypes (pandas itself as the reference)."""
    study = load_study(example_copy)
    for pid in study.participants():
        data = study.slice(pid)
        for name in ("momentary", "events", "questionnaires", "quality", "set_aside"):
            frame = getattr(study, name)
            expected = frame[frame["participant"] == pid].reset_index(drop=True)
            pd.testing.assert_frame_equal(getattr(data, name), expected)
        assert study.rows_of(pid) == len(data.momentary)


def test_heaviest_jobs_are_handed_out_first(example_copy: Path) -> None:
    """Check participants with two editions come first, then more prompts first, and those
    without a booklet last (longest-processing-time-first; Graham 1969, "Bounds on
    multiprocessing timing anomalies")."""
    study = load_study(example_copy)
    everyone = study.participants()
    order = heaviest_first(study, everyone, study.settings)
    assert sorted(order) == everyone
    roster = study.roster.set_index("participant")

    def editions(pid: str) -> int:
        row = roster.loc[pid]
        if row["consent"] != "yes" or not bool(row["feedback"]):
            return 0
        return 2 if bool(row["therapist"]) else 1

    counts = [editions(p) for p in order]
    assert counts == sorted(counts, reverse=True)
    assert counts[0] == 2 and counts[-1] == 0
    for a, b in itertools.pairwise(order):
        if editions(a) == editions(b) and editions(a) > 0:
            assert study.rows_of(a) >= study.rows_of(b)


def test_fewer_collections_restores_the_collector_and_frees_cycles() -> None:
    """Check the block raises the young-generation threshold, restores the old one after, and
    ends with a full collection that frees reference cycles made inside it."""
    before = gc.get_threshold()
    freed: list[str] = []

    class Node:
        def __init__(self) -> None:
            self.me = self

        def __del__(self) -> None:
            freed.append("node")

    with fewer_collections():
        assert gc.get_threshold()[0] > before[0]
        Node()  # a cycle: reference counting alone never frees it
    assert gc.get_threshold() == before
    assert freed == ["node"]


def test_fewer_collections_restores_the_collector_after_an_error() -> None:
    """Check a failing participant leaves the collector as it was (the worker goes on)."""
    before = gc.get_threshold()
    with pytest.raises(RuntimeError), fewer_collections():
        raise RuntimeError("rendering failed")
    assert gc.get_threshold() == before


def test_time_zones_of_many_rows_share_one_string_per_zone() -> None:
    """Check parsing a large time column keeps one zone string object per distinct zone, so
    loading a big study does not hold a string per row (the memory target of a 2000-person
    study), with the times still right: own offset, the row's zone, else the study's."""
    from springback.intake.times import parse_times

    n = 30_000
    values = pd.Series(["2026-03-02 09:00"] * n, dtype="str")
    values.iloc[::3] = "2026-03-02 09:00+01:00"
    rows = pd.Series([""] * n, dtype="str")
    rows.iloc[1::3] = "Europe/London"
    times = parse_times(values, study_zone="Europe/Amsterdam", row_zones=rows)
    zones = times.zone.tolist()
    assert zones[:3] == ["Europe/Amsterdam", "Europe/London", "Europe/Amsterdam"]
    assert len({id(z) for z in zones if z == "Europe/Amsterdam"}) == 1
    assert len({id(z) for z in zones if z == "Europe/London"}) == 1
    # 09:00 in Amsterdam (UTC+1 in March before the change) and London (UTC+0)
    # (Python's zoneinfo, the IANA database, as the reference).
    assert str(times.utc.iloc[2]) == "2026-03-02 08:00:00+00:00"
    assert str(times.utc.iloc[0]) == "2026-03-02 08:00:00+00:00"  # its own offset, +01:00
    assert str(times.utc.iloc[1]) == "2026-03-02 09:00:00+00:00"


def test_frame_digest_changes_with_values_names_and_types_only() -> None:
    """Check a participant's data digest is the same for an equal frame (another index too) and
    differs after one changed value, a renamed column or a changed type."""
    from springback.build.fingerprints import frame_digest

    frame = pd.DataFrame({
        "participant": pd.Series(["P1", "P1"], dtype="str"),
        "time": pd.to_datetime(["2026-03-02 08:00", "2026-03-02 11:00"], utc=True),
        "down": [2.0, float("nan")],
    })
    same = frame.copy()
    same.index = [7, 8]
    assert frame_digest(frame) == frame_digest(same)
    changed = frame.copy()
    changed.loc[1, "down"] = 3.0
    renamed = frame.rename(columns={"down": "low"})
    retyped = frame.astype({"down": "float32"})
    digests = {frame_digest(f) for f in (frame, changed, renamed, retyped)}
    assert len(digests) == 4
