"""Real exports as they come: times from numbers, periods, what was sent, and bad input.

Every expected number below is counted by hand from the tiny files written in each test.
"""

from __future__ import annotations

import errno
import time
from pathlib import Path

import pandas as pd
import pytest

from springback.errors import DataError
from springback.frames import DiskFrames
from springback.intake import check_study, load_study
from tests.support.intake_project import make_project

ROSTER = "participant,language,consent\np1,en,yes\np2,en,yes\n"
NUMBERS = """\
[data]
prompt_times = ["09:00", "13:00", "17:00"]
{day_one}
[data.columns]
day = "day"
prompt = "beep"
"""


def _numbers(root: Path, rows: str, day_one: str = 'first_day = "2024-03-04"',
             roster: str = ROSTER, extra: str = "") -> Path:
    return make_project(root, extra_toml=NUMBERS.format(day_one=day_one) + extra, files={
        "data/momentary.csv": "participant,day,beep,sad,calm\n" + rows,
        "data/participants.csv": roster})


def test_times_from_day_and_prompt_numbers(tmp_path: Path) -> None:
    root = _numbers(tmp_path / "p", "p1,1,1,3,5\np1,1,3,4,4\np1,2,2,2,6\np1,2,3,,\n"
                    "p2,1,1,2,6\n")
    study = load_study(root)
    m = study.momentary
    # Day 1 is 2024-03-04; prompt 3 is at 17:00, prompt 2 at 13:00 (the settings above).
    assert [t.strftime("%Y-%m-%d %H:%M") for t in m["local_time"]] == [
        "2024-03-04 09:00", "2024-03-04 17:00", "2024-03-05 13:00", "2024-03-04 09:00"]
    assert study.times_scheduled and study.slice("p1").times_scheduled
    assert (m["scheduled"] == m["time"]).all()
    # Rule 2 with 3 prompt times a day: p1 answered on days 1-2 -> 6 sent, 3 answered.
    q = study.quality.set_index("participant")
    assert (q.at["p1", "answered"], q.at["p1", "scheduled"]) == (3, 6.0)
    assert (q.at["p2", "answered"], q.at["p2", "scheduled"]) == (1, 3.0)


def test_date_of_day_one_from_the_roster(tmp_path: Path) -> None:
    roster = "participant,language,consent,first_day\np1,en,yes,2024-03-04\np2,en,yes,\n"
    root = _numbers(tmp_path / "p", "p1,1,1,3,5\np2,1,1,2,6\n", day_one="", roster=roster)
    report = check_study(root)
    [problem] = report.errors
    assert problem.what == "participant 'p2' has no date of day 1"
    assert (problem.row, problem.column) == (3, "day")
    assert problem.fix == "fill in first_day for 'p2' in the roster"


def test_periods_from_the_period_column_with_their_own_day_one(tmp_path: Path) -> None:
    toml = NUMBERS.format(day_one='period_starts = ["2024-03-04", "2024-05-13"]') + \
        'period = "wave"\n'
    root = make_project(tmp_path / "p", extra_toml=toml, files={
        "data/momentary.csv": "participant,wave,day,beep,sad,calm\n"
        "p1,0,1,1,3,5\np1,0,2,1,3,5\np1,1,1,2,4,4\np1,1,3,1,,\n",
        "data/participants.csv": ROSTER})
    study = load_study(root)
    m = study.momentary
    assert m["period"].tolist() == [1, 1, 2]
    assert m["local_time"].iloc[2].strftime("%Y-%m-%d %H:%M") == "2024-05-13 13:00"
    # Period 1: days 1-2 answered -> 6 sent; period 2: day 1 answered (day 3 only listed,
    # no study_days) -> 3 sent.
    sent = study.schedule.groupby("period")["sent"].sum().to_dict()
    assert sent == {1: 6.0, 2: 3.0}


def test_padding_after_study_days_is_not_sent_but_extra_answers_count(tmp_path: Path) -> None:
    rows = "".join(f"p1,{d},{b},,\n" for d in range(1, 5) for b in (1, 2, 3))
    rows = rows.replace("p1,1,1,,", "p1,1,1,3,5").replace("p1,4,2,,", "p1,4,2,3,5")
    root = _numbers(tmp_path / "p", rows + "p2,1,1,2,6\n", extra="")
    toml = (root / "study.toml").read_text().replace(
        "[data]\n", "[data]\nstudy_days = 2\n", 1)
    (root / "study.toml").write_text(toml)
    q = load_study(root).quality.set_index("participant")
    # p1 answered on day 1 and day 4 (beyond the design's 2 days): days 1-4 sent, 3 each.
    assert (q.at["p1", "answered"], q.at["p1", "scheduled"]) == (2, 12.0)
    # p2 answered on day 1 only: the design's 2 days were sent.
    assert q.at["p2", "scheduled"] == 6.0


def test_gap_starts_a_new_period(tmp_path: Path) -> None:
    rows = ("participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\n"
            "p1,2024-03-05 09:00,3,5\np1,2024-03-20 09:00,4,4\np2,2024-03-04 10:00,2,6\n")
    root = make_project(tmp_path / "p", extra_toml="", files={
        "data/momentary.csv": rows, "data/participants.csv": ROSTER})
    toml = (root / "study.toml").read_text().replace(
        'timezone = "Europe/Amsterdam"', 'timezone = "Europe/Amsterdam"\nprompts_per_day = 2')
    (root / "study.toml").write_text(toml)
    study = load_study(root)
    assert study.momentary["period"].tolist() == [1, 1, 2, 1]
    # Two answered days in period 1 and one in period 2, 2 prompts a day: 6 sent, not the
    # 17 days from the first to the last answer.
    assert study.quality.set_index("participant").at["p1", "scheduled"] == 6.0


def test_one_unanswered_row_does_not_make_everyone_compliant(tmp_path: Path) -> None:
    rows = ("participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\n"
            "p1,2024-03-04 13:00,,\np2,2024-03-04 10:00,2,6\n")
    root = make_project(tmp_path / "p", extra_toml="", files={
        "data/momentary.csv": rows, "data/participants.csv": ROSTER})
    toml = (root / "study.toml").read_text().replace(
        'timezone = "Europe/Amsterdam"', 'timezone = "Europe/Amsterdam"\nprompts_per_day = 4')
    (root / "study.toml").write_text(toml)
    q = load_study(root).quality.set_index("participant")
    # Rule 2 (no scheduled column): 4 prompts on the one day of each participant.
    assert q["scheduled"].to_dict() == {"p1": 4.0, "p2": 4.0}
    assert q["compliance"].to_dict() == {"p1": 0.25, "p2": 0.25}


def test_a_time_far_from_the_others_is_set_aside_with_a_warning(tmp_path: Path) -> None:
    rows = ("participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\n"
            "p1,2024-03-05 09:00,3,5\np1,2099-03-05 09:00,3,5\np2,2024-03-04 10:00,2,6\n")
    root = make_project(tmp_path / "p", files={"data/momentary.csv": rows,
                                               "data/participants.csv": ROSTER})
    study = load_study(root)
    [far] = [w for w in study.warnings if w.code == "time-far-off"]
    assert far.message() == (
        "data/momentary.csv, row 4: 1 time of participant 'p1' lie more than a year from "
        "their other times (row 4: 2099-03-05); it is set aside. Fix: correct the time (a "
        "device clock or a typed year is usual)")
    assert len(study.momentary) == 3
    assert study.set_aside["row"].tolist() == [4]


def test_an_answer_before_its_prompt_is_warned(tmp_path: Path) -> None:
    rows = ("participant,timestamp,scheduled,sad,calm\n"
            "p1,2024-03-04 08:30,2024-03-04 09:00,3,5\np2,2024-03-04 10:01,2024-03-04 10:00,2,6\n")
    root = make_project(tmp_path / "p", files={"data/momentary.csv": rows,
                                               "data/participants.csv": ROSTER})
    [early] = [w for w in load_study(root).warnings if w.code == "answer-before-prompt"]
    assert early.message() == (
        "data/momentary.csv, row 2: 1 answer of participant 'p1' came before its prompt was "
        "sent. Fix: check the device clocks and the scheduled column; the answers are kept")


def test_short_rows_are_refused_with_their_rows(tmp_path: Path) -> None:
    rows = "participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\np1,2024-03-04 13:00,4\n"
    report = check_study(make_project(tmp_path / "p", files={"data/momentary.csv": rows}))
    [problem] = report.errors
    assert problem.message() == (
        "data/momentary.csv, row 3: 1 row has fewer fields than the header (row 3 has 3; "
        "the header has 4); expected 4 ','-separated fields on every row. Fix: look at the "
        "rows named: a missing separator or a line broken in two is usual; leave a cell "
        "empty rather than leaving it out")


def test_a_header_of_more_than_10000_columns_is_refused_quickly(tmp_path: Path) -> None:
    header = ",".join(f"c{i}" for i in range(100_000))
    root = make_project(tmp_path / "p", files={"data/momentary.csv": header + "\n"})
    started = time.perf_counter()
    report = check_study(root)
    took = time.perf_counter() - started
    [problem] = report.errors
    assert problem.what == "the header has 100,000 columns; at most 10,000 can be read"
    assert took < 20  # a bound for a slow machine, not a speed target (it was minutes)


def test_a_10_mb_line_without_newline_is_read_in_linear_time(tmp_path: Path) -> None:
    times = []
    for size in (1, 10):
        root = make_project(tmp_path / f"p{size}", files={
            "data/momentary.csv": "participant,timestamp,sad,calm\n" + "x" * (size << 20)})
        started = time.perf_counter()
        check_study(root)
        times.append(time.perf_counter() - started)
    assert times[1] < 20 * max(times[0], 0.05)  # linear: ten times the size, not 100 times


def test_a_full_disk_is_a_plain_error(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    def full(self: DiskFrames, *args: object, **kw: object) -> None:
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(DiskFrames, "append", full)
    root = make_project(tmp_path / "p")
    with pytest.raises(DataError) as caught:
        load_study(root)
    [problem] = caught.value.problems
    assert problem.what.startswith("the study's working files could not be written in ")
    assert problem.what.endswith(": No space left on device")
    assert check_study(root).errors == (problem,)


def test_r_row_names_are_an_unnamed_first_column(tmp_path: Path) -> None:
    rows = ('"participant","timestamp","sad","calm"\n"1","p1","2024-03-04 09:00",3,5\n'
            '"2","p2","2024-03-04 10:00",2,6\n')
    study = load_study(make_project(tmp_path / "p", files={"data/momentary.csv": rows}))
    assert study.momentary["participant"].tolist() == ["p1", "p2"]
    assert pd.Series(study.momentary["sad"]).tolist() == [3.0, 2.0]


def test_a_date_column_and_a_clock_column(tmp_path: Path) -> None:
    rows = "participant,date,clock,sad,calm\np1,2024-03-04,09:15,3,5\np1,2024-03-04,9:5x,4,4\n"
    root = make_project(tmp_path / "p", extra_toml='[data]\non_bad_rows = "set aside"\n'
                        '[data.columns]\ndate = "date"\nclock = "clock"\n',
                        files={"data/momentary.csv": rows, "data/participants.csv": ROSTER})
    study = load_study(root)
    assert [t.strftime("%Y-%m-%d %H:%M") for t in study.momentary["local_time"]] == [
        "2024-03-04 09:15"]
    assert not study.times_scheduled
    [bad] = [w for w in study.warnings if w.code == "bad-time"]
    assert (bad.row, bad.column, bad.what) == (3, "clock", "the clock time cannot be read")


def test_an_unreadable_time_of_an_unanswered_row_is_told(tmp_path: Path) -> None:
    rows = ("participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\np1,yesterday,,\n"
            "p2,2024-03-04 10:00,2,6\n")
    report = check_study(make_project(tmp_path / "p", files={"data/momentary.csv": rows}))
    [problem] = report.errors
    assert (problem.code, problem.row, problem.column) == ("bad-time", 3, "timestamp")


def test_a_10_mb_header_without_separators_is_quoted_short(tmp_path: Path) -> None:
    root = make_project(tmp_path / "p", files={"data/momentary.csv": "x" * (10 << 20)})
    report = check_study(root)
    assert report.errors and all(len(p.message()) < 600 for p in report.errors)
    assert report.errors[0].found == "columns 'xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx...' " \
        "(10,485,760 characters)"


def test_a_zone_far_from_the_studys_is_warned(tmp_path: Path) -> None:
    rows = ("participant,timestamp,sad,calm\np1,2024-03-04 09:00 JST,3,5\n"
            "p1,2024-03-04 13:00 CET,4,4\np2,2024-03-04 10:00 CEST,2,6\n")
    study = load_study(make_project(tmp_path / "p", files={"data/momentary.csv": rows}))
    # JST (+09:00) is 8 hours from Amsterdam's +01:00 on 4 March; CEST (+02:00) is 1 hour.
    [far] = [w for w in study.warnings if w.code == "zone-far-off"]
    assert far.message() == (
        "data/momentary.csv, row 2: 1 time of participant 'p1' carry a time zone 3 or more "
        "hours from the study's Europe/Amsterdam (row 2: JST); they are read in their own "
        "zone. Fix: check the device's time zone, or the study's timezone under [study]")
    assert len(study.momentary) == 3


def test_without_prompts_per_day_the_listed_prompts_are_sent(tmp_path: Path) -> None:
    # Rule 3: no design number, but the file lists unanswered prompts (row 3 has a time).
    rows = ("participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\n"
            "p1,2024-03-04 13:00,,\np2,2024-03-04 10:00,2,6\n")
    root = make_project(tmp_path / "p", files={"data/momentary.csv": rows,
                                               "data/participants.csv": ROSTER})
    q = load_study(root).quality.set_index("participant")
    assert q["scheduled"].to_dict() == {"p1": 2.0, "p2": 1.0}


def test_without_design_or_listed_prompts_compliance_is_unknown(tmp_path: Path) -> None:
    # Rule 4: answered rows only and no prompts_per_day: the number sent is not known.
    q = load_study(make_project(tmp_path / "p")).quality
    assert q["scheduled"].isna().all() and q["compliance"].isna().all()


def test_unreadable_day_and_prompt_numbers_are_told_by_row(tmp_path: Path) -> None:
    rows = "p1,1,1,3,5\np1,x,2,,\np1,1,7,4,4\np1,1e9,1,4,4\np1,2,,,\n"
    report = check_study(_numbers(tmp_path / "p", rows))
    found = [(p.row, p.column, p.what) for p in report.errors]
    # Rows counted in the file above (header = row 1); row 6 has no prompt and no answer.
    assert found == [
        (3, "day", "the day number is not a whole number from 1 to 36,600"),
        (5, "day", "the day number is not a whole number from 1 to 36,600"),
        (4, "beep", "the prompt number has no time in prompt_times"),
    ]
