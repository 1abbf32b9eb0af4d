"""Charts: accessible, self-contained, deterministic SVG with text alternatives and tables.

Built on small hand-made results that follow the family contracts (notes/INTERFACES.md), so
these tests do not depend on the metric modules.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from springback.charts import Chart, make_charts
from springback.charts.common import Inputs
from springback.charts.mood import mood_chart
from springback.charts.palette import CHART, GRAPHIC_MIN, TEXT_MIN, contrast_ratio
from springback.charts.svg import WIDTH, finish_svg
from springback.metrics.results import Estimate, Family, ParticipantResults, SeriesDescription
from springback.model import ParticipantData
from springback.settings import StudySettings

SVG = "{http://www.w3.org/2000/svg}"
ZONE = "Europe/Amsterdam"
DAYS = 28
HOURS = (9, 12, 15, 18, 21)


def make_settings(**booklet) -> StudySettings:
    """A small study: one composite (higher = worse), PHQ-9 with its bands, events as load."""
    return StudySettings.model_validate({
        "study": {"title": "Test study", "timezone": ZONE, "prompts_per_day": len(HOURS)},
        "items": {"down": {"scale": [1, 7], "label": {"en": "feeling down"}},
                  "tense": {"scale": [1, 7]}},
        "composites": {"low_mood": {"items": ["down", "tense"], "higher_is": "worse",
                                    "label": {"en": "low mood", "nl": "somberheid"}}},
        "questionnaires": {"phq9": {"range": [0, 27], "label": {"en": "PHQ-9"},
                                    "bands": [[0, "minimal"], [5, "mild"], [10, "moderate"],
                                              [15, "moderately severe"], [20, "severe"]]}},
        "events": {"daily_load": "events"},
        "booklet": booklet,
    })


def make_data(seed: int = 3) -> tuple[ParticipantData, pd.DataFrame]:
    """Prompts five times a day for four weeks (a few skipped), plus four events."""
    rng = np.random.default_rng(seed)
    days = pd.date_range("2026-03-16", periods=DAYS, freq="D")  # a Monday; DST on 29 March
    rows = []
    for d, day in enumerate(days):
        for h in HOURS:
            if rng.random() < 0.15:
                continue
            when = pd.Timestamp(day + pd.Timedelta(hours=h)).tz_localize(ZONE)
            level = 3.0 + (1.5 if d >= 16 else 0.0)
            rows.append({"local_time": when, "study_day": day,
                         "value": float(np.clip(level + rng.normal(0, 0.8), 1, 7))})
    series = pd.DataFrame(rows)
    events = pd.DataFrame({
        "participant": "p01",
        "time": pd.to_datetime(["2026-03-18 10:00", "2026-03-25 14:00", "2026-04-02 19:00",
                                "2026-04-06 08:30"]).tz_localize(ZONE).tz_convert("UTC"),
        "kind": ["argument", "work stress", "argument", "<script>alert(1)</script>"],
        "intensity": [4.0, 3.0, 5.0, 2.0], "upsetting": [True, True, True, False],
    })
    events["local_time"] = events["time"].dt.tz_convert(ZONE)
    empty = pd.DataFrame()
    data = ParticipantData("p01", "en", "default", "yes", True, True, series, events, empty,
                           empty, empty)
    return data, series


LOW_MOOD = SeriesDescription("low_mood", True, (1.0, 7.0))
"""The composite of `make_settings` as the results describe it."""


def make_results(series: pd.DataFrame) -> ParticipantResults:
    """Families following the contracts, with values chosen by hand (not computed by metrics)."""
    g = series.groupby("study_day")["value"]
    daily = pd.DataFrame({"study_day": g.mean().index, "mean": g.mean().to_numpy(),
                          "sd": g.std().to_numpy(), "n": g.size().to_numpy(),
                          "scheduled": float(len(HOURS))})
    q1, q3 = np.percentile(series["value"], [25, 75])
    descriptives = Family(
        estimates={"n_answered": Estimate(float(len(series)))},
        tables={"series": series[["local_time", "value"]], "daily": daily},
        params={"typical_low": float(q1), "typical_high": float(q3)})
    starts = series["local_time"].iloc[[3, 40, 80]].reset_index(drop=True)
    episodes = pd.DataFrame({"episode": [1, 2, 3], "start": starts,
                             "trigger": ["event", "dip", "event"],
                             "kind": ["argument", "", "work stress"], "depth": [2.0, 1.6, 2.4],
                             "hours_to_baseline": [6.0, np.nan, 9.0],
                             "censored": [False, True, False],
                             "censored_by": ["", "night", ""]})
    hours = np.arange(0, 13, 3.0)
    aligned = pd.DataFrame([{"episode": e, "hours": h, "deviation": d * np.exp(-0.2 * h)}
                            for e, d in zip((1, 2, 3), (2.0, 1.6, 2.4), strict=True)
                            for h in hours])
    fit_h = np.linspace(0, 12, 25)
    recovery = Family(
        estimates={"recovery_half_life_hours": Estimate(3.5, 2.1, 6.0, n=3),
                   "median_recovery_hours": Estimate(7.5, n=2), "n_episodes": Estimate(3.0)},
        tables={"episodes": episodes, "aligned": aligned,
                "fit": pd.DataFrame({"hours": fit_h, "deviation": 2.0 * np.exp(-0.2 * fit_h)})})
    ends = series["local_time"].iloc[30:]
    k = np.arange(len(ends))
    rolling = pd.DataFrame({"local_time": ends.to_numpy(), "ar1": 0.2 + 0.004 * k,
                            "variance": 0.6 + 0.002 * k, "sd": np.nan, "skewness": np.nan,
                            "crosscorr": np.nan})
    grid = pd.DataFrame([{"window": w, "bandwidth_days": b, "tau_inertia": 0.6 - w / 2,
                          "p_inertia": 0.01 if w < 0.5 else 0.2, "tau_variance": -0.05 + b / 100,
                          "p_variance": 0.4}
                         for w in (0.3, 0.5, 0.7) for b in (3.0, 7.0, 14.0)])
    warnings = Family(
        estimates={"warning_tau_inertia": Estimate(0.45), "warning_tau_variance": Estimate(0.02)},
        tables={"rolling": rolling, "grid": grid}, params={"alpha": 0.05})
    qtimes = pd.to_datetime(["2026-03-16 10:00", "2026-03-30 10:00", "2026-04-12 10:00"]
                            ).tz_localize(ZONE)
    questionnaires = Family(
        estimates={"reliable_change_phq9": Estimate(2.4, note="reliable worsening")},
        tables={"scores_phq9": pd.DataFrame({"local_time": qtimes, "score": [6.0, 8.0, 16.0],
                                             "band": ["mild", "mild", "moderately severe"]}),
                "sudden_phq9": pd.DataFrame({"local_time": qtimes[[2]], "kind": ["loss"],
                                             "change": [8.0]})})
    level = np.where(daily["study_day"] >= pd.Timestamp("2026-04-01"), 4.5, 3.0)
    shifts = Family(
        estimates={"n_shifts": Estimate(1.0)},
        tables={"daily": daily[["study_day", "mean"]].assign(level=level),
                "change_points": pd.DataFrame({"study_day": [pd.Timestamp("2026-04-01")],
                                               "direction": ["worse"], "size": [1.5],
                                               "method": ["PELT"], "exceeds_swings": [True]})})
    x = np.linspace(1, 7, 121)
    density = 0.5 * np.exp(-((x - 3) ** 2) / 0.5) + 0.5 * np.exp(-((x - 4.6) ** 2) / 0.5)
    load = daily[["study_day", "mean"]].rename(columns={"mean": "mood"}).assign(
        load=np.arange(len(daily)) % 3)
    landscape = Family(
        estimates={"landscape_valleys": Estimate(2.0), "switches": Estimate(5.0)},
        tables={"potential": pd.DataFrame({"x": x, "density": density,
                                           "potential": -np.log(density)}),
                "valleys": pd.DataFrame({"x": [3.0, 4.6], "depth": [1.2, 1.1]}),
                "load": load[["study_day", "load", "mood"]]})
    return ParticipantResults("p01", "low_mood", {
        "descriptives": descriptives, "recovery": recovery, "warnings": warnings,
        "questionnaires": questionnaires, "shifts": shifts, "landscape": landscape,
    }, enough_data=True, series=LOW_MOOD)


@pytest.fixture(scope="module")
def study():
    data, series = make_data()
    return data, make_results(series), make_settings()


@pytest.fixture(scope="module")
def charts(study) -> dict[str, Chart]:
    data, results, settings = study
    return make_charts(data, results, settings, "en", lambda s: s)


ALL_KEYS = {"mood", "calendar", "recovery", "warnings", "questionnaire_phq9", "grid",
            "landscape", "load"}


def test_every_chart_with_data_is_made(charts):
    """Check that each chart of the contract is built when its family has data."""
    assert set(charts) == ALL_KEYS
    for key, chart in charts.items():
        assert chart.key == key and chart.title and chart.table_caption
        assert isinstance(chart.table, pd.DataFrame) and len(chart.table) > 0


@pytest.mark.parametrize("key", sorted(ALL_KEYS))
def test_svg_has_title_and_desc_as_direct_children(charts, key):
    """Check root <svg>: role img, aria-labelledby naming its direct <title> and <desc>."""
    chart = charts[key]
    root = ET.fromstring(chart.svg)
    assert root.tag == f"{SVG}svg" and root.get("role") == "img"
    children = list(root)
    # The title carries the whole alternative (WeasyPrint's PDF /Alt is the <title> alone).
    assert children[0].tag == f"{SVG}title"
    assert children[0].text == f"{chart.title}: {chart.description}"
    assert children[1].tag == f"{SVG}desc" and children[1].text == chart.description
    assert root.get("aria-labelledby") == children[0].get("id")
    assert len(chart.description) > 40
    assert float(root.get("width")) <= WIDTH + 1
    # Only the root carries a role or ARIA (axe: nested graphics roles need their own names).
    inner = [el for el in root.iter() if el is not root]
    assert not any(n == "role" or n.startswith("aria-") for el in inner for n in el.attrib)


def test_ids_are_unique_across_one_participants_charts(charts):
    """Check that no id repeats across all SVGs inlined into one page, and refs resolve."""
    ids: list[str] = []
    for chart in charts.values():
        root = ET.fromstring(chart.svg)
        own = [el.get("id") for el in root.iter() if el.get("id")]
        ids += own
        for ref in re.findall(r"url\(#([^)]+)\)", chart.svg):
            assert ref in own, f"{chart.key}: dangling url(#{ref})"
    assert len(ids) == len(set(ids))
    assert any(i.startswith("sb-mood-") for i in ids)


def test_svg_is_plain_svg_to_an_html_parser(charts):
    """Check that an HTML5 parser sees an <svg> in the SVG namespace with unprefixed children."""
    import tinyhtml5

    for chart in charts.values():
        assert chart.svg.startswith("<svg ") and "ns0:" not in chart.svg
        doc = tinyhtml5.parse(f"<!doctype html><html><body>{chart.svg}</body></html>")
        body = doc.find("{http://www.w3.org/1999/xhtml}body")
        assert [el.tag for el in body] == [f"{SVG}svg"]
        assert body[0][0].tag == f"{SVG}title"


def test_no_external_references_or_scripts(charts):
    """Check that nothing in the SVG fetches or runs anything (offline booklets)."""
    for chart in charts.values():
        root = ET.fromstring(chart.svg)
        for el in root.iter():
            assert el.tag not in (f"{SVG}script", f"{SVG}image", f"{SVG}foreignObject")
            for name, value in el.attrib.items():
                assert not name.startswith("on"), name
                if name.endswith("href"):
                    assert value.startswith("#")
                assert "http:" not in value and "https:" not in value, (name, value)
        text = chart.svg.replace("http://www.w3.org/", "")
        assert "http" not in text


def test_output_is_deterministic(study, charts):
    """Check that the same input gives byte-identical SVGs, tables and descriptions."""
    data, results, settings = study
    again = make_charts(data, results, settings, "en", lambda s: s)
    for key, chart in charts.items():
        assert again[key].svg == chart.svg
        assert again[key].description == chart.description
        pd.testing.assert_frame_equal(again[key].table, chart.table)


def test_user_strings_are_escaped(charts):
    """Check that an event kind holding markup stays text in the SVG and the table."""
    svg = charts["mood"].svg
    assert "<script>" not in svg and "&lt;script&gt;" in svg
    assert "<script>alert(1)</script>" in set(charts["mood"].table["Events"])


def _over_white(colour: str, alpha: float) -> str:
    """Composite a colour at some opacity onto the white chart background (WCAG note)."""
    rgb = [int(colour[i:i + 2], 16) for i in (1, 3, 5)]
    mixed = [round(alpha * c + (1 - alpha) * 255) for c in rgb]
    return "#" + "".join(f"{c:02X}" for c in mixed)


def test_every_colour_in_the_svgs_meets_contrast(charts):
    """Check text fills against 4.5:1 and strokes/fills of marks against 3:1 on white.

    Opacity is composited onto the background before the WCAG 2.1 luminance (W3C 2018) is
    computed. Light area fills (band, terrain, calendar and grid cells) are backgrounds: their
    text is checked against them in tests/test_contrast.py, and their edges are drawn in 3:1
    colours.
    """
    from springback.charts.palette import BAND_FILLS, CALENDAR_RAMP, DIVERGING

    backgrounds = {c.upper() for c in (CHART.background, CHART.band, CHART.terrain)}
    backgrounds |= {c.upper() for c in (*BAND_FILLS, *CALENDAR_RAMP, *DIVERGING)}
    checked = 0

    def visit(el: ET.Element, inherited: float, key: str) -> None:
        nonlocal checked
        alpha = inherited * float(el.get("opacity", 1))
        tag = el.tag.removeprefix(SVG)
        for attr in ("fill", "stroke"):
            colour = (el.get(attr) or "").upper()
            if not re.fullmatch(r"#[0-9A-F]{6}", colour):
                continue
            own = alpha * float(el.get(f"{attr}-opacity", 1))
            if own == 0:
                continue
            if colour in backgrounds and tag != "text":
                continue
            seen = _over_white(colour, own)
            checked += 1
            if tag == "text":
                assert any(contrast_ratio(colour, b) >= TEXT_MIN for b in backgrounds), key
                assert own == 1, f"{key}: translucent text"
            else:
                assert contrast_ratio(seen, CHART.background) >= GRAPHIC_MIN, (
                    f"{key}: {tag} {attr} {colour} at opacity {own}")
        for child in el:
            visit(child, alpha, key)

    for chart in charts.values():
        visit(ET.fromstring(chart.svg), 1.0, chart.key)
    assert checked > 100


def test_text_uses_the_booklet_font(charts):
    """Check that every text element names Atkinson Hyperlegible with a sans-serif fallback."""
    for chart in charts.values():
        for el in ET.fromstring(chart.svg).iter(f"{SVG}text"):
            family = el.get("font-family") or ""
            assert "Atkinson Hyperlegible" in family and "sans-serif" in family


def test_dates_are_study_local(study, charts):
    """Check that times are shown in the study zone, not UTC.

    The 19:00 Amsterdam event on 2 April is 17:00 UTC, the 08:30 one on 6 April 06:30 UTC;
    prompts at 09:00..21:00 local would show one or two hours earlier in UTC.
    """
    table = charts["mood"].table
    by_day = dict(zip(table["Date"], table["Events"], strict=True))
    assert by_day["Thu 2 Apr"] == "argument"
    assert by_day["Mon 6 Apr"] == "<script>alert(1)</script>"
    _data, results, _settings = study
    starts = results.families["recovery"].tables["episodes"]["start"]
    shown = list(charts["recovery"].table["Start"])
    for start, text in zip(starts, shown, strict=True):
        assert text.endswith(f"{start.hour:02d}:{start.minute:02d}"), text
        assert start.hour in HOURS


def test_descriptions_state_the_pattern(charts):
    """Check that each text alternative is computed from the data, in plain words."""
    mood = charts["mood"].description
    series_min = f"{min(make_data()[1]['value']):.1f}"
    assert series_min in mood and "typical range" in mood
    assert "shift to feeling worse" in mood and "1 April" in mood
    daily = make_data()[1].groupby("study_day")["value"].mean().to_numpy()
    first, last = f"{daily[:7].mean():.1f}", f"{daily[-7:].mean():.1f}"
    assert f"{first} in the first week and {last} in the last week" in mood
    assert "worse than" not in mood and "better than" not in mood  # no word from a cut-off
    assert "two resting places, near 3.0 and near 4.6" in charts["landscape"].description
    assert "5 times" in charts["landscape"].description
    assert "from 6 (mild)" in charts["questionnaire_phq9"].description
    assert "reliable worsening" in charts["questionnaire_phq9"].description
    assert "Carry-over from one moment to the next rose" in charts["warnings"].description
    assert "ups and downs stayed about the same" in charts["warnings"].description
    # The rolling windows here end from the 31st answer on (make_data's series from row 30):
    # the caption names that day as where the lines begin and the settings' window share.
    start = pd.Timestamp(make_data()[1]["local_time"].iloc[30]).tz_localize(None)
    assert (f"the lines begin on {start.day} {start.strftime('%B')}, once the first such "
            "stretch is complete") in charts["warnings"].description
    assert "3 times" in charts["recovery"].description
    assert "In 2 of them" in charts["recovery"].description
    assert "worse" in charts["load"].description or "better" in charts["load"].description


def test_calendar_labels_and_table(charts, study):
    """Check the calendar writes answered/sent per day, Monday first, one row per week."""
    _data, results, _settings = study
    table = charts["calendar"].table
    assert list(table.columns) == ["Week starting", "Mon", "Tue", "Wed", "Thu", "Fri", "Sat",
                                   "Sun"]
    assert len(table) == DAYS // 7
    daily = results.families["descriptives"].tables["daily"]
    first = f"{int(daily['n'].iloc[0])}/{len(HOURS)}"
    assert table.iloc[0]["Mon"] == first
    answered = int(daily["n"].sum())
    assert f"You answered {answered} of {DAYS * len(HOURS)} prompts" in (
        charts["calendar"].description)
    assert f">{first}<" in charts["calendar"].svg


def test_grid_writes_tau_in_cells(charts):
    """Check that each grid cell's tau is written in the SVG, starred when p < alpha."""
    svg = charts["grid"].svg
    assert ">0.45*<" in svg  # window 0.3: tau 0.6 - 0.15, p 0.01
    assert ">0.25<" in svg  # window 0.7: tau 0.25, p 0.2
    assert len(charts["grid"].table) == 9


def test_charts_are_translated_through_gettext(study):
    """Check that axis titles, labels and tables go through the gettext callable."""
    data, results, settings = study
    marked = mood_chart(Inputs(replace(data, language="nl"), results, settings, "nl",
                               lambda s: "«" + s + "»"))
    assert "«Date»" in marked.table.columns
    assert "«Date»" in marked.svg
    assert marked.title == "«Your mood over time»"
    assert "somberheid" in marked.svg
    # numbers follow the language: Dutch decimal comma
    assert re.search(r"\d,\d", marked.description)


def test_missing_families_and_estimates_drop_charts_quietly(study):
    """Check that absent families give no chart and missing estimates give a plain sentence."""
    data, results, settings = study
    fams = dict(results.families)
    del fams["landscape"], fams["shifts"]
    fams["recovery"] = replace(fams["recovery"], estimates={
        "recovery_half_life_hours": Estimate.missing("too few episodes"),
        "median_recovery_hours": Estimate.missing("too few episodes")})
    fams["warnings"] = replace(fams["warnings"], estimates={}, tables={
        "rolling": fams["warnings"].tables["rolling"]})
    thin = replace(results, families=fams)
    charts = make_charts(data, thin, settings, "en", lambda s: s)
    assert set(charts) == {"mood", "calendar", "recovery", "warnings", "questionnaire_phq9"}
    assert "too few" in charts["recovery"].description
    assert "could not be judged" in charts["warnings"].description
    assert "shift" not in charts["mood"].description


def test_no_data_gives_no_charts(study):
    """Check that a participant without enough data gets an empty chart set, not an error."""
    data, _results, settings = study
    empty = ParticipantResults("p01", "low_mood", {}, enough_data=False, reason="too few",
                               series=LOW_MOOD)
    assert make_charts(data, empty, settings, "en", lambda s: s) == {}


def test_finish_svg_renames_ids_and_references():
    """Check the id rewrite on a tiny hand-written SVG (clip path and href references)."""
    raw = ('<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink">'
           '<defs><clipPath id="clip7"><rect/></clipPath></defs>'
           '<g clip-path="url(#clip7)"><use xlink:href="#clip7"/></g></svg>')
    out = finish_svg(raw, "questionnaire_phq 9", "T & t", "D < d")
    root = ET.fromstring(out)
    assert root.find(f"{SVG}defs/{SVG}clipPath").get("id") == "sb-questionnaire_phq-9-1"
    assert root.find(f"{SVG}g").get("clip-path") == "url(#sb-questionnaire_phq-9-1)"
    assert root.find(f"{SVG}g/{SVG}use").get("href") == "#sb-questionnaire_phq-9-1"
    assert "xlink:" not in out
    assert root.find(f"{SVG}title").text == "T & t: D < d" and "D &lt; d" in out


def test_many_shifts_are_summarised(study):
    """Check that more than two shifts give a count and the largest, not one sentence each."""
    data, results, settings = study
    days = pd.to_datetime(["2026-03-20", "2026-03-25", "2026-04-01", "2026-04-06"])
    points = pd.DataFrame({"study_day": days, "direction": ["worse", "better", "worse", "better"],
                           "size": [0.8, -0.5, 1.9, -0.7], "method": "PELT",
                           "exceeds_swings": True})
    fams = dict(results.families)
    fams["shifts"] = replace(fams["shifts"], tables={**fams["shifts"].tables,
                                                     "change_points": points})
    chart = mood_chart(Inputs(data, replace(results, families=fams), settings, "en",
                              lambda s: s))
    assert "shift 4 times: 2 times to feeling worse and 2 times to feeling better" in (
        chart.description)
    assert "The largest shift was around 1 April." in chart.description
    # Written labels would overlap: the key names the dotted rule instead.
    assert "shift: worse" not in chart.svg and "detected shift" in chart.svg


def test_load_path_joins_weekly_averages_for_long_studies(charts):
    """Check the load chart: four weeks of days give a weekly path and a day-per-row table."""
    assert ">weekly averages, joined in time order<" in charts["load"].svg
    assert len(charts["load"].table) == DAYS
    assert "start, 16 March" in charts["load"].svg


def test_weasyprint_draws_the_svg_as_a_figure_with_alt_text(charts):
    """Check in a real PDF/UA render that each inlined chart becomes a Figure with /Alt.

    (An early version serialised <ns0:svg>, which XML parsers accept but HTML parsers take for
    an unknown element: WeasyPrint then printed the chart's text instead of drawing it.)
    """
    import io

    import pikepdf
    from weasyprint import HTML

    chosen = [charts["grid"], charts["questionnaire_phq9"]]
    body = "".join(f"<figure><div>{c.svg}</div><figcaption>{c.title}</figcaption></figure>"
                   for c in chosen)
    html = (f"<!doctype html><html lang='en'><head><title>t</title></head>"
            f"<body><h1>Charts</h1>{body}</body></html>")
    pdf = pikepdf.open(io.BytesIO(HTML(string=html).write_pdf(pdf_variant="pdf/ua-1")))
    alts: list[str] = []

    def walk(node: object) -> None:
        if isinstance(node, pikepdf.Dictionary):
            if node.get("/S") == pikepdf.Name("/Figure"):
                alts.append(str(node.get("/Alt", "")))
            kids = node.get("/K")
            for kid in kids if isinstance(kids, pikepdf.Array) else [kids]:
                walk(kid)

    walk(pdf.Root.StructTreeRoot)
    assert alts == [f"{c.title}: {c.description}" for c in chosen]


def test_a_thin_participant_gets_sensible_charts():
    """Check two days of answers, no events, one questionnaire score and better-is-higher."""
    settings = StudySettings.model_validate({
        "study": {"timezone": ZONE},
        "items": {"calm": {"scale": [0, 10]}},
        "composites": {"wellbeing": {"items": ["calm"], "higher_is": "better"}},
        "questionnaires": {"phq9": {"range": [0, 27], "bands": [[0, "minimal"], [5, "mild"]]}},
    })
    times = pd.to_datetime(["2026-05-04 09:00", "2026-05-04 20:00", "2026-05-05 13:00"]
                           ).tz_localize(ZONE)
    series = pd.DataFrame({"local_time": times, "value": [6.0, 7.0, 5.0]})
    daily = pd.DataFrame({"study_day": pd.to_datetime(["2026-05-04", "2026-05-05"]),
                          "mean": [6.5, 5.0], "sd": [0.7, np.nan], "n": [2, 1],
                          "scheduled": [np.nan, np.nan]})
    families = {
        "descriptives": Family(tables={"series": series, "daily": daily},
                               params={"typical_low": np.nan, "typical_high": np.nan}),
        "questionnaires": Family(
            estimates={"reliable_change_phq9": Estimate.missing("one score only")},
            tables={"scores_phq9": pd.DataFrame({"local_time": times[:1], "score": [4.0],
                                                 "band": ["minimal"]})}),
    }
    results = ParticipantResults("p02", "wellbeing", families, enough_data=False, reason="few",
                                 series=SeriesDescription("wellbeing", False, (0.0, 10.0)))
    empty = pd.DataFrame()
    data = ParticipantData("p02", "nl", "default", "yes", True, False, empty, empty, empty,
                           empty, empty)
    charts = make_charts(data, results, settings, "nl", lambda s: s)
    assert set(charts) == {"mood", "calendar", "questionnaire_phq9"}
    mood = charts["mood"]
    assert "higher means better" in mood.svg
    assert "typical range" not in mood.description and "Events" not in mood.description
    assert charts["calendar"].description == (
        "You answered 3 prompts over 2 days. You answered on every day.")
    assert ">2<" in charts["calendar"].svg  # answered only: no prompts-per-day known
    assert "once, on 4 mei: score 4 (minimal)" in charts["questionnaire_phq9"].description


def test_big_designs_still_fit_an_a4_column(study):
    """Check a 40-week calendar and a 7-window grid stay within the page column."""
    from springback.charts.calendar import calendar_chart
    from springback.charts.change import grid_chart

    data, results, settings = study
    days = pd.date_range("2026-01-05", periods=280, freq="D")
    daily = pd.DataFrame({"study_day": days, "mean": 3.0, "sd": 0.5, "n": 4, "scheduled": 5.0})
    grid = pd.DataFrame([{"window": w, "bandwidth_days": b, "tau_inertia": 0.1,
                          "p_inertia": 0.5, "tau_variance": -0.1, "p_variance": 0.5}
                         for w in (0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8) for b in (3.0, 7.0)])
    fams = dict(results.families)
    fams["descriptives"] = replace(fams["descriptives"], tables={
        **fams["descriptives"].tables, "daily": daily})
    fams["warnings"] = replace(fams["warnings"], tables={"grid": grid})
    ctx = Inputs(data, replace(results, families=fams), settings, "en", lambda s: s)
    for chart in (calendar_chart(ctx), grid_chart(ctx)):
        root = ET.fromstring(chart.svg)
        assert float(root.get("width")) <= WIDTH + 1, chart.key
        assert float(root.get("height")) <= 900, chart.key
    assert len(calendar_chart(ctx).table) == 40


def test_a_translation_with_broken_placeholders_falls_back_to_english(study):
    """Check that a catalogue entry with a mistyped {placeholder} cannot stop a booklet."""
    data, results, settings = study

    def sloppy(message: str) -> str:
        return message.replace("{low}", "{lwo}").replace("Date", "Datum")

    chart = make_charts(data, results, settings, "de", sloppy)["mood"]
    assert "Your answers ranged from " in chart.description
    assert "Datum" in chart.table.columns


def test_clip_path_ids_from_vl_convert_become_stable_and_namespaced():
    """Check that vl-convert's process-wide clip counters cannot reach the booklet.

    Two conversions of the same clipped spec get different raw ids (clip1, clip2); after
    `to_svg` both are identical and the ids carry the chart key.
    """
    import altair as alt
    import vl_convert

    from springback.charts.svg import _rendered as svg_cache
    from springback.charts.svg import to_svg, vega_lite

    chart = (alt.Chart(alt.Data(values=[{"x": 1, "y": 2}, {"x": 3, "y": 9}]), width=100,
                       height=50).mark_line(clip=True)
             .encode(x=alt.X(field="x", type="quantitative", scale=alt.Scale(domain=[0, 2])),
                     y=alt.Y(field="y", type="quantitative")))
    raw = [vl_convert.vegalite_to_svg(vega_lite(chart)) for _ in range(2)]
    assert re.findall(r'id="([^"]+)"', raw[0]) != re.findall(r'id="([^"]+)"', raw[1])
    svg_cache.clear()  # each to_svg below renders anew, with a fresh clip id
    first = to_svg(chart, "trend", "T", "D", "en")
    svg_cache.clear()
    second = to_svg(chart, "trend", "T", "D", "en")
    assert first == second
    assert 'clip-path="url(#sb-trend-1)"' in first and 'id="sb-trend-1"' in first
