"""out/study/results.html: the cohort's page for the research team, self-contained.

Built like the booklets: a language, one h1 and nested headings, tables with captions and
header scopes, charts as inline SVG with <title>/<desc> each followed by its data table, and a
Content-Security-Policy that loads nothing from anywhere (the same as templates/base.html).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from html import escape
from typing import Any

import pandas as pd

from springback.charts.palette import PAGE
from springback.study import charts
from springback.study.codebook import MEASURES

CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; font-src data:"

STYLE = f"""
body {{ font-family: "Atkinson Hyperlegible", sans-serif; color: {PAGE.text};
  background: {PAGE.background}; max-width: 60rem; margin: 0 auto; padding: 1rem;
  line-height: 1.5; }}
h1, h2, h3 {{ color: {PAGE.heading}; }}
table {{ border-collapse: collapse; margin: 0.5rem 0 1.5rem; }}
caption {{ text-align: left; font-weight: bold; padding: 0.25rem 0; }}
th, td {{ border: 1px solid {PAGE.border}; padding: 0.2rem 0.5rem; text-align: left; }}
td.num {{ text-align: right; font-variant-numeric: tabular-nums; }}
figure {{ margin: 1rem 0; }}
.table-wrap {{ max-width: 100%; overflow-x: auto; }}
figure svg {{ max-width: 100%; height: auto; display: block; }}
td, th {{ overflow-wrap: break-word; }}
td.num {{ white-space: nowrap; }}
.note {{ background: {PAGE.caution_background}; border-left: 4px solid {PAGE.caution_border};
  padding: 0.5rem 1rem; }}
a {{ color: {PAGE.link}; }}
a:focus {{ outline: 3px solid {PAGE.focus}; }}
"""

FILES = (
    ("participants.csv", "one row per participant, one column per measure and reading "
                         "(also as participants.parquet)"),
    ("codebook.csv", "what each column of participants.csv means: unit, range, method, "
                     "reference"),
    ("distributions.csv", "each indicator across participants"),
    ("compliance_weeks.csv", "prompts answered by study week"),
    ("readings.csv", "participants per reading, topic by topic"),
    ("group_estimates.csv", "mean inertia, half-life and indicator trends of the group"),
    ("warning_table.csv", "the warning reading by course (2x2)"),
    ("warning_accuracy.csv", "sensitivity, specificity and the count expected by chance"),
)


def num(value: Any, digits: int = 3) -> str:
    """A number for the page: fixed digits, 'not available' for a missing one."""
    if value is None or isinstance(value, str):
        return escape(value or "")
    f = float(value)
    if not math.isfinite(f):
        return "not available"
    if float(f).is_integer() and digits == 0:
        return f"{int(f)}"
    return f"{f:.{digits}f}"


def table(frame: pd.DataFrame, caption: str, columns: Mapping[str, str],
          formats: Mapping[str, Callable[[Any], str]] | None = None) -> str:
    """An HTML table with a caption, column headers with scope, and the first column as the
    row header."""
    formats = formats or {}
    head = "".join(f'<th scope="col">{escape(t)}</th>' for t in columns.values())
    body = []
    for row in frame.to_dict("records"):
        cells = []
        for i, col in enumerate(columns):
            v = row.get(col)
            text = formats[col](v) if col in formats else (
                num(v) if isinstance(v, float) else escape(str(v)))
            cls = ' class="num"' if isinstance(v, (int, float)) and not isinstance(
                v, bool) else ""
            cells.append(f'<th scope="row">{text}</th>' if i == 0 else f"<td{cls}>{text}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    # A wide table scrolls in its own focusable region, so the page itself never does.
    return (f'<div class="table-wrap" role="region" tabindex="0" '
            f'aria-label="{escape(caption)}">\n'
            f"<table>\n<caption>{escape(caption)}</caption>\n<thead><tr>{head}</tr></thead>\n"
            f"<tbody>\n" + "\n".join(body) + "\n</tbody>\n</table>\n</div>")


def figure(svg: str, data: pd.DataFrame, caption: str, columns: Mapping[str, str],
           formats: Mapping[str, Callable[[Any], str]] | None = None) -> str:
    """A chart followed by the table of its data."""
    return (f"<figure>\n{svg}\n<figcaption>{escape(caption)}</figcaption>\n</figure>\n"
            + table(data, f"Data of the chart: {caption}", columns, formats))


def _int(v: Any) -> str:
    return num(v, 0)


def _pct(v: Any) -> str:
    f = float(v)
    return f"{f:.0%}" if math.isfinite(f) else "not available"


def page(title: str, tables: Mapping[str, pd.DataFrame], alpha: float) -> str:
    """The whole page from the study's tables (see springback.study.TABLES)."""
    people, group = tables["participants"], tables["group_estimates"]
    counts, accuracy = tables["warning_table"], tables["warning_accuracy"]
    parts = [_head(title), _about(people, alpha), _participation(tables["compliance_weeks"]),
             _indicators(people, tables["distributions"]), _readings(tables["readings"]),
             _group(people, group), _warnings(counts, accuracy, alpha), _files()]
    return "\n".join(parts) + "\n</main>\n</body>\n</html>\n"


def _head(title: str) -> str:
    return (f'<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            f'<meta http-equiv="Content-Security-Policy" content="{CSP}">\n'
            f'<meta name="generator" content="springback">\n'
            f"<title>{escape(title)}: study-level results</title>\n<style>{STYLE}</style>\n"
            f"</head>\n<body>\n<header>\n<p>{escape(title)}</p>\n"
            f"<h1>Study-level results</h1>\n</header>\n"
            '<nav aria-label="Contents">\n<ol>\n'
            '<li><a href="#participation">Participation</a></li>\n'
            '<li><a href="#indicators">Indicators across participants</a></li>\n'
            '<li><a href="#readings">Readings by class</a></li>\n'
            '<li><a href="#group">Group-level estimates</a></li>\n'
            '<li><a href="#before-shifts">Did the indicators rise before shifts?</a></li>\n'
            '<li><a href="#files">Files</a></li>\n</ol>\n</nav>\n<main>')


def _about(people: pd.DataFrame, alpha: float) -> str:
    return (f"<p>This page describes this study's {len(people)} participants with metrics "
            "as one cohort, from the same tables the booklets were made from "
            "(out/metrics.csv and out/findings.csv). Every number is an observation of this "
            "study; none of it has been validated as a test or a prediction for anyone. "
            f"Tests in the booklets use alpha = {alpha:g}.</p>")


def _participation(weeks: pd.DataFrame) -> str:
    out = ['<section id="participation">\n<h2>Participation</h2>']
    if weeks.empty:
        out.append("<p>The number of prompts sent is not known, so the share answered "
                   "cannot be given.</p>")
    else:
        svg, data = charts.weeks(weeks)
        out.append(figure(svg, data, "Prompts answered by study week (pooled over participants, "
                                     "band: lowest to highest participant)",
                          {"week": "Week", "participants": "Participants",
                           "pooled": "Answered (pooled)", "min": "Lowest", "max": "Highest"}
                          ))
    return "\n".join(out) + "\n</section>"


def _indicators(people: pd.DataFrame, dist: pd.DataFrame) -> str:
    out = ['<section id="indicators">\n<h2>Indicators across participants</h2>',
           "<p>Each indicator as the booklets report it, one value per participant; n counts "
           "the participants with enough data for it.</p>",
           table(dist, "Indicators across participants",
                 {"label": "Indicator", "n": "n", "n_missing": "Not enough data",
                  "mean": "Mean", "sd": "SD", "median": "Median", "q25": "25th pct.",
                  "q75": "75th pct.", "min": "Lowest", "max": "Highest"},
                 {"n": _int, "n_missing": _int})]
    units = {m.name: m.unit for m in MEASURES}
    for row in dist.itertuples():
        if not row.n:
            continue
        name = str(row.measure)
        values = pd.DataFrame({"participant": people["participant"],
                               "value": people[name].to_numpy(float)})
        svg, data = charts.strip(name, str(row.label), units.get(name, ""), values)
        out.append(f'<h3 id="ind-{escape(name)}">{escape(str(row.label))}</h3>')
        whole = bool((data["value"] % 1 == 0).all())
        out.append(figure(svg, data, f"{row.label}, one dot per participant",
                          {"participant": "Participant", "value": "Value"},
                          {"value": _int} if whole else None))
    return "\n".join(out) + "\n</section>"


def _readings(readings: pd.DataFrame) -> str:
    out = ['<section id="readings">\n<h2>Readings by class</h2>',
           "<p>The findings stage gives each participant one reading per topic; this is how "
           "many had each.</p>"]
    for topic in ("course", "warning", "pattern"):
        part = readings[readings["topic"] == topic]
        if part.empty:
            continue
        svg, data = charts.bars(f"readings-{topic}", f"Readings on {topic}", part)
        out.append(f"<h3>{escape(topic.capitalize())}</h3>")
        out.append(figure(svg, data, f"Participants per reading on {topic}",
                          {"reading": "Reading", "participants": "Participants"}))
    out.append(table(readings, "Participants per reading, every topic",
                     {"topic": "Topic", "reading": "Reading", "participants": "Participants",
                      "share": "Share"}, {"share": _pct}))
    return "\n".join(out) + "\n</section>"


def _group(people: pd.DataFrame, group: pd.DataFrame) -> str:
    out = ['<section id="group">\n<h2>Group-level estimates</h2>',
           "<p>Mean inertia of the group from a multilevel model (the next answer on the "
           "current answer's deviation from the person's mean, a random intercept and a random "
           "slope per participant, on the pairs of answers on one day the booklets use), "
           "beside the plain mean of the person-level estimates; the half-life follows from "
           "inertia and the median time between paired answers. The trends are the mean "
           "Kendall tau of each rolling indicator across participants (above 0: the indicator "
           "rose over the study on average).</p>",
           table(group, "Group-level estimates with 95% intervals",
                 {"label": "Estimate", "value": "Value", "lower": "Lower", "upper": "Upper",
                  "n": "Participants", "method": "Method"}, {"n": _int})]
    if "inertia" in people:
        svg, data = charts.forest(people, group)
        out.append(figure(svg, data, "Inertia by participant (95% intervals) and for the group",
                          {"participant": "Participant", "value": "Inertia",
                           "lower": "Lower", "upper": "Upper"}))
    return "\n".join(out) + "\n</section>"


def _warnings(counts: pd.DataFrame, accuracy: pd.DataFrame, alpha: float) -> str:
    read = int(counts["read"].sum())
    chance = accuracy[accuracy["statistic"] == "rising_expected"]
    seen = int(chance["count"].sum())
    expected = float(chance["value"].sum())
    return "\n".join([
        '<section id="before-shifts">\n<h2>Did the indicators rise before shifts?</h2>',
        "<p>For participants whose course read as an abrupt shift, the warning reading is that "
        "of the lead-up (the answers before the first large shift); for the others (no_shift: "
        "no clear change, gradual change or switching), that of all their data. This is "
        "what happened in this study: with so few participants the intervals are wide, and "
        "none of it shows that rising indicators predict a shift.</p>",
        table(counts, "Warning reading by course: participants",
              {"group": "Course", "rising": "Rising", "not_rising": "Not rising",
               "read": "Read", "not_read": "Not enough data"}),
        table(accuracy, "How often the warning reading matched the course (Wilson 95% "
                        "intervals)",
              {"label": "Statistic", "value": "Value", "lower": "Lower", "upper": "Upper",
               "count": "Count", "of": "Of", "method": "Method"},
              {"count": _int, "of": _int}),
        f'<p class="note">If nothing changed in anyone, each reading would come out rising '
        f"with a chance of at most alpha = {alpha:g} (the family-wise rate the warning "
        f"reading holds), so about {expected:.2f} of the {read} readings would be rising by "
        f"chance alone; this study saw {seen}.</p>",
        "</section>"])


def _files() -> str:
    items = "\n".join(f'<li><a href="{escape(name)}">{escape(name)}</a>: {escape(what)}</li>'
                      for name, what in FILES)
    return (f'<section id="files">\n<h2>Files</h2>\n<p>The tables of this page, for R, SPSS '
            f"or Python (springback.study.results(project) reads them as pandas frames):</p>"
            f"\n<ul>\n{items}\n</ul>\n</section>")

