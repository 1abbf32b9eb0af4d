"""Check that every user mistake in the intake gives its exact message (tiny real files)."""

from __future__ import annotations

from pathlib import Path

import pytest

from springback.errors import DataError, SettingsError
from springback.intake import check_study, load_study
from tests.support.intake_project import BASE_TOML, MOMENTARY, ROSTER, make_project

CASES = [
    pytest.param(
        dict(files={"data/momentary.csv": None}),
        "error", "missing-file",
        'data/momentary.csv: the file is missing. Fix: check the file name, or the path '
        'under [data] in study.toml',
        id="missing-file"),
    pytest.param(
        dict(files={
            "data/momentary.csv": (
                'participant,timestamp,sad,clam\n'
                'p1,2024-03-04 09:00,3,5\n'
            )}),
        "error", "missing-column",
        "data/momentary.csv, column 'calm': column 'calm' is missing; expected a column "
        "named 'calm' (ratings of item 'calm'), found columns 'participant', 'timestamp', "
        "'sad', 'clam'. Fix: did you mean 'clam'? Rename the column, or set column = "
        '"..." under [items.calm] in study.toml',
        id="missing-column"),
    pytest.param(
        dict(files={"data/momentary.csv": ""}),
        "error", "empty-file",
        'data/momentary.csv: the file is empty. Fix: export the data again',
        id="empty"),
    pytest.param(
        dict(files={"data/momentary.csv": "participant,timestamp,sad,calm\n"}),
        "error", "no-rows",
        'data/momentary.csv: the file has a header but no rows. Fix: export the data again',
        id="header-only"),
    pytest.param(
        dict(files={
            "data/momentary.csv": (
                'participant,timestamp,sad,calm\n'
                'p1,2024-03-04 09:00,3,5,9\n'
            )}),
        "error", "unreadable",
        'data/momentary.csv: the file cannot be read as CSV: line 2 has 5 fields but the '
        "header has 4; expected the same number of ','-separated fields on every line. "
        'Fix: look at the line named (an unclosed quote or an extra separator is usual)',
        id="unreadable"),
    pytest.param(
        dict(files={
            "data/momentary.csv": 'participant,timestamp,sad,calm\np1,"2024-03-04 09:00,3,5\n'}),
        "error", "unreadable",
        'data/momentary.csv: the file cannot be read as CSV: a quoted field starting on '
        "line 2 is never closed; expected the same number of ','-separated fields on every "
        'line. Fix: look at the line named (an unclosed quote or an extra separator is '
        'usual)',
        id="unclosed-quote"),
    pytest.param(
        dict(toml='[study]\ntitle = "x\n'),
        "error", "invalid-toml",
        "study.toml: this is not valid TOML: Illegal character '\\n' (at line 2, column "
        '11). Fix: correct the line named (a missing quote or bracket is usual)',
        id="toml"),
    pytest.param(
        dict(toml=BASE_TOML.replace("Europe/Amsterdam", "Europe/Amsterdm")),
        "error", "invalid-setting",
        "study.toml: study.timezone: unknown time zone 'Europe/Amsterdm' (did you mean "
        "'Europe/Amsterdam'?), found 'Europe/Amsterdm'. Fix: correct this key in "
        'study.toml (see `springback init` for an example)',
        id="zone"),
    pytest.param(
        dict(files={
            "data/momentary.csv": MOMENTARY.replace("2024-03-04 13:00", "04/03/2024 13:00")}),
        "error", "bad-time",
        "data/momentary.csv, row 3, column 'timestamp': the time cannot be read; expected "
        'an ISO 8601 time such as 2024-03-04 09:15 or 2024-03-04T09:15:00+01:00, found '
        "'04/03/2024 13:00'. Fix: correct the value, or set timestamp_format under [data]",
        id="bad-time"),
    pytest.param(
        dict(files={
            "data/momentary.csv": MOMENTARY.replace("2024-03-04 13:00", "2024-03-31 02:30")}),
        "error", "nonexistent-time",
        "data/momentary.csv, row 3, column 'timestamp': this local time does not exist "
        '(the clocks were put forward); expected a local time that exists once, or a time '
        "with its UTC offset, found '2024-03-31 02:30' in Europe/Amsterdam. Fix: add the "
        'UTC offset to the time (e.g. +01:00); the tool does not guess',
        id="nonexistent"),
    pytest.param(
        dict(files={
            "data/momentary.csv": MOMENTARY.replace("2024-03-04 13:00", "2024-10-27 02:30")}),
        "error", "ambiguous-time",
        "data/momentary.csv, row 3, column 'timestamp': this local time happens twice (the "
        'clocks were put back); expected a local time that exists once, or a time with its '
        "UTC offset, found '2024-10-27 02:30' in Europe/Amsterdam. Fix: add the UTC offset "
        'to the time (e.g. +01:00); the tool does not guess',
        id="ambiguous"),
    pytest.param(
        dict(files={
            "data/momentary.csv": MOMENTARY.replace("2024-03-04 13:00", "2024-03-04 13:00 XST")}),
        "error", "unknown-zone",
        "data/momentary.csv, row 3, column 'timestamp': the time zone is unknown; expected "
        'an IANA zone such as Europe/Amsterdam, an offset such as +02:00, or a '
        "fixed-offset abbreviation such as CET, found '2024-03-04 13:00 XST'. Fix: write "
        'the zone as an IANA name or an offset such as +02:00',
        id="zone-row"),
    pytest.param(
        dict(files={"data/momentary.csv": MOMENTARY.replace("4,4", "9,4")}),
        "error", "value-out-of-scale",
        "data/momentary.csv, row 3, column 'sad': value outside the item's scale; expected "
        "a number from 1 to 7, found 9. Fix: correct the value, or the item's scale in "
        'study.toml',
        id="scale"),
    pytest.param(
        dict(files={"data/momentary.csv": MOMENTARY.replace("4,4", "often,4")}),
        "error", "not-a-number",
        "data/momentary.csv, row 3, column 'sad': not a number; expected a number from 1 "
        "to 7 or an empty cell, found 'often'. Fix: enter the rating as a number; texts "
        "that mean 'no answer' go in missing_values under [data]",
        id="nan"),
    pytest.param(
        dict(files={"data/momentary.csv": MOMENTARY + "p1,2024-03-04 13:00,5,4\n"}),
        "error", "conflicting-rows",
        "data/momentary.csv, row 3: one prompt has several rows with different answers; "
        "expected one row per participant and prompt, found rows 3 and 5 for participant "
        "'p1' at 2024-03-04 13:00, with different values in 'sad'. Fix: remove the wrong row, "
        'or set on_bad_rows = "set aside" under [data]',
        id="conflict"),
    pytest.param(
        dict(files={"data/momentary.csv": MOMENTARY + "p1,2024-03-04 13:00,4,4\n"}),
        "warning", "duplicate-row",
        "data/momentary.csv, row 3, column 'participant': participant 'p1' has 2 rows for "
        'the prompt at 2024-03-04 13:00 (rows 3 and 5) with the same answers; row 3 is '
        'kept. Fix: remove the extra rows to silence this',
        id="dup"),
    pytest.param(
        dict(files={"data/momentary.csv": MOMENTARY + "p9,2024-03-04 13:00,4,4\n"}),
        "error", "not-in-roster",
        "data/momentary.csv, row 5, column 'participant': participant 'p9' is not in the "
        "roster (no consent record), found 1 row. Fix: add 'p9' to data/participants.csv "
        'with their consent, or remove their rows',
        id="stranger"),
    pytest.param(
        dict(files={
            "data/events.csv": (
                'participant,timestamp,kind,intensity\n'
                'p9,2024-03-04 12:00,argument,3\n'
            )}),
        "error", "not-in-roster",
        "data/events.csv, row 2, column 'participant': participant 'p9' is not in the "
        "roster (no consent record), found 1 row. Fix: add 'p9' to data/participants.csv "
        'with their consent, or remove their rows',
        id="stranger-events"),
    pytest.param(
        dict(files={
            "data/questionnaires.csv": (
                'participant,timestamp,questionnaire,score\n'
                'p9,2024-03-04 12:00,phq9,3\n'
            )}),
        "error", "not-in-roster",
        "data/questionnaires.csv, row 2, column 'participant': participant 'p9' is not in "
        "the roster (no consent record), found 1 row. Fix: add 'p9' to "
        'data/participants.csv with their consent, or remove their rows',
        id="stranger-q"),
    pytest.param(
        dict(toml=BASE_TOML.replace('items = ["sad", "calm"]','items = ["sad", "clam"]')),
        "error", "unknown-item",
        "study.toml: composites.low_mood.items: composite 'low_mood' names unknown item "
        "'clam'; expected one of: sad, calm. Fix: did you mean 'calm'?",
        id="composite"),
    pytest.param(
        dict(extra_toml='[booklet]\nabout = "low_mod"\n'),
        "error", "unknown-about",
        "study.toml: booklet.about: 'low_mod' is neither a composite nor an item; expected "
        "one of: low_mood, sad, calm. Fix: did you mean 'low_mood'?",
        id="about"),
    pytest.param(
        dict(toml=BASE_TOML.replace('[5, "mild"], [10, "moderate"]',
                                    '[10, "mild"], [5, "moderate"]')),
        "error", "bands-not-increasing",
        'study.toml: questionnaires.phq9.bands: band lower bounds must increase, found 0, '
        '10, 5. Fix: list bands from the lowest score upwards, each [lower bound, label]',
        id="bands"),
    pytest.param(
        dict(files={"data/participants.csv": ROSTER + "p3,en,yes\n"}),
        "warning", "no-data",
        "data/participants.csv, row 4, column 'participant': participant 'p3' has no "
        'momentary answers. Fix: check that the id is written the same in both files; no '
        'booklet is made without data',
        id="nodata"),
    pytest.param(
        dict(files={
            "data/participants.csv": ROSTER.replace("p2,en,yes", "p2,en,withdrawn")}),
        "warning", "withdrawn",
        "data/momentary.csv, row 4, column 'participant': participant 'p2' withdrew "
        'consent; their 1 row is set aside. Fix: delete their rows from the file to '
        'silence this',
        id="withdrawn"),
    pytest.param(
        dict(files={
            "data/momentary.csv": (
                'participant,timestamp,scheduled,sad,calm\n'
                'p1,2024-03-04 11:30,2024-03-04 09:00,3,5\n'
                'p2,2024-03-04 10:00,2024-03-04 10:00,2,6\n'
            )}),
        "warning", "late-answers",
        "data/momentary.csv, row 2: 1 answer of participant 'p1' came more than 60 minutes "
        'after the prompt. Fix: check the device clocks; late answers are counted in the '
        'quality report (late_after_minutes under [data] sets the limit)',
        id="late"),
    pytest.param(
        dict(files={
            "data/momentary.csv": MOMENTARY.replace("p1", "pé").encode("latin-1"),
            "data/participants.csv": ROSTER.replace("p1", "pé")}),
        "warning", "latin-1",
        'data/momentary.csv: the file is not UTF-8; it was read as Latin-1. Fix: check '
        'that names with accents look right, or save the file as UTF-8',
        id="latin1"),
    pytest.param(
        dict(extra_toml='[data]\nmomentary = "data/momentary.json"\n', files={
            "data/momentary.json": "{}"}),
        "error", "unsupported-format",
        "data/momentary.json: files ending in '.json' cannot be read; expected a .csv, "
        '.tsv, .txt, .xlsx, .parquet or .sav file. Fix: export the data in one of these '
        'formats',
        id="format"),
    pytest.param(
        dict(files={
            "data/momentary.csv": (
                'participant,timestamp,sad,sad,calm\n'
                'p1,2024-03-04 09:00,3,3,5\n'
            )}),
        "error", "duplicate-column",
        "data/momentary.csv: column names appear more than once: 'sad'; expected each "
        'column name once. Fix: rename or remove the extra columns',
        id="dupcol"),
    pytest.param(
        dict(files={"data/momentary.csv": MOMENTARY + ",2024-03-04 13:00,4,4\n"}),
        "error", "missing-participant",
        "data/momentary.csv, row 5, column 'participant': the participant id is missing; "
        'expected an id from the roster. Fix: correct the value, or set on_bad_rows = "set '
        'aside" under [data]',
        id="noid"),
    pytest.param(
        dict(files={
            "data/questionnaires.csv": (
                'participant,timestamp,questionnaire,score\n'
                'p1,2024-03-04 12:00,phq9,30\n'
            )}),
        "error", "score-out-of-range",
        "data/questionnaires.csv, row 2, column 'score': score outside the range of "
        "'phq9'; expected a score from 0 to 27, found 30. Fix: correct the score, or the "
        'range under [questionnaires.phq9]',
        id="qrange"),
    pytest.param(
        dict(files={
            "data/questionnaires.csv": (
                'participant,timestamp,questionnaire,score\n'
                'p1,2024-03-04 12:00,gad7,3\n'
            )}),
        "error", "unknown-questionnaire",
        "data/questionnaires.csv, row 2, column 'questionnaire': the questionnaire is not "
        "defined in study.toml; expected one of: phq9, found 'gad7'. Fix: add it under "
        '[questionnaires.<name>], or correct the name',
        id="qunknown"),
    pytest.param(
        dict(files={"data/participants.csv": ROSTER.replace("p2,en,yes", "p2,en,maybe")}),
        "error", "bad-consent",
        "data/participants.csv, row 3, column 'consent': consent must be 'yes' or "
        "'withdrawn', found 'maybe'. Fix: write yes or withdrawn",
        id="consent"),
    pytest.param(
        dict(extra_toml='[booklet]\nabuot = "x"\n'),
        "warning", "unknown-key",
        "study.toml: booklet.abuot: unknown setting 'abuot' is ignored. Fix: did you mean "
        "'about'?",
        id="unknownkey"),
    pytest.param(
        dict(extra_toml='[data]\non_bad_rows = "set aside"\n', files={
            "data/momentary.csv": MOMENTARY.replace("4,4", "9,4")}),
        "warning", "value-out-of-scale",
        "data/momentary.csv, row 3, column 'sad': value outside the item's scale; expected "
        'a number from 1 to 7, found 9. Fix: the row is set aside and listed in the '
        'quality report',
        id="setaside"),
]


@pytest.mark.parametrize(("setup", "severity", "code", "message"), CASES)
def test_exact_message(tmp_path: Path, setup: dict, severity: str, code: str,
                       message: str) -> None:
    """Check that the mistake gives one problem with this exact text, from check and load."""
    project = make_project(tmp_path / "study", **setup)
    report = check_study(project)
    assert [(p.severity.value, p.code, p.message()) for p in report.problems] == [
        (severity, code, message)]
    assert report.ok is (severity == "warning")
    assert (report.study is None) is (severity == "error")
    # load_study raises with the same problem (warnings too, in strict mode)
    with pytest.raises((DataError, SettingsError)) as caught:
        load_study(project, strict=True)
    assert [p.message() for p in caught.value.problems] == [message]
