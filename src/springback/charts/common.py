"""What every chart builder shares: the inputs, language-aware formatting, times for Vega-Lite."""

from __future__ import annotations

import math
import string
from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import altair as alt
import babel.dates
import numpy as np
import pandas as pd

from springback.findings import Findings
from springback.i18n.language import LOCALES, LocaleFormat
from springback.metrics.results import Estimate, Family, ParticipantResults
from springback.model import Edition, ParticipantData
from springback.settings import StudySettings

_MS_PER_DAY = 86_400_000
CHAR_WIDTH = 6.9
"""Estimated mean width in px of a character of the 13 px booklet font (for wrapping keys)."""


@dataclass(frozen=True)
class Chart:
    """One chart of a booklet: inline SVG plus its text alternative and data table."""

    key: str
    title: str
    description: str
    """The text alternative in plain words; states the pattern the chart shows."""
    svg: str
    """Inline <svg role="img" aria-labelledby=...> with <title> and <desc>; ids namespaced."""
    table: pd.DataFrame
    """The chart's data, display-ready: translated column names, cells formatted as text."""
    table_caption: str
    print_table: pd.DataFrame | None = None
    """A condensed version for the printed appendix (weekly rows instead of daily), or None
    when the table is printed as it is."""
    print_caption: str = ""


@dataclass(frozen=True)
class Inputs:
    """One participant's inputs to the chart builders, with formatting in their language."""

    data: ParticipantData
    results: ParticipantResults
    settings: StudySettings
    language: str
    gettext: Callable[[str], str]
    findings: Findings | None = None
    """The participant's findings: pictures show what the booklet's sentences say (a chart
    never draws a conclusion of its own)."""
    edition: Edition = "participant"
    """Whom the chart's words address: the participant ('your mood') or, in the therapist
    edition, the clinician about the participant ('the mood')."""

    def voice(self, participant: str, therapist: str) -> str:
        """One wording of a text in the edition's voice (both already translated)."""
        return therapist if self.edition == "therapist" else participant

    # -- where the numbers come from -----------------------------------------------------
    def family(self, name: str) -> Family | None:
        """The metric family, or None when it was not computed."""
        return self.results.families.get(name)

    def table(self, family: str, name: str) -> pd.DataFrame | None:
        """A family's table, or None when the family or table is absent or empty."""
        fam = self.family(family)
        if fam is None:
            return None
        frame = fam.tables.get(name)
        if frame is None or len(frame) == 0:
            return None
        return frame

    def estimate(self, family: str, measure: str) -> Estimate:
        """An estimate of a family; missing (with a reason) when not reported."""
        fam = self.family(family)
        if fam is None or measure not in fam.estimates:
            return Estimate.missing("not computed")
        return fam.estimates[measure]

    def param(self, family: str, name: str, default: Any = None) -> Any:
        """A family's parameter, or the default."""
        fam = self.family(family)
        return default if fam is None else fam.params.get(name, default)

    # -- the variable the booklet is about ----------------------------------------------
    # (as the results describe it: `metrics.results.SeriesDescription`)
    @property
    def variable(self) -> str:
        return self.results.series.variable

    @property
    def label(self) -> str:
        return self.settings.label_of(self.variable, self.language)

    @property
    def higher_is_worse(self) -> bool:
        return self.results.series.higher_is_worse

    @property
    def scale(self) -> tuple[float, float]:
        return self.results.series.scale

    def value_axis_title(self) -> str:
        """Axis title naming the variable and which end is worse."""
        _ = self.gettext
        if self.higher_is_worse:
            return _("{label} (higher means worse)").format(label=self.label)
        return _("{label} (higher means better)").format(label=self.label)

    # -- formatting ----------------------------------------------------------------------
    @property
    def locale(self) -> str:
        """The CLDR locale of the booklet language (as `i18n.language` formats)."""
        return LOCALES.get(self.language, LOCALES["en"])

    @cached_property
    def formatter(self) -> LocaleFormat:
        """The booklet's own number formatting, so charts and text round alike."""
        language = self.language if self.language in LOCALES else "en"
        return LocaleFormat(language, self.settings.study.timezone)

    def num(self, value: float | None, digits: int = 1) -> str:
        """A number in the booklet language, rounded half up ('–' for a missing value)."""
        return self.formatter.number(value, digits)

    def percent(self, share: float) -> str:
        """A share 0..1 as a whole percentage in the booklet language."""
        return self.formatter.percent(share)

    def date(self, when: Any) -> str:
        """Day and month in the booklet language (e.g. '3 May', '3. Mai')."""
        return babel.dates.format_skeleton("MMMMd", _as_date(when), locale=self.locale)

    def date_short(self, when: Any) -> str:
        """Weekday, day and short month (e.g. 'Fri 3 May') for data tables."""
        return babel.dates.format_skeleton("MMMEd", _as_date(when), locale=self.locale)

    def time_of_day(self, when: Any) -> str:
        """Clock time on the 24-hour clock, as everywhere in the booklet."""
        return babel.dates.format_time(pd.Timestamp(when).to_pydatetime(), "HH:mm",
                                       locale=self.locale)

    def hours_words(self, hours: float) -> str:
        """A duration in hours as people say it ('about half a day')."""
        _ = self.gettext
        if hours < 0.75:
            return _("less than an hour")
        if hours < 1.5:
            return _("about an hour")
        if 10 <= hours < 15:
            return _("about half a day")
        if 20 <= hours < 30:
            return _("about a day")
        if hours >= 30:
            return _("about {n} days").format(n=self.num(hours / 24, 0 if hours >= 60 else 1))
        return _("about {n} hours").format(n=self.num(hours, 0))

    # -- times ---------------------------------------------------------------------------
    def wall_clock(self, times: pd.Series) -> pd.Series:
        """Times as naive wall-clock times in the study time zone."""
        values = pd.to_datetime(times)
        if values.dt.tz is not None:
            values = values.dt.tz_convert(self.settings.study.timezone).dt.tz_localize(None)
        return values

    def ms(self, times: pd.Series) -> np.ndarray:
        """Wall-clock times as epoch milliseconds read as UTC (Vega-Lite 'utc' scales).

        Charts show study-zone clock times whatever the time zone of the machine: the
        wall-clock time is passed as if it were UTC, and every time scale is a UTC scale.
        """
        wall = self.wall_clock(times)
        return (wall.astype("datetime64[ms]").astype("int64")).to_numpy()


def _fields(text: str) -> set[str] | None:
    """The {placeholders} of a message, or None when it is not a valid format string."""
    try:
        return {name for _, name, _, _ in string.Formatter().parse(text) if name is not None}
    except ValueError:
        return None


def checked_gettext(gettext: Callable[[str], str]) -> Callable[[str], str]:
    """Wrap gettext so a translation with other {placeholders} than its source falls back.

    A mistyped placeholder in a catalogue would otherwise stop a whole booklet with a
    KeyError; the English sentence is the better failure.
    """
    def lookup(message: str) -> str:
        translated = gettext(message)
        return translated if _fields(translated) == _fields(message) else message

    return lookup


def _as_date(when: Any) -> Any:
    stamp = pd.Timestamp(when)
    if stamp.tzinfo is not None:
        stamp = stamp.tz_localize(None)
    return stamp.date()


@dataclass(frozen=True)
class TimeAxis:
    """A date axis over whole study days: its UTC domain in epoch ms and its labelled days."""

    first: int
    last: int
    ticks: tuple[int, ...]
    title: str | None
    format: str
    """The d3 time format of the day labels (`svg.date_axis_format`)."""

    @property
    def domain(self) -> tuple[int, int]:
        return (self.first, self.last)

    def x(self, field: str = "t", *, show_title: bool = True) -> alt.X:
        """The x encoding of epoch-ms `field` on this axis (without its title if asked)."""
        return alt.X(
            field=field, type="temporal",
            scale=alt.Scale(type="utc", domain=[self.first, self.last], nice=False),
            axis=alt.Axis(title=self.title if show_title else None, format=self.format,
                          values=list(self.ticks), labelOverlap=True, labelFlush=False),
        )


def time_axis(ctx: Inputs, title: str | None, times: np.ndarray, pad_days: int = 0
              ) -> TimeAxis:
    """A date axis over whole study days, with at most ~8 labelled days.

    `times` are the plotted epoch-ms values; the scale is UTC (see `Inputs.ms`).
    """
    from springback.charts.svg import date_axis_format

    first = (int(np.min(times)) // _MS_PER_DAY - pad_days) * _MS_PER_DAY
    last = (int(np.max(times)) // _MS_PER_DAY + 1 + pad_days) * _MS_PER_DAY
    n_days = (last - first) // _MS_PER_DAY
    step = next((s for s in (1, 2, 7, 14, 28) if n_days / s <= 8), 56)
    start = first
    if step >= 7:  # weekly labels fall on Mondays (1 Jan 1970 was a Thursday)
        start += ((0 - (first // _MS_PER_DAY + 3)) % 7) * _MS_PER_DAY
    ticks = tuple(range(start, last + 1, step * _MS_PER_DAY))
    return TimeAxis(first, last, ticks, title, date_axis_format(ctx.language))


@dataclass(frozen=True)
class KeyItem:
    """One entry of a chart key: a sample mark and its label."""

    label: str
    colour: str
    kind: str = "line"
    """'line' (with `dash`), 'point' (with `shape`, `filled`) or 'box' (a filled swatch)."""
    dash: tuple[int, ...] = (1, 0)
    shape: str = "circle"
    filled: bool = True
    width: float = 2.5
    edge: str = ""
    """Outline of a 'box' swatch (a 3:1 colour; the fill may be light)."""


def key_spec(items: list[KeyItem], width: int) -> alt.LayerChart:
    """A small chart drawing a key of sample marks with written labels, wrapped to `width`.

    A key with dashes, shapes and words keeps every series readable without colour.
    """
    row_h, sample_w, gap = 24, 26, 18
    x, row = 0.0, 0
    layers: list[alt.Chart] = []
    labels: list[dict[str, Any]] = []
    for item in items:
        need = sample_w + 6 + CHAR_WIDTH * len(item.label)
        if x > 0 and x + need > width:
            x, row = 0.0, row + 1
        y = row * row_h + row_h / 2
        if item.kind == "line":
            layers.append(
                alt.Chart()
                .mark_rule(color=item.colour, strokeWidth=item.width, strokeDash=list(item.dash))
                .encode(x=alt.XValue(x), x2=alt.X2Value(x + sample_w), y=alt.YValue(y)))
        elif item.kind == "box":
            layers.append(
                alt.Chart()
                .mark_rect(color=item.colour, stroke=item.edge or None, strokeWidth=1)
                .encode(x=alt.XValue(x), x2=alt.X2Value(x + sample_w),
                        y=alt.YValue(y - 7), y2=alt.Y2Value(y + 7)))
        else:
            layers.append(
                alt.Chart()
                .mark_point(shape=item.shape, size=80, filled=item.filled, color=item.colour,
                            strokeWidth=1.5, opacity=1)
                .encode(x=alt.XValue(x + sample_w / 2), y=alt.YValue(y)))
        labels.append({"x": x + sample_w + 6, "y": y, "label": item.label})
        x += need + gap
    layers.append(
        alt.Chart(alt.Data(values=labels))
        .mark_text(align="left", baseline="middle")
        .encode(x=alt.X(field="x", type="quantitative", scale=None),
                y=alt.Y(field="y", type="quantitative", scale=None),
                text=alt.Text(field="label")))
    return alt.LayerChart(layer=layers, data=alt.Data(values=[{}]), width=width,
                          height=(row + 1) * row_h)


def day_noon_ms(ctx: Inputs, days: pd.Series) -> np.ndarray:
    """Study days (naive midnight) as epoch ms of their noon, so daily points sit mid-day."""
    return ctx.ms(pd.to_datetime(days)) + _MS_PER_DAY // 2


def inline(frame: pd.DataFrame) -> alt.Data:
    """A frame as a chart's inline data set, its rows held as a tuple (see `records`).

    Every method of an altair chart (mark, encode, layer, properties, to_dict) deep-copies the
    chart's lists and dicts, rows included, and leaves tuples as they are; the spec it writes
    holds the same rows as a list, so a tuple changes nothing but the copying (about a third of
    a chart's build time with a few hundred answers).
    """
    return alt.Data(values=tuple(records(frame)))


def records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Rows as JSON-ready dicts (NaN -> None, numpy scalars -> Python) for inline data."""
    out = []
    for row in frame.to_dict(orient="records"):
        clean: dict[str, Any] = {}
        for k, v in row.items():
            if isinstance(v, np.generic):
                v = v.item()
            if isinstance(v, float) and not math.isfinite(v):
                v = None
            elif isinstance(v, pd.Timestamp):
                v = v.isoformat()
            clean[str(k)] = v
        out.append(clean)
    return out

