"""The therapist flag table's words: each rule and what triggered it, in the booklet's language.

phrases.rule_words says what a rule looks at and phrases.flag_detail what made it fire, from
the rule the settings describe and the flag's value and date. One rule of each kind
(questionnaire bound, item bound at least and at most, silence, shift), with and without a
`within_days` window, in English, Dutch and German; the texts are pinned whole.
"""

from __future__ import annotations

import gettext
import tomllib

import pytest

from springback.i18n.language import LocaleFormat, translations
from springback.model import Flag
from springback.render import phrases
from springback.settings import from_mapping

STUDY = """
[study]
title = "Flag words"
timezone = "Europe/Amsterdam"

[items.sad]
scale = [1, 7]
label = { en = "sad", nl = "verdrietig", de = "traurig" }

[items.hopeless]
scale = [1, 7]
label = { en = "hopeless", nl = "hopeloos", de = "hoffnungslos" }

[composites.low_mood]
items = ["sad", "hopeless"]
higher_is = "worse"
label = { en = "low mood", nl = "sombere stemming", de = "gedrückte Stimmung" }

[questionnaires.phq9]
range = [0, 27]
bands = [[0, "minimal"], [10, "moderate"]]
label = { en = "PHQ-9", nl = "PHQ-9", de = "PHQ-9" }

[[safety.rules]]
name = "phq high"
questionnaire = "phq9"
at_least = 20
action = "refer"

[[safety.rules]]
name = "phq high recently"
questionnaire = "phq9"
at_least = 20
within_days = 28
action = "hold"

[[safety.rules]]
name = "hopeless"
item = "hopeless"
at_least = 6
action = "hold"

[[safety.rules]]
name = "hopeless recently"
item = "hopeless"
at_least = 6
within_days = 14
action = "refer"

[[safety.rules]]
name = "hardly sad"
item = "sad"
at_most = 2
action = "hold"

[[safety.rules]]
name = "stopped answering"
silence_days = 7
action = "refer"

[[safety.rules]]
name = "worse mood"
shift = true
action = "refer"

[[safety.rules]]
name = "worse mood recently"
shift = true
within_days = 21
action = "hold"
"""

VALUES = {"phq high": 22.0, "phq high recently": 21.0, "hopeless": 7.0,
          "hopeless recently": 6.0, "hardly sad": 1.5, "stopped answering": 9.0,
          "worse mood": 2.7, "worse mood recently": -2.74}
"""The flag's value per rule (a shift's size is said without its sign)."""

RULE_WORDS = {
    "nl": {"phq high": "score van 20 of meer op de PHQ-9",
           "phq high recently": "score van 20 of meer op de PHQ-9",
           "hopeless": "score van 6 of meer op ‘hopeloos’",
           "hopeless recently": "score van 6 of meer op ‘hopeloos’",
           "hardly sad": "score van 2 of minder op ‘verdrietig’",
           "stopped answering": "7 dagen geen antwoorden",
           "worse mood": "een stap naar slechtere stemming",
           "worse mood recently": "een stap naar slechtere stemming"},
    "de": {"phq high": "Wert von 20 oder mehr im PHQ-9",
           "phq high recently": "Wert von 20 oder mehr im PHQ-9",
           "hopeless": "Bewertung von „hoffnungslos“ mit 6 oder mehr",
           "hopeless recently": "Bewertung von „hoffnungslos“ mit 6 oder mehr",
           "hardly sad": "Bewertung von „traurig“ mit 2 oder weniger",
           "stopped answering": "7 Tage ohne Antwort",
           "worse mood": "ein Schritt zu schlechterer Stimmung",
           "worse mood recently": "ein Schritt zu schlechterer Stimmung"},
}
"""What each rule looks at; an English booklet shows the rule's own name from the settings."""

DETAILS = {
    "en": {
        "phq high": "The latest PHQ-9 score of 20 or more was 22, on 20 April 2026.",
        "phq high recently": "The latest PHQ-9 score of 20 or more in the last 28 days was 21, "
                             "on 20 April 2026.",
        "hopeless": "The latest rating of 'hopeless' of 6 or more was 7, on 20 April 2026.",
        "hopeless recently": "The latest rating of 'hopeless' of 6 or more in the last 14 days "
                             "was 6, on 20 April 2026.",
        "hardly sad": "The latest rating of 'sad' of 2 or less was 1.5, on 20 April 2026.",
        "stopped answering": "No answers for 9 days before the end of the data period (the "
                             "rule: 7 days); the last answer was on 20 April 2026.",
        "worse mood": "A step towards worse in the daily average low mood of 2.7 scale points "
                      "from 20 April 2026, larger than the usual day-to-day swing.",
        "worse mood recently": "A step towards worse in the daily average low mood of 2.7 "
                               "scale points from 20 April 2026, larger than the usual "
                               "day-to-day swing (only steps of the last 21 days count).",
    },
    "nl": {
        "phq high": "De laatste score van 20 of meer op de PHQ-9 was 22, op 20 april 2026.",
        "phq high recently": "De laatste score van 20 of meer op de PHQ-9 in de laatste 28 "
                             "dagen was 21, op 20 april 2026.",
        "hopeless": "De laatste score van 6 of meer op ‘hopeloos’ was 7, op 20 april 2026.",
        "hopeless recently": "De laatste score van 6 of meer op ‘hopeloos’ in de laatste 14 "
                             "dagen was 6, op 20 april 2026.",
        "hardly sad": "De laatste score van 2 of minder op ‘verdrietig’ was 1,5, op 20 april "
                      "2026.",
        "stopped answering": "9 dagen geen antwoorden vóór het einde van de gegevensperiode (de "
                             "regel: 7 dagen); het laatste antwoord kwam op 20 april 2026.",
        "worse mood": "Een stap naar slechter in het daggemiddelde van ‘sombere stemming’ "
                      "van 2,7 schaalpunten vanaf 20 april 2026, groter dan de gebruikelijke "
                      "schommeling van dag tot dag.",
        "worse mood recently": "Een stap naar slechter in het daggemiddelde van ‘sombere "
                               "stemming’ van 2,7 schaalpunten vanaf 20 april 2026, groter dan "
                               "de gebruikelijke schommeling van dag tot dag (alleen stappen in "
                               "de laatste 21 dagen tellen).",
    },
    "de": {
        "phq high": "Der letzte Wert von 20 oder mehr im PHQ-9 war 22, am 20. April 2026.",
        "phq high recently": "Der letzte Wert von 20 oder mehr im PHQ-9 in den letzten 28 Tagen "
                             "war 21, am 20. April 2026.",
        "hopeless": "Die letzte Bewertung von „hoffnungslos“ mit 6 oder mehr war 7, am 20. "
                    "April 2026.",
        "hopeless recently": "Die letzte Bewertung von „hoffnungslos“ mit 6 oder mehr in den "
                             "letzten 14 Tagen war 6, am 20. April 2026.",
        "hardly sad": "Die letzte Bewertung von „traurig“ mit 2 oder weniger war 1,5, am 20. "
                      "April 2026.",
        "stopped answering": "Vor dem Ende des Datenzeitraums 9 Tage ohne Antwort (die Regel: "
                             "7 Tage); die letzte Antwort kam am 20. April 2026.",
        "worse mood": "Ein Schritt zum Schlechteren im Tagesmittel von „gedrückte Stimmung“ "
                      "um 2,7 Skalenpunkte ab dem 20. April 2026, größer als die übliche "
                      "Schwankung von Tag zu Tag.",
        "worse mood recently": "Ein Schritt zum Schlechteren im Tagesmittel von „gedrückte "
                               "Stimmung“ um 2,7 Skalenpunkte ab dem 20. April 2026, größer "
                               "als die übliche Schwankung von Tag zu Tag (es zählen nur "
                               "Schritte der letzten 21 Tage).",
    },
}


@pytest.fixture(scope="module")
def settings() -> object:
    """The settings with one safety rule of each kind."""
    parsed, _ = from_mapping(tomllib.loads(STUDY))
    return parsed


def _tools(language: str) -> tuple[object, LocaleFormat]:
    tr = gettext.NullTranslations() if language == "en" else translations(language)
    return tr, LocaleFormat(language, "Europe/Amsterdam")


def _number(fmt: LocaleFormat) -> object:
    """Whole numbers without decimals, others with one (as the booklet's flag table)."""
    return lambda x: fmt.number(x, 0 if float(x).is_integer() else 1)


def _flag(rule: str) -> Flag:
    return Flag("P01", rule, "refer", VALUES[rule], "2026-04-20", "detail in English")


@pytest.mark.parametrize("language", ["en", "nl", "de"])
@pytest.mark.parametrize("rule", list(VALUES))
def test_rule_words(settings: object, language: str, rule: str) -> None:
    """Check what each rule looks at, in each language (English: the rule's own name)."""
    tr, fmt = _tools(language)
    words = phrases.rule_words(_flag(rule), settings, language, tr, _number(fmt))
    assert words == (rule if language == "en" else RULE_WORDS[language][rule])


@pytest.mark.parametrize("language", ["en", "nl", "de"])
@pytest.mark.parametrize("rule", list(VALUES))
def test_flag_detail(settings: object, language: str, rule: str) -> None:
    """Check what triggered each rule, with its value and the date written out."""
    tr, fmt = _tools(language)
    detail = phrases.flag_detail(_flag(rule), settings, language, tr, fmt.date_long,
                                 _number(fmt))
    assert detail == DETAILS[language][rule]


@pytest.mark.parametrize("language", ["en", "nl", "de"])
def test_silence_without_any_answer(settings: object, language: str) -> None:
    """Check a silence flag with no last answer says there were no answers at all."""
    tr, fmt = _tools(language)
    never = Flag("P01", "stopped answering", "refer", None, "", "")
    assert phrases.flag_detail(never, settings, language, tr, fmt.date_long, _number(fmt)) == {
        "en": "No answered prompts at all in the data period.",
        "nl": "In de gegevensperiode is geen enkele melding beantwoord.",
        "de": "Im Datenzeitraum wurde keine einzige Abfrage beantwortet."}[language]


def test_a_rule_gone_from_the_settings_keeps_the_flag_words(settings: object) -> None:
    """Check a flag whose rule is no longer in the settings shows its stored name and detail."""
    tr, fmt = _tools("de")
    gone = Flag("P01", "old rule", "hold", 3.0, "2026-04-20", "3 ratings at 6 or more")
    assert phrases.rule_words(gone, settings, "de", tr, _number(fmt)) == "old rule"
    assert phrases.flag_detail(gone, settings, "de", tr, fmt.date_long,
                               _number(fmt)) == "3 ratings at 6 or more"
