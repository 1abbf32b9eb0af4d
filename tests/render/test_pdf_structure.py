"""The PDFs of the built example study are tagged PDF/UA documents a screen reader can use.

Checked with pikepdf (structure) and pypdf (text order), on every booklet of the example study.
The requirements are those of PDF/UA-1 (ISO 14289-1) as summarised in the Matterhorn Protocol
(PDF Association 2014): a structure tree, /MarkInfo /Marked true, the document language, a title
shown in the window bar, alternate text on every figure, and every font embedded.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pikepdf
import pytest
from pypdf import PdfReader

pytestmark = pytest.mark.xdist_group("example")


def _pdfs(project: Path) -> list[Path]:
    return sorted((project / "out" / "booklets").rglob("*.pdf"))


def _struct_elems(node: pikepdf.Object) -> Iterator[pikepdf.Dictionary]:
    """Walk the structure tree depth-first in document (reading) order."""
    kids = node.get("/K")
    if kids is None:
        return
    if not isinstance(kids, pikepdf.Array):
        kids = [kids]
    for kid in kids:
        if isinstance(kid, pikepdf.Dictionary) and "/S" in kid:
            yield kid
            yield from _struct_elems(kid)


def _fonts(pdf: pikepdf.Pdf) -> Iterator[tuple[str, pikepdf.Dictionary]]:
    for page in pdf.pages:
        fonts = page.obj.get("/Resources", {}).get("/Font", {})
        for _name, font in fonts.items():
            if font.get("/Subtype") == "/Type0":
                for descendant in font["/DescendantFonts"]:
                    yield str(descendant.get("/BaseFont")), descendant
            else:
                yield str(font.get("/BaseFont")), font


def test_every_pdf_is_tagged_with_title_language_alt_and_embedded_fonts(
    built_example: Path,
) -> None:
    """Check /StructTreeRoot, /MarkInfo, /Lang, the title, figure /Alt and embedded fonts."""
    pdfs = _pdfs(built_example)
    assert pdfs
    roster = {p.parent.name for p in pdfs}
    assert len(roster) >= 8
    for path in pdfs:
        with pikepdf.open(path) as pdf:
            root = pdf.Root
            assert "/StructTreeRoot" in root, path
            assert bool(root.MarkInfo.Marked), path
            assert str(root.get("/Lang", "")) in {"en", "nl", "de"}, path
            assert bool(root.ViewerPreferences.DisplayDocTitle), path
            title = str(pdf.open_metadata().get("dc:title", "")) or str(pdf.docinfo.get("/Title"))
            assert path.parent.name in title, (path, title)
            elems = list(_struct_elems(root.StructTreeRoot))
            figures = [e for e in elems if e.get("/S") == "/Figure"]
            assert figures, f"{path}: no figures tagged"
            for fig in figures:
                assert str(fig.get("/Alt", "")).strip(), f"{path}: a figure has no /Alt"
            headings = [e for e in elems if str(e.get("/S")) in {"/H1", "/H2", "/H3"}]
            assert sum(1 for e in headings if e.get("/S") == "/H1") == 1, path
            for name, font in _fonts(pdf):
                desc = font.get("/FontDescriptor")
                if desc is None:  # Type3 fonts carry their glyphs inline
                    continue
                assert any(k in desc for k in ("/FontFile", "/FontFile2", "/FontFile3")), (
                    f"{path}: font {name} is not embedded"
                )
            assert 3 <= len(pdf.pages) <= 40, (path, len(pdf.pages))


def test_body_font_is_the_legibility_font(built_example: Path) -> None:
    """Check the booklet font really is embedded (a relative URL would fall back silently)."""
    path = _pdfs(built_example)[0]
    with pikepdf.open(path) as pdf:
        names = {name for name, _ in _fonts(pdf)}
    assert any("Atkinson" in n for n in names), names


def test_text_extracts_in_reading_order(built_example: Path) -> None:
    """Check headings come out of the PDF text before the paragraphs that follow them."""
    path = next(p for p in _pdfs(built_example) if p.name == "participant.pdf")
    with pikepdf.open(path) as pdf:
        elems = list(_struct_elems(pdf.Root.StructTreeRoot))
        assert elems
    text = " ".join(p.extract_text() for p in PdfReader(path).pages)
    text = " ".join(text.split())
    from html.parser import HTMLParser

    class Headings(HTMLParser):
        def __init__(self) -> None:
            super().__init__()
            self.current: str | None = None
            self.items: list[tuple[str, str]] = []
            self.want_para = False

        def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
            if tag == "h2":
                self.current = ""
            elif tag == "p" and self.want_para:
                self.current = "p"

        def handle_data(self, data: str) -> None:
            if self.current == "":
                self.items.append((data.strip(), ""))
                self.want_para = True
                self.current = None
            elif self.current == "p" and data.strip() and self.items:
                head, _ = self.items[-1]
                self.items[-1] = (head, data.strip())
                self.want_para = False
                self.current = None

    parser = Headings()
    parser.feed(path.with_suffix(".html").read_text(encoding="utf-8"))
    checked = 0
    for heading, para in parser.items:
        first_words = " ".join(para.split()[:4])
        if not heading or not first_words or heading not in text or first_words not in text:
            continue
        assert text.index(heading) < text.index(first_words, text.index(heading)), heading
        checked += 1
    assert checked >= 4
