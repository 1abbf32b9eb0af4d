"""Every sentence that states a finding carries its source, and the source is out/findings.csv.

The example study's booklets are parsed with an HTML parser; each element marked
`data-finding` / `data-reading` / `data-certainty` must match the participant's row of the
build's own findings.csv (the findings stage decided once; templates only phrase).
"""

from __future__ import annotations

from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest

from springback.settings import load_settings

pytestmark = pytest.mark.xdist_group("example")


class Marks(HTMLParser):
    """Collect (topic, reading, certainty, text) of every element marked with data-finding."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.marks: list[dict[str, str]] = []
        self._open: list[tuple[str, dict[str, str], list[str]]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if "data-finding" in a:
            self._open.append((tag, a, []))

    def handle_endtag(self, tag: str) -> None:
        if self._open and self._open[-1][0] == tag:
            _, a, text = self._open.pop()
            self.marks.append({"topic": a["data-finding"], "reading": a["data-reading"],
                               "certainty": a.get("data-certainty", ""),
                               "text": " ".join("".join(text).split())})

    def handle_data(self, data: str) -> None:
        for _, _, text in self._open:
            text.append(data)


def _marks(path: Path) -> list[dict[str, str]]:
    parser = Marks()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser.marks


@pytest.fixture(scope="module")
def findings(built_example: Path) -> pd.DataFrame:
    return pd.read_csv(built_example / "out" / "findings.csv", dtype=str, keep_default_na=False)


def _booklets(built_example: Path) -> list[Path]:
    return sorted((built_example / "out" / "booklets").glob("*/*.html"))


def test_findings_csv_has_one_row_per_topic_and_the_documented_columns(findings) -> None:
    """Check out/findings.csv: the documented columns, one row per participant and topic."""
    assert list(findings.columns) == ["participant", "topic", "reading", "certainty", "detail",
                                      "reason"]
    assert not findings.duplicated(["participant", "topic"]).any()
    for topic in ("course", "warning", "pattern", "level", "participation", "help"):
        assert topic in set(findings["topic"]), topic
    missing = findings[findings["reading"] == "not_enough_data"]
    assert (missing["reason"] != "").all()  # no reading without its reason


def test_every_mark_in_every_booklet_matches_findings_csv(built_example: Path,
                                                          findings: pd.DataFrame) -> None:
    """Check each data-finding mark of both editions against the build's findings.csv."""
    rows = {(r.participant, r.topic): (r.reading, r.certainty)
            for r in findings.itertuples()}
    checked = 0
    for path in _booklets(built_example):
        pid = path.parent.name
        for mark in _marks(path):
            assert (pid, mark["topic"]) in rows, (path, mark)
            assert (mark["reading"], mark["certainty"]) == rows[(pid, mark["topic"])], (path, mark)
            assert mark["text"], (path, mark)  # a marked element says something
            checked += 1
    assert checked > 50


def test_participant_edition_states_the_course_and_the_warning_only_when_opted_in(
        built_example: Path) -> None:
    """Check the course is stated in every participant edition, the warning only where the
    study shows change to participants (the example does not)."""
    settings, _ = load_settings(built_example)
    assert settings.booklet.show_change_to_participant is False
    for path in _booklets(built_example):
        topics = {m["topic"] for m in _marks(path)}
        assert "course" in topics, path
        if path.stem == "participant":
            assert "warning" not in topics, path
        else:
            assert {"warning", "pattern"} <= topics, path


def test_the_help_banner_gives_the_flags_own_reason(built_example: Path,
                                                    findings: pd.DataFrame) -> None:
    """Check a refer banner is marked with the help finding and says what its rule saw: the
    silence of P12 is not told as 'some of your answers suggest'."""
    helps = findings[(findings["topic"] == "help") & (findings["reading"] == "refer")]
    assert "P12" in set(helps["participant"])
    for pid in helps["participant"]:
        path = built_example / "out" / "booklets" / pid / "participant.html"
        if not path.exists():
            continue
        banner = [m for m in _marks(path) if m["topic"] == "help"]
        assert banner and banner[0]["reading"] == "refer", pid
    p12_page = built_example / "out" / "booklets" / "P12" / "participant.html"
    p12 = next(m for m in _marks(p12_page) if m["topic"] == "help")["text"]
    assert "You have not answered since" in p12
    assert "Some of your answers suggest" not in p12


def test_phone_numbers_never_break_across_lines(built_example: Path) -> None:
    """Check in the PDF text of every participant edition that each phone number of the help
    ladder and the help strip sits on one line (no-break spaces between its digit groups)."""
    import itertools
    import re

    import pypdf

    numbers = ("+99 999", "+99 800 0000", "+99 800 1100", "+99 20 555 0100")
    seen = 0
    for path in sorted((built_example / "out" / "booklets").glob("*/participant.pdf")):
        lines = [" ".join(line.replace("\u00a0", " ").split())
                 for page in pypdf.PdfReader(path).pages
                 for line in page.extract_text().splitlines()]
        for this, after in itertools.pairwise(lines):
            # A number cut at a line end: '+99' or '+99 800' with its rest on the next line.
            if re.search(r"\+99( \d+)*$", this) and re.match(r"\d|\(fictional\)", after):
                raise AssertionError(f"{path}: a phone number breaks: {this!r} / {after!r}")
        text = "\n".join(lines)
        seen += sum(n in text for n in numbers)
    assert seen >= 10


def test_page_one_holds_the_summary_the_help_strip_and_the_mood_chart(built_example: Path) -> None:
    """Check on the PDF text of every participant edition that page 1 holds the title, the
    summary, the help strip (its emergency number) and the mood chart with its caption
    (Bartels et al. 2023, Heliyon 9:e20084: a short summary first, every graph explained)."""
    import re

    import pypdf

    checked = 0
    for path in sorted((built_example / "out" / "booklets").glob("*/participant.pdf")):
        html = path.with_suffix(".html").read_text(encoding="utf-8")
        summary = html[html.index('id="s-summary"'):]
        summary = summary[:summary.index("</section>")]
        caption = re.search(r"<figcaption><strong>(.*?)</strong>", summary)
        assert caption is not None, f"{path}: the summary has no chart"
        page = " ".join(pypdf.PdfReader(path).pages[0].extract_text()
                        .replace("\u00a0", " ").split())
        title = " ".join(caption.group(1).split())
        assert title in page, f"{path}: the mood chart is not on page 1"
        assert "+99 999" in page, f"{path}: the help strip is not on page 1"
        checked += 1
    assert checked >= 8


def test_every_marked_element_is_a_real_tag(built_example: Path) -> None:
    """Check that a finding's mark never runs into its tag's name (a '<tabledata-finding'
    element is no table: its rows would print as run-together text)."""
    class Tags(HTMLParser):
        def __init__(self) -> None:
            super().__init__(convert_charrefs=True)
            self.names: set[str] = set()

        def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
            self.names.add(tag)

    marked_tables = 0
    for path in sorted((built_example / "out" / "booklets").glob("*/*.html")):
        html = path.read_text(encoding="utf-8")
        tags = Tags()
        tags.feed(html)
        assert not {t for t in tags.names if "data-" in t or '"' in t}, path
        marked_tables += html.count('<table data-finding="warning"')
    assert marked_tables >= 5  # the therapist editions' trend-test tables
