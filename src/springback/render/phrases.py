"""Numbers in the words people use: "about one in five prompts", "about half a day", "about three
hours"; the words of safety flags in the booklet's language.

Pure functions; every phrase goes through the catalogue passed in (`gettext.NullTranslations`
or a language's catalogue), so translators see whole phrases.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from collections.abc import Callable, Iterable, Mapping
from typing import Any, Protocol


class Translator(Protocol):
    """What a gettext catalogue offers."""

    def gettext(self, message: str) -> str: ...
    def ngettext(self, singular: str, plural: str, n: int) -> str: ...


# Fractions a reader knows by heart; a share is described by the nearest one.
_FRACTIONS = ((1, 10), (1, 5), (1, 4), (1, 3), (1, 2), (2, 3), (3, 4), (4, 5), (9, 10))


def share_of_prompts(share: float, tr: Translator) -> str:
    """Say a share 0..1 of prompts in words: 'about one in five prompts'."""
    if not math.isfinite(share) or share < 0:
        raise ValueError(f"a share must be a number from 0 to 1, got {share}")
    if share >= 0.97:
        return tr.gettext("almost every prompt")
    if share < 0.07:
        return tr.gettext("fewer than one in ten prompts")
    k, n = min(_FRACTIONS, key=lambda f: abs(f[0] / f[1] - share))
    if (k, n) == (1, 2):
        return tr.gettext("about half of the prompts")
    if k == 1:
        return tr.gettext("about one in %(n)s prompts") % {"n": number_word(n, tr)}
    return tr.gettext("about %(k)s in %(n)s prompts") % {"k": number_word(k, tr),
                                                        "n": number_word(n, tr)}


def duration(hours: float, tr: Translator) -> str:
    """Say a duration in hours in words: 'about three hours', 'about half a day', 'about two
    days'."""
    if not math.isfinite(hours) or hours < 0:
        raise ValueError(f"a duration must be zero or more hours, got {hours}")
    if hours < 0.75:
        return tr.gettext("less than an hour")
    if hours < 1.5:
        return tr.gettext("about an hour")
    if hours < 9.5:
        n = round(hours)
        return tr.ngettext("about %(n)s hour", "about %(n)s hours", n) % {
            "n": number_word(n, tr)}
    if hours < 16:
        return tr.gettext("about half a day")
    if hours < 32:
        return tr.gettext("about a day")
    if hours < 42:
        return tr.gettext("about a day and a half")
    days = round(hours / 24)
    if days == 7:
        return tr.gettext("about a week")
    if days < 10:
        return tr.ngettext("about %(n)s day", "about %(n)s days", days) % {
            "n": number_word(days, tr)}
    weeks = round(hours / (24 * 7))
    if weeks == 1:
        return tr.gettext("about a week")
    return tr.ngettext("about %(n)s week", "about %(n)s weeks", weeks) % {
        "n": number_word(weeks, tr)}


def count(n: int, tr: Translator) -> str:
    """Say how many times something happened: 'once', 'twice', 'five times', '14 times'."""
    if n == 1:
        return tr.gettext("once")
    if n == 2:
        return tr.gettext("twice")
    return tr.ngettext("%(n)s time", "%(n)s times", n) % {"n": number_word(n, tr)}


def number_word(n: int, tr: Translator) -> str:
    """A count from two to twelve in words ('three', 'drei', 'drie'); other counts in digits.

    Style guides spell out small counts in running text: the Duden for one to twelve, The
    Chicago Manual of Style (17th ed., 9.2) up to one hundred.
    One is left to the sentence ('once', 'about one in five', 'a week'), since its word
    changes with the noun in Dutch and German."""
    words = {2: tr.gettext("two"), 3: tr.gettext("three"), 4: tr.gettext("four"),
             5: tr.gettext("five"), 6: tr.gettext("six"), 7: tr.gettext("seven"),
             8: tr.gettext("eight"), 9: tr.gettext("nine"), 10: tr.gettext("ten"),
             11: tr.gettext("eleven"), 12: tr.gettext("twelve")}
    return words.get(n, str(n))


def general_refer(tr: Translator) -> str:
    """The help banner's sentence when no rule-specific one applies (its earlier wording)."""
    return tr.gettext("Some of your answers suggest that it may help to talk with someone soon.")


def _field(flag: Any, name: str) -> Any:
    """A flag's rule, action or date, from a Flag, its record, or the help finding
    (springback.findings: topic 'help', reading = the action, numbers hold rule and when)."""
    if isinstance(flag, dict):
        return flag.get(name)
    numbers = getattr(flag, "numbers", None)
    if getattr(flag, "topic", "") == "help" and isinstance(numbers, Mapping):
        return getattr(flag, "reading", None) if name == "action" else numbers.get(name)
    return getattr(flag, name, None)


def refer_sentence(flag: Any, settings: Any, language: str, tr: Translator,
                   say_date: Callable[[dt.date], str]) -> str:
    """The help banner's sentence for one refer flag, in the words of the rule that fired.

    `flag` is a safety Flag, its manifest record or the help finding; `settings` the study's
    settings, which say what the rule looks at; `say_date` writes a date in the booklet's
    language. A silence
    says since when nothing came ("You have not answered since 14 May 2026; we would like to
    hear how you are."), never that answers suggest anything.
    """
    rule = next((r for r in settings.safety.rules if r.name == _field(flag, "rule")), None)
    when = str(_field(flag, "when") or "")
    try:
        day = say_date(dt.date.fromisoformat(when)) if when else ""
    except ValueError:
        day = ""
    if rule is None:
        return general_refer(tr)
    if rule.silence_days is not None:
        if not day:
            return tr.gettext("We have not had any answers from you yet; we would like to "
                              "hear how you are.")
        return tr.gettext("You have not answered since %(day)s; we would like to hear how "
                          "you are.") % {"day": day}
    if not day:
        return general_refer(tr)
    if rule.questionnaire is not None:
        spec = settings.questionnaires.get(rule.questionnaire)
        labels = spec.label if spec is not None else {}
        name = labels.get(language) or labels.get("en") or rule.questionnaire
        return tr.gettext("Your answers on the %(questionnaire)s of %(day)s suggest that it may "
                          "help to talk with someone soon.") % {"questionnaire": name,
                                                                "day": day}
    if rule.item is not None:
        return tr.gettext("Your ratings of '%(item)s', most recently on %(day)s, suggest that "
                          "it may help to talk with someone soon.") % {
            "item": settings.label_of(rule.item, language), "day": day}
    if rule.shift:
        return tr.gettext("Your mood seems to have become clearly worse from %(day)s on; it "
                          "may help to talk with someone soon.") % {"day": day}
    return general_refer(tr)


def refer_sentences(flags: Iterable[Any], settings: Any, language: str, tr: Translator,
                    say_date: Callable[[dt.date], str]) -> list[str]:
    """One sentence per refer flag (the same sentence once), in the flags' order."""
    out: list[str] = []
    for flag in flags:
        if _field(flag, "action") != "refer":
            continue
        text = refer_sentence(flag, settings, language, tr, say_date)
        if text not in out:
            out.append(text)
    return out


_DIGIT_GAP = re.compile(r"(?<=[\d+]) (?=[\d(])")


def keep_together(text: str) -> str:
    """Join the digit groups of phone numbers with no-break spaces, so that '+99 800 0000'
    or '+99 20 555 0100 (fictional)' never breaks across lines (U+00A0, Unicode UAX #14)."""
    return _DIGIT_GAP.sub("\u00a0", str(text))


# -- Safety flags in the booklet's language ----------------------------------------------
# The safety stage keeps each flag's rule, value and date; the words are made here, through
# the language's catalogue, from the rule the settings describe.


def _rule_of(flag: Any, settings: Any) -> Any:
    """The settings' safety rule a flag came from (None when the rule is gone)."""
    return next((r for r in settings.safety.rules if r.name == _field(flag, "rule")), None)


def _bound(rule: Any, tr: Translator, number: Callable[[float], str]) -> str:
    """A threshold rule's bound in words: '20 or more', '2 or less'."""
    if rule.at_least is not None and rule.at_most is not None:
        return tr.gettext("%(high)s or more, or %(low)s or less") % {
            "high": number(rule.at_least), "low": number(rule.at_most)}
    if rule.at_least is not None:
        return tr.gettext("%(value)s or more") % {"value": number(rule.at_least)}
    return tr.gettext("%(value)s or less") % {"value": number(rule.at_most)}


def _source(rule: Any, settings: Any, language: str) -> tuple[str, str]:
    """('questionnaire' or 'item', its name in the booklet's language) of a threshold rule."""
    if rule.questionnaire is not None:
        spec = settings.questionnaires.get(rule.questionnaire)
        labels = spec.label if spec is not None else {}
        return "questionnaire", labels.get(language) or labels.get("en") or rule.questionnaire
    return "item", settings.label_of(rule.item, language)


def rule_words(flag: Any, settings: Any, language: str, tr: Translator,
               number: Callable[[float], str]) -> str:
    """What a flag's rule looks at, in the booklet's language ('PHQ-9 score of 20 or more').

    An English booklet shows the rule's own name from the settings, as the overview does."""
    rule = _rule_of(flag, settings)
    if rule is None or language == "en":
        return str(_field(flag, "rule") or "")
    if rule.silence_days is not None:
        return tr.ngettext("no answers for %(n)d day", "no answers for %(n)d days",
                           rule.silence_days) % {"n": rule.silence_days}
    if rule.shift:
        return tr.gettext("a step towards worse mood")
    kind, name = _source(rule, settings, language)
    if kind == "questionnaire":
        return tr.gettext("%(questionnaire)s score of %(bound)s") % {
            "questionnaire": name, "bound": _bound(rule, tr, number)}
    return tr.gettext("rating of '%(item)s' of %(bound)s") % {
        "item": name, "bound": _bound(rule, tr, number)}


def flag_detail(flag: Any, settings: Any, language: str, tr: Translator,
                say_date: Callable[[dt.date], str], number: Callable[[float], str]) -> str:
    """What triggered a flag, in the booklet's language, from its rule, value and date.

    'The latest PHQ-9 score of 20 or more in the last 28 days was 22, on 20 April 2026.'
    'A step towards worse in the daily average low mood of 2.7 scale points from 20 April
    2026, larger than the usual day-to-day swing.'
    """
    rule = _rule_of(flag, settings)
    value = _field(flag, "value")
    when = str(_field(flag, "when") or "")
    try:
        day = say_date(dt.date.fromisoformat(when)) if when else ""
    except ValueError:
        day = when
    if rule is None:
        return str(_field(flag, "detail") or "")
    window = rule.within_days
    if rule.silence_days is not None:
        if value is None or not day:
            return tr.gettext("No answered prompts at all in the data period.")
        return tr.ngettext(
            "No answers for %(days)s days before the end of the data period (the rule: "
            "%(n)d day); the last answer was on %(day)s.",
            "No answers for %(days)s days before the end of the data period (the rule: "
            "%(n)d days); the last answer was on %(day)s.", rule.silence_days) % {
            "days": number(float(value)), "n": rule.silence_days, "day": day}
    if rule.shift:
        size = {"variable": settings.label_of(settings.about, language),
                "size": number(abs(float(value or 0.0))), "day": day}
        if window:
            return tr.gettext(
                "A step towards worse in the daily average %(variable)s of %(size)s scale "
                "points from %(day)s, larger than the usual day-to-day swing (only steps of "
                "the last %(n)s days count).") % {**size, "n": number(window)}
        return tr.gettext(
            "A step towards worse in the daily average %(variable)s of %(size)s scale points "
            "from %(day)s, larger than the usual day-to-day swing.") % size
    kind, name = _source(rule, settings, language)
    words = {"name": name, "bound": _bound(rule, tr, number),
             "value": number(float(value or 0.0)), "day": day}
    if kind == "questionnaire":
        if window:
            return tr.gettext(
                "The latest %(name)s score of %(bound)s in the last %(n)s days was %(value)s, "
                "on %(day)s.") % {**words, "n": number(window)}
        return tr.gettext("The latest %(name)s score of %(bound)s was %(value)s, on "
                          "%(day)s.") % words
    if window:
        return tr.gettext(
            "The latest rating of '%(name)s' of %(bound)s in the last %(n)s days was "
            "%(value)s, on %(day)s.") % {**words, "n": number(window)}
    return tr.gettext("The latest rating of '%(name)s' of %(bound)s was %(value)s, on "
                      "%(day)s.") % words
