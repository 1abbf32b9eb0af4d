"""The example study's booklets against its own out/metrics.csv, read with an HTML parser."""

from __future__ import annotations

import math
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest
from babel.numbers import parse_decimal

from springback.i18n.language import LOCALES
from springback.render.context import PARTICIPANT_SECTIONS, THERAPIST_SECTIONS

pytestmark = pytest.mark.xdist_group("example")


class Measures(HTMLParser):
    """Collect the text of every element marked with data-measure, plus section ids and lang."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.open: list[tuple[str, str, list[str]]] = []
        self.found: list[tuple[str, str, str]] = []
        self.sections: list[str] = []
        self.lang = ""
        self.missing_notes = 0
        self._in_missing = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "html":
            self.lang = a.get("lang") or ""
        if tag == "section" and a.get("id"):
            self.sections.append(str(a["id"]).removeprefix("s-"))
        if tag == "span" and a.get("data-measure"):
            self.open.append((str(a["data-measure"]), str(a["data-part"]), []))

    def handle_endtag(self, tag: str) -> None:
        if tag == "span" and self.open:
            name, part, text = self.open.pop()
            self.found.append((name, part, "".join(text)))

    def handle_data(self, data: str) -> None:
        for _, _, text in self.open:
            text.append(data)


def _read(path: Path) -> Measures:
    parser = Measures()
    parser.feed(path.read_text(encoding="utf-8"))
    parser.close()
    return parser


def _booklets(project: Path) -> list[Path]:
    return sorted((project / "out" / "booklets").rglob("*.html"))


def test_every_number_equals_metrics_csv(built_example: Path) -> None:
    """Check that every number tied to a measure equals out/metrics.csv, rounded as shown."""
    metrics = pd.read_csv(built_example / "out" / "metrics.csv", dtype={"participant": str})
    table = metrics.set_index(["participant", "measure"])
    booklets = _booklets(built_example)
    assert booklets
    checked = 0
    for path in booklets:
        participant = path.parent.name
        page = _read(path)
        locale = LOCALES[page.lang]
        for name, part, text in page.found:
            if name in ("typical_low", "typical_high"):
                continue  # parameters of the typical range, not rows of metrics.csv
            expected = table.loc[(participant, name), part]
            assert not (isinstance(expected, float) and math.isnan(expected)), (path, name)
            decimals = text.split(",")[-1] if page.lang != "en" else text.split(".")[-1]
            digits = len(decimals) if decimals != text else 0
            shown = float(parse_decimal(text, locale=locale))
            assert shown == pytest.approx(round(float(expected), digits), abs=10 ** -digits / 2 +
                                          1e-9), (path.name, participant, name, part, text)
            checked += 1
    assert checked > 10 * len(booklets)


def test_every_section_is_in_every_booklet(built_example: Path) -> None:
    """Check that each built edition has all of its sections (help may come first)."""
    for path in _booklets(built_example):
        page = _read(path)
        wanted = PARTICIPANT_SECTIONS if path.stem == "participant" else THERAPIST_SECTIONS
        # the study hides the change section from participants by default
        wanted = [s for s in wanted if not (path.stem == "participant" and s == "change")]
        shown = [s for s in page.sections if s != "appendix"]
        assert sorted(shown) == sorted(wanted), path
