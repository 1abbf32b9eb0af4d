"""The [data] keys for real exports: per-file id columns, times from numbers, refused values."""

from __future__ import annotations

from pathlib import Path

import pytest

from springback.errors import SettingsError
from springback.intake import check_study, load_study
from springback.settings import from_mapping
from springback.settings.scaffold import commented_settings
from springback.settings.sections import SETTINGS_FILE
from tests.support.intake_project import make_project

ITEMS = {"items": {"sad": {"scale": [1, 7]}}}


def _problems(raw: dict) -> list:
    try:
        return from_mapping(raw)[1]
    except SettingsError as exc:
        return list(exc.problems)


def test_infinite_scale_and_absurd_surrogates_are_refused_with_the_key() -> None:
    # Source of truth: the schema's documented limits (finite scale ends; 19..100,000 surrogates).
    inf = _problems({"items": {"sad": {"scale": [1, float("inf")]}}})
    assert [(p.where, p.what) for p in inf] == [
        (f"{SETTINGS_FILE}: items.sad.scale", "both ends must be finite numbers, found [1.0, inf]")]
    huge = _problems(ITEMS | {"metrics": {"surrogates": 1e13}})
    assert [p.where for p in huge] == [f"{SETTINGS_FILE}: metrics.surrogates"]
    assert "less than or equal to 100000" in huge[0].what


def test_day_without_prompt_or_times_is_refused() -> None:
    # Source of truth: the rule in data_files.data_checks (day and prompt come as a pair).
    problems = _problems(ITEMS | {"data": {"columns": {"day": "dayno"}}})
    whats = {p.where.split(": ")[1]: p.what for p in problems if p.is_error}
    assert whats == {
        "data.columns.day": "[data.columns] day needs prompt as well",
        "data.prompt_times": "times built from day and prompt numbers need the prompts' times",
    }
    bad_clock = _problems(ITEMS | {"data": {"prompt_times": ["25:00"]}})
    assert [p.what for p in bad_clock] == ["'25:00' is not a clock time like 09:30"]


def test_init_template_lists_every_data_key() -> None:
    # Source of truth: the schema itself (every key of [data] and [data.columns]).
    from springback.settings.data_files import Columns, DataFiles

    text = commented_settings()
    for model, table in ((DataFiles, "[data]"), (Columns, "[data.columns]")):
        part = text.split(table + "\n", 1)[1].split("\n[", 1)[0]
        for key in model.model_fields:
            if key == "columns":
                continue
            assert f"{key} =" in part, f"{table} {key} is missing from init's template"


def test_each_file_names_its_own_id_column(tmp_path: Path) -> None:
    # Source of truth: the files written here (roster ids under 'code', events under 'who').
    root = make_project(tmp_path / "p", extra_toml=(
        '\n[data.columns]\nroster_participant = "code"\nevents_participant = "who"\n'), files={
        "data/participants.csv": "code,language,consent\np1,en,yes\np2,en,yes\n",
        "data/events.csv": "who,timestamp,kind,intensity\np1,2024-03-04 11:00,conflict,3\n",
    })
    study = load_study(root)
    assert study.participants() == ["p1", "p2"]
    assert study.events["participant"].tolist() == ["p1"]


def test_a_roster_without_its_own_id_column_names_the_key(tmp_path: Path) -> None:
    # Source of truth: the roster written here has 'participant', not 'code'.
    root = make_project(tmp_path / "p",
                        extra_toml='\n[data.columns]\nroster_participant = "code"\n')
    report = check_study(root)
    [problem] = [p for p in report.errors]
    assert problem.what == "column 'code' is missing"
    assert problem.fix == ('rename the column, or set roster_participant = "..." '
                           "under [data.columns]")


@pytest.mark.parametrize("key", ["first_day", "period_starts"])
def test_dates_of_day_one_without_day_numbers_are_named_unused(key: str) -> None:
    # Source of truth: data_checks (these keys only apply with day and prompt columns).
    value = "2024-03-04" if key == "first_day" else ["2024-03-04"]
    extra = {"columns": {"period": "wave"}} if key == "period_starts" else {}
    problems = from_mapping(ITEMS | {"data": {key: value} | extra})[1]
    assert [(p.where, p.code) for p in problems] == [(f"{SETTINGS_FILE}: data.{key}",
                                                      "unused-setting")]


def test_a_deeply_nested_array_is_a_plain_error(tmp_path: Path) -> None:
    # Source of truth: Python's TOML reader recurses per nesting level (5,000 levels overflow).
    from springback.settings import load_settings

    (tmp_path / SETTINGS_FILE).write_text("x = " + "[" * 5000 + "]" * 5000 + "\n")
    with pytest.raises(SettingsError) as caught:
        load_settings(tmp_path)
    [problem] = caught.value.problems
    assert problem.message() == (
        "study.toml: this is not usable TOML: arrays or tables are nested too deeply. Fix: "
        "write the values without nesting lists inside lists")
