"""Booklets in the participant's language: gettext catalogues and Babel (CLDR) formatting.

English is the source language: its text lives in the templates and the code, so its
catalogue is the empty `NullTranslations`. Dutch and German come from compiled catalogues in
`locale/<lang>/LC_MESSAGES/messages.mo`, which are committed next to their `.po` sources so an
installed package needs no compile step. Keeping the catalogues current is the job of
`springback.i18n.catalogues` (extraction, update, report).
"""

from __future__ import annotations

import datetime as dt
import gettext
import math
from dataclasses import dataclass
from decimal import ROUND_HALF_UP, Decimal
from functools import cache
from pathlib import Path
from typing import Any, Literal, cast
from zoneinfo import ZoneInfo

import jinja2
import pandas as pd
from babel import Locale
from babel import dates as babel_dates
from babel import numbers as babel_numbers
from babel import units as babel_units
from babel.messages.pofile import read_po

from springback.errors import Problem, SpringbackError, error

LANGUAGES = ("en", "nl", "de")
"""Languages a booklet can be made in; English is the source language."""

SOURCE_LANGUAGE = "en"
DOMAIN = "messages"
LOCALE_DIR = Path(__file__).resolve().parent / "locale"

# CLDR locale per language. British English gives the day-month-year order and the 24-hour
# clock the issue asks for in every language (US English would show "3:05 PM" and Sunday-first
# weeks); nl_NL and de_DE are the largest regions of each language.
LOCALES = {"en": "en_GB", "nl": "nl_NL", "de": "de_DE"}

_DayWidth = Literal["abbreviated", "narrow", "short", "wide"]
"""How Babel abbreviates the names of the days."""

MISSING = "–"
"""What a number or date filter shows for a missing value (templates say why in words)."""


def _check_language(language: str) -> str:
    if language not in LANGUAGES:
        raise SpringbackError(
            f"springback has no booklet text in language '{language}'; "
            f"it can make booklets in {', '.join(LANGUAGES)}. Fix the participant's language "
            "in the roster or in study.toml (study.languages)."
        )
    return language


def catalogue_path(language: str, suffix: str = ".po") -> Path:
    """Path of a language's catalogue file (`.po` source or `.mo` compiled)."""
    return LOCALE_DIR / language / "LC_MESSAGES" / f"{DOMAIN}{suffix}"


def template_path() -> Path:
    """Path of the message template (`messages.pot`) extracted from the sources."""
    return LOCALE_DIR / f"{DOMAIN}.pot"


@cache
def translations(language: str) -> gettext.NullTranslations:
    """Return the language's message catalogue (cached); English returns the source text."""
    _check_language(language)
    if language == SOURCE_LANGUAGE:
        return gettext.NullTranslations()
    path = catalogue_path(language, ".mo")
    try:
        with path.open("rb") as fh:
            return gettext.GNUTranslations(fh)
    except OSError:
        raise SpringbackError(
            f"the compiled catalogue for language '{language}' is missing ({path}); "
            "reinstall springback, or run `springback translations --update` in a source checkout"
        ) from None


def install(env: jinja2.Environment, language: str) -> None:
    """Install the language's catalogue into a Jinja environment (newstyle gettext)."""
    env.add_extension("jinja2.ext.i18n")
    # Newstyle gettext formats with %(name)s inside the call, and with autoescape on the
    # translation is Markup, so the variables are escaped while the catalogue's text is not.
    env.install_gettext_translations(translations(language), newstyle=True)  # type: ignore[attr-defined]


# -- Formatting -----------------------------------------------------------------------------


def _is_missing(x: Any) -> bool:
    if x is None or x is pd.NaT:
        return True
    try:
        return bool(pd.isna(x))
    except (TypeError, ValueError):
        return False


@dataclass(frozen=True)
class LocaleFormat:
    """Locale-aware formatting for one language and study time zone (CLDR data via Babel).

    Every method returns the text a reader sees; missing values (None, NaN, NaT) become
    `MISSING`. Times are shown in the study's time zone: aware values are converted to it, and
    naive values are taken as already local (the naive `study_day` dates of the data model).
    """

    language: str
    timezone: str = "UTC"

    def __post_init__(self) -> None:
        _check_language(self.language)
        ZoneInfo(self.timezone)

    @property
    def locale(self) -> Locale:
        return Locale.parse(LOCALES[self.language])

    @property
    def zone(self) -> ZoneInfo:
        return ZoneInfo(self.timezone)

    # numbers
    def number(self, x: Any, digits: int = 1, sign: bool = False) -> str:
        """Format a number with exactly `digits` decimals: 2.5 -> '2,5' in Dutch and German."""
        if _is_missing(x) or not math.isfinite(float(x)):
            return MISSING
        value, pattern = self._rounded(x, digits)
        if sign:
            pattern = f"+{pattern};-{pattern}"
        return babel_numbers.format_decimal(value, format=pattern, locale=self.locale)

    def percent(self, x: Any, digits: int = 0) -> str:
        """Format a share 0..1 as a percentage in the locale's style: '25%' or '25 %'."""
        if _is_missing(x) or not math.isfinite(float(x)):
            return MISSING
        pattern = self.locale.percent_formats[None].pattern
        if digits > 0:
            # The CLDR pattern has one integer digit '0' (e.g. "#,##0 %"); widen it.
            pattern = pattern.replace("0", "0." + "0" * digits, 1)
        step = Decimal(1).scaleb(-(digits + 2))
        value = Decimal(repr(float(x))).quantize(step, rounding=ROUND_HALF_UP)
        return babel_numbers.format_percent(value, format=pattern, locale=self.locale)

    def hours(self, x: Any, digits: int = 1) -> str:
        """Format a duration in hours with its unit: '2,5 uur', '2,5 Stunden', '1 hour'."""
        if _is_missing(x) or not math.isfinite(float(x)):
            return MISSING
        value, pattern = self._rounded(x, digits)
        # CLDR picks the plural from the shown digits: '1 hour' but '1.0 hours'.
        return babel_units.format_unit(
            value, "duration-hour", length="long", format=pattern, locale=self.locale
        )

    @staticmethod
    def _rounded(x: Any, digits: int) -> tuple[Decimal, str]:
        # Round half up, as readers learnt at school; Babel alone would round half to even.
        step = Decimal(1).scaleb(-digits)
        value = Decimal(repr(float(x))).quantize(step, rounding=ROUND_HALF_UP)
        return value, "#,##0" + ("." + "0" * digits if digits > 0 else "")

    # dates and times
    def local(self, value: Any) -> dt.datetime | None:
        """Return the instant as a datetime in the study time zone (None when missing)."""
        if _is_missing(value):
            return None
        ts = pd.Timestamp(value)
        if ts.tzinfo is None:
            return ts.to_pydatetime().replace(tzinfo=self.zone)
        return ts.tz_convert(self.zone).to_pydatetime()

    def _date(self, value: Any, fmt: str) -> str:
        local = self.local(value)
        if local is None:
            return MISSING
        return babel_dates.format_date(local.date(), fmt, locale=self.locale)

    def date_long(self, value: Any) -> str:
        """Format a date in words: '3 maart 2026', '3. März 2026', '3 March 2026'."""
        return self._date(value, "long")

    def date_short(self, value: Any) -> str:
        """Format a date in digits: '03-03-2026', '03.03.26', '03/03/2026'."""
        return self._date(value, "short")

    def day_month(self, value: Any) -> str:
        """Format day and month in words, without the year: '3 maart', '3. März'."""
        local = self.local(value)
        if local is None:
            return MISSING
        return babel_dates.format_skeleton("dMMMM", local, locale=self.locale)

    def weekday(self, value: Any, width: _DayWidth = "wide") -> str:
        """Name the day of the week of a date: 'dinsdag', 'Dienstag' ('abbreviated' for short)."""
        local = self.local(value)
        if local is None:
            return MISSING
        return self.weekday_names(width)[local.weekday()]

    def time_short(self, value: Any) -> str:
        """Format a clock time on the 24-hour clock in the study time zone: '15:05'."""
        local = self.local(value)
        if local is None:
            return MISSING
        return babel_dates.format_time(local, "HH:mm", locale=self.locale)

    def datetime_short(self, value: Any) -> str:
        """Format a date and 24-hour time in the study time zone: '3 mrt 2026, 15:05'."""
        local = self.local(value)
        if local is None:
            return MISSING
        day = babel_dates.format_date(local.date(), "medium", locale=self.locale)
        return f"{day}, {self.time_short(local)}"

    def weekday_names(self, width: _DayWidth = "wide") -> list[str]:
        """Names of the days of the week, Monday first (ISO 8601 weeks in every language)."""
        names = babel_dates.get_day_names(width, locale=self.locale)
        return [names[i] for i in range(7)]  # Babel numbers the days Monday = 0


def register_filters(env: jinja2.Environment, language: str, timezone: str) -> None:
    """Register the locale filters and globals that templates use."""
    fmt = LocaleFormat(language, timezone)
    env.filters.update(
        number=fmt.number,
        percent=fmt.percent,
        hours=fmt.hours,
        local=fmt.local,
        date_long=fmt.date_long,
        date_short=fmt.date_short,
        day_month=fmt.day_month,
        weekday=fmt.weekday,
        time_short=fmt.time_short,
        datetime_short=fmt.datetime_short,
    )
    env.globals.update(
        language=language,
        locale_code=LOCALES[language].replace("_", "-"),
        study_timezone=timezone,
        weekday_names=fmt.weekday_names(),
        weekday_abbr=fmt.weekday_names("abbreviated"),
    )


# -- Completeness, for `check` ----------------------------------------------------------------


def language_name(language: str) -> str:
    """The language's English name ('Dutch'), for messages to the research team."""
    try:
        return Locale.parse(language).get_display_name("en") or language
    except (ValueError, TypeError):
        return language


def missing_messages(language: str) -> list[str]:
    """Message ids of the template that the language's compiled catalogue does not translate."""
    _check_language(language)
    if language == SOURCE_LANGUAGE:
        return []
    with template_path().open("rb") as fh:
        template = read_po(fh)
    compiled = translations(language)._catalog  # type: ignore[attr-defined]
    missing: list[str] = []
    for message in template:
        if not message.id:
            continue
        key = message.id[0] if isinstance(message.id, tuple) else message.id
        if message.context:
            key = f"{message.context}\x04{key}"
        found = compiled.get((key, 0)) if isinstance(message.id, tuple) else compiled.get(key)
        if not found:
            missing.append(cast(str, key))
    return missing


def catalogue_problems(
    languages: Any, where: str = "study.toml: study.languages"
) -> list[Problem]:
    """Check that each language has a complete catalogue; one error per unusable language."""
    problems = []
    for language in sorted(set(languages)):
        if language not in LANGUAGES:
            problems.append(
                error(
                    where,
                    f"springback has no booklet text in language '{language}'",
                    expected=f"one of {', '.join(LANGUAGES)}",
                    found=repr(language),
                    fix="use one of the listed language codes, or add the language's "
                    "catalogue to springback (see DEVELOPERS.md, 'How to add a language')",
                    code="unknown-language",
                )
            )
            continue
        try:
            missing = missing_messages(language)
        except (OSError, SpringbackError) as exc:
            problems.append(
                error(where, f"the {language_name(language)} catalogue cannot be read: {exc}",
                      code="catalogue-unreadable", fix="reinstall springback")
            )
            continue
        if missing:
            shown = "; ".join(f"'{m}'" for m in missing[:5])
            more = f" and {len(missing) - 5} more" if len(missing) > 5 else ""
            problems.append(
                error(
                    where,
                    f"the {language_name(language)} ({language}) catalogue is incomplete: "
                    f"{len(missing)} message(s) not translated: {shown}{more}",
                    expected="every booklet message translated",
                    found=f"{len(missing)} untranslated",
                    fix=f"translate them in {catalogue_path(language)} and run "
                    "`springback translations --update`, or make these booklets in a "
                    "complete language",
                    code="catalogue-incomplete",
                )
            )
    return problems
