"""Charts of states: the mood landscape (valleys of the score density) and mood against load."""

from __future__ import annotations

import math
from typing import cast

import altair as alt
import numpy as np
import pandas as pd

from springback.charts.common import (
    Chart,
    Inputs,
    KeyItem,
    inline,
    key_spec,
)
from springback.charts.palette import CHART
from springback.charts.svg import PLOT_WIDTH, to_svg
from springback.findings import Finding
from springback.findings import topics as finding_topics

POTENTIAL_SPAN = 6.0
"""Height of the landscape shown above its deepest point: density ratios up to e^6 (~400)."""
TABLE_ROWS = 21
WEEKLY_PATH_DAYS = 21
"""From three weeks of days on, the path over time joins weekly averages instead of days."""


def landscape_chart(ctx: Inputs) -> Chart | None:
    """The quasi-potential U(x) = -ln p(x) as a landscape, with its valleys marked."""
    _ = ctx.gettext
    potential = ctx.table("landscape", "potential")
    if potential is None:
        return None
    curve = potential[["x", "potential", "density"]].astype(float)
    curve = curve[np.isfinite(curve["x"]) & np.isfinite(curve["potential"])]
    if len(curve) < 3:
        return None
    floor = float(curve["potential"].min())
    ceiling = floor + POTENTIAL_SPAN
    # Levels almost never visited rise off the top; they are left out rather than flattened.
    curve = curve[curve["potential"] <= ceiling].assign(u=lambda f: f["potential"])
    valleys = ctx.table("landscape", "valleys")
    valley_rows = _valley_rows(ctx, curve, valleys)
    low, high = ctx.scale
    bottom = floor - 0.5
    x = alt.X("x", type="quantitative",
              scale=alt.Scale(domain=[low, high], nice=False, zero=False),
              axis=alt.Axis(title=ctx.value_axis_title(), tickMinStep=1))
    y = alt.Y("u", type="quantitative",
              scale=alt.Scale(domain=[bottom, ceiling], nice=False, zero=False),
              axis=alt.Axis(title=_("Lower = more often"), labels=False, ticks=False))
    ground = alt.Chart(inline(curve[["x", "u"]]))
    layers: list[alt.Chart] = [
        ground.mark_area(color=CHART.terrain).encode(x=x, y=y, y2=alt.Y2Datum(bottom)),
        ground.mark_line(color=CHART.primary, strokeWidth=3).encode(x=x, y=y),
    ]
    if len(valley_rows):
        marked = alt.Chart(inline(valley_rows))
        layers += [
            marked.mark_point(shape="circle", filled=True, size=260, color=CHART.accent,
                              yOffset=-10, opacity=1).encode(x=x, y=y),
            marked.mark_text(dy=-42, color=CHART.ink, fontWeight="bold", lineBreak="\n",
                             baseline="bottom").encode(x=x, y=y, text=alt.Text(field="label")),
        ]
    spec = alt.layer(*layers).properties(width=PLOT_WIDTH, height=230)
    title = ctx.voice(_("Your mood landscape"), _("Mood landscape"))
    description = _landscape_description(ctx, valley_rows)
    return Chart("landscape", title, description,
                 to_svg(spec, "landscape", title, description, ctx.language),
                 _landscape_table(ctx, curve, valley_rows),
                 ctx.voice(_("How often your mood was at each level"),
                           _("How often the mood was at each level")))


def _valley_rows(ctx: Inputs, curve: pd.DataFrame, valleys: pd.DataFrame | None) -> pd.DataFrame:
    _ = ctx.gettext
    if valleys is None:
        return pd.DataFrame({"x": [], "u": [], "label": []})
    xs = sorted(float(v) for v in valleys["x"] if math.isfinite(float(v)))
    grid = curve["x"].to_numpy()
    us = [float(np.interp(v, grid, curve["u"].to_numpy())) for v in xs]
    moved = _finding(ctx, "landscape").reading == "moved_away"
    labels = [(_("where it rested\nbefore, near {x}") if moved else
               _("resting place\nnear {x}")).format(x=ctx.num(v)) for v in xs]
    return pd.DataFrame({"x": xs, "u": us, "label": labels})


def _finding(ctx: Inputs, topic: str) -> Finding:
    """The participant's finding on `topic` (the findings stage's own function when the chart
    is drawn without findings): the pictures phrase what the findings decided."""
    found = ctx.findings.get(topic) if ctx.findings is not None else None
    if found is not None:
        return found
    if topic == "load":
        alpha = float(ctx.settings.metrics.alpha)
        return finding_topics.load(ctx.results, ctx.higher_is_worse, alpha)
    return finding_topics.landscape(ctx.results)


def _landscape_description(ctx: Inputs, valley_rows: pd.DataFrame) -> str:
    _ = ctx.gettext
    xs = [ctx.num(v) for v in valley_rows["x"]]
    land = _finding(ctx, "landscape")
    if land.reading == "moved_away" and land.number("last_mean") is not None:
        text = ctx.voice(
            _("Over the study your mood most often came back to about {x}, but in the last "
              "{days} days it averaged {last}: it has moved away from that level."),
            _("Over the study the mood most often came back to about {x}, but in the last "
              "{days} days it averaged {last}: it has moved away from that level.")).format(
            x=ctx.num(land.number("valley")), days=int(land.numbers["last_days"]),
            last=ctx.num(land.number("last_mean")))
    elif len(xs) == 1:
        text = ctx.voice(_("Your mood seemed to have one resting place, near {x}."),
                         _("The mood seemed to have one resting place, near {x}.")).format(
            x=xs[0])
    elif len(xs) == 2:
        text = ctx.voice(_("Your mood seemed to have two resting places, near {a} and near {b}."),
                         _("The mood seemed to have two resting places, near {a} and near {b}.")
                         ).format(a=xs[0], b=xs[1])
        switches = ctx.estimate("landscape", "switches")
        if switches.ok:
            text += " " + _("It moved from one to the other {n} times.").format(
                n=int(cast(float, switches.value)))
    elif len(xs) > 2:
        text = ctx.voice(_("Your mood seemed to have several resting places, near {places}."),
                         _("The mood seemed to have several resting places, near {places}.")
                         ).format(places=", ".join(xs))
    else:
        text = ctx.voice(_("Your mood had no clear resting place."),
                         _("The mood had no clear resting place."))
    return text + " " + ctx.voice(
        _("The lower the line, the more often your mood was at that level."),
        _("The lower the line, the more often the mood was at that level."))


def _landscape_table(ctx: Inputs, curve: pd.DataFrame, valley_rows: pd.DataFrame
                     ) -> pd.DataFrame:
    _ = ctx.gettext
    picks = np.unique(np.linspace(0, len(curve) - 1, TABLE_ROWS).round().astype(int))
    rows = curve.iloc[picks]
    top = float(curve["density"].max()) or 1.0
    near = set()
    for v in valley_rows["x"]:
        near.add(int(np.abs(rows["x"].to_numpy() - v).argmin()))
    return pd.DataFrame({
        _("Mood level"): [ctx.num(v) for v in rows["x"]],
        _("How often (most often = 100)"): [ctx.num(100 * d / top, 0) for d in rows["density"]],
        _("Resting place"): [_("yes") if i in near else "" for i in range(len(rows))],
    })


def load_chart(ctx: Inputs) -> Chart | None:
    """Mood against load: days as dots, the path over time joined in order (loops show)."""
    _ = ctx.gettext
    load = ctx.table("landscape", "load")
    if load is None:
        return None
    load = load.dropna(subset=["load", "mood"]).sort_values("study_day").reset_index(drop=True)
    if len(load) < 3:
        return None
    days = pd.to_datetime(load["study_day"])
    daily = pd.DataFrame({"load": load["load"].astype(float), "mood": load["mood"].astype(float)})
    weekly = len(load) >= WEEKLY_PATH_DAYS
    if weekly:
        # Day-to-day noise hides a loop; weekly averages keep the path readable.
        block = ((days - days.iloc[0]).dt.days // 7).to_numpy()
        path = daily.groupby(block).mean().reset_index(drop=True)
        starts = days.groupby(block).min().reset_index(drop=True)
    else:
        path, starts = daily, days
    names = [_("first third"), _("middle third"), _("last third")]
    part = np.empty(len(path), dtype=object)
    for name, idx in zip(names, np.array_split(np.arange(len(path)), 3), strict=True):
        part[idx] = name
    shapes = dict(zip(names, ("circle", "square", "triangle-up"), strict=True))
    path = path.assign(order=np.arange(len(path)), part=part,
                       shape=[shapes[p] for p in part])
    ends = path.iloc[[0, -1]].assign(label=[
        _("start, {date}").format(date=ctx.date(starts.iloc[0])),
        _("end, {date}").format(date=ctx.date(days.iloc[-1]))])
    load_name = _load_label(ctx)
    low, high = ctx.scale
    counts = bool(np.all(np.mod(daily["load"], 1) == 0))
    x = alt.X("load", type="quantitative", scale=alt.Scale(zero=False, nice=True, padding=12),
              axis=alt.Axis(title=load_name, tickMinStep=1, format="d") if counts
              else alt.Axis(title=load_name))
    y = alt.Y("mood", type="quantitative",
              scale=alt.Scale(domain=[low, high], nice=False, zero=False),
              axis=alt.Axis(title=ctx.value_axis_title()))
    layers: list[alt.Chart] = []
    key: list[KeyItem] = []
    if weekly:
        layers.append(alt.Chart(inline(daily))
                      .mark_point(shape="circle", filled=False, size=24, color=CHART.neutral,
                                  strokeWidth=1)
                      .encode(x=x, y=y))
        key.append(KeyItem(_("one day"), CHART.neutral, kind="point", filled=False))
    key.append(KeyItem(_("weekly averages, joined in time order") if weekly
                       else _("days, joined in time order"), CHART.primary))
    key += [KeyItem(name, CHART.primary, kind="point", shape=shapes[name]) for name in names]
    steps = alt.Chart(inline(path))
    label = alt.Text(field="label")
    layers += [
        steps.mark_line(color=CHART.primary, strokeWidth=2)
        .encode(x=x, y=y, order=alt.Order("order", type="quantitative")),
        steps.mark_point(filled=True, size=80, color=CHART.primary, opacity=1)
        .encode(x=x, y=y, shape=alt.Shape("shape", type="nominal", scale=None)),
        # The start label sits below its point and the end label above, so they do not meet.
        alt.Chart(inline(ends.iloc[[0]]))
        .mark_text(dy=10, baseline="top", align="left", dx=6, color=CHART.ink,
                   fontWeight="bold")
        .encode(x=x, y=y, text=label),
        alt.Chart(inline(ends.iloc[[1]]))
        .mark_text(dy=-10, baseline="bottom", align="left", dx=6, color=CHART.ink,
                   fontWeight="bold")
        .encode(x=x, y=y, text=label),
    ]
    plot = alt.layer(*layers).properties(width=PLOT_WIDTH, height=300)
    spec = alt.vconcat(key_spec(key, PLOT_WIDTH), plot, spacing=10)
    title = ctx.voice(_("Your mood and your daily load"), _("Mood and daily load"))
    description = _load_description(ctx)
    table = pd.DataFrame({
        _("Date"): [ctx.date_short(d) for d in days],
        _("Load"): [ctx.num(v) for v in daily["load"]],
        _("Daily average"): [ctx.num(v) for v in daily["mood"]],
    })
    return Chart("load", title, description,
                 to_svg(spec, "load", title, description, ctx.language), table,
                 _("Daily load and daily average mood"))


def _load_label(ctx: Inputs) -> str:
    _ = ctx.gettext
    source = ctx.settings.events.daily_load
    if source == "events" or source is None:
        return _("Upsetting events that day")
    return _("{label} (daily average)").format(label=ctx.settings.label_of(source, ctx.language))


def _load_description(ctx: Inputs) -> str:
    _ = ctx.gettext
    # The load finding: Spearman's rank correlation of daily load and mood (Spearman 1904).
    found = _finding(ctx, "load")
    rho = ctx.num(found.number("rho"), 2)
    if found.reading == "worse_with_load":
        text = ctx.voice(_("On days with more load your mood tended to be worse (rank "
                           "correlation {rho})."),
                         _("On days with more load the mood tended to be worse (rank "
                           "correlation {rho}).")).format(rho=rho)
    elif found.reading == "better_with_load":
        text = ctx.voice(_("On days with more load your mood tended to be better (rank "
                           "correlation {rho})."),
                         _("On days with more load the mood tended to be better (rank "
                           "correlation {rho}).")).format(rho=rho)
    else:
        text = ctx.voice(
            _("Your mood was about the same on days with more and with less load."),
            _("The mood was about the same on days with more and with less load."))
    if found.certainty == "some_signs":
        text += " " + _("This could be chance.")
    return text + " " + ctx.voice(
        _("The line follows the study in time order, so a loop shows when your mood came back "
          "along a different path than it went."),
        _("The line follows the study in time order, so a loop shows when the mood came back "
          "along a different path than it went."))
