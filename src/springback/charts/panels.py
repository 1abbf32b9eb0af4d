"""Measurement periods drawn side by side: one panel per period, the gaps between named.

Weeks without prompts between two periods would otherwise take most of a time axis (two
six-day periods ten weeks apart leave a sixth of the width to the data). Each period gets a
panel of its own dates, as wide as its days; between two panels a narrow strip names the
gap in words, as the answering calendar does.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import altair as alt
import numpy as np
import pandas as pd

from springback.charts.common import CHAR_WIDTH, Inputs, TimeAxis, time_axis
from springback.charts.palette import CHART

_MS_PER_DAY = 86_400_000
GAP_WIDTH = 30
"""Width of the strip naming a gap between two panels (its words run upwards)."""
LABEL_WIDTH = 55
"""Room one date label needs on a panel's axis; narrower panels label fewer days."""


@dataclass(frozen=True)
class Panel:
    """One measurement period's part of a time chart."""

    start: int
    """Epoch ms (study-zone wall clock read as UTC) of the period's first day."""
    end: int
    """Epoch ms of the day after the period's last day."""
    gap: str
    """The gap after this period in words ('9 weeks without prompts'), '' for the last."""
    gap_sentence: str
    """The same with its dates, for the text alternative ('' for the last)."""


def period_panels(ctx: Inputs) -> list[Panel] | None:
    """The panels of a study measured in two or more periods; None for one period."""
    _ = ctx.gettext
    periods = ctx.table("descriptives", "periods")
    if periods is None or len(periods) < 2:
        return None
    periods = periods.sort_values("first_day")
    firsts = [pd.Timestamp(d).normalize() for d in periods["first_day"]]
    lasts = [pd.Timestamp(d).normalize() for d in periods["last_day"]]
    panels = []
    for i, (first, last) in enumerate(zip(firsts, lasts, strict=True)):
        nxt = firsts[i + 1] if i + 1 < len(firsts) else None
        gap, sentence = ("", "") if nxt is None else gap_words(ctx, last, nxt)
        panels.append(Panel(
            start=_ms(first), end=_ms(last) + _MS_PER_DAY, gap=gap, gap_sentence=sentence))
    return panels


def gap_words(ctx: Inputs, last: pd.Timestamp, first: pd.Timestamp) -> tuple[str, str]:
    """The days between a period's last day and the next one's first, in words and dated."""
    _ = ctx.gettext
    days = pd.date_range(last + pd.Timedelta(days=1), first - pd.Timedelta(days=1))
    n = len(days)
    if n == 0:
        return "", ""
    if n >= 14:
        label = _("{n} weeks without prompts").format(n=round(n / 7))
    elif n >= 2:
        label = _("{n} days without prompts").format(n=n)
    else:
        label = _("a day without prompts")
    return label, _("From {start} to {end} there were no prompts ({gap}).").format(
        start=ctx.date(days[0]), end=ctx.date(days[-1]), gap=label)


def panel_of(panels: list[Panel], times: pd.Series | np.ndarray) -> np.ndarray:
    """The index of the panel each plotted time (epoch ms) belongs to: the last period that
    began before it (a time in a gap goes with the period before, outside its axis)."""
    starts = np.array([p.start for p in panels[1:]], dtype=np.int64)
    return np.searchsorted(starts, np.asarray(times, dtype=np.int64), side="right")


def panel_axes(ctx: Inputs, title: str | None, panels: list[Panel], times: np.ndarray,
               width: int) -> list[tuple[TimeAxis, int]]:
    """Each panel's date axis (its period's days and the times plotted in it) and width.

    The widths share `width` less the gap strips in proportion to each axis's days.
    """
    where = panel_of(panels, times)
    axes = []
    for i, p in enumerate(panels):
        inside = np.asarray(times, dtype=np.int64)[where == i]
        axes.append(time_axis(ctx, title, np.concatenate([inside, [p.start, p.end - 1]])))
    days = [(a.last - a.first) / _MS_PER_DAY for a in axes]
    room = width - GAP_WIDTH * (len(panels) - 1)
    widths = [max(int(room * d / sum(days)), 2 * LABEL_WIDTH) for d in days]
    return [(_fewer_labels(a, w), w) for a, w in zip(axes, widths, strict=True)]


def _fewer_labels(axis: TimeAxis, width: int) -> TimeAxis:
    """Every n-th day label when the panel is too narrow for all of them."""
    fits = max(width // LABEL_WIDTH, 2)
    if len(axis.ticks) <= fits:
        return axis
    return replace(axis, ticks=axis.ticks[:: math.ceil(len(axis.ticks) / fits)])


def side_by_side(panels: list[Panel], plots: list[alt.LayerChart | alt.FacetChart],
                 height: int) -> alt.HConcatChart:
    """The panels in a row, each gap named in a strip between two of them."""
    row: list[alt.LayerChart | alt.FacetChart] = []
    for panel, plot in zip(panels, plots, strict=True):
        row.append(plot)
        if panel.gap:
            # Upwards along the strip; in two lines when one is longer than the panel is high.
            words = panel.gap.split(" ")
            half = len(words) // 2
            label: str | list[str] = panel.gap if CHAR_WIDTH * len(panel.gap) < height or \
                half == 0 else [" ".join(words[:half]), " ".join(words[half:])]
            strip = alt.Chart(alt.Data(values=[{"label": label}]))
            row.append(alt.layer(
                strip.mark_text(angle=270, baseline="middle", align="center", color=CHART.ink)
                .encode(x=alt.XValue(GAP_WIDTH / 2), y=alt.YValue(height / 2),
                        text=alt.Text(field="label")),
                # the time axis goes on dashed: days are left out here
                strip.mark_rule(color=CHART.axis, strokeDash=[3, 3])
                .encode(x=alt.XValue(0), x2=alt.X2Value(GAP_WIDTH), y=alt.YValue(height + 0.5)),
            ).properties(width=GAP_WIDTH, height=height))
    return alt.hconcat(*row, spacing=0)


def _ms(day: pd.Timestamp) -> int:
    """A naive study day as epoch ms read as UTC (as `Inputs.ms` writes plotted times)."""
    return int(pd.Timestamp(day).tz_localize(None).value // 1_000_000)
