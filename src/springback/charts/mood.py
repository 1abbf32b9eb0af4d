"""Mood over time: answers, daily averages, the typical range, events and shifts."""

from __future__ import annotations

import math
from collections.abc import Callable
from functools import partial
from typing import Any, cast

import altair as alt
import numpy as np
import pandas as pd
from babel.lists import format_list

from springback.charts.common import (
    Chart,
    Inputs,
    KeyItem,
    TimeAxis,
    day_noon_ms,
    inline,
    key_spec,
    time_axis,
)
from springback.charts.palette import CHART
from springback.charts.panels import Panel, panel_axes, panel_of, period_panels, side_by_side
from springback.charts.svg import PLOT_WIDTH, to_svg

EVENT_SHAPES = ("triangle-down", "diamond", "square", "cross", "triangle-up")
"""One shape per event kind (answers are circles); further kinds share the last shape."""
HEIGHT = 260
MAX_SHIFT_LABELS = 3


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
    answers = pd.DataFrame({"t": ctx.ms(series["local_time"]), "v": series["value"]})
    means = pd.DataFrame({"t": day_noon_ms(ctx, daily["study_day"]), "v": daily["mean"],
                          "p": _period_of(ctx, daily["study_day"])})
    times = np.concatenate([answers["t"], means["t"]])
    panels = period_panels(ctx)  # two or more measurement periods: one panel each
    views = [(time_axis(ctx, _("Date"), times), PLOT_WIDTH)] if panels is None else \
        panel_axes(ctx, _("Date"), panels, times, PLOT_WIDTH)

    def pick(frame: pd.DataFrame, i: int) -> pd.DataFrame:
        return frame if panels is None else frame[panel_of(panels, frame["t"]) == i]

    key = [KeyItem(_("daily average"), CHART.primary, width=3),
           KeyItem(_("single answers"), CHART.neutral, kind="point", filled=False)]
    typical = (ctx.param("descriptives", "typical_low"), ctx.param("descriptives", "typical_high"))
    band = all(v is not None and math.isfinite(v) for v in typical)
    if band:
        key.append(KeyItem(ctx.voice(_("your typical range"), _("typical range")), CHART.band,
                           kind="box", edge=CHART.neutral))
    if _shown_shifts(ctx) is not None:
        key += [KeyItem(_("detected shift"), CHART.highlight, dash=(2, 3), width=2),
                KeyItem(_("level before and after a shift"), CHART.highlight, dash=(8, 4))]
    shown: list[pd.DataFrame] = []
    events = _events(ctx)
    if events is not None:
        for i, (x, _w) in enumerate(views):
            inside = pick(events, i)
            shown.append(inside[(inside["t"] >= x.first) & (inside["t"] < x.last)])
        events = pd.concat(shown)
    n_events = 0 if events is None else len(events)
    shapes: dict[str, str] = {}
    if events is not None and n_events:
        kinds = list(dict.fromkeys(sorted(events["kind"])))
        shapes = dict(zip(kinds, EVENT_SHAPES, strict=False))
        key += [KeyItem(_("event: {kind}").format(kind=k), CHART.accent, kind="point",
                        shape=shapes[k]) for k in kinds]
    plots = []
    for i, (x, width) in enumerate(views):
        y = _value_axis(ctx, low, high, labels=i == 0)
        layers: list[alt.Chart] = []
        if band:
            layers += _band_layers(float(typical[0]), float(typical[1]), y)
        layers.append(
            alt.Chart(inline(pick(answers, i)))
            .mark_point(shape="circle", filled=False, size=22, color=CHART.neutral,
                        strokeWidth=1)
            .encode(x=x.x("t"), y=y("v")))
        layers += _shift_layers(ctx, x, y, partial(pick, i=i))
        layers.append(
            alt.Chart(inline(pick(means, i)))
            .mark_line(color=CHART.primary, strokeWidth=3,
                       point=alt.OverlayMarkDef(filled=True, size=24, color=CHART.primary))
            .encode(x=x.x("t"), y=y("v"),
                    detail=alt.Detail(field="p", type="nominal")))  # no line across a gap
        if shown and len(shown[i]):
            here = shown[i]
            here = here.assign(shape=[shapes.get(k, EVENT_SHAPES[-1]) for k in here["kind"]])
            layers.append(
                alt.Chart(inline(here[["t", "kind", "shape"]]))
                .mark_point(filled=True, size=90, color=CHART.accent, opacity=1)
                .encode(x=x.x("t"), y=alt.YValue(8),
                        shape=alt.Shape(field="shape", type="nominal", scale=None)))
        plots.append(alt.layer(*layers).properties(width=width, height=HEIGHT))
    plot = plots[0] if panels is None else side_by_side(panels, plots, HEIGHT)
    spec = alt.vconcat(key_spec(key, PLOT_WIDTH), plot, spacing=10)
    title = ctx.voice(_("Your mood over time"), _("Mood over time"))
    description = _mood_description(ctx, series, daily, n_events, panels)
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


def _value_axis(ctx: Inputs, low: float, high: float, *, labels: bool = True
                ) -> Callable[[str], alt.Y]:
    """The y encoding of a field on the mood scale, titled with the variable and its worse end
    (without `labels`: the bare axis line of a later period's panel)."""
    scale = alt.Scale(domain=[low, high], nice=False, zero=False)
    axis = alt.Axis(title=ctx.value_axis_title(), tickMinStep=1) if labels else \
        alt.Axis(title=None, labels=False, ticks=False)

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


def _shift_layers(ctx: Inputs, x: TimeAxis, y: Callable[[str], alt.Y],
                  pick: Callable[[pd.DataFrame], pd.DataFrame]) -> list[alt.Chart]:
    """Detected shifts: dashed rules with a written direction, and the segment levels (those
    `pick` keeps: a panel's own)."""
    _ = ctx.gettext
    points = _shown_shifts(ctx)
    if points is None:
        return []
    words = {"worse": _("shift: worse"), "better": _("shift: better")}
    marks = pd.DataFrame({
        "t": ctx.ms(pd.to_datetime(points["study_day"])),
        "label": [words.get(str(d), str(d)) for d in points["direction"]],
    })
    labelled = len(marks) <= MAX_SHIFT_LABELS  # more would overlap; the key names them
    marks = pick(marks)
    layers = [
        alt.Chart(inline(marks))
        .mark_rule(color=CHART.highlight, strokeWidth=2, strokeDash=[2, 3])
        .encode(x=x.x("t")),
    ]
    if labelled:
        layers.append(
            alt.Chart(inline(marks))
            .mark_text(align="left", dx=4, color=CHART.ink)
            .encode(x=x.x("t"), y=alt.YValue(26), text=alt.Text(field="label")))
    levels = ctx.table("shifts", "daily")
    if levels is not None and "level" in levels.columns:
        # Each level holds from the start of its day; the last one to the end of its day.
        starts = ctx.ms(pd.to_datetime(levels["study_day"]))
        period = _period_of(ctx, levels["study_day"])
        steps = pd.DataFrame({"t": np.append(starts, starts[-1] + 86_400_000),
                              "v": np.append(levels["level"].to_numpy(dtype=float),
                                             float(levels["level"].iloc[-1])),
                              "p": [*period, period[-1]]}).dropna()
        layers.append(
            alt.Chart(inline(pick(steps)))
            .mark_line(interpolate="step-after", color=CHART.highlight, strokeWidth=2,
                       strokeDash=[8, 4])
            .encode(x=x.x("t"), y=y("v"),
                    detail=alt.Detail(field="p", type="nominal")))  # no step across a gap
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
                      n_events: int, panels: list[Panel] | None) -> str:
    _ = ctx.gettext
    values = series["value"].to_numpy(dtype=float)
    parts = _composite_sentences(ctx)
    parts.append(ctx.voice(_("Your answers ranged from {low} to {high}."),
                           _("The answers ranged from {low} to {high}.")).format(
        low=ctx.num(values.min()), high=ctx.num(values.max())))
    lo, hi = ctx.param("descriptives", "typical_low"), ctx.param("descriptives", "typical_high")
    if lo is not None and hi is not None and math.isfinite(lo) and math.isfinite(hi):
        parts.append(ctx.voice(_("Half of them were between {low} and {high}: your typical range."),
                               _("Half of them were between {low} and {high}: the typical range.")
                               ).format(low=ctx.num(lo), high=ctx.num(hi)))
    parts += [p.gap_sentence for p in panels or [] if p.gap_sentence]  # drawn side by side
    means = daily["mean"].to_numpy(dtype=float)
    if len(means) >= 14:
        first, last = float(np.mean(means[:7])), float(np.mean(means[-7:]))
        parts.append(ctx.voice(_("Your daily average was {first} in the first week and {last} "
                                 "in the last week."),
                               _("The daily average was {first} in the first week and {last} "
                                 "in the last week.")).format(first=ctx.num(first),
                                                               last=ctx.num(last)))
    parts += _course_sentences(ctx)
    parts += _shift_sentences(ctx)
    if n_events:
        parts.append(ctx.voice(_("Events you reported are marked at the top ({n} in all)."),
                               _("Events the participant reported are marked at the top "
                                 "({n} in all).")).format(n=n_events))
    return " ".join(parts)


def _composite_sentences(ctx: Inputs) -> list[str]:
    """Which items the composite score averages (reverse-scored ones named apart)."""
    _ = ctx.gettext
    composite = ctx.settings.composites.get(ctx.variable)
    if composite is None:
        return []
    straight = [i for i in composite.items if not _reversed(ctx, i)]
    turned = [i for i in composite.items if _reversed(ctx, i)]

    def names(items: list[str]) -> str:
        return format_list([ctx.settings.label_of(i, ctx.language) for i in items],
                           locale=ctx.locale)

    label = ctx.label[:1].upper() + ctx.label[1:]
    if not turned:
        return [ctx.voice(_("{label} is the average of your answers to {items}."),
                          _("{label} is the average of the answers to {items}.")).format(
            label=label, items=names(straight))]
    if not straight:
        return [ctx.voice(_("{label} is the average of your answers to {items}, counted the "
                            "other way round."),
                          _("{label} is the average of the answers to {items}, counted the "
                            "other way round.")).format(label=label, items=names(turned))]
    return [ctx.voice(_("{label} is the average of your answers to {items} and to {reversed}, "
                        "counted the other way round."),
                      _("{label} is the average of the answers to {items} and to {reversed}, "
                        "counted the other way round.")).format(
        label=label, items=names(straight), reversed=names(turned))]


def _reversed(ctx: Inputs, item: str) -> bool:
    spec = ctx.settings.items.get(item)
    return bool(spec is not None and spec.reverse)


def _course_sentences(ctx: Inputs) -> list[str]:
    """The course reading of the findings in words (an abrupt shift: `_shift_sentences`)."""
    _ = ctx.gettext
    course = None if ctx.findings is None else ctx.findings.get("course")
    if course is None:
        return []
    worse = course.numbers.get("direction") == "worse"
    # The booklet's own sentences for these readings (templates/_findings.html).
    if course.reading == "gradual_change":
        if worse:
            return [ctx.voice(_("Over the study, your mood slowly got worse."),
                              _("Over the study, the mood slowly got worse."))]
        return [ctx.voice(_("Over the study, your mood slowly got better."),
                          _("Over the study, the mood slowly got better."))]
    if course.reading == "passing_episode":
        if worse:
            return [ctx.voice(_("For a while your mood was worse than usual, and then it came "
                                "back."),
                              _("For a while the mood was worse than usual, and then it came "
                                "back."))]
        return [ctx.voice(_("For a while your mood was better than usual, and then it came "
                            "back."),
                          _("For a while the mood was better than usual, and then it came "
                            "back."))]
    if course.reading == "switching":
        return [ctx.voice(_("Your mood moved back and forth between two levels."),
                          _("The mood moved back and forth between two levels."))]
    if course.reading == "no_clear_change":
        return [ctx.voice(_("We found no clear lasting change in your mood during the study."),
                          _("We found no clear lasting change in the mood during the study."))]
    return []


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
    worse = ctx.voice(_("Around {date} your mood seemed to shift to feeling worse."),
                      _("Around {date} the mood seemed to shift for the worse."))
    better = ctx.voice(_("Around {date} your mood seemed to shift to feeling better."),
                       _("Around {date} the mood seemed to shift for the better."))
    if len(points) <= 2:
        return [(worse if row.direction == "worse" else better).format(date=ctx.date(row.study_day))
                for row in points.itertuples()]
    n_worse = int((points["direction"] == "worse").sum())
    largest = points.loc[cast(Any, points["size"].abs().idxmax())]
    return [
        ctx.voice(_("Your mood seemed to shift {n} times: {worse} times to feeling worse and "
                    "{better} times to feeling better."),
                  _("The mood seemed to shift {n} times: {worse} times for the worse and "
                    "{better} times for the better.")).format(n=len(points), worse=n_worse,
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
