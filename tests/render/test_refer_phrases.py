"""The help banner's sentence follows the rule that fired (silence, score, rating, shift)."""

from __future__ import annotations

import datetime as dt
import gettext

import pytest

from springback.i18n.language import translations
from springback.render import phrases
from springback.safety.rules import Flag
from tests.support.tiny_projects import STUDY_TOML
from tests.support.tiny_projects import settings_of as _settings_of

EN = gettext.NullTranslations()
RULES = """
[[safety.rules]]
name = "stopped answering"
silence_days = 7
action = "refer"

[[safety.rules]]
name = "high score"
questionnaire = "mood_q"
at_least = 10
action = "refer"

[[safety.rules]]
name = "abrupt worsening"
shift = true
action = "refer"
"""


@pytest.fixture(scope="module")
def settings(tmp_path_factory: pytest.TempPathFactory) -> object:
    """The tiny study's settings with a silence, a questionnaire and a shift rule."""
    root = tmp_path_factory.mktemp("refer")
    (root / "study.toml").write_text(STUDY_TOML.replace("{keep}", "copy") + RULES,
                                     encoding="utf-8")
    return _settings_of(root)


def day(d: dt.date) -> str:
    """A date as the English booklets write it (for the test)."""
    return f"{d.day} {d:%B}"


def flag(rule: str, when: str = "2026-05-14") -> Flag:
    """A refer flag of this rule."""
    return Flag("P01", rule, "refer", 10.0, when, "detail in English")


def test_silence_says_since_when(settings: object) -> None:
    """Check the silence wording of the issue, not 'your answers suggest'."""
    text = phrases.refer_sentence(flag("stopped answering"), settings, "en", EN, day)
    assert text == "You have not answered since 14 May; we would like to hear how you are."
    never = phrases.refer_sentence(flag("stopped answering", ""), settings, "en", EN, day)
    assert "not had any answers" in never


def test_each_rule_has_its_own_sentence(settings: object) -> None:
    """Check score, rating, shift and an unknown rule each get their own words."""
    score = phrases.refer_sentence(flag("high score"), settings, "en", EN, day)
    assert score.startswith("Your answers on the mood_q of 14 May")
    rating = phrases.refer_sentence(flag("hopeless"), settings, "en", EN, day)
    assert rating.startswith("Your ratings of 'hopeless', most recently on 14 May")
    shift = phrases.refer_sentence(flag("abrupt worsening"), settings, "en", EN, day)
    assert "worse from 14 May on" in shift
    other = phrases.refer_sentence(flag("gone from settings"), settings, "en", EN, day)
    assert other == "Some of your answers suggest that it may help to talk with someone soon."


def test_sentences_of_refer_flags_only_once_each(settings: object) -> None:
    """Check holds are left out and a repeated sentence is said once; records work too."""
    hold = Flag("P01", "hopeless", "hold", 7.0, "2026-05-01", "")
    record = flag("stopped answering").to_row()
    out = phrases.refer_sentences([hold, flag("stopped answering"), record], settings, "en",
                                  EN, day)
    assert out == ["You have not answered since 14 May; we would like to hear how you are."]


@pytest.mark.parametrize(("language", "word"), [("nl", "sinds"), ("de", "seit")])
def test_translated(settings: object, language: str, word: str) -> None:
    """Check the Dutch and German catalogues hold the silence sentence."""
    text = phrases.refer_sentence(flag("stopped answering"), settings, language,
                                  translations(language), day)
    assert word in text and "14 May" in text


def test_the_help_finding_gives_the_same_sentence(settings: object) -> None:
    """Check the findings stage's help finding is phrased by the rule it names."""
    from springback.findings.topics import help_needed

    finding = help_needed("P01", [flag("stopped answering")])
    assert finding.reading == "refer"
    assert phrases.refer_sentence(finding, settings, "en", EN, day) == (
        "You have not answered since 14 May; we would like to hear how you are.")
    assert phrases.refer_sentences([finding], settings, "en", EN, day) == [
        "You have not answered since 14 May; we would like to hear how you are."]
