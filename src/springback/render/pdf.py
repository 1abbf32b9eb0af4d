"""Turn booklet HTML into a tagged PDF (PDF/UA-1) with the fonts embedded.

A booklet loads nothing from the network or the rest of the disk: its fonts and styles arrive
inline (data: URIs), and the only files WeasyPrint may open are springback's packaged static
files and fonts. Anything else a template asks for (`file:///etc/passwd` as an attachment, an
`https:` image) is refused, and the booklet is not made: `TemplateRefused` names every refused
address and how to fix it.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any
from urllib.parse import unquote, urlsplit

from weasyprint import HTML, URLFetcher

from springback.render.env import PACKAGED_TEMPLATES, TemplateRefused


def _own_folders() -> tuple[Path, ...]:
    """Folders of springback's own files a booklet may load: packaged static files, fonts."""
    from fontpkg_atkinson_hyperlegible import ROOT

    return ((PACKAGED_TEMPLATES / "static").resolve(), (Path(ROOT) / "files").resolve())


class BookletFetcher(URLFetcher):
    """A WeasyPrint fetcher for data: URIs and springback's own files; it notes every refusal."""

    def __init__(self) -> None:
        super().__init__(allowed_protocols=("data", "file"))
        self.refused: list[str] = []

    def fetch(self, url: str, headers: Any = None) -> Any:
        parts = urlsplit(url)
        scheme = parts.scheme.lower()
        if scheme == "data":
            return super().fetch(url, headers)
        if scheme == "file" and parts.netloc in ("", "localhost"):
            path = Path(unquote(parts.path)).resolve()
            if any(path.is_relative_to(folder) for folder in _own_folders()):
                return super().fetch(url, headers)
        self.refused.append(url if len(url) <= 120 else url[:117] + "...")
        raise ValueError(f"a booklet may not load {url}")


def local_fetcher() -> BookletFetcher:
    """A fetcher that allows only data: URIs and springback's own packaged files."""
    return BookletFetcher()


def html_to_pdf(html: str, base_url: Path | str) -> bytes:
    """Write the HTML as a PDF/UA-1 document (title and language from the HTML)."""
    fetcher = local_fetcher()
    document = HTML(string=html, base_url=str(base_url), url_fetcher=fetcher)
    pdf = document.write_pdf(pdf_variant="pdf/ua-1")
    if fetcher.refused:
        raise TemplateRefused(
            "templates: the booklet asks for " + ", ".join(sorted(set(fetcher.refused)))
            + ", which a booklet may not load (only inline data: URIs and springback's own fonts "
            "and styles; no local files, no network), so no PDF was made. Fix: remove that "
            "link, image or attachment from the template in templates/, or inline the file "
            "as a data: URI")
    return bytes(pdf)
