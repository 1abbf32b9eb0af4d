"""The answering calendar: weeks by weekdays, the measurement periods and the gaps between."""

from __future__ import annotations

from dataclasses import dataclass

import altair as alt
import babel.dates
import numpy as np
import pandas as pd

from springback.charts.common import Chart, Inputs, inline
from springback.charts.palette import CALENDAR_RAMP, CHART, readable_text_on
from springback.charts.panels import gap_words
from springback.charts.svg import to_svg

CALENDAR_MAX_HEIGHT = 640
"""Tallest calendar in px (about two thirds of an A4 page at the column width)."""


def calendar_chart(ctx: Inputs) -> Chart | None:
    """Weeks by weekdays, Monday first: prompts answered per day, written in each cell."""
    _ = ctx.gettext
    daily = ctx.table("descriptives", "daily")
    if daily is None:
        return None
    cells = _calendar_cells(ctx, daily)
    weekdays = babel.dates.get_day_names("abbreviated", locale=ctx.locale)
    day_names = [weekdays[i] for i in range(7)]
    week_names = list(dict.fromkeys(cells["week"]))
    gaps = _gaps(ctx, cells)
    rows = list(week_names)  # a row naming each gap between periods follows its last week
    for gap in gaps:
        if gap.after_week in rows and gap.before_week != gap.after_week:
            rows.insert(rows.index(gap.after_week) + 1, gap.label)
    # Long studies get flatter rows so the calendar stays on one page; below 28 px a row has
    # no room for the day of the month as well (the week's start date is on the axis).
    cell_w, cell_h = 72, min(32, max(18, CALENDAR_MAX_HEIGHT // len(rows)))
    roomy = cell_h >= 28
    x = alt.X(field="weekday", type="ordinal", sort=day_names,
              scale=alt.Scale(domain=day_names, paddingInner=0.06),
              axis=alt.Axis(title=None, orient="top", labelAngle=0, domain=False, ticks=False))
    y = alt.Y(field="week", type="ordinal", sort=rows,
              scale=alt.Scale(domain=rows, paddingInner=0.08),
              axis=alt.Axis(title=_("Week starting"), domain=False, ticks=False,
                            values=week_names if len(rows) > len(week_names) else alt.Undefined))
    ink = alt.Fill(field="ink", type="nominal", scale=None)
    layers = [
        alt.Chart().mark_rect(stroke=CHART.neutral, strokeWidth=1)
        .encode(x=x, y=y, fill=alt.Fill(field="fill", type="nominal", scale=None)),
        alt.Chart().mark_text(fontSize=14 if roomy else 12, fontWeight="bold",
                              dx=8 if roomy else 0, dy=2 if roomy else 0)
        .encode(x=x, y=y, text=alt.Text(field="label"), fill=ink),
    ]
    if roomy:
        layers.append(
            alt.Chart().mark_text(fontSize=11, align="left", baseline="top",
                                  dx=-cell_w / 2 + 5, dy=-cell_h / 2 + 3)
            .encode(x=x, y=y, text=alt.Text(field="dom"), fill=ink))
    named = [{"week": g.label, "weekday": day_names[3], "gap": g.label} for g in gaps
             if g.label in rows]
    if named:  # written across the middle of its row, in the place of the missing weeks
        layers.append(
            alt.Chart(alt.Data(values=named))
            .mark_text(fontSize=13, fontStyle="italic", color=CHART.ink)
            .encode(x=x, y=y, text=alt.Text(field="gap")))
    data = inline(cells.assign(weekday=[day_names[i] for i in cells["wd"]]))
    spec = alt.layer(*layers, data=data).properties(width=7 * cell_w,
                                                    height=cell_h * len(rows))
    title = ctx.voice(_("Which prompts you answered"), _("Which prompts were answered"))
    description = " ".join([_calendar_description(ctx, cells),
                            *(g.sentence for g in gaps)])
    table = _calendar_table(ctx, cells, day_names, [g for g in gaps if g.label in rows])
    return Chart("calendar", title, description,
                 to_svg(spec, "calendar", title, description, ctx.language), table,
                 _("Prompts answered per day, by week"))


@dataclass(frozen=True)
class Gap:
    """The days without prompts between two measurement periods."""

    after_week: str
    """The calendar row (week label) of the earlier period's last day."""
    before_week: str
    """The calendar row of the later period's first day."""
    label: str
    """Its length in words ('10 weeks without prompts'), the row written in the calendar."""
    sentence: str
    """The same with its dates, for the text alternative."""


def _gaps(ctx: Inputs, cells: pd.DataFrame) -> list[Gap]:
    """Each gap between consecutive measurement periods with at least one day in it."""
    periods = ctx.table("descriptives", "periods")
    if periods is None or len(periods) < 2:
        return []
    periods = periods.sort_values("first_day")
    ends = [pd.Timestamp(d).normalize() for d in periods["last_day"]]
    starts = [pd.Timestamp(d).normalize() for d in periods["first_day"]]
    shown = set(pd.DatetimeIndex(cells["day"]))
    gaps = []
    for last, first in zip(ends[:-1], starts[1:], strict=True):
        days = pd.date_range(last + pd.Timedelta(days=1), first - pd.Timedelta(days=1))
        if len(days) == 0 or any(d in shown for d in days):
            continue
        label, sentence = gap_words(ctx, last, first)  # the time charts' words too
        gaps.append(Gap(
            after_week=ctx.date(last - pd.Timedelta(days=last.day_of_week)),
            before_week=ctx.date(first - pd.Timedelta(days=first.day_of_week)),
            label=label, sentence=sentence))
    return gaps


def _calendar_cells(ctx: Inputs, daily: pd.DataFrame) -> pd.DataFrame:
    """One row per study day from the first to the last, with share answered and colours."""
    days = pd.to_datetime(daily["study_day"]).dt.normalize()
    answered = pd.Series(daily["n"].to_numpy(dtype=float), index=days)
    sent = pd.Series(
        daily["scheduled"].to_numpy(dtype=float) if "scheduled" in daily.columns
        else np.full(len(daily), np.nan), index=days)
    span = _period_days(ctx, days)
    answered = answered.groupby(level=0).sum().reindex(span, fill_value=0.0)
    sent = sent.groupby(level=0).max().reindex(span)
    per_day = ctx.settings.study.prompts_per_day
    if per_day is not None:
        sent = sent.fillna(float(per_day))
    share = (answered / sent).clip(upper=1.0)
    known = sent.notna() & (sent > 0)
    top = float(answered.max()) if answered.max() > 0 else 1.0
    level = share.where(known, answered / top)
    steps = len(CALENDAR_RAMP) - 1
    # Steps: none, under half, half or more, three quarters or more, all.
    cuts = np.array([0.0, 0.5, 0.75, 1.0])
    fills = [CALENDAR_RAMP[min(steps, int(np.searchsorted(cuts, v, side="right")))]
             if v > 0 else CALENDAR_RAMP[0] for v in level.fillna(0.0)]
    labels = [f"{int(a)}/{int(s)}" if k else f"{int(a)}"
              for a, s, k in zip(answered, sent.fillna(0), known, strict=True)]
    week_start = span - pd.to_timedelta(span.day_of_week, unit="D")
    return pd.DataFrame({
        "day": span, "wd": span.day_of_week, "week": [ctx.date(w) for w in week_start],
        "dom": [str(d.day) for d in span], "label": labels, "answered": answered.to_numpy(),
        "sent": sent.to_numpy(), "known": known.to_numpy(), "fill": fills,
        "ink": [readable_text_on(f) for f in fills],
    })


def _period_days(ctx: Inputs, days: pd.Series) -> pd.DatetimeIndex:
    """Every day of each measurement period (the gaps between periods are left out)."""
    periods = ctx.table("descriptives", "periods")
    if periods is None or len(periods) < 2:
        return pd.date_range(days.min(), days.max(), freq="D")
    first = min(days.min(), pd.Timestamp(periods["first_day"].min()))
    last = max(days.max(), pd.Timestamp(periods["last_day"].max()))
    span = pd.date_range(first, last, freq="D")
    inside = np.zeros(len(span), bool)
    for a, b in zip(periods["first_day"], periods["last_day"], strict=True):
        inside |= (span >= pd.Timestamp(a)) & (span <= pd.Timestamp(b))
    inside |= span.isin(days)  # a day with answers is always shown
    return span[inside]


def _calendar_description(ctx: Inputs, cells: pd.DataFrame) -> str:
    _ = ctx.gettext
    n_days = len(cells)
    answered = int(cells["answered"].sum())
    none = int((cells["answered"] == 0).sum())
    parts = []
    if bool(cells["known"].all()):
        sent = int(cells["sent"].sum())
        full = int((cells["answered"] >= cells["sent"]).sum())
        parts.append(ctx.voice(_("You answered {answered} of {sent} prompts ({share}) over "
                                 "{days} days."),
                               _("{answered} of {sent} prompts ({share}) were answered over "
                                 "{days} days.")).format(
            answered=answered, sent=sent, days=n_days,
            share=ctx.percent(answered / sent if sent else 0.0)))
        parts.append(ctx.voice(_("On {full} of these days you answered every prompt."),
                               _("On {full} of these days every prompt was answered.")
                               ).format(full=full))
    else:
        parts.append(ctx.voice(_("You answered {answered} prompts over {days} days."),
                               _("{answered} prompts were answered over {days} days.")).format(
            answered=answered, days=n_days))
    if none:
        parts.append(ctx.voice(_("On {none} days you answered none."),
                               _("On {none} days none was answered.")).format(none=none))
    else:
        parts.append(ctx.voice(_("You answered on every day."),
                               _("There were answers on every day.")))
    return " ".join(parts)


def _calendar_table(ctx: Inputs, cells: pd.DataFrame, day_names: list[str],
                    gaps: list[Gap]) -> pd.DataFrame:
    _ = ctx.gettext
    wide = cells.pivot(index="week", columns="wd", values="label")
    rows = list(dict.fromkeys(cells["week"]))
    for gap in gaps:  # the gap's row, as in the calendar, with empty days
        rows.insert(rows.index(gap.after_week) + 1, gap.label)
    wide = wide.reindex(index=rows, columns=range(7))
    table = wide.astype(object).fillna("").rename(columns=dict(enumerate(day_names)))
    table.columns = [str(c) for c in table.columns]
    table.index.name = None
    return table.reset_index(names=_("Week starting"))
