"""Turn booklet HTML into a tagged PDF (PDF/UA-1) with the fonts embedded."""

from __future__ import annotations

from pathlib import Path

from weasyprint import HTML, URLFetcher

# A booklet never loads anything from the network: only embedded (data:) and local files.
_LOCAL_PROTOCOLS = ("data", "file")


def local_fetcher() -> URLFetcher:
    """A WeasyPrint fetcher that refuses every protocol except data: and file:."""
    return URLFetcher(allowed_protocols=_LOCAL_PROTOCOLS)


def html_to_pdf(html: str, base_url: Path | str) -> bytes:
    """Write the HTML as a PDF/UA-1 document (title and language from the HTML)."""
    # Fonts arrive as data URLs inside the HTML, so base_url only matters for a project's own
    # template additions; it resolves relative file references, never network ones.
    document = HTML(string=html, base_url=str(base_url), url_fetcher=local_fetcher())
    return document.write_pdf(pdf_variant="pdf/ua-1")
