"""The typed template context of a booklet, built in exactly one function."""

from __future__ import annotations

import datetime as dt
import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass, replace
from typing import Any, TypedDict, cast

import pandas as pd

from springback.charts import Chart, palette
from springback.findings import Finding, Findings, FlagLike
from springback.metrics.results import Estimate, ParticipantResults
from springback.model import EDITIONS, Edition, ParticipantData
from springback.settings import Referral, StudySettings

PARTICIPANT_SECTIONS = (
    "summary", "about_booklet", "participation", "mood", "ups_downs", "bouncing_back", "carry_over",
    "change", "landscape", "questionnaires", "reflect", "help", "how_made", "glossary",
)
"""Section partials (templates/sections/<name>.html) of the participant edition, in order."""

THERAPIST_SECTIONS = (
    "summary", "review", "about_booklet", "participation", "data_quality", "mood", "ups_downs",
    "bouncing_back", "carry_over", "change", "sensitivity", "landscape", "pattern",
    "questionnaires", "reflect", "help", "how_made", "methods", "glossary",
)
"""Section partials of the therapist edition, in order."""

SECTION_CHARTS = {
    "participation": ("calendar",), "mood": ("mood",), "bouncing_back": ("recovery", "load"),
    "change": ("warnings",), "sensitivity": ("grid",), "landscape": ("landscape",),
    "questionnaires": ("questionnaire_",),
}
"""Charts each section shows (a key ending in '_' stands for every key it starts)."""

LONG_TABLE_ROWS = 16
"""Data tables longer than this cannot sit on the page of their chart; in print they move to
an appendix at the end of the booklet (on screen they stay in their <details>)."""


@dataclass(frozen=True)
class QuestionnaireView:
    """One questionnaire as the booklet shows it."""

    key: str
    label: str
    last: Estimate
    last_band: str
    change: Estimate
    bands: tuple[tuple[str, float, float], ...]
    """(label, lowest score, highest score) per band, increasing."""
    higher_is_worse: bool
    n_scores: int


class BookletContext(TypedDict):
    """Everything a booklet template may use; nothing else reaches the templates."""

    edition: Edition
    language: str
    sections: list[str]
    study_title: str
    study_team: str
    contact_name: str
    contact_email: str
    contact_phone: str
    answers_checked: str
    participant: str
    period_first: dt.date | None
    period_last: dt.date | None
    version: int
    built_at: dt.datetime
    tool_version: str
    variable_label: str
    scale_low: float
    scale_high: float
    higher_is_worse: bool
    typical_low: float | None
    typical_high: float | None
    enough_data: bool
    reason: str
    estimates: dict[str, Estimate]
    params: dict[str, dict[str, Any]]
    change_points: list[dict[str, Any]]
    event_kinds: list[tuple[str, int]]
    questionnaires: list[QuestionnaireView]
    quality: dict[str, Any]
    set_aside: list[dict[str, Any]]
    flags: list[FlagLike]
    refer: bool
    review_state: str
    referral: Referral | None
    charts: dict[str, Chart]
    long_tables: list[str]
    findings: dict[str, Finding]
    """Topic -> the finding every sentence about it phrases (springback.findings)."""
    summary: list[Finding]
    """The findings this edition's summary states, most important first."""
    alpha: float
    large_print: bool
    paper: str
    palette_css: str


def build_context(
    *,
    settings: StudySettings,
    data: ParticipantData,
    results: ParticipantResults,
    findings: Findings,
    flags: list[FlagLike],
    review_state: str,
    charts: dict[str, Chart],
    edition: Edition,
    language: str,
    version: int,
    built_at: dt.datetime,
    tool_version: str,
) -> BookletContext:
    """Gather what one edition of one participant's booklet shows."""
    if edition not in EDITIONS:
        raise ValueError(f"edition must be one of {', '.join(EDITIONS)}, got {edition!r}")
    own_flags = [f for f in flags if f.participant == data.participant]
    by_topic = findings.by_topic()
    refer = by_topic["help"].reading == "refer" if "help" in by_topic else False
    variable = results.variable or settings.about
    sections = _sections(settings, edition, refer)
    desc = _params(results, "descriptives")
    low, high = _scale(settings, variable)
    first, last = _period(data)
    return BookletContext(
        edition=edition,
        language=language,
        sections=sections,
        study_title=settings.study.title,
        study_team=settings.study.team,
        contact_name=settings.study.contact.name,
        contact_email=settings.study.contact.email,
        contact_phone=settings.study.contact.phone,
        answers_checked=_text(settings.study.answers_checked, language),
        participant=data.participant,
        period_first=first,
        period_last=last,
        version=version,
        built_at=built_at,
        tool_version=tool_version,
        variable_label=settings.label_of(variable, language),
        scale_low=float(desc.get("scale_low", low)),
        scale_high=float(desc.get("scale_high", high)),
        higher_is_worse=bool(desc.get("higher_is_worse", _polarity(settings, variable))),
        typical_low=_finite(desc.get("typical_low")),
        typical_high=_finite(desc.get("typical_high")),
        enough_data=results.enough_data,
        reason=results.reason,
        estimates=results.measures(),
        params={name: dict(fam.params) for name, fam in results.families.items()},
        change_points=_records(results, "shifts", "change_points"),
        event_kinds=_event_kinds(data),
        questionnaires=_questionnaires(settings, results, language),
        quality=_quality(data),
        set_aside=(cast(list[dict[str, Any]], data.set_aside.head(50).to_dict("records"))
                   if len(data.set_aside) else []),
        flags=own_flags,
        refer=refer,
        review_state=review_state,
        referral=settings.referral_for(data.region, language),
        charts={key: _chart_view(chart) for key, chart in charts.items()},
        long_tables=_long_tables(sections, charts),
        findings=by_topic,
        summary=[by_topic[t] for t in findings.summary.get(edition, ()) if t in by_topic],
        alpha=float(_params(results, "warnings").get("alpha", settings.metrics.alpha)),
        large_print=settings.booklet.large_print,
        paper=settings.booklet.paper,
        palette_css=palette.css_variables(),
    )


SVG_NS = "http://www.w3.org/2000/svg"
XLINK_NS = "http://www.w3.org/1999/xlink"


def _chart_view(chart: Chart) -> Chart:
    """The chart with SVG markup an HTML parser reads as SVG."""
    return replace(chart, svg=inline_svg(chart.svg))


def inline_svg(svg: str) -> str:
    """Return the SVG without namespace prefixes on its elements (`<svg>`, not `<ns0:svg>`).

    HTML parsers know SVG only by the plain element names; a prefixed `<ns0:svg>` becomes a
    pile of unknown, endlessly nested inline elements (no picture, and layout recursion in
    WeasyPrint). ElementTree writes such prefixes whenever another library has re-registered
    the empty prefix, so the markup is normalised here, where it enters the HTML.
    """
    if svg.lstrip().startswith("<svg"):
        return svg
    root = ET.fromstring(svg)
    if root.tag != f"{{{SVG_NS}}}svg":
        raise ValueError(f"a chart must be an SVG image, found <{root.tag}>")
    for element in root.iter():
        if isinstance(element.tag, str):
            element.tag = element.tag.removeprefix(f"{{{SVG_NS}}}")
        for name in [n for n in element.attrib if n == f"{{{XLINK_NS}}}href"]:
            element.set("href", element.attrib.pop(name))  # SVG 2 reads plain href
    root.set("xmlns", SVG_NS)
    return ET.tostring(root, encoding="unicode")


def _long_tables(sections: list[str], charts: dict[str, Chart]) -> list[str]:
    """Keys of the shown charts whose data tables go to the print appendix, in reading order."""
    keys = []
    for section in sections:
        for wanted in SECTION_CHARTS.get(section, ()):
            for key in sorted(charts):
                matches = key.startswith(wanted) if wanted.endswith("_") else key == wanted
                if matches and len(charts[key].table) > LONG_TABLE_ROWS:
                    keys.append(key)
    return keys


def _sections(settings: StudySettings, edition: Edition, refer: bool) -> list[str]:
    """Sections in reading order; where a 'refer' flag exists, help follows the summary."""
    names = list(PARTICIPANT_SECTIONS if edition == "participant" else THERAPIST_SECTIONS)
    if edition == "participant" and not settings.booklet.show_change_to_participant:
        names.remove("change")
    if not settings.booklet.show_landscape:
        names.remove("landscape")
    if refer:
        names.remove("help")
        names.insert(2 if edition == "therapist" else 1, "help")  # right after the summary
    return names


def _text(texts: dict[str, str], language: str) -> str:
    return texts.get(language) or texts.get("en") or ""


def _params(results: ParticipantResults, family: str) -> dict[str, Any]:
    fam = results.families.get(family)
    return dict(fam.params) if fam is not None else {}


def _finite(x: Any) -> float | None:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _scale(settings: StudySettings, variable: str) -> tuple[float, float]:
    try:
        return settings.scale_of(variable)
    except (KeyError, StopIteration, ValueError):
        return (math.nan, math.nan)


def _polarity(settings: StudySettings, variable: str) -> bool:
    try:
        return settings.higher_is_worse(variable)
    except KeyError:
        return True


def _period(data: ParticipantData) -> tuple[dt.date | None, dt.date | None]:
    """First and last study day with an answer."""
    if data.momentary.empty or "study_day" not in data.momentary:
        return None, None
    days = pd.to_datetime(data.momentary["study_day"])
    return days.min().date(), days.max().date()


def _records(results: ParticipantResults, family: str, table: str) -> list[dict[str, Any]]:
    fam = results.families.get(family)
    if fam is None or table not in fam.tables:
        return []
    return cast(list[dict[str, Any]], fam.tables[table].to_dict("records"))


def _event_kinds(data: ParticipantData) -> list[tuple[str, int]]:
    """Event kinds the participant reported, most frequent first (names as typed)."""
    if data.events.empty or "kind" not in data.events:
        return []
    counts = data.events["kind"].astype(str).value_counts()
    return sorted(((str(k), int(n)) for k, n in counts.items()), key=lambda kn: (-kn[1], kn[0]))


def _quality(data: ParticipantData) -> dict[str, Any]:
    if data.quality.empty:
        return {}
    return {cast(str, k): v for k, v in data.quality.iloc[0].to_dict().items()
            if k != "participant"}


def _questionnaires(
    settings: StudySettings, results: ParticipantResults, language: str
) -> list[QuestionnaireView]:
    """Questionnaires with at least one score, with their bands as score ranges."""
    fam = results.families.get("questionnaires")
    if fam is None:
        return []
    views = []
    for key, spec in settings.questionnaires.items():
        scores = fam.tables.get(f"scores_{key}")
        if scores is None or scores.empty:
            continue
        last = fam.estimates.get(f"questionnaire_last_{key}", Estimate.missing("no score"))
        bands = []
        for i, (lower, label) in enumerate(spec.bands):
            upper = spec.bands[i + 1][0] - 1 if i + 1 < len(spec.bands) else spec.range[1]
            bands.append((settings.band_label(key, str(label), language), float(lower),
                          float(upper)))
        views.append(
            QuestionnaireView(
                key=key,
                label=_text(spec.label, language) or key,
                last=last,
                last_band=settings.band_label(key, str(scores["band"].iloc[-1]), language)
                if "band" in scores else "",
                change=fam.estimates.get(
                    f"reliable_change_{key}", Estimate.missing("only one score")
                ),
                bands=tuple(bands),
                higher_is_worse=spec.higher_is == "worse",
                n_scores=len(scores),
            )
        )
    return views

