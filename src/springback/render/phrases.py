"""Numbers in the words people use: "about 1 in 5 prompts", "about half a day", "about 3 hours".

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
    """Say a share 0..1 of prompts in words: 'about 1 in 5 prompts'."""
    if not math.isfinite(share) or share < 0:
        raise ValueError(f"a share must be a number from 0 to 1, got {share}")
    if share >= 0.97:
        return tr.gettext("almost every prompt")
    if share < 0.07:
        return tr.gettext("fewer than 1 in 10 prompts")
    k, n = min(_FRACTIONS, key=lambda f: abs(f[0] / f[1] - share))
    if (k, n) == (1, 2):
        return tr.gettext("about half of the prompts")
    return tr.gettext("about %(k)d in %(n)d prompts") % {"k": k, "n": n}


def duration(hours: float, tr: Translator) -> str:
    """Say a duration in hours in words: 'about 3 hours', 'about half a day', 'about 2 days'."""
    if not math.isfinite(hours) or hours < 0:
        raise ValueError(f"a duration must be zero or more hours, got {hours}")
    if hours < 0.75:
        return tr.gettext("less than an hour")
    if hours < 1.5:
        return tr.gettext("about an hour")
    if hours < 9.5:
        n = round(hours)
        return tr.ngettext("about %(n)d hour", "about %(n)d hours", n) % {"n": n}
    if hours < 16:
        return tr.gettext("about half a day")
    if hours < 32:
        return tr.gettext("about a day")
    if hours < 42:
        return tr.gettext("about a day and a half")
    days = round(hours / 24)
    if days < 10:
        return tr.ngettext("about %(n)d day", "about %(n)d days", days) % {"n": days}
    weeks = round(hours / (24 * 7))
    return tr.ngettext("about %(n)d week", "about %(n)d weeks", weeks) % {"n": weeks}


def count(n: int, tr: Translator) -> str:
    """Say how many times something happened: 'once', 'twice', '5 times'."""
    if n == 1:
        return tr.gettext("once")
    if n == 2:
        return tr.gettext("twice")
    return tr.ngettext("%(n)d time", "%(n)d times", n) % {"n": n}


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
