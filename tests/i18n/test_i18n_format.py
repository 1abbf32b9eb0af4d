"""Locale formatting of numbers, dates and times (CLDR data through Babel)."""

from __future__ import annotations

import datetime as dt
import math

import jinja2
import pandas as pd
import pytest

from springback.errors import SpringbackError
from springback.i18n.language import (
    LANGUAGES,
    LocaleFormat,
    install,
    register_filters,
    translations,
)

AMS = "Europe/Amsterdam"
# 3 March 2026 14:05 UTC is 15:05 in Amsterdam (CET, UTC+1) -- a Tuesday.
INSTANT = pd.Timestamp("2026-03-03 14:05", tz="UTC")


@pytest.mark.parametrize(
    ("language", "value", "digits", "expected"),
    [
        ("en", 2.5, 1, "2.5"),
        ("nl", 2.5, 1, "2,5"),
        ("de", 2.5, 1, "2,5"),
        ("nl", 2, 1, "2,0"),
        ("de", 1234.5, 0, "1.235"),  # half up, thousands separator a full stop
        ("en", 1234.5, 0, "1,235"),
        ("nl", 2.25, 1, "2,3"),  # half up (Babel alone rounds half to even: 2,2)
        ("de", -0.35, 1, "-0,4"),
        ("en", 0.123456, 3, "0.123"),
    ],
)
def test_number(language: str, value: float, digits: int, expected: str) -> None:
    """Check that numbers use the locale's decimal mark and a fixed count of decimals."""
    assert LocaleFormat(language).number(value, digits) == expected


def test_number_sign_and_missing() -> None:
    """Check that a sign can be forced and missing values show a dash, not 'nan'."""
    fmt = LocaleFormat("nl")
    assert fmt.number(0.4, sign=True) == "+0,4"
    assert fmt.number(-0.4, sign=True) == "-0,4"
    for missing in (None, float("nan"), math.inf, pd.NA):
        assert fmt.number(missing) == "–"
        assert fmt.percent(missing) == "–"


@pytest.mark.parametrize(
    ("language", "value", "digits", "expected"),
    [
        ("en", 0.25, 0, "25%"),
        ("nl", 0.25, 0, "25%"),
        ("de", 0.25, 0, "25\xa0%"),  # German CLDR pattern: a no-break space before the sign
        ("nl", 0.2555, 1, "25,6%"),
        ("de", 0.125, 0, "13\xa0%"),
    ],
)
def test_percent(language: str, value: float, digits: int, expected: str) -> None:
    """Check that shares are shown as percentages in the locale's pattern."""
    assert LocaleFormat(language).percent(value, digits) == expected


@pytest.mark.parametrize(
    ("language", "date_long", "date_short", "day_month", "weekday"),
    [
        ("en", "3 March 2026", "03/03/2026", "3 March", "Tuesday"),
        ("nl", "3 maart 2026", "03-03-2026", "3 maart", "dinsdag"),
        ("de", "3. März 2026", "03.03.26", "3. März", "Dienstag"),
    ],
)
def test_dates(language: str, date_long: str, date_short: str, day_month: str,
               weekday: str) -> None:
    """Check long, short and day-month dates and weekday names per locale."""
    fmt = LocaleFormat(language, AMS)
    assert fmt.date_long(INSTANT) == date_long
    assert fmt.date_short(INSTANT) == date_short
    assert fmt.day_month(INSTANT) == day_month
    assert fmt.weekday(INSTANT) == weekday


@pytest.mark.parametrize("language", LANGUAGES)
def test_times_are_24_hour_in_the_study_zone(language: str) -> None:
    """Check that times use the 24-hour clock and are converted to the study's time zone."""
    assert LocaleFormat(language, AMS).time_short(INSTANT) == "15:05"
    assert LocaleFormat(language, "UTC").time_short(INSTANT) == "14:05"
    # Summer time: 29 March 2026 is the switch in the EU; 12:00 UTC is 14:00 CEST.
    summer = pd.Timestamp("2026-03-29 12:00", tz="UTC")
    assert LocaleFormat(language, AMS).time_short(summer) == "14:00"
    assert "15:05" in LocaleFormat(language, AMS).datetime_short(INSTANT)


def test_date_follows_the_study_zone_across_midnight() -> None:
    """Check that the date shown is the local date, not the UTC date."""
    late = pd.Timestamp("2026-03-03 23:30", tz="UTC")  # 00:30 on 4 March in Amsterdam
    assert LocaleFormat("nl", AMS).date_long(late) == "4 maart 2026"
    assert LocaleFormat("nl", "UTC").date_long(late) == "3 maart 2026"


def test_naive_values_are_local_wall_time() -> None:
    """Check that naive datetimes and dates (study days) are shown as they are."""
    fmt = LocaleFormat("de", AMS)
    assert fmt.date_long(pd.Timestamp("2026-03-03")) == "3. März 2026"
    assert fmt.date_long(dt.date(2026, 3, 3)) == "3. März 2026"
    assert fmt.time_short(dt.datetime(2026, 3, 3, 9, 30)) == "09:30"
    assert fmt.local(pd.NaT) is None


@pytest.mark.parametrize(
    ("language", "monday", "sunday"),
    [("en", "Monday", "Sunday"), ("nl", "maandag", "zondag"), ("de", "Montag", "Sonntag")],
)
def test_weeks_start_on_monday(language: str, monday: str, sunday: str) -> None:
    """Check that weekday names run Monday to Sunday in every language (ISO 8601 weeks)."""
    names = LocaleFormat(language).weekday_names()
    assert (names[0], names[-1], len(names)) == (monday, sunday, 7)


@pytest.mark.parametrize(
    ("language", "hours", "digits", "expected"),
    [("en", 1, 0, "1 hour"), ("en", 2.46, 1, "2.5 hours"), ("nl", 2.5, 1, "2,5 uur"),
     ("de", 1, 0, "1 Stunde"), ("de", 2.5, 1, "2,5 Stunden")],
)
def test_hours(language: str, hours: float, digits: int, expected: str) -> None:
    """Check durations in hours with the unit's plural form per language (CLDR units)."""
    assert LocaleFormat(language).hours(hours, digits) == expected


def test_filters_in_a_template() -> None:
    """Check that the registered filters and globals work inside an autoescaped template."""
    env = jinja2.Environment(autoescape=True)
    install(env, "nl")
    register_filters(env, "nl", AMS)
    out = env.from_string(
        "{{ x|number }} {{ p|percent }} {{ t|date_long }} {{ t|time_short }} "
        "{{ weekday_names[0] }} {{ locale_code }}"
    ).render(x=2.5, p=0.5, t=INSTANT)
    assert out == "2,5 50% 3 maart 2026 15:05 maandag nl-NL"


def test_newstyle_gettext_escapes_variables() -> None:
    """Check that values formatted into a message are escaped but the message is not."""
    env = jinja2.Environment(autoescape=True)
    install(env, "en")
    out = env.from_string('{{ _("Hello %(name)s", name=who) }}').render(who="<b>Ann</b>")
    assert out == "Hello &lt;b&gt;Ann&lt;/b&gt;"


@pytest.mark.parametrize("bad", ["fr", "", "EN", "nl_NL"])
def test_unknown_language_is_rejected(bad: str) -> None:
    """Check that an unknown language raises a clear SpringbackError, not a KeyError."""
    with pytest.raises(SpringbackError, match=r"no booklet text in language .*en, nl, de"):
        translations(bad)
    with pytest.raises(SpringbackError, match="no booklet text"):
        LocaleFormat(bad)
