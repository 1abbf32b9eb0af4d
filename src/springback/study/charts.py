"""The study page's charts: altair specs, drawn to inline SVG by springback.charts.svg.to_svg
(which validates them against the Vega-Lite schema).

Each function returns the chart's SVG (with <title> and <desc>) and the frame of its data, which
the page prints as the chart's table.
"""

from __future__ import annotations

import math
from typing import Any

import altair as alt
import numpy as np
import pandas as pd

from springback.charts.palette import CHART
from springback.charts.svg import PLOT_WIDTH, checked_whole, to_svg

LANGUAGE = "en"


def _records(frame: pd.DataFrame) -> tuple[dict[str, Any], ...]:
    """Rows for inline data, NaN as None, as a tuple (altair's copies share it; see
    `springback.charts.common.inline`)."""
    return tuple({str(k): (None if isinstance(v, float) and not math.isfinite(v) else v)
                  for k, v in row.items()} for row in frame.to_dict("records"))


@checked_whole
def strip(key: str, label: str, unit: str, values: pd.DataFrame) -> tuple[str, pd.DataFrame]:
    """One dot per participant on the indicator's axis (`values`: participant, value)."""
    data = values[np.isfinite(values["value"].to_numpy(float))].sort_values(
        ["value", "participant"], kind="stable")
    spec = (alt.Chart(alt.Data(values=_records(data)), width=PLOT_WIDTH, height=40)
            .mark_circle(size=90, opacity=0.75, color=CHART.primary)
            .encode(x=alt.X(field="value", type="quantitative", title=f"{label} ({unit})",
                            scale=alt.Scale(zero=False))))
    lo, hi = (data["value"].min(), data["value"].max()) if len(data) else (math.nan, math.nan)
    desc = (f"{len(data)} participants; values from {lo:.3g} to {hi:.3g}." if len(data) else
            "No participant had a value.")
    return to_svg(spec, f"study-{key}", f"{label} across participants", desc, LANGUAGE), data


@checked_whole
def forest(people: pd.DataFrame, group: pd.DataFrame) -> tuple[str, pd.DataFrame]:
    """Each participant's inertia with its 95% interval, then the two group estimates."""
    rows = people.rename(columns={"inertia": "value", "inertia_lower": "lower",
                                  "inertia_upper": "upper"})
    # A cohort in which nobody has an interval has no interval columns at all.
    rows = rows.reindex(columns=["participant", "value", "lower", "upper"])
    rows = rows[np.isfinite(rows["value"].to_numpy(float))].assign(kind="participant")
    g = group[group["estimate"].isin(["inertia_mixed", "inertia_person_mean"])]
    g = pd.DataFrame({"participant": g["label"], "value": g["value"], "lower": g["lower"],
                      "upper": g["upper"], "kind": "group"})
    data = pd.concat([rows, g], ignore_index=True)
    order = list(data["participant"])
    y = alt.Y(field="participant", type="nominal", sort=order, title=None)
    colour = alt.Color(field="kind", type="nominal", title=None,
                       scale=alt.Scale(domain=["participant", "group"],
                                       range=[CHART.primary, CHART.accent]))
    spec = alt.LayerChart(
        data=alt.Data(values=_records(data)), width=PLOT_WIDTH - 160, height=22 * len(data),
        layer=[
            alt.Chart().mark_rule(strokeWidth=2).encode(
                y=y, x=alt.X(field="lower", type="quantitative"), x2=alt.X2(field="upper"),
                color=colour),
            alt.Chart().mark_point(filled=True, size=70).encode(
                y=y, color=colour, x=alt.X(field="value", type="quantitative",
                                           title="Inertia (lag-1 autocorrelation)")),
        ])
    desc = (f"{len(rows)} participants' inertia with 95% intervals; the multilevel model's "
            f"mean is {_fmt(g['value'].iloc[0]) if len(g) else 'not available'}.")
    return to_svg(spec, "study-inertia", "Inertia by participant and for the group", desc,
                  LANGUAGE), data


@checked_whole
def weeks(table: pd.DataFrame) -> tuple[str, pd.DataFrame]:
    """Answered share of prompts sent by study week: pooled, with the participants' range."""
    data = table[["week", "participants", "pooled", "min", "max"]]
    x = alt.X(field="week", type="quantitative", title="Study week",
              scale=alt.Scale(zero=False), axis=alt.Axis(tickMinStep=1, format="d"))
    spec = alt.LayerChart(
        data=alt.Data(values=_records(data)), width=PLOT_WIDTH, height=200,
        layer=[
            alt.Chart().mark_area(color=CHART.band).encode(
                x=x, y=alt.Y(field="min", type="quantitative", scale=alt.Scale(domain=[0, 1]),
                             axis=alt.Axis(format="%"), title="Prompts answered"),
                y2=alt.Y2(field="max")),
            alt.Chart().mark_line(point=True, color=CHART.primary).encode(
                x=x, y=alt.Y(field="pooled", type="quantitative")),
        ])
    desc = (f"{len(data)} weeks; pooled share answered from {_pct(data['pooled'].min())} to "
            f"{_pct(data['pooled'].max())}; the band spans the participants' lowest and "
            "highest share." if len(data) else "No prompts were sent.")
    return to_svg(spec, "study-weeks", "Prompts answered by study week", desc, LANGUAGE), data


@checked_whole
def bars(key: str, title: str, table: pd.DataFrame) -> tuple[str, pd.DataFrame]:
    """Participants per reading of one topic (`table`: reading, participants)."""
    data = table[["reading", "participants"]]
    spec = (alt.Chart(alt.Data(values=_records(data)), width=PLOT_WIDTH - 160,
                      height=26 * max(len(data), 1))
            .mark_bar(color=CHART.secondary)
            .encode(y=alt.Y(field="reading", type="nominal", title=None,
                            sort=list(data["reading"])),
                    x=alt.X(field="participants", type="quantitative", title="Participants",
                            axis=alt.Axis(tickMinStep=1))))
    desc = "; ".join(f"{r.reading}: {r.participants}" for r in data.itertuples()) + "."
    return to_svg(spec, f"study-{key}", title, desc, LANGUAGE), data


def _fmt(v: Any) -> str:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return str(v)
    return f"{f:.3f}" if math.isfinite(f) else "not available"


def _pct(v: Any) -> str:
    f = float(v)
    return f"{f:.0%}" if math.isfinite(f) else "not available"
