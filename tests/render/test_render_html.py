"""Rendered booklets and overview, read back with an HTML parser (never regexes on markup)."""

from __future__ import annotations

import itertools
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from babel.numbers import parse_decimal

from springback import findings, render
from springback.render.context import PARTICIPANT_SECTIONS, THERAPIST_SECTIONS, inline_svg
from tests.support.render_samples import (
    BUILT,
    CHART_KEYS,
    EVIL,
    SampleFlag,
    render_booklet,
    sample_chart,
    sample_data,
    sample_results,
    sample_settings,
)


class Page(HTMLParser):
    """Collect what the tests look at: elements with attributes, text per element, scripts."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.elements: list[tuple[str, dict[str, str | None]]] = []
        self.stack: list[tuple[str, dict[str, str | None], list[str]]] = []
        self.texts: dict[int, str] = {}
        self.text_parts: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.elements.append((tag, dict(attrs)))
        if tag not in {"meta", "br", "link", "input", "img", "path", "rect"}:
            self.stack.append((tag, dict(attrs), []))

    def handle_endtag(self, tag: str) -> None:
        while self.stack:
            t, attrs, parts = self.stack.pop()
            text = "".join(parts)
            if self.stack:
                self.stack[-1][2].append(text)
            if attrs.get("data-measure") is not None:
                self.texts[len(self.texts)] = f"{attrs['data-measure']}|{attrs['data-part']}|{text}"
            if t == tag:
                break

    def handle_data(self, data: str) -> None:
        self.text_parts.append(data)
        if self.stack:
            self.stack[-1][2].append(data)

    def tags(self, name: str) -> list[dict[str, str | None]]:
        return [a for t, a in self.elements if t == name]

    @property
    def text(self) -> str:
        return " ".join(self.text_parts)


def parse(html: str) -> Page:
    page = Page()
    page.feed(html)
    page.close()
    return page


@pytest.fixture(scope="module")
def editions() -> dict[str, str]:
    return {ed: render_booklet(ed) for ed in ("participant", "therapist")}


@pytest.mark.parametrize(
    ("edition", "expected"),
    [("participant", [s for s in PARTICIPANT_SECTIONS if s != "change"]),
     ("therapist", list(THERAPIST_SECTIONS))],
)
def test_every_section_is_present_in_order(editions, edition, expected) -> None:
    """Check that each edition has every section of the design, in reading order."""
    page = parse(editions[edition])
    found = [a["id"].removeprefix("s-") for a in page.tags("section") if a.get("id")]
    assert found == [*expected, "appendix"]  # the print appendix of the charts' numbers


def test_document_structure_is_accessible(editions) -> None:
    """Check lang, one h1, no skipped heading level, landmarks, skip link and the CSP."""
    for html in editions.values():
        page = parse(html)
        assert page.tags("html")[0]["lang"] == "en"
        levels = [int(t[1]) for t, _ in page.elements if t in {"h1", "h2", "h3", "h4"}]
        assert levels.count(1) == 1 and levels[0] == 1
        assert all(b - a <= 1 for a, b in itertools.pairwise(levels))
        for landmark in ("header", "nav", "main", "footer"):
            assert page.tags(landmark), landmark
        assert page.tags("a")[0]["href"] == "#main" and page.tags("main")[0]["id"] == "main"
        csp = [m["content"] for m in page.tags("meta")
               if m.get("http-equiv") == "Content-Security-Policy"]
        assert csp and csp[0].startswith("default-src 'none'")
        assert not page.tags("script") and not page.tags("link")
        for table in page.tags("th"):
            assert table.get("scope") in {"col", "row"}


def test_numbers_equal_the_metric_values(editions) -> None:
    """Check that every number tied to a measure shows the measure's value, rounded."""
    data = sample_data()
    measures = sample_results(data).measures()
    params = sample_results(data).families["descriptives"].params
    for html in editions.values():
        page = parse(html)
        shown = [t.split("|", 2) for t in page.texts.values()]
        assert len(shown) > 5
        for name, part, text in shown:
            value = (params[name] if name in params else getattr(measures[name], part))
            digits = len(text.split(".")[1]) if "." in text else 0
            assert float(parse_decimal(text, locale="en")) == pytest.approx(
                round(value, digits)), (name, part, text)


def test_participant_edition_has_no_statistics(editions) -> None:
    """Check that the participant edition speaks in words, not intervals or p-values."""
    text = parse(editions["participant"]).text
    for jargon in ("interval", "p-value", "Kendall", "RMSSD", "autocorrelation"):
        assert jargon not in text
    assert "about nine in ten prompts" in text
    assert "about half a day" in text


def test_missing_estimates_say_not_enough_data() -> None:
    """Check that a missing estimate gives the 'not enough data' wording and never a number."""
    data = sample_data()
    results = sample_results(data, missing=("inertia", "recovery_half_life_hours", "rmssd"))
    for edition in ("participant", "therapist"):
        full = render_booklet(edition, data=data, results=results)
        page = parse(full)
        sections = {}
        for name in ("carry_over", "bouncing_back", "ups_downs"):
            start = full.index(f'id="s-{name}"')
            sections[name] = full[start:full.index("</section>", start)]
        for name, html in sections.items():
            assert "Not enough data for this part." in html, (edition, name)
        shown = {t.split("|")[0] for t in page.texts.values()}
        assert not shown & {"inertia", "recovery_half_life_hours", "rmssd"}


@pytest.mark.parametrize("edition", ["participant", "therapist"])
def test_user_strings_are_escaped(edition) -> None:
    """Check that study title, item labels, event kinds and referral texts cannot inject markup."""
    settings = sample_settings(title=EVIL)
    raw = settings.model_dump()
    raw["composites"]["low_mood"]["label"] = {"en": EVIL}
    raw["referral"][0]["emergency"] = EVIL
    raw["study"]["answers_checked"] = {"en": EVIL}
    settings = type(settings).model_validate(raw)
    data = sample_data(events=(EVIL, "bad news"))
    flags = [SampleFlag(data.participant, EVIL, "refer", 16.0, "2026-03-11", EVIL)]
    html = render_booklet(edition, settings=settings, data=data, flags=flags,
                          charts={"mood": sample_chart("mood", label=EVIL)})
    page = parse(html)
    assert not page.tags("script")
    assert EVIL in page.text  # shown as text, so the reader sees what was typed
    assert "&lt;script&gt;" in html


def test_refer_flag_puts_help_first() -> None:
    """Check that a 'refer' flag moves the help section right after the summary."""
    flags = [SampleFlag("P007", "phq9 high", "refer", 16.0, "2026-03-11", "score 16")]
    page = parse(render_booklet("participant", flags=flags))
    found = [a["id"] for a in page.tags("section")]
    assert found[:2] == ["s-summary", "s-help"]
    assert "it may help to talk with someone soon" in page.text
    other = [SampleFlag("P999", "phq9 high", "refer", 16.0, "2026-03-11", "score 16")]
    page = parse(render_booklet("participant", flags=other))
    assert [a["id"] for a in page.tags("section")][:2] == ["s-summary", "s-mood"]


def test_therapist_edition_shows_flags_and_review_state() -> None:
    """Check that the therapist edition lists flags with their data and the review state."""
    flags = [SampleFlag("P007", "phq9 high", "hold", 16.0, "2026-03-11", "score 16 of 27")]
    html = render_booklet("therapist", flags=flags, review_state="held")
    text = parse(html).text
    assert "phq9 high" in text and "11 March 2026" in text and "score 16 of 27" in text
    assert "a clinician must review this booklet" in text


def test_change_section_follows_the_setting() -> None:
    """Check that participants see how indicators changed only when the study enables it."""
    shown = sample_settings(show_change_to_participant=True, show_landscape=False)
    ids = [a["id"] for a in parse(render_booklet("participant", settings=shown)).tags("section")]
    assert "s-change" in ids and "s-landscape" not in ids
    text = parse(render_booklet("participant", settings=shown)).text
    assert "false alarms" in text


def test_every_chart_has_caption_and_data_table(editions) -> None:
    """Check that each chart is a figure with a caption and a captioned table in <details>."""
    html = editions["therapist"]
    page = parse(html)
    figures = page.tags("figure")
    assert len(figures) == len(CHART_KEYS)
    assert len(page.tags("figcaption")) == len(CHART_KEYS)
    assert len(page.tags("details")) == len(CHART_KEYS)
    assert len(page.tags("caption")) > len(CHART_KEYS)


def test_cover_shows_period_version_and_edition(editions) -> None:
    """Check that the cover names the period covered, the version and the edition."""
    text = parse(editions["participant"]).text
    assert "2 March 2026 – 21 March 2026" in text
    assert "Booklet version" in text and "3" in text and "P007" in text


def test_project_template_overrides_packaged(tmp_path: Path) -> None:
    """Check that a study's own template replaces the packaged one of the same name."""
    (tmp_path / "sections").mkdir()
    (tmp_path / "sections" / "reflect.html").write_text(
        "<p>{{ _('Our own reflection questions.') }}</p>", encoding="utf-8")
    html = render_booklet("participant", project_templates=tmp_path)
    assert "Our own reflection questions." in parse(html).text
    assert "Which parts of this booklet do you recognise?" not in parse(html).text


def test_large_print_and_paper_settings() -> None:
    """Check that large print marks the document and the paper size reaches the page rule."""
    html = render_booklet("participant", settings=sample_settings(large_print=True,
                                                                   paper="Letter"))
    assert "large-print" in (parse(html).tags("html")[0].get("class") or "")
    assert "size: letter" in html


def test_overview_lists_every_participant_with_reason() -> None:
    """Check the team overview: one row each, links to both editions, reasons for the rest."""
    rows = [
        {"participant": "P002", "status": "built", "reason": "", "compliance": 0.8,
         "flags": [{"rule": "phq9 high", "action": "hold", "value": 16.0, "when": "2026-03-11",
                    "detail": ""}],
         "review_state": "held", "editions": ["booklets/P002/participant",
                                              "booklets/P002/therapist"],
         "formats": ["html", "pdf"], "version": 1, "period": ("2026-03-02", "2026-03-21")},
        {"participant": "P001", "status": "withdrawn", "reason": "consent withdrawn"},
        {"participant": "P003", "status": "not enough data", "reason": "12 answered prompts"},
        {"participant": EVIL, "status": "no feedback", "reason": ""},
    ]
    env = render.make_environment(None, "en")
    html = render.render_overview(env, rows, sample_settings(), BUILT)
    page = parse(html)
    hrefs = [a["href"] for a in page.tags("a")]
    for href in ("booklets/P002/participant.html", "booklets/P002/therapist.pdf"):
        assert href in hrefs
    text = page.text
    assert "80%" in text and "phq9 high" in text and "held for review" in text
    assert "withdrew consent" in text and "not enough data" in text
    assert "did not want feedback" in text and not page.tags("script")
    assert len(page.tags("h1")) == 1


def test_chart_numbers_go_to_the_print_appendix_condensed_when_long() -> None:
    """Check that every chart's table stays in <details> on screen and is in the appendix in
    print: as it is when short, in its weekly form when long, and named as screen-only when
    there is no short form."""
    base = sample_chart("mood")
    daily = pd.DataFrame({"Day": [f"{d} March" for d in range(1, 61)], "mood": ["3.0"] * 60})
    weekly = pd.DataFrame({"Week starting": ["2 March", "9 March"], "Average": ["3.0", "3.1"]})
    mood = type(base)("mood", "Mood", "A line.", base.svg, daily, "Daily mood", weekly,
                      "Weekly mood")
    recovery = type(base)("recovery", "Recovery", "Curves.", base.svg, daily, "Episodes")
    page = parse(render_booklet("participant", charts={"mood": mood, "recovery": recovery}))
    assert [d["class"] for d in page.tags("details")] == ["chart-data", "chart-data"]
    appendix = [a for a in page.tags("section") if a.get("id") == "s-appendix"]
    assert appendix and "print-only" in appendix[0]["class"]
    captions = [t for t in page.text_parts if t in ("Daily mood", "Weekly mood", "Episodes")]
    assert captions == ["Daily mood", "Episodes", "Weekly mood"]  # screen tables, then print
    text = " ".join(page.text.split())
    assert "The numbers behind “Recovery” are in the screen version of this booklet" in text


def test_prefixed_svg_is_made_readable_for_html() -> None:
    """Check that an SVG serialised with a namespace prefix becomes plain inline SVG."""
    ns = "http://www.w3.org/2000/svg"
    prefixed = (f'<ns0:svg xmlns:ns0="{ns}" role="img"><ns0:title>t</ns0:title>'
                '<ns0:path d="M0 0" /><ns0:path d="M1 1" /></ns0:svg>')
    fixed = inline_svg(prefixed)
    page = parse(f"<div>{fixed}</div>")
    assert [t for t, _ in page.elements] == ["div", "svg", "title", "path", "path"]
    assert page.tags("svg")[0]["xmlns"] == ns
    plain = f'<svg xmlns="{ns}"><path d="M0 0"/></svg>'
    assert inline_svg(plain) == plain
    with pytest.raises(ValueError, match="must be an SVG image"):
        inline_svg('<html xmlns="http://www.w3.org/1999/xhtml"/>')


def test_many_change_points_give_one_course_sentence_from_the_findings() -> None:
    """Check the mood section states the course reading once (not a paragraph per change point),
    marked with its finding, and that the words follow the reading the findings stage made."""
    data = sample_data()
    results = sample_results(data)
    days = pd.date_range("2026-03-01", periods=21, freq="D")
    level = np.where(np.arange(21) < 11, 3.0, 5.0)
    daily = pd.DataFrame({"study_day": days, "mean": level + 0.1 * np.sin(np.arange(21)),
                          "n": 5, "level": level})
    points = pd.DataFrame({"study_day": [days[11]], "direction": ["worse"], "size": [2.0],
                           "method": "PELT", "exceeds_swings": [True],
                           "questionnaire_nearby": [""]})
    shifts = results.families["shifts"]
    families = {**results.families,
                "shifts": type(shifts)(estimates=shifts.estimates,
                                       tables={"daily": daily, "change_points": points},
                                       params={"noise_sd": 0.1, "within_segment_sd": 0.1})}
    results = type(results)(results.participant, results.variable, families, True,
                            series=results.series)
    page = parse(render_booklet("participant", data=data, results=results))
    marks = [t for t in page.tags("p") if t.get("data-finding") == "course"]
    assert [t["data-reading"] for t in marks] == ["abrupt_shift"]
    text = " ".join(page.text.split())
    assert "Around 12 March 2026, your mood changed for the worse" in text


def test_results_are_never_called_abnormal(editions) -> None:
    """Check that results are told against the person's own range, never as 'abnormal'."""
    for html in editions.values():
        text = parse(html).text.lower()
        assert "abnormal" not in text and "typical range" in text


def test_editions_are_checked() -> None:
    """Check that an unknown edition, or a context of the other edition, is refused."""
    data = sample_data()
    results = sample_results(data)
    kwargs = dict(settings=sample_settings(), data=data, results=results,
                  findings=findings.decide(results, [], sample_settings()), flags=[],
                  review_state="not needed", charts={}, language="en", version=1,
                  built_at=BUILT, tool_version="0.1.0")
    with pytest.raises(ValueError, match="edition must be one of"):
        render.build_context(edition="summary", **kwargs)
    context = render.build_context(edition="participant", **kwargs)
    env = render.make_environment(None, "en")
    with pytest.raises(ValueError, match="built for the participant edition"):
        render.render_edition(env, context, "therapist")


@pytest.mark.parametrize("edition", ["participant", "therapist"])
def test_too_few_episodes_show_no_recovery_chart_to_the_participant(edition: str) -> None:
    """Check that 'not enough data' for bouncing back never stands beside a recovery chart
    in the participant edition (the therapist still sees the episodes that were found)."""
    import dataclasses

    from springback.metrics.results import Estimate, Family

    results = sample_results(sample_data())
    few = Family(estimates={
        "recovery_half_life_hours": Estimate.missing("only 2 episodes; at least 3 are needed"),
        "n_episodes": Estimate(2.0, n=2)})
    results = dataclasses.replace(results, families={**results.families, "recovery": few})
    html = render_booklet(edition, results=results)
    section = html[html.index('id="s-bouncing_back"'):]
    section = section[:section.index("</section>")]
    assert "Not enough data for this part." in section
    assert ('id="chart-recovery"' in section) == (edition == "therapist")
