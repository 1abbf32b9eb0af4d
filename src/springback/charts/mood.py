"""Mood over time and the answering calendar."""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any, cast

import altair as alt
import babel.dates
import numpy as np
import pandas as pd

from springback.charts.common import (
    Chart,
    Inputs,
    KeyItem,
    TimeAxis,
    day_noon_ms,
    key_spec,
    records,
    time_axis,
)
from springback.charts.palette import CALENDAR_RAMP, CHART, readable_text_on
from springback.charts.svg import PLOT_WIDTH, to_svg

EVENT_SHAPES = ("triangle-down", "diamond", "square", "cross", "triangle-up")
"""One shape per event kind (answers are circles); further kinds share the last shape."""
HEIGHT = 260
MAX_SHIFT_LABELS = 3
CALENDAR_MAX_HEIGHT = 640
"""Tallest calendar in px (about two thirds of an A4 page at the column width)."""


def mood_chart(ctx: Inputs) -> Chart | None:
    """Answers, daily means, the typical range, events and detected shifts over time."""
    _ = ctx.gettext
    series = ctx.table("descriptives", "series")
    daily = ctx.table("descriptives", "daily")
    if series is None or daily is None:
        return None
    series = series.dropna(subset=["value"])
    daily = daily.dropna(subset=["mean"])
    if series.empty or daily.empty:
        return None
    low, high = ctx.scale
    y = _value_axis(ctx, low, high)
    answers = pd.DataFrame({"t": ctx.ms(series["local_time"]), "v": series["value"]})
    means = pd.DataFrame({"t": day_noon_ms(ctx, daily["study_day"]), "v": daily["mean"],
                          "p": _period_of(ctx, daily["study_day"])})
    x = time_axis(ctx, _("Date"), np.concatenate([answers["t"], means["t"]]))
    layers: list[alt.Chart] = []
    key = [KeyItem(_("daily average"), CHART.primary, width=3),
           KeyItem(_("single answers"), CHART.neutral, kind="point", filled=False)]
    typical = (ctx.param("descriptives", "typical_low"), ctx.param("descriptives", "typical_high"))
    if all(v is not None and math.isfinite(v) for v in typical):
        layers += _band_layers(float(typical[0]), float(typical[1]), y)
        key.append(KeyItem(_("your typical range"), CHART.band, kind="box", edge=CHART.neutral))
    layers.append(
        alt.Chart(alt.Data(values=records(answers)))
        .mark_point(shape="circle", filled=False, size=22, color=CHART.neutral, strokeWidth=1)
        .encode(x=x.x("t"), y=y("v")))
    shift_layers = _shift_layers(ctx, x, y)
    if shift_layers:
        layers += shift_layers
        key += [KeyItem(_("detected shift"), CHART.highlight, dash=(2, 3), width=2),
                KeyItem(_("level before and after a shift"), CHART.highlight, dash=(8, 4))]
    layers.append(
        alt.Chart(alt.Data(values=records(means)))
        .mark_line(color=CHART.primary, strokeWidth=3,
                   point=alt.OverlayMarkDef(filled=True, size=24, color=CHART.primary))
        .encode(x=x.x("t"), y=y("v"),
                detail=alt.Detail(field="p", type="nominal")))  # no line across a gap
    n_events = 0
    events = _events(ctx)
    if events is not None:
        first, last = x.domain
        events = events[(events["t"] >= first) & (events["t"] < last)]
    if events is not None and len(events):
        n_events = len(events)
        kinds = list(dict.fromkeys(sorted(events["kind"])))
        shapes = dict(zip(kinds, EVENT_SHAPES, strict=False))
        events = events.assign(shape=[shapes.get(k, EVENT_SHAPES[-1]) for k in events["kind"]])
        layers.append(
            alt.Chart(alt.Data(values=records(events[["t", "kind", "shape"]])))
            .mark_point(filled=True, size=90, color=CHART.accent, opacity=1)
            .encode(x=x.x("t"), y=alt.value(8),
                    shape=alt.Shape(field="shape", type="nominal", scale=None)))
        key += [KeyItem(_("event: {kind}").format(kind=k), CHART.accent, kind="point",
                        shape=shapes[k]) for k in kinds]
    plot = alt.layer(*layers).properties(width=PLOT_WIDTH, height=HEIGHT)
    spec = alt.vconcat(key_spec(key, PLOT_WIDTH), plot, spacing=10)
    title = _("Your mood over time")
    description = _mood_description(ctx, series, daily, n_events)
    table = _mood_table(ctx, daily, events)
    return Chart("mood", title, description, to_svg(spec, "mood", title, description,
                                                    ctx.language),
                 table, _("Daily averages, answers and events per day"),
                 _weekly_table(ctx, daily, events), _("Weekly summary of the daily averages"))


def _weekly_table(ctx: Inputs, daily: pd.DataFrame, events: pd.DataFrame | None
                  ) -> pd.DataFrame:
    """The daily table condensed to weeks (Monday first) for the printed appendix."""
    _ = ctx.gettext
    days = pd.to_datetime(daily["study_day"])
    week = days - pd.to_timedelta(days.dt.day_of_week, unit="D")
    frame = pd.DataFrame({"week": week.to_numpy(), "mean": daily["mean"].to_numpy(float),
                          "n": daily["n"].to_numpy(float)})
    groups = frame.groupby("week", sort=True)
    counts: dict[pd.Timestamp, int] = {}
    if events is not None and len(events):
        ev_days = pd.to_datetime(events["day"])
        if ev_days.dt.tz is not None:  # the local day, as the daily table's days are
            ev_days = ev_days.dt.tz_localize(None)
        ev_week = ev_days - pd.to_timedelta(ev_days.dt.day_of_week, unit="D")
        counts = {pd.Timestamp(cast(Any, k)): int(v) for k, v in ev_week.value_counts().items()}
    rows = [(pd.Timestamp(cast(Any, w)), g) for w, g in groups]
    return pd.DataFrame({
        _("Week starting"): [ctx.date_short(w) for w, _g in rows],
        _("Average"): [ctx.num(float(np.average(g["mean"], weights=g["n"]))) for _w, g in rows],
        _("Lowest day"): [ctx.num(float(g["mean"].min())) for _w, g in rows],
        _("Highest day"): [ctx.num(float(g["mean"].max())) for _w, g in rows],
        _("Answers"): [str(int(g["n"].sum())) for _w, g in rows],
        _("Events"): [str(counts.get(w, 0)) for w, _g in rows],
    })


def _value_axis(ctx: Inputs, low: float, high: float) -> Callable[[str], alt.Y]:
    """The y encoding of a field on the mood scale, titled with the variable and its worse end."""
    scale = alt.Scale(domain=[low, high], nice=False, zero=False)
    axis = alt.Axis(title=ctx.value_axis_title(), tickMinStep=1)

    def encode(field: str) -> alt.Y:
        return alt.Y(field=field, type="quantitative", scale=scale, axis=axis)

    return encode


def _band_layers(lo: float, hi: float, y: Callable[[str], alt.Y]) -> list[alt.Chart]:
    """The typical range: a light band with 3:1 edges (named in the key)."""
    band = alt.Data(values=[{"lo": lo, "hi": hi}])
    edge = alt.Chart(band).mark_rule(color=CHART.neutral, strokeWidth=1)
    return [
        alt.Chart(band).mark_rect(color=CHART.band).encode(y=y("lo"), y2=alt.Y2(field="hi")),
        edge.encode(y=y("lo")),
        edge.encode(y=y("hi")),
    ]


def _shift_layers(ctx: Inputs, x: TimeAxis, y: Callable[[str], alt.Y]) -> list[alt.Chart]:
    """Detected shifts: dashed rules with a written direction, and the segment levels."""
    _ = ctx.gettext
    points = _shown_shifts(ctx)
    if points is None:
        return []
    words = {"worse": _("shift: worse"), "better": _("shift: better")}
    marks = pd.DataFrame({
        "t": ctx.ms(pd.to_datetime(points["study_day"])),
        "label": [words.get(str(d), str(d)) for d in points["direction"]],
    })
    layers = [
        alt.Chart(alt.Data(values=records(marks)))
        .mark_rule(color=CHART.highlight, strokeWidth=2, strokeDash=[2, 3])
        .encode(x=x.x("t")),
    ]
    if len(marks) <= MAX_SHIFT_LABELS:  # more written labels would overlap; the key names them
        layers.append(
            alt.Chart(alt.Data(values=records(marks)))
            .mark_text(align="left", dx=4, color=CHART.ink)
            .encode(x=x.x("t"), y=alt.value(26), text=alt.Text(field="label")))
    levels = ctx.table("shifts", "daily")
    if levels is not None and "level" in levels.columns:
        # Each level holds from the start of its day; the last one to the end of its day.
        starts = ctx.ms(pd.to_datetime(levels["study_day"]))
        steps = pd.DataFrame({"t": np.append(starts, starts[-1] + 86_400_000),
                              "v": np.append(levels["level"].to_numpy(dtype=float),
                                             float(levels["level"].iloc[-1]))}).dropna()
        layers.append(
            alt.Chart(alt.Data(values=records(steps)))
            .mark_line(interpolate="step-after", color=CHART.highlight, strokeWidth=2,
                       strokeDash=[8, 4])
            .encode(x=x.x("t"), y=y("v")))
    return layers


def _events(ctx: Inputs) -> pd.DataFrame | None:
    """Events inside the plotted period, with their kind (kinds beyond five pooled)."""
    _ = ctx.gettext
    events = ctx.data.events
    if events is None or len(events) == 0 or "local_time" not in events.columns:
        return None
    kinds = events["kind"].astype(object).where(events["kind"].notna(), "").astype(str)
    kinds = kinds.where(kinds.str.strip() != "", _("other events"))
    order = kinds.value_counts().sort_index().sort_values(ascending=False, kind="stable")
    keep = set(order.index[: len(EVENT_SHAPES) - 1]) if len(order) > len(EVENT_SHAPES) else None
    if keep is not None:
        kinds = kinds.where(kinds.isin(keep), _("other events"))
    # Study days start at day_start (e.g. 04:00): a 02:00 event belongs to the day before.
    hours, minutes = (int(p) for p in ctx.settings.study.day_start.split(":"))
    shifted = ctx.wall_clock(events["local_time"]) - pd.Timedelta(hours=hours, minutes=minutes)
    return pd.DataFrame({"t": ctx.ms(events["local_time"]), "kind": kinds.to_numpy(),
                         "day": shifted.dt.normalize()})


def _mood_description(ctx: Inputs, series: pd.DataFrame, daily: pd.DataFrame,
                      n_events: int) -> str:
    _ = ctx.gettext
    values = series["value"].to_numpy(dtype=float)
    parts = [_("Your answers ranged from {low} to {high}.").format(
        low=ctx.num(values.min()), high=ctx.num(values.max()))]
    lo, hi = ctx.param("descriptives", "typical_low"), ctx.param("descriptives", "typical_high")
    if lo is not None and hi is not None and math.isfinite(lo) and math.isfinite(hi):
        parts.append(_("Half of them were between {low} and {high}: your typical range.").format(
            low=ctx.num(lo), high=ctx.num(hi)))
    means = daily["mean"].to_numpy(dtype=float)
    if len(means) >= 14:
        first, last = float(np.mean(means[:7])), float(np.mean(means[-7:]))
        spread = float(np.std(values, ddof=1)) if len(values) > 1 else 0.0
        if abs(last - first) < 0.5 * spread or spread == 0:
            trend = _("about the same as")
        elif (last > first) == ctx.higher_is_worse:
            trend = _("worse than")
        else:
            trend = _("better than")
        parts.append(_("In the last week your daily average was {last}, {trend} in the first "
                       "week ({first}).").format(last=ctx.num(last), trend=trend,
                                                 first=ctx.num(first)))
    parts += _shift_sentences(ctx)
    if n_events:
        parts.append(_("Events you reported are marked at the top ({n} in all).").format(
            n=n_events))
    return " ".join(parts)


def _shown_shifts(ctx: Inputs) -> pd.DataFrame | None:
    """The change points the picture shows: with findings, only the abrupt shift the course
    reading found (none for a gradual change, switching or no clear change); without them,
    every change point."""
    points = ctx.table("shifts", "change_points")
    if points is None or ctx.findings is None:
        return points
    course = ctx.findings.get("course")
    if course is None or course.reading != "abrupt_shift":
        return None
    day = pd.Timestamp(str(course.numbers.get("date")))
    chosen = points[pd.to_datetime(points["study_day"]) == day]
    return chosen if len(chosen) else None


def _shift_sentences(ctx: Inputs) -> list[str]:
    """One sentence per shift, or a summary naming the largest when there are many."""
    _ = ctx.gettext
    points = _shown_shifts(ctx)
    if points is None:
        return []
    worse = _("Around {date} your mood seemed to shift to feeling worse.")
    better = _("Around {date} your mood seemed to shift to feeling better.")
    if len(points) <= 2:
        return [(worse if row.direction == "worse" else better).format(date=ctx.date(row.study_day))
                for row in points.itertuples()]
    n_worse = int((points["direction"] == "worse").sum())
    largest = points.loc[cast(Any, points["size"].abs().idxmax())]
    return [
        _("Your mood seemed to shift {n} times: {worse} times to feeling worse and {better} "
          "times to feeling better.").format(n=len(points), worse=n_worse,
                                             better=len(points) - n_worse),
        _("The largest shift was around {date}.").format(date=ctx.date(largest["study_day"])),
    ]


def _mood_table(ctx: Inputs, daily: pd.DataFrame, events: pd.DataFrame | None) -> pd.DataFrame:
    _ = ctx.gettext
    per_day: dict[pd.Timestamp, str] = {}
    if events is not None:
        for day, group in events.groupby("day", sort=True):
            per_day[pd.Timestamp(cast(Any, day))] = ", ".join(sorted(group["kind"].astype(str)))
    days = pd.to_datetime(daily["study_day"])
    return pd.DataFrame({
        _("Date"): [ctx.date_short(d) for d in days],
        _("Daily average"): [ctx.num(v) for v in daily["mean"]],
        _("Answers"): [str(int(n)) if pd.notna(n) else "" for n in daily["n"]],
        _("Events"): [per_day.get(pd.Timestamp(d).normalize(), "") for d in days],
    })


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
    # Long studies get flatter rows so the calendar stays on one page; below 28 px a row has
    # no room for the day of the month as well (the week's start date is on the axis).
    cell_w, cell_h = 72, min(32, max(18, CALENDAR_MAX_HEIGHT // len(week_names)))
    roomy = cell_h >= 28
    x = alt.X(field="weekday", type="ordinal", sort=day_names,
              scale=alt.Scale(domain=day_names, paddingInner=0.06),
              axis=alt.Axis(title=None, orient="top", labelAngle=0, domain=False, ticks=False))
    y = alt.Y(field="week", type="ordinal", sort=week_names,
              scale=alt.Scale(domain=week_names, paddingInner=0.08),
              axis=alt.Axis(title=_("Week starting"), domain=False, ticks=False))
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
    data = alt.Data(values=records(cells.assign(weekday=[day_names[i] for i in cells["wd"]])))
    spec = alt.layer(*layers, data=data).properties(width=7 * cell_w,
                                                    height=cell_h * len(week_names))
    title = _("Which prompts you answered")
    description = _calendar_description(ctx, cells)
    table = _calendar_table(ctx, cells, day_names)
    return Chart("calendar", title, description,
                 to_svg(spec, "calendar", title, description, ctx.language), table,
                 _("Prompts answered per day, by week"))


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


def _period_of(ctx: Inputs, days: pd.Series) -> list[int]:
    """The measurement period of each study day (1 when the study has one period)."""
    periods = ctx.table("descriptives", "periods")
    if periods is None:
        return [1] * len(days)
    periods = periods.sort_values("first_day")
    starts = pd.to_datetime(periods["first_day"]).to_numpy()
    place = np.searchsorted(starts, pd.to_datetime(days).to_numpy(), side="right") - 1
    labels = periods["period"].to_numpy()
    return [int(labels[max(i, 0)]) for i in place]


def _calendar_description(ctx: Inputs, cells: pd.DataFrame) -> str:
    _ = ctx.gettext
    n_days = len(cells)
    answered = int(cells["answered"].sum())
    none = int((cells["answered"] == 0).sum())
    parts = []
    if bool(cells["known"].all()):
        sent = int(cells["sent"].sum())
        full = int((cells["answered"] >= cells["sent"]).sum())
        parts.append(_("You answered {answered} of {sent} prompts ({share}) over {days} "
                       "days.").format(answered=answered, sent=sent, days=n_days,
                                       share=ctx.percent(answered / sent if sent else 0.0)))
        parts.append(_("On {full} of these days you answered every prompt.").format(full=full))
    else:
        parts.append(_("You answered {answered} prompts over {days} days.").format(
            answered=answered, days=n_days))
    if none:
        parts.append(_("On {none} days you answered none.").format(none=none))
    else:
        parts.append(_("You answered on every day."))
    return " ".join(parts)


def _calendar_table(ctx: Inputs, cells: pd.DataFrame, day_names: list[str]) -> pd.DataFrame:
    _ = ctx.gettext
    wide = cells.pivot(index="week", columns="wd", values="label")
    wide = wide.reindex(index=list(dict.fromkeys(cells["week"])), columns=range(7))
    table = wide.astype(object).fillna("").rename(columns=dict(enumerate(day_names)))
    table.columns = [str(c) for c in table.columns]
    table.index.name = None
    return table.reset_index(names=_("Week starting"))
