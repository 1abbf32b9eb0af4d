"""The study's own texts per language (labels, referrals, answer checks), checked at `check`."""

from __future__ import annotations

import configparser
from pathlib import Path
from typing import Any

import pandas as pd

from springback.i18n.check import (
    JINJA_OPTIONS,
    check_languages,
    settings_text_problems,
    template_problems,
)
from springback.settings import from_mapping


def _settings(**extra: Any):  # type: ignore[no-untyped-def]
    raw: dict[str, Any] = {
        "study": {"languages": ["en", "nl", "de"]},
        "items": {
            "sad": {"scale": [1, 7], "label": {"en": "sad", "nl": "verdrietig", "de": "traurig"}},
            "calm": {"scale": [1, 7], "label": {"en": "calm", "nl": "rustig"}},
            "tired": {"scale": [1, 7]},
        },
        "referral": [
            {"region": "default", "language": lang, "questions": "q", "feeling_worse": "w",
             "self_harm": "s", "emergency": "e"} for lang in ("en", "nl")
        ],
    }
    raw.update(extra)
    settings, _ = from_mapping(raw)
    return settings


def test_partial_label_is_an_error_naming_the_language() -> None:
    """Check that a label given in en/nl but not de is an error for German booklets only."""
    problems = settings_text_problems(_settings(), [("de", "north"), ("nl", "north")])
    labels = [p for p in problems if p.code == "label-missing"]
    assert [p.message() for p in labels] == [
        "study.toml: items.calm.label: the label of 'calm' has no text in German (de), so those "
        "booklets would mix languages; expected a text for each language participants read, "
        'found texts in en, nl. Fix: add de = "..."'
    ]
    assert all(p.is_error for p in labels)


def test_no_label_at_all_is_not_a_language_problem() -> None:
    """Check that an item without any label (its key is shown everywhere) is not reported."""
    problems = settings_text_problems(_settings(), [("de", "north")])
    assert not any("tired" in p.where for p in problems)


def test_answers_checked_and_band_labels() -> None:
    """Check the per-language 'who reads the answers' text and the band names."""
    settings = _settings(
        study={"languages": ["en", "nl"], "answers_checked": {"en": "A nurse reads them daily."}},
        questionnaires={"phq9": {"range": [0, 27], "bands": [[0, "minimal"], [5, "mild"]],
                                 "label": {"en": "PHQ-9", "nl": "PHQ-9"}}},
    )
    codes = {p.code: p.is_error for p in settings_text_problems(settings, [("nl", "x")])}
    assert codes["answers-checked-missing"] is True
    assert codes["band-labels-missing"] is True  # a Dutch booklet would show English bands
    english_only = settings_text_problems(settings, [("en", "north")])
    assert "band-labels-missing" not in {p.code for p in english_only}
    translated = _settings(
        study={"languages": ["en", "nl"]},
        questionnaires={"phq9": {"range": [0, 27], "bands": [[0, "minimal"], [5, "mild"]],
                                 "band_labels": {"nl": ["minimaal", "licht"]}}},
    )
    assert not settings_text_problems(translated, [("nl", "x")])


def test_unknown_languages_are_left_to_the_catalogue_check() -> None:
    """Check that an unknown language gives no label problems (catalogue_problems reports it)."""
    assert settings_text_problems(_settings(), [("fr", "north")]) == []


def test_study_template_text_without_translation(tmp_path: Path) -> None:
    """Check that an override's own wording is an error for Dutch booklets, with its line."""
    folder = tmp_path / "templates" / "sections"
    folder.mkdir(parents=True)
    (folder / "reflect.html").write_text(
        "<p>{% trans %}Your mood booklet{% endtrans %}</p>\n"
        "<p>{% trans %}Ask our nurse about this page.{% endtrans %}</p>\n",
        encoding="utf-8",
    )
    problems = template_problems(tmp_path / "templates", ["nl", "en"])
    assert [(p.where, p.row, p.code) for p in problems] == [
        ("templates/sections/reflect.html", 2, "template-untranslated")
    ]
    assert "no translation in Dutch (nl)" in problems[0].what
    assert "'Ask our nurse about this page.'" in problems[0].what
    assert template_problems(tmp_path / "templates", ["en"]) == []


def test_unreadable_study_template_is_reported(tmp_path: Path) -> None:
    """Check that a template syntax error is one problem with its line, not a traceback."""
    (tmp_path / "templates").mkdir()
    (tmp_path / "templates" / "base.html").write_text("<p>\n{% trans %}Hi{% endif %}\n",
                                                     encoding="utf-8")
    (problem,) = template_problems(tmp_path / "templates", ["de"])
    assert (problem.code, problem.row) == ("template-unreadable", 2)


def test_check_languages_counts_only_participants_who_get_a_booklet(tmp_path: Path) -> None:
    """Check that withdrawn and no-feedback participants' languages and regions are ignored."""
    roster = pd.DataFrame({
        "participant": ["A", "B", "C"], "language": ["en", "de", "de"],
        "consent": ["yes", "withdrawn", "yes"], "feedback": [True, True, False],
        "therapist": [False, False, False], "region": ["north", "south", "south"],
    })
    problems = check_languages(_settings(), roster, tmp_path)
    assert [p.code for p in problems] == []
    roster.loc[1, "consent"] = "yes"
    codes = sorted(p.code for p in check_languages(_settings(), roster, tmp_path))
    assert codes == ["label-missing"]  # referral texts: safety.referral_problems


def test_jinja_options_match_babel_cfg() -> None:
    """Check that the study-template check reads templates exactly as `babel.cfg` says."""
    cfg = configparser.ConfigParser()
    cfg.read(Path(__file__).resolve().parents[2] / "babel.cfg")
    assert dict(cfg["jinja2: src/springback/templates/**.html"]) == JINJA_OPTIONS
