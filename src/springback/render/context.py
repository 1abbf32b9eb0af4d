"""The typed template context of a booklet, built in exactly one function."""

from __future__ import annotations

import datetime as dt
import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass, replace
from typing import Any, TypedDict, cast

import pandas as pd

from springback.charts import Chart, palette
from springback.findings import Finding, Findings
from springback.i18n.language import LocaleFormat, translations
from springback.metrics.results import Estimate, ParticipantResults
from springback.model import EDITIONS, Edition, Flag, ParticipantData
from springback.render import phrases
from springback.settings import Referral, StudySettings

PARTICIPANT_SECTIONS = (
    "summary", "mood", "participation", "ups_downs", "bouncing_back", "carry_over", "change",
    "questionnaires", "reflect", "help", "about_booklet",
)
"""Section partials (templates/sections/<name>.html) of the participant edition, in order: the
summary page, one section per topic, help, and what the booklet is (with how it was made and
the words used) at the end."""

THERAPIST_SECTIONS = (
    "summary", "mood", "pattern", "change", "sensitivity", "questionnaires", "participation",
    "data_quality", "ups_downs", "bouncing_back", "carry_over", "landscape", "methods",
)
"""Section partials of the therapist edition, in order: the clinical summary (with the review
state and its checklist), the detail, then the methods appendix."""

SECTION_CHARTS: dict[Edition, dict[str, tuple[str, ...]]] = {
    "participant": {"summary": ("mood",), "bouncing_back": ("recovery",),
                    "change": ("warnings",), "questionnaires": ("questionnaire_",)},
    "therapist": {"mood": ("mood",), "change": ("warnings",), "sensitivity": ("grid",),
                  "questionnaires": ("questionnaire_",), "participation": ("calendar",),
                  "bouncing_back": ("recovery", "load"), "landscape": ("landscape",)},
}
"""Charts each section of each edition shows (a key ending in '_' stands for every key it
starts); a participant is spared the answer calendar, the load loop and the landscape."""


def chart_names(edition: Edition) -> frozenset[str]:
    """The names of the charts any section of this edition shows (the ones worth drawing)."""
    return frozenset(name for names in SECTION_CHARTS[edition].values() for name in names)

APPENDIX_MAX_ROWS = 45
"""In print, the numbers behind each chart are in an appendix at the end (on screen they stay
in a <details> beside the chart). A table longer than this (about one page) is printed in its
condensed form (weekly rows) or, without one, left to the HTML edition."""


NUMBERS_IN_PICTURE = ("calendar", "grid")
"""Charts that write every number of their table into the picture itself (the answer
calendar's counts, the sensitivity grid's tau values): the printed appendix does not repeat
them."""


@dataclass(frozen=True)
class AppendixTable:
    """One chart's numbers as the printed appendix shows them (`table is None`: HTML only)."""

    key: str
    title: str
    caption: str
    table: pd.DataFrame | None


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
    flags: list[Flag]
    refer: bool
    review_state: str
    referral: Referral | None
    charts: dict[str, Chart]
    appendix: list[AppendixTable]
    section_charts: dict[str, list[str]]
    """Section -> keys of the charts it shows, in order."""
    findings: dict[str, Finding]
    refer_reasons: list[str]
    """The help banner's reason per refer flag, in the rule's own words (phrases.refer_sentence)."""
    flag_words: dict[str, tuple[str, str]]
    """Rule name -> (the rule, what triggered it) in the booklet's language (phrases)."""
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
    flags: list[Flag],
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
    charts = _explained(charts, edition, by_topic)
    refer = by_topic["help"].reading == "refer" if "help" in by_topic else False
    series = results.series
    sections = _sections(settings, edition, refer)
    desc = _params(results, "descriptives")
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
        period_first=series.first_day,
        period_last=series.last_day,
        version=version,
        built_at=built_at,
        tool_version=tool_version,
        variable_label=settings.label_of(series.variable, language),
        scale_low=series.scale_low,
        scale_high=series.scale_high,
        higher_is_worse=series.higher_is_worse,
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
        appendix=_appendix(sections, charts, edition),
        section_charts={name: _shown(SECTION_CHARTS[edition].get(name, ()), charts)
                        for name in sections},
        findings=by_topic,
        flag_words=_flag_words(own_flags, settings, language),
        refer_reasons=phrases.refer_sentences(
            own_flags, settings, language, translations(language),
            LocaleFormat(language, settings.study.timezone).date_long),
        summary=[by_topic[t] for t in findings.summary.get(edition, ()) if t in by_topic],
        alpha=float(_params(results, "warnings").get("alpha", settings.metrics.alpha)),
        large_print=settings.booklet.large_print,
        paper=settings.booklet.paper,
        palette_css=palette.css_variables(),
    )


def _flag_words(flags: list[Flag], settings: StudySettings,
                language: str) -> dict[str, tuple[str, str]]:
    """Each flag's rule and trigger in the booklet's language (the review table's words)."""
    fmt = LocaleFormat(language, settings.study.timezone)
    tr = translations(language)

    def number(x: float) -> str:
        return fmt.number(x, 0 if float(x).is_integer() else 1)

    return {f.rule: (phrases.rule_words(f, settings, language, tr, number),
                     phrases.flag_detail(f, settings, language, tr, fmt.date_long, number))
            for f in flags}


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


EXPLAINED_BY = {"recovery": "recovery"}
"""Charts the participant edition shows only beside a reading of this topic: 'not enough data'
never stands next to a picture of the few episodes there were (the therapist edition still
shows them)."""


def _explained(charts: dict[str, Chart], edition: Edition,
               by_topic: dict[str, Finding]) -> dict[str, Chart]:
    """The charts this edition may show, given the findings they explain."""
    if edition != "participant":
        return charts
    return {key: c for key, c in charts.items()
            if key not in EXPLAINED_BY or (EXPLAINED_BY[key] in by_topic
                                           and by_topic[EXPLAINED_BY[key]].known)}


def _shown(wanted: tuple[str, ...], charts: dict[str, Chart]) -> list[str]:
    """Keys of the charts matching the wanted names (a name ending in '_' is a prefix)."""
    return [key for name in wanted for key in sorted(charts)
            if (key.startswith(name) if name.endswith("_") else key == name)]


def _appendix(sections: list[str], charts: dict[str, Chart],
              edition: Edition) -> list[AppendixTable]:
    """The shown charts' tables for the printed appendix, in reading order."""
    out = []
    for section in sections:
        for key in _shown(SECTION_CHARTS[edition].get(section, ()), charts):
            c = charts[key]
            if key in NUMBERS_IN_PICTURE:
                continue
            if len(c.table) <= APPENDIX_MAX_ROWS:
                out.append(AppendixTable(key, c.title, c.table_caption, c.table))
            elif c.print_table is not None and len(c.print_table) <= APPENDIX_MAX_ROWS:
                out.append(AppendixTable(key, c.title, c.print_caption, c.print_table))
            else:
                out.append(AppendixTable(key, c.title, c.table_caption, None))
    return out


def _sections(settings: StudySettings, edition: Edition, refer: bool) -> list[str]:
    """Sections in reading order; where a 'refer' flag exists, help follows the summary."""
    names = list(PARTICIPANT_SECTIONS if edition == "participant" else THERAPIST_SECTIONS)
    if edition == "participant" and not settings.booklet.show_change_to_participant:
        names.remove("change")
    if not settings.booklet.show_landscape and "landscape" in names:
        names.remove("landscape")
    if refer and "help" in names:  # the participant's edition: help right after the summary
        names.remove("help")
        names.insert(1, "help")
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
        bands = [(b.label, b.lower, b.upper) for b in settings.band_table(key, language)]
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

