"""Charts of change: recovery after dips and events, rolling indicators, the sensitivity grid."""

from __future__ import annotations

import math
from typing import Any, cast

import altair as alt
import numpy as np
import pandas as pd
from scipy import stats

from springback.charts.common import (
    Chart,
    Inputs,
    KeyItem,
    day_noon_ms,
    inline,
    key_spec,
    time_axis,
)
from springback.charts.palette import CHART, DIVERGING, readable_text_on
from springback.charts.panels import panel_axes, panel_of, period_panels, side_by_side
from springback.charts.svg import PLOT_WIDTH, to_svg
from springback.findings.warning import agreeing_cells, grid_agreement, study_trends

SOLID, DASHED = [1, 0], [5, 4]


def recovery_chart(ctx: Inputs) -> Chart | None:
    """Episodes aligned at their start, with the pooled fitted return curve."""
    _ = ctx.gettext
    aligned = ctx.table("recovery", "aligned")
    episodes = ctx.table("recovery", "episodes")
    if aligned is None or episodes is None:
        return None
    aligned = aligned.dropna(subset=["hours", "deviation"])
    if aligned.empty:
        return None
    censored = dict(zip(episodes["episode"], episodes["censored"].astype(bool), strict=True))
    back, not_back = _("got back to usual"), _("not back before night or the end")
    lines = aligned.assign(status=[not_back if censored.get(e, False) else back
                                   for e in aligned["episode"]])
    top = float(max(lines["deviation"].max(), 0.0))
    bottom = float(min(lines["deviation"].min(), 0.0)) - 0.12 * (top or 1.0)

    def x(field: str) -> alt.X:
        return alt.X(field, type="quantitative",
                     axis=alt.Axis(title=_("Hours after the dip or event"), tickMinStep=1,
                                   labelOverlap=True),
                     scale=alt.Scale(zero=True, nice=True))

    def y(field: str) -> alt.Y:
        return alt.Y(field, type="quantitative",
                     scale=alt.Scale(domain=[bottom, top * 1.05], nice=False),
                     axis=alt.Axis(title=ctx.voice(
                         _("Distance from your usual level (higher = worse)"),
                         _("Distance from the usual level (higher = worse)"))))

    usual = alt.Data(values=[{"y": 0.0, "label": ctx.voice(_("your usual level"),
                                                           _("usual level"))}])
    layers: list[alt.Chart] = [
        alt.Chart(usual).mark_rule(color=CHART.axis, strokeWidth=1.5).encode(y=y("y")),
        alt.Chart(usual).mark_text(align="right", baseline="top", dy=4, color=CHART.ink)
        .encode(x=alt.XValue(PLOT_WIDTH), y=y("y"), text=alt.Text(field="label")),
        alt.Chart(inline(lines[["episode", "hours", "deviation", "status"]]))
        .mark_line(color=CHART.neutral, strokeWidth=1.4)
        .encode(x=x("hours"), y=y("deviation"), detail=alt.Detail("episode", type="nominal"),
                strokeDash=alt.StrokeDash("status", type="nominal",
                                          scale=alt.Scale(domain=[back, not_back],
                                                          range=[SOLID, DASHED]),
                                          legend=None)),
    ]
    key = [KeyItem(_("one time: got back to usual"), CHART.neutral, width=1.5),
           KeyItem(_("one time: not back before night or the end"), CHART.neutral,
                   dash=tuple(DASHED), width=1.5)]
    fit = ctx.table("recovery", "fit")
    if fit is not None:
        layers.append(alt.Chart(inline(fit[["hours", "deviation"]].dropna()))
                      .mark_line(color=CHART.accent, strokeWidth=3.5)
                      .encode(x=x("hours"), y=y("deviation")))
        key.insert(0, KeyItem(_("typical way back (fitted curve)"), CHART.accent, width=3.5))
    plot = alt.layer(*layers).properties(width=PLOT_WIDTH, height=240)
    spec = alt.vconcat(key_spec(key, PLOT_WIDTH), plot, spacing=10)
    title = _("Bouncing back after dips and events")
    description = _recovery_description(ctx, episodes)
    return Chart("recovery", title, description,
                 to_svg(spec, "recovery", title, description, ctx.language),
                 _recovery_table(ctx, episodes), _("Each dip or event and how long it lasted"))


def _recovery_description(ctx: Inputs, episodes: pd.DataFrame) -> str:
    _ = ctx.gettext
    n = len(episodes)
    n_back = int((~episodes["censored"].astype(bool)).sum())
    parts = [ctx.voice(_("We found {n} times when your mood dipped or an upsetting event "
                         "happened. In {back} of them your mood got back to your usual level "
                         "before night or the end of the study."),
                       _("We found {n} times when the mood dipped or an upsetting event "
                         "happened. In {back} of them the mood got back to its usual level "
                         "before night or the end of the study.")).format(n=n, back=n_back)]
    # One time only, the one the booklet's sentence gives (the pooled half-life).
    half = ctx.estimate("recovery", "recovery_half_life_hours")
    if half.ok:
        parts.append(_("The fitted curve is half-way back after {time}.").format(
            time=ctx.hours_words(float(cast(float, half.value)))))
    else:
        parts.append(_("There were too few of these times to fit a curve."))
    return " ".join(parts)


def _recovery_table(ctx: Inputs, episodes: pd.DataFrame) -> pd.DataFrame:
    _ = ctx.gettext
    reasons = {"night": _("not back before night"), "end": _("not back before the end"),
               "next event": _("next event came first")}
    starts = ctx.wall_clock(episodes["start"])
    what = [(ctx.settings.event_label(k, ctx.language) if t == "event" and isinstance(k, str)
             and k else _("a dip"))
            for t, k in zip(episodes["trigger"], episodes["kind"], strict=True)]
    hours = [reasons.get(str(r), _("not back")) if bool(c) else ctx.num(h)
             for h, c, r in zip(episodes["hours_to_baseline"], episodes["censored"],
                                episodes["censored_by"], strict=True)]
    return pd.DataFrame({
        _("Start"): [f"{ctx.date_short(s)} {ctx.time_of_day(s)}" for s in starts],
        _("What happened"): what,
        _("How far from usual"): [ctx.num(d) for d in episodes["depth"]],
        _("Hours to get back"): hours,
    })


INDICATORS = (("ar1", "warning_tau_inertia", "primary"),
              ("variance", "warning_tau_variance", "secondary"))


def _daily_last(ctx: Inputs, rolling: pd.DataFrame, column: str) -> pd.DataFrame:
    """The last window ending on each day (a daily series is enough to see a trend)."""
    wall = ctx.wall_clock(rolling["local_time"])
    frame = pd.DataFrame({"day": wall.dt.normalize(), "v": rolling[column].to_numpy()})
    return frame.dropna().groupby("day", sort=True).last().reset_index()


def warnings_chart(ctx: Inputs) -> Chart | None:
    """Rolling carry-over and variance, each with its Theil–Sen trend line and Kendall's tau."""
    _ = ctx.gettext
    rolling = ctx.table("warnings", "rolling")
    if rolling is None:
        return None
    names = {"ar1": _("Carry-over (lag-1 autocorrelation)"),
             "variance": _("Ups and downs (variance)")}
    found: dict[str, pd.DataFrame] = {}
    shown: list[tuple[str, str, str]] = []
    for column, measure, colour in INDICATORS:
        if column not in rolling.columns:
            continue
        daily = _daily_last(ctx, rolling, column)
        if len(daily) < 2:
            continue
        found[column] = daily
        shown.append((column, measure, getattr(CHART, colour)))
    if not shown:
        return None
    # Only the lowest panel names the date axis.
    panels = [_indicator_panel(ctx, found[column], names[column], measure, colour,
                               dated=i == len(shown) - 1)
              for i, (column, measure, colour) in enumerate(shown)]
    spec = alt.vconcat(*panels, spacing=18)
    title = _("How the indicators changed over the study")
    first = min(pd.Timestamp(d["day"].min()) for d in found.values())
    description = _warnings_description(ctx, first)
    table = _warnings_table(ctx, found)
    return Chart("warnings", title, description,
                 to_svg(spec, "warnings", title, description, ctx.language), table,
                 _("Indicator values at the end of each day"))


def _indicator_panel(ctx: Inputs, daily: pd.DataFrame, name: str, measure: str,
                     colour: str, *, dated: bool) -> alt.LayerChart | alt.HConcatChart:
    _ = ctx.gettext
    t = day_noon_ms(ctx, daily["day"])
    frame = pd.DataFrame({"t": t, "v": daily["v"].to_numpy()})
    # Theil–Sen slope (Sen 1968): the rank-based line that goes with Kendall's tau.
    slope, intercept, _lo, _hi = stats.theilslopes(frame["v"], (t - t[0]) / 86_400_000)

    def trend(at: np.ndarray) -> pd.DataFrame:
        return pd.DataFrame({"t": at, "v": intercept + slope * (at - t[0]) / 86_400_000})

    tau = ctx.estimate("warnings", measure)
    note = (_("dashed line: trend; Kendall's tau {tau}").format(
                tau=ctx.num(float(cast(float, tau.value)), 2))
            if tau.ok else _("dashed line: trend; Kendall's tau not computed"))
    title = alt.TitleParams(name, subtitle=note, subtitleColor=CHART.ink, subtitleFontSize=13)
    periods = period_panels(ctx)
    if periods is None:
        x = time_axis(ctx, _("Date"), t).x("t", show_title=dated)
        y = alt.Y("v", type="quantitative", scale=alt.Scale(zero=False),
                  axis=alt.Axis(title=None))
        return _indicator_layers(frame, trend(np.array([t[0], t[-1]])), x, y, colour
                                 ).properties(title=title, width=PLOT_WIDTH, height=120)
    # One panel per measurement period on one value scale; the one trend line in pieces.
    where = panel_of(periods, t)
    pieces = [trend(np.array([t[where == i][0], t[where == i][-1]])) if (where == i).any()
              else trend(np.array([], dtype=np.int64)) for i in range(len(periods))]
    values = np.concatenate([frame["v"].to_numpy(float), *(p["v"].to_numpy() for p in pieces)])
    scale = alt.Scale(domain=[float(np.nanmin(values)), float(np.nanmax(values))], zero=False)
    plots: list[alt.LayerChart | alt.FacetChart] = []
    for i, (axis, width) in enumerate(panel_axes(ctx, _("Date"), periods, t, PLOT_WIDTH)):
        y = alt.Y("v", type="quantitative", scale=scale,
                  axis=alt.Axis(title=None) if i == 0 else
                  alt.Axis(title=None, labels=False, ticks=False))
        plots.append(_indicator_layers(frame[where == i], pieces[i],
                                       axis.x("t", show_title=dated), y, colour
                                       ).properties(width=width, height=120))
    return side_by_side(periods, plots, 120).properties(title=title)


def _indicator_layers(frame: pd.DataFrame, ends: pd.DataFrame, x: alt.X, y: alt.Y,
                      colour: str) -> alt.LayerChart:
    """An indicator's daily values and its dashed trend line on one date axis."""
    return alt.LayerChart(layer=[
        alt.Chart(inline(frame))
        .mark_line(color=colour, strokeWidth=2.5).encode(x=x, y=y),
        alt.Chart(inline(ends))
        .mark_line(color=CHART.axis, strokeWidth=2, strokeDash=[6, 4]).encode(x=x, y=y),
    ])


def _warning_numbers(ctx: Inputs) -> dict[str, Any]:
    """The warning finding's numbers (the findings stage's own functions when the chart is
    drawn without findings): the pictures phrase what the findings decided."""
    warn = ctx.findings.get("warning") if ctx.findings is not None else None
    if warn is not None:
        return dict(warn.numbers)
    alpha = float(ctx.param("warnings", "alpha", ctx.settings.metrics.alpha))
    return {"data": "all data", "alpha": alpha, **study_trends(ctx.family("warnings")),
            **grid_agreement(ctx.table("warnings", "grid"), alpha)}


def _trend_words(ctx: Inputs, code: str) -> str:
    """The words of a trend code of springback.findings.warning.trend_code."""
    _ = ctx.gettext
    return {"rose": _("rose"), "rose_slightly": _("rose slightly"),
            "about_same": _("stayed about the same"), "fell_slightly": _("fell slightly"),
            "fell": _("fell")}.get(code, _("could not be judged"))


def _warnings_description(ctx: Inputs, first: pd.Timestamp) -> str:
    _ = ctx.gettext
    numbers = _warning_numbers(ctx)
    parts = [
        # Why the lines start after the study does: each point needs a full window first.
        _("Each point sums up the last {share} of the answers of its measurement period, so "
          "the lines begin on {day}, once the first such stretch is complete.").format(
            share=ctx.percent(float(ctx.settings.metrics.window)),
            day=ctx.date(first)),
        _("Carry-over from one moment to the next {change} over the study.").format(
            change=_trend_words(ctx, str(numbers.get("study_trend_inertia")))),
        ctx.voice(_("The size of your ups and downs {change}."),
                  _("The size of the ups and downs {change}.")).format(
            change=_trend_words(ctx, str(numbers.get("study_trend_variance")))),
        _("The dashed lines show the overall trend. Such changes often come and go without "
          "any shift in mood, so they are not a prediction."),
    ]
    parts += [p.gap_sentence for p in period_panels(ctx) or [] if p.gap_sentence]
    return " ".join(parts)


def _warnings_table(ctx: Inputs, found: dict[str, pd.DataFrame]) -> pd.DataFrame:
    _ = ctx.gettext
    headers = {"ar1": _("Carry-over"), "variance": _("Variance")}
    merged: pd.DataFrame | None = None
    for column, daily in found.items():
        part = daily.rename(columns={"v": column})
        merged = part if merged is None else merged.merge(part, on="day", how="outer")
    assert merged is not None
    merged = merged.sort_values("day")
    out = {_("Date"): [ctx.date_short(d) for d in merged["day"]]}
    for column in found:
        out[headers[column]] = [ctx.num(v, 2) for v in merged[column]]
    return pd.DataFrame(out)


def _tau_fill(tau: float) -> str:
    """The diverging fill for a tau value (the value itself is written in the cell)."""
    if not math.isfinite(tau):
        return CHART.background
    edges = (-0.5, -0.1, 0.1, 0.5)
    return DIVERGING[int(np.searchsorted(edges, tau, side="right"))]


def grid_chart(ctx: Inputs) -> Chart | None:
    """Kendall's tau of both indicators for every window and smoothing bandwidth tried."""
    _ = ctx.gettext
    numbers = _warning_numbers(ctx)
    # The grid of the answers the warning reading rests on (the lead-up before a shift).
    family = "warnings_leadup" if numbers.get("data") == "lead-up" else "warnings"
    grid = ctx.table(family, "grid")
    if grid is None:
        return None
    windows = sorted(grid["window"].unique())
    bands = sorted(grid["bandwidth_days"].unique())
    window_names = {w: ctx.percent(float(w)) for w in windows}
    band_names = {b: ctx.num(float(b), 0 if float(b).is_integer() else 1) for b in bands}
    panels: list[alt.LayerChart] = []
    names = {"inertia": _("Carry-over"), "variance": _("Variance")}
    # Two panels side by side while five windows fit; more windows stack them.
    side_by_side = len(windows) <= 5
    cell_w = 46 if side_by_side else min(46, (PLOT_WIDTH - 40) // len(windows))
    # A star marks a cell the warning finding counts as agreeing with a rise.
    starred = agreeing_cells(grid, float(numbers.get("alpha", ctx.settings.metrics.alpha)))
    for which in ("inertia", "variance"):
        tau = grid[f"tau_{which}"].astype(float)
        fills = [_tau_fill(v) for v in tau]
        cells = pd.DataFrame({
            "w": [window_names[w] for w in grid["window"]],
            "b": [band_names[b] for b in grid["bandwidth_days"]],
            "label": [ctx.num(v, 2) + ("*" if agrees else "") if math.isfinite(v) else "–"
                      for v, agrees in zip(tau, starred[which], strict=True)],
            "fill": fills, "ink": [readable_text_on(f) for f in fills],
        })
        x = alt.X("w", type="ordinal", sort=list(window_names.values()),
                  axis=alt.Axis(title=_("Window (share of prompts)"), labelAngle=0))
        y = alt.Y("b", type="ordinal", sort=list(band_names.values()),
                  axis=alt.Axis(title=_("Smoothing (days)") if not (panels and side_by_side)
                                else None))
        base = alt.Chart(inline(cells))
        panels.append(alt.LayerChart(layer=[
            base.mark_rect(stroke=CHART.neutral, strokeWidth=1)
            .encode(x=x, y=y, fill=alt.Fill("fill", type="nominal", scale=None)),
            base.mark_text(fontSize=13)
            .encode(x=x, y=y, text=alt.Text(field="label"),
                    fill=alt.Fill("ink", type="nominal", scale=None)),
        ]).properties(title=names[which], width=cell_w * len(windows), height=30 * len(bands)))
    spec = (alt.hconcat(*panels, spacing=24) if side_by_side
            else alt.vconcat(*panels, spacing=24))
    title = _("How much the trends depend on the analysis choices")
    description = _grid_description(ctx, numbers)
    return Chart("grid", title, description,
                 to_svg(spec, "grid", title, description, ctx.language),
                 _grid_table(ctx, grid, window_names, band_names),
                 _("Kendall's tau and p-value for each window and smoothing"))


def _grid_description(ctx: Inputs, numbers: dict[str, Any]) -> str:
    """The grid's agreement as the warning finding counted it (springback.findings.warning)."""
    _ = ctx.gettext
    alpha = ctx.num(float(numbers.get("alpha", ctx.settings.metrics.alpha)), 2)
    parts = [_("Numbers are Kendall's tau of each indicator over time; above 0 means rising. "
               "A star marks a rise with a Holm-adjusted p below {alpha}.").format(alpha=alpha)]
    if numbers.get("data") == "lead-up" and numbers.get("shift_date"):
        parts.append(_("These analyses use the answers before {date} only, the lead-up to "
                       "the shift.").format(date=ctx.date(numbers["shift_date"])))
    n = numbers.get("grid_cells")
    if n:
        for which, text in (
            ("inertia", _("Carry-over rose in {up} of {n} analyses, and in {sig} of them with "
                          "a Holm-adjusted p below {alpha}.")),
            ("variance", _("Variance rose in {up} of {n} analyses, and in {sig} of them with a "
                           "Holm-adjusted p below {alpha}.")),
        ):
            parts.append(text.format(up=numbers.get(f"grid_up_{which}", 0), n=n,
                                     sig=numbers.get(f"grid_rose_{which}", 0), alpha=alpha))
    return " ".join(parts)


def _grid_table(ctx: Inputs, grid: pd.DataFrame, window_names: dict[Any, str],
                band_names: dict[Any, str]) -> pd.DataFrame:
    _ = ctx.gettext
    ordered = grid.sort_values(["window", "bandwidth_days"])
    return pd.DataFrame({
        _("Window"): [window_names[w] for w in ordered["window"]],
        _("Smoothing (days)"): [band_names[b] for b in ordered["bandwidth_days"]],
        _("Tau, carry-over"): [ctx.num(v, 2) for v in ordered["tau_inertia"]],
        _("p, carry-over"): [ctx.num(v, 3) for v in ordered["p_inertia"]],
        _("Tau, variance"): [ctx.num(v, 2) for v in ordered["tau_variance"]],
        _("p, variance"): [ctx.num(v, 3) for v in ordered["p_variance"]],
    })
