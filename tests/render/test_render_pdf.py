"""The PDF writer: tagged PDF/UA-1, embedded Atkinson Hyperlegible, paper size, no fetching."""

from __future__ import annotations

import io

import pikepdf
import pypdf
import pytest

from springback.render import html_to_pdf
from springback.render.env import TemplateRefused
from springback.render.pdf import local_fetcher
from tests.support.render_samples import render_booklet, sample_settings

# Page sizes in PostScript points (1/72 inch): ISO 216 A4 is 210 x 297 mm; US Letter 8.5 x 11 in.
A4 = (595.28, 841.89)
LETTER = (612.0, 792.0)


@pytest.fixture(scope="module")
def therapist_pdf(tmp_path_factory) -> bytes:
    return html_to_pdf(render_booklet("therapist"), tmp_path_factory.mktemp("pdf"))


def _fonts(pdf: pikepdf.Pdf) -> dict[str, pikepdf.Dictionary]:
    fonts = {}
    for page in pdf.pages:
        for font in page.Resources.get("/Font", {}).values():
            fonts[str(font.BaseFont)] = font
    return fonts


def test_pdf_is_tagged_with_title_and_language(therapist_pdf: bytes) -> None:
    """Check the structure tree, MarkInfo, document language and title."""
    with pikepdf.open(io.BytesIO(therapist_pdf)) as pdf:
        assert "/StructTreeRoot" in pdf.Root and "/MarkInfo" in pdf.Root
        assert str(pdf.Root.Lang) == "en"
        assert "Harbour Light Mood Study" in str(pdf.open_metadata().get("dc:title", "")) or \
            "Harbour Light Mood Study" in str(pdf.docinfo.get("/Title"))


def test_atkinson_hyperlegible_is_embedded(therapist_pdf: bytes) -> None:
    """Check that every font is embedded and the text face is Atkinson Hyperlegible."""
    with pikepdf.open(io.BytesIO(therapist_pdf)) as pdf:
        fonts = _fonts(pdf)
        assert any("Atkinson" in name for name in fonts), list(fonts)
        for name, font in fonts.items():
            desc = font.get("/FontDescriptor")
            if desc is None and "/DescendantFonts" in font:
                desc = font.DescendantFonts[0].FontDescriptor
            assert desc is not None and any(
                k in desc for k in ("/FontFile", "/FontFile2", "/FontFile3")), name


def test_figures_carry_alternate_text(therapist_pdf: bytes) -> None:
    """Check that every Figure in the structure tree has /Alt."""
    figures = []

    def walk(node: object) -> None:
        if isinstance(node, pikepdf.Dictionary):
            if node.get("/S") == "/Figure":
                figures.append(node)
            kids = node.get("/K")
            if isinstance(kids, pikepdf.Array):
                for kid in kids:
                    walk(kid)
            elif isinstance(kids, pikepdf.Dictionary):
                walk(kids)

    with pikepdf.open(io.BytesIO(therapist_pdf)) as pdf:
        walk(pdf.Root.StructTreeRoot)
        assert figures and all("/Alt" in f for f in figures)


def test_text_reads_in_order_with_running_header(therapist_pdf: bytes) -> None:
    """Check reading order (headings before their text), page numbers and the running header."""
    reader = pypdf.PdfReader(io.BytesIO(therapist_pdf))
    pages = [p.extract_text() for p in reader.pages]
    text = " ".join(" ".join(pages).split())
    assert text.index("Bouncing back after hard moments") < text.index(
        "to get halfway back to the usual level")
    assert f"2 / {len(pages)}" in pages[1]
    assert "Harbour Light Mood Study" in pages[2] and "P007" in pages[2]


def test_paper_size_and_large_print(therapist_pdf: bytes, tmp_path) -> None:
    """Check paper sizes (A4 default, Letter by setting) and 16 pt body text in large print."""
    reader = pypdf.PdfReader(io.BytesIO(therapist_pdf))
    box = reader.pages[0].mediabox
    assert (float(box.width), float(box.height)) == pytest.approx(A4, abs=0.5)
    html = render_booklet("participant", settings=sample_settings(large_print=True,
                                                                   paper="Letter"))
    reader = pypdf.PdfReader(io.BytesIO(html_to_pdf(html, tmp_path)))
    box = reader.pages[0].mediabox
    assert (float(box.width), float(box.height)) == pytest.approx(LETTER, abs=0.5)
    sizes: list[float] = []

    def visit(text, cm, tm, font_dict, font_size) -> None:
        if text.strip():
            sizes.append(font_size * tm[0] * cm[0])

    reader.pages[2].extract_text(visitor_text=visit)
    body = sorted(sizes)[len(sizes) // 2]
    assert body >= 16 - 0.01


def test_network_resources_are_never_fetched(tmp_path) -> None:
    """Check that an http reference in a template is refused rather than fetched."""
    html = ('<!DOCTYPE html><html lang="en"><head><title>t</title></head><body><main>'
            '<img src="http://example.invalid/x.png" alt="x"></main></body></html>')
    with pytest.raises(ValueError, match="may not load"):
        local_fetcher().fetch("http://example.invalid/x.png")
    with pytest.raises(TemplateRefused, match=r"http://example\.invalid/x\.png"):
        html_to_pdf(html, tmp_path)  # refused and reported: no PDF is made
