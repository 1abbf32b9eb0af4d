"""Questionnaire charts: scores over time against their bands, sudden gains and losses."""

from __future__ import annotations

import altair as alt
import numpy as np
import pandas as pd

from springback.charts.common import (
    CHAR_WIDTH,
    Chart,
    Inputs,
    inline,
    time_axis,
)
from springback.charts.palette import BAND_FILLS, CHART
from springback.charts.svg import PLOT_WIDTH, to_svg


def questionnaire_charts(ctx: Inputs) -> list[Chart]:
    """One chart per questionnaire with scores: the scores over its labelled bands."""
    fam = ctx.family("questionnaires")
    if fam is None:
        return []
    keys = sorted(name.removeprefix("scores_") for name in fam.tables
                  if name.startswith("scores_"))
    charts = []
    for q in keys:
        chart = _questionnaire_chart(ctx, q)
        if chart is not None:
            charts.append(chart)
    return charts


def _bands(ctx: Inputs, q: str) -> tuple[tuple[float, float], list[tuple[float, float, str]]]:
    """The score range and (low, high, label) bands drawn, from the settings' band table (the
    one the booklet's text shows): each band is drawn up to the next one's lower bound."""
    spec = ctx.settings.questionnaires[q]
    rng = (float(spec.range[0]), float(spec.range[1]))
    return rng, [(b.lower, b.end, b.label) for b in ctx.settings.band_table(q, ctx.language)]


def _band_name(ctx: Inputs, q: str, label: object) -> str:
    """A band's name in the booklet's language (as written in `bands` if untranslated)."""
    if not isinstance(label, str) or not label:
        return ""
    if q not in ctx.settings.questionnaires:
        return label
    return ctx.settings.band_label(q, label, ctx.language)


def _questionnaire_chart(ctx: Inputs, q: str) -> Chart | None:
    _ = ctx.gettext
    scores = ctx.table("questionnaires", f"scores_{q}")
    if scores is not None and "band" in scores.columns:
        scores = scores.assign(band=[_band_name(ctx, q, b) for b in scores["band"]])
    if scores is None:
        return None
    scores = scores.dropna(subset=["score"]).sort_values("local_time")
    if scores.empty:
        return None
    spec_q = ctx.settings.questionnaires.get(q)
    name = (spec_q.label.get(ctx.language) or spec_q.label.get("en") or q) if spec_q else q
    (low, high), bands = _bands(ctx, q)
    def y(field: str) -> alt.Y:
        return alt.Y(field, type="quantitative",
                     scale=alt.Scale(domain=[low, high], nice=False, zero=False),
                     axis=alt.Axis(title=_("Score")))

    points = pd.DataFrame({"t": ctx.ms(scores["local_time"]), "v": scores["score"]})
    axis = time_axis(ctx, _("Date"), points["t"].to_numpy(), pad_days=1)
    margin = int(min(170, 12 + CHAR_WIDTH * max((len(b[2]) for b in bands), default=0)))
    band_rows = pd.DataFrame(
        [{"lo": lo, "hi": hi, "label": label, "fill": BAND_FILLS[i % len(BAND_FILLS)]}
         for i, (lo, hi, label) in enumerate(bands)])
    layers: list[alt.Chart] = []
    if len(band_rows):
        layers += [
            alt.Chart(inline(band_rows)).mark_rect()
            .encode(y=y("lo"), y2=alt.Y2("hi"),
                    fill=alt.Fill("fill", type="nominal", scale=None)),
            alt.Chart(inline(band_rows.iloc[1:]))
            .mark_rule(color=CHART.neutral, strokeDash=[3, 3]).encode(y=y("lo")),
            # Band names sit in the right margin, clear of the scores.
            alt.Chart(inline(band_rows.assign(
                mid=(band_rows["lo"] + band_rows["hi"]) / 2)))
            .mark_text(align="left", baseline="middle", dx=8, color=CHART.ink, limit=margin)
            .encode(x=alt.XValue(PLOT_WIDTH - margin), y=y("mid"),
                    text=alt.Text(field="label")),
        ]
    layers.append(
        alt.Chart(inline(points))
        .mark_line(color=CHART.primary, strokeWidth=2.5,
                   point=alt.OverlayMarkDef(filled=True, size=70, color=CHART.primary))
        .encode(x=axis.x("t"), y=y("v")))
    layers += _sudden_layers(ctx, q, scores, axis.x("t"), y("v"))
    spec = alt.layer(*layers).properties(width=PLOT_WIDTH - margin, height=220)
    key = f"questionnaire_{q}"
    title = ctx.voice(_("Your {name} scores"), _("Scores on the {name}")).format(name=name)
    description = _questionnaire_description(ctx, q, name, scores)
    table = pd.DataFrame({
        _("Date"): [ctx.date_short(t) for t in ctx.wall_clock(scores["local_time"])],
        _("Score"): [ctx.num(s, 0 if float(s).is_integer() else 1) for s in scores["score"]],
        _("Band"): [str(b) if isinstance(b, str) else "" for b in scores.get("band", [])]
        if "band" in scores.columns else [""] * len(scores),
    })
    return Chart(key, title, description, to_svg(spec, key, title, description, ctx.language),
                 table, _("{name} scores and their bands").format(name=name))


def _sudden_layers(ctx: Inputs, q: str, scores: pd.DataFrame, x: alt.X,
                   y: alt.Y) -> list[alt.Chart]:
    """Sudden gains and losses: a marked point with a written label."""
    _ = ctx.gettext
    sudden = ctx.table("questionnaires", f"sudden_{q}")
    if sudden is None:
        return []
    words = {"gain": _("sudden gain"), "loss": _("sudden loss")}
    by_time = dict(zip(ctx.ms(scores["local_time"]), scores["score"], strict=True))
    times = ctx.ms(sudden["local_time"])
    rows = pd.DataFrame({"t": times, "v": [by_time.get(t, np.nan) for t in times],
                         "label": [words.get(str(k), str(k)) for k in sudden["kind"]]}).dropna()
    if rows.empty:
        return []
    marked = alt.Chart(inline(rows))
    return [
        marked.mark_point(shape="diamond", filled=False, size=260, strokeWidth=2.5,
                          color=CHART.highlight).encode(x=x, y=y),
        marked.mark_text(dy=-18, color=CHART.ink).encode(x=x, y=y, text=alt.Text(field="label")),
    ]


def _band_of(row: pd.Series) -> str:
    """' (band)' after a score, or '' when the score has no band."""
    band = row.get("band")
    return f" ({band})" if isinstance(band, str) and band else ""


def _questionnaire_description(ctx: Inputs, q: str, name: str, scores: pd.DataFrame) -> str:
    _ = ctx.gettext
    first, last = scores.iloc[0], scores.iloc[-1]
    if len(scores) == 1:
        return ctx.voice(_("You filled in the {name} once, on {date}: score {score}{band}."),
                         _("The {name} was filled in once, on {date}: score {score}{band}.")
                         ).format(
            name=name, date=ctx.date(ctx.wall_clock(scores["local_time"]).iloc[0]),
            score=ctx.num(float(first["score"]), 0), band=_band_of(first))
    wall = ctx.wall_clock(scores["local_time"])
    parts = [ctx.voice(_("Your {name} score went from {first}{first_band} on {first_date} to "
                         "{last}{last_band} on {last_date}."),
                       _("The {name} score went from {first}{first_band} on {first_date} to "
                         "{last}{last_band} on {last_date}.")).format(
        name=name, first=ctx.num(float(first["score"]), 0), first_band=_band_of(first),
        first_date=ctx.date(wall.iloc[0]), last=ctx.num(float(last["score"]), 0),
        last_band=_band_of(last), last_date=ctx.date(wall.iloc[-1]))]
    rci = ctx.estimate("questionnaires", f"reliable_change_{q}")
    verdicts = {
        "reliable improvement": _("This change is larger than the usual measurement error: "
                                  "a reliable improvement."),
        "reliable worsening": _("This change is larger than the usual measurement error: "
                                "a reliable worsening."),
        "no reliable change": _("This change is within the usual measurement error."),
    }
    # The questionnaire finding's reading when there are findings (the same rule, decided once).
    found = ctx.findings.get(f"questionnaire_{q}") if ctx.findings is not None else None
    readings = {"improved": "reliable improvement", "worsened": "reliable worsening",
                "no_reliable_change": "no reliable change"}
    verdict = (readings.get(found.reading, "") if found is not None and rci.ok
               else rci.note if rci.ok else "")
    if verdict in verdicts:
        parts.append(verdicts[verdict])
    return " ".join(parts)
