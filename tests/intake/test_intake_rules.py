"""Check the intake's rules: scoring, study days, compliance, consent, events, questionnaires."""

from __future__ import annotations

import hashlib
import math
import stat
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from rich.console import Console

from springback.errors import DataError, SettingsError
from springback.intake import check_study, load_study, quality_table
from springback.model import (
    EVENT_COLUMNS,
    MOMENTARY_COLUMNS,
    QUALITY_COLUMNS,
    QUESTIONNAIRE_COLUMNS,
    ROSTER_COLUMNS,
    SET_ASIDE_COLUMNS,
)
from tests.support.intake_project import BASE_TOML, MOMENTARY, ROSTER, make_project


def _load(tmp_path: Path, extra: str = "", **files: str | bytes | None):
    paths = {f"data/{k}.csv": v for k, v in files.items()}
    return load_study(make_project(tmp_path / "study", extra_toml=extra, files=paths))


def test_column_contracts(tmp_path: Path) -> None:
    """Check that every frame has the columns and types the model promises."""
    study = _load(tmp_path, events="participant,timestamp,kind\np1,2024-03-04 12:00,loss\n",
                  questionnaires="participant,timestamp,questionnaire,score\n"
                  "p1,2024-03-04 12:00,phq9,4\n")
    m = study.momentary
    assert tuple(m.columns) == (*MOMENTARY_COLUMNS, "sad", "calm", "low_mood")
    assert str(m["time"].dtype) == "datetime64[ns, UTC]"
    assert str(m["study_day"].dtype) == "datetime64[ns]"
    assert str(m["scheduled"].dtype) == "datetime64[ns, UTC]"
    assert m["source_row"].dtype == np.int64
    assert tuple(study.events.columns) == EVENT_COLUMNS
    assert tuple(study.questionnaires.columns) == QUESTIONNAIRE_COLUMNS
    assert tuple(study.roster.columns) == ROSTER_COLUMNS
    assert tuple(study.quality.columns) == QUALITY_COLUMNS
    assert tuple(study.set_aside.columns) == SET_ASIDE_COLUMNS
    assert study.roster["feedback"].dtype == bool
    assert list(study.roster["region"]) == ["default", "default"]
    data = study.slice("p1")
    assert len(data.momentary) == 2 and len(data.events) == 1 and data.language == "en"


def test_composite_reverse_scoring_and_min_items(tmp_path: Path) -> None:
    """Check composites: mean after reversing (low + high - x); NaN with too few items."""
    rows = "participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\np1,2024-03-04 13:00,6,\n"
    study = _load(tmp_path / "a", momentary=rows)
    # calm 5 on 1..7 reversed is 1 + 7 - 5 = 3; mean(3, 3) = 3 (reverse scoring: common practice)
    assert study.momentary["low_mood"].iloc[0] == 3.0
    assert math.isnan(study.momentary["low_mood"].iloc[1])
    relaxed = BASE_TOML.replace('higher_is = "worse"', 'higher_is = "worse"\nmin_items = 1')
    root = make_project(tmp_path / "b", toml=relaxed, files={"data/momentary.csv": rows})
    assert load_study(root).momentary["low_mood"].iloc[1] == 6.0


def test_study_day_follows_day_start_across_clock_change(tmp_path: Path) -> None:
    """Check that answers before day_start count for the previous day, in local clock time."""
    rows = ("participant,timestamp,sad,calm\n"
            "p1,2024-03-30 23:30,3,5\n"       # Saturday evening, winter time
            "p1,2024-03-31 03:59,3,5\n"       # after the clock change, before 04:00
            "p1,2024-03-31 04:00,3,5\n"       # Sunday's first minute of the study day
            "p2,2024-03-31T03:30:00Z,2,6\n")  # 05:30 summer time in Amsterdam
    m = _load(tmp_path, momentary=rows).momentary
    days = [d.strftime("%Y-%m-%d") for d in m["study_day"]]
    assert days == ["2024-03-30", "2024-03-30", "2024-03-31", "2024-03-31"]
    assert m["local_time"].iloc[3].strftime("%H:%M %z") == "05:30 +0200"
    # 23:30 CET -> 22:30 UTC; 03:59 CEST -> 01:59 UTC (the zone rules: IANA tz database)
    assert [t.strftime("%H:%M") for t in m["time"].iloc[:2]] == ["22:30", "01:59"]


def test_compliance_from_unanswered_rows(tmp_path: Path) -> None:
    """Check compliance when the file lists unanswered prompts: answered / distinct prompts."""
    rows = ("participant,timestamp,scheduled,sad,calm\n"
            "p1,2024-03-04 09:05,2024-03-04 09:00,3,5\n"
            "p1,,2024-03-04 13:00,,\n"
            "p1,2024-03-04 17:10,2024-03-04 17:00,4,4\n"
            "p1,2024-03-05 11:30,2024-03-05 09:00,2,6\n"
            "p2,2024-03-04 10:00,2024-03-04 10:00,2,6\n")
    study = _load(tmp_path, momentary=rows)
    q = study.quality.set_index("participant")
    assert q.loc["p1", "answered"] == 3
    assert q.loc["p1", "scheduled"] == 4
    assert q.loc["p1", "compliance"] == pytest.approx(0.75)
    assert q.loc["p1", "late_answers"] == 1            # 150 minutes after the prompt
    assert q.loc["p1", "days_covered"] == 2
    # gaps 09:05 -> 17:10 -> next day 11:30: the longest is 18 h 20 min
    assert q.loc["p1", "longest_gap_hours"] == pytest.approx(18 + 20 / 60)
    assert q.loc["p1", "first_day"] == pd.Timestamp("2024-03-04")
    assert q.loc["p1", "last_day"] == pd.Timestamp("2024-03-05")
    assert len(study.momentary) == 4  # unanswered prompts are not answers
    assert len(study.set_aside) == 0  # nor are they set aside


def test_compliance_from_the_design(tmp_path: Path) -> None:
    """Check compliance from prompts_per_day x days in the span when no schedule is in the data."""
    rows = ("participant,timestamp,sad,calm\np1,2024-03-04 09:00,3,5\n"
            "p1,2024-03-06 09:00,3,5\np2,2024-03-04 10:00,2,6\n")
    toml = BASE_TOML.replace("[study]\n", "[study]\nprompts_per_day = 3\n")
    study = load_study(make_project(tmp_path / "b", toml=toml,
                                    files={"data/momentary.csv": rows}))
    q = study.quality.set_index("participant")
    assert q.loc["p1", "scheduled"] == 9.0  # 3 days (4th to 6th) x 3 prompts
    assert q.loc["p1", "compliance"] == pytest.approx(2 / 9)
    assert q.loc["p2", "scheduled"] == 3.0
    unknown = _load(tmp_path / "c", momentary=rows).quality
    assert unknown["compliance"].isna().all()


def test_withdrawn_rows_are_set_aside_in_every_file(tmp_path: Path) -> None:
    """Check that a withdrawn participant's rows leave every frame and are listed with why."""
    roster = ROSTER.replace("p2,en,yes", "p2,en,withdrawn")
    report = check_study(make_project(tmp_path / "study", files={
        "data/participants.csv": roster,
        "data/events.csv": "participant,timestamp,kind\np2,2024-03-04 12:00,loss\n",
        "data/questionnaires.csv": "participant,timestamp,questionnaire,score\n"
                                   "p2,2024-03-04 12:00,phq9,4\n"}))
    study = report.study
    assert study is not None
    assert "p2" not in set(study.momentary["participant"])
    assert study.events.empty and study.questionnaires.empty
    aside = study.set_aside
    assert list(aside["file"]) == ["data/events.csv", "data/momentary.csv",
                                   "data/questionnaires.csv"]
    assert set(aside["reason"]) == {"participant withdrew consent"}
    assert study.quality.set_index("participant").loc["p2", "rows_set_aside"] == 3
    assert [p.code for p in report.problems] == ["withdrawn"] * 3


def test_set_aside_mode_lists_every_bad_row(tmp_path: Path) -> None:
    """Check on_bad_rows = "set aside": the study loads and each bad row is listed."""
    bad = "".join(f"p1,2024-03-05 {h:02d}:00,9,4\n" for h in range(8, 20)) + \
        "".join(f"p1,2024-03-06 {h:02d}:00,9,4\n" for h in range(8, 20))
    rows = MOMENTARY + bad
    setting = '[data]\non_bad_rows = "set aside"\n'
    report = check_study(make_project(tmp_path / "a", extra_toml=setting,
                                      files={"data/momentary.csv": rows}))
    assert report.ok and report.study is not None
    aside = report.study.set_aside
    assert len(aside) == 24
    assert set(aside["column"]) == {"sad"}
    assert set(aside["reason"]) == {"value outside the item's scale"}
    assert report.study.quality.set_index("participant").loc["p1", "rows_set_aside"] == 24
    # 20 rows are listed one by one, the rest in one line
    assert len(report.problems) == 21
    assert report.problems[-1].message() == (
        "data/momentary.csv, column 'sad': 4 more rows with this problem: value outside the "
        "item's scale. Fix: the row is set aside and listed in the quality report")
    strict = check_study(make_project(tmp_path / "b", files={"data/momentary.csv": rows}))
    assert len(strict.errors) == 21 and strict.study is None


def test_strict_makes_warnings_fatal(tmp_path: Path) -> None:
    """Check that strict=True refuses a study with only warnings."""
    root = make_project(tmp_path / "study", files={"data/participants.csv": ROSTER + "p3,en,yes\n"})
    assert len(load_study(root).warnings) == 1
    with pytest.raises(DataError) as caught:
        load_study(root, strict=True)
    assert [p.code for p in caught.value.problems] == ["no-data"]
    assert not check_study(root, strict=True).ok and check_study(root).ok
    typo = make_project(tmp_path / "typo", extra_toml='[booklet]\nabuot = "x"\n')
    with pytest.raises(SettingsError):  # only a settings warning: a settings error in strict
        load_study(typo, strict=True)


def test_events_marked_upsetting_by_kind_and_intensity(tmp_path: Path) -> None:
    """Check that events.upsetting and events.min_intensity decide which events count."""
    events = ("participant,timestamp,kind,intensity\n"
              "p1,2024-03-04 10:00,argument,4\np1,2024-03-04 11:00,argument,1\n"
              "p1,2024-03-04 12:00,good news,5\np2,2024-03-04 12:00,loss,\n")
    study = _load(tmp_path / "a", '[events]\nupsetting = ["argument", "loss"]\n'
                  "min_intensity = 3\n", events=events)
    assert list(study.events["upsetting"]) == [True, False, False, False]
    everything = _load(tmp_path / "b", events=events)
    assert everything.events["upsetting"].all()
    assert everything.events["intensity"].isna().sum() == 1


def test_questionnaire_items_prorated(tmp_path: Path) -> None:
    """Check item sums, prorating (mean x k) within max_missing_items, and the score column."""
    toml = BASE_TOML + ('[questionnaires.gad3]\nrange = [0, 9]\nitems = ["g1", "g2", "g3"]\n'
                        "max_missing_items = 1\n")
    rows = ("participant,timestamp,questionnaire,score,g1,g2,g3\n"
            "p1,2024-03-04 12:00,gad3,,1,2,3\n"
            "p1,2024-03-05 12:00,gad3,,3,,2\n"
            "p1,2024-03-06 12:00,gad3,,3,,\n"
            "p2,2024-03-04 12:00,phq9,11,,,\n"
            "p2,2024-03-05 12:00,gad3,7,,,\n")
    report = check_study(make_project(tmp_path / "study", toml=toml,
                                      files={"data/questionnaires.csv": rows}))
    assert report.study is not None
    scores = report.study.questionnaires
    # (3 + 2) / 2 x 3 = 7.5: prorating by the mean of the answered items (common practice)
    assert list(scores["score"]) == [6.0, 7.5, 11.0, 7.0]
    assert list(scores["questionnaire"]) == ["gad3", "gad3", "phq9", "gad3"]
    (short,) = report.problems
    assert short.message() == (
        "data/questionnaires.csv, row 4: 2 of the 3 items of 'gad3' are empty; the row is "
        "set aside; expected at most 1 empty. Fix: fill in the items, or raise "
        "max_missing_items under [questionnaires.gad3]")
    assert list(report.study.set_aside["row"]) == [4]


def test_row_time_zones_formats_and_answered_column(tmp_path: Path) -> None:
    """Check a per-row zone column, a custom time format and a separate answered column."""
    rows = ("participant,timestamp,answered,device_zone,sad,calm\n"
            "p1,04/03/2024 09:00,04/03/2024 09:30,EET,3,5\n"
            "p1,04/03/2024 13:00,,Europe/London,4,4\n"
            "p2,04/03/2024 10:00,04/03/2024 10:01,+03,2,6\n")
    extra = ('[data]\ntimestamp_format = "%d/%m/%Y %H:%M"\n'
             '[data.columns]\ntimezone = "device_zone"\n')
    m = _load(tmp_path, extra, momentary=rows).momentary
    utc = [t.strftime("%d %H:%M") for t in m["time"]]
    # EET = UTC+2, London in March = UTC+0, +03 = UTC+3
    assert utc == ["04 07:30", "04 13:00", "04 07:01"]
    assert [t.strftime("%H:%M") for t in m["scheduled"]] == ["07:00", "13:00", "07:00"]


def test_custom_missing_values(tmp_path: Path) -> None:
    """Check that texts listed in missing_values count as no answer, not as bad numbers."""
    rows = "participant,timestamp,sad,calm\np1,2024-03-04 09:00,-99,5\np2,2024-03-04 10:00,2,6\n"
    m = _load(tmp_path, '[data]\nmissing_values = ["-99", ""]\n', momentary=rows).momentary
    assert m["sad"].isna().sum() == 1


def test_inputs_are_only_read(tmp_path: Path) -> None:
    """Check that read-only input files load and are left byte for byte as they were."""
    root = make_project(tmp_path / "study")
    files = sorted((root / "data").iterdir())
    before = [hashlib.sha256(f.read_bytes()).hexdigest() for f in files]
    for f in files:
        f.chmod(stat.S_IRUSR)
    try:
        study = load_study(root)
    finally:
        for f in files:
            f.chmod(stat.S_IRUSR | stat.S_IWUSR)
    assert [hashlib.sha256(f.read_bytes()).hexdigest() for f in files] == before
    assert sorted(study.input_files) == sorted([root.resolve() / "study.toml",
                                                *(f.resolve() for f in files)])


def test_quality_table_lists_participants(tmp_path: Path) -> None:
    """Check the terminal table: one line per participant with compliance and set-aside rows."""
    study = _load(tmp_path)
    console = Console(width=160, record=True)
    console.print(quality_table(study))
    text = console.export_text()
    assert "Data quality: Tiny study" in text
    assert "2 participants, 3 answered prompts, 0 rows set aside" in text
    assert text.count("p1") == 1 and text.count("p2") == 1


def test_every_problem_of_a_row_is_reported_and_counted_once(tmp_path: Path) -> None:
    """Check that a row with a bad rating and a bad time gives two problems, one set-aside row."""
    rows = MOMENTARY + "p1,yesterday,9,often\n"
    setting = '[data]\non_bad_rows = "set aside"\n'
    report = check_study(make_project(tmp_path / "study", extra_toml=setting,
                                      files={"data/momentary.csv": rows}))
    assert sorted(p.code for p in report.problems) == ["bad-time", "not-a-number",
                                                       "value-out-of-scale"]
    assert {p.row for p in report.problems} == {5}
    study = report.study
    assert study is not None and len(study.set_aside) == 3
    assert study.quality.set_index("participant").loc["p1", "rows_set_aside"] == 1


def test_optional_files_absent_give_typed_empty_frames(tmp_path: Path) -> None:
    """Check that without events or questionnaires files the frames are empty but typed."""
    study = _load(tmp_path)
    assert study.events.empty and study.questionnaires.empty
    assert str(study.events["time"].dtype) == "datetime64[ns, UTC]"
    assert str(study.questionnaires["local_time"].dtype) == "datetime64[ns, Europe/Amsterdam]"
    assert study.events["upsetting"].dtype == bool


def test_long_layout_repeats_and_unknown_items(tmp_path: Path) -> None:
    """Check long rows: a repeated value is kept once, clashing values fail, unknown items warn."""
    rows = ("participant,timestamp,item,value\n"
            "p1,2024-03-04 09:00,sad,3\np1,2024-03-04 09:00,calm,5\np1,2024-03-04 09:00,sad,3\n"
            "p1,2024-03-04 13:00,sad,4\np1,2024-03-04 13:00,sad,5\np1,2024-03-04 13:00,calm,2\n"
            "p1,2024-03-04 13:00,hunger,2\np2,2024-03-04 10:00,sad,2\np2,2024-03-04 10:00,calm,6\n")
    toml = BASE_TOML + '[data]\nlayout = "long"\n'
    report = check_study(make_project(tmp_path / "a", toml=toml,
                                      files={"data/momentary.csv": rows}))
    assert [p.message() for p in report.problems] == [
        "data/momentary.csv, column 'item': item 'hunger' is not defined in study.toml; its 1 "
        "row is not used. Fix: add it under [items] if it should be used",
        "data/momentary.csv, row 2, column 'value': rows 2 and 4 repeat the same value for the "
        "same item and prompt; row 2 is kept. Fix: remove the extra rows to silence this",
        "data/momentary.csv, row 5, column 'value': rows 5 and 6 give different values for the "
        "same item and prompt; expected one value per participant, time and item, found '4', "
        "'5'. Fix: correct the value, or set on_bad_rows = \"set aside\" under [data]"]
    toml += 'on_bad_rows = "set aside"\n'
    study = load_study(make_project(tmp_path / "b", toml=toml,
                                    files={"data/momentary.csv": rows}))
    # the clashing item is unusable; the prompt's other item is kept
    assert study.momentary["sad"].iloc[0] == 3.0 and math.isnan(study.momentary["sad"].iloc[1])
    assert study.momentary["calm"].tolist() == [5.0, 2.0, 6.0]
    assert list(study.set_aside["row"]) == [4, 5, 6]


def test_unopenable_file_is_reported(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Check that a file the system refuses to open gives a problem, not a traceback."""
    root = make_project(tmp_path / "study")
    real = Path.open

    def refuse(self: Path, *args: Any, **kwargs: Any) -> Any:
        if self.name == "momentary.csv":
            raise PermissionError(13, "Permission denied")
        return real(self, *args, **kwargs)

    monkeypatch.setattr(Path, "open", refuse)
    assert [p.message() for p in check_study(root).problems] == [
        "data/momentary.csv: the file cannot be opened: Permission denied. Fix: check that "
        "you may read it and that no other program locks it"]


def test_named_optional_file_missing_is_a_warning(tmp_path: Path) -> None:
    """Check that an events file named in study.toml but absent warns; at the default, silence."""
    named = make_project(tmp_path / "named", extra_toml='[data]\nevents = "data/evnts.csv"\n')
    assert [p.message() for p in check_study(named).problems] == [
        "data/evnts.csv: the events file is missing; the study goes on without events. "
        "Fix: correct events under [data], or remove the line"]
    assert check_study(make_project(tmp_path / "default")).problems == ()
