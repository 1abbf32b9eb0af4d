"""Rendering: the Jinja environment, the typed booklet context, HTML and PDF writing."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from springback.render.context import (
    EDITIONS,
    PARTICIPANT_SECTIONS,
    THERAPIST_SECTIONS,
    BookletContext,
    build_context,
)
from springback.render.env import make_environment, template_search_path
from springback.render.html import render_edition, render_overview

if TYPE_CHECKING:
    from springback.render.pdf import html_to_pdf

__all__ = [
    "EDITIONS",
    "PARTICIPANT_SECTIONS",
    "THERAPIST_SECTIONS",
    "BookletContext",
    "build_context",
    "html_to_pdf",
    "make_environment",
    "render_edition",
    "render_overview",
    "template_search_path",
]


def __getattr__(name: str) -> Any:
    """`html_to_pdf` is imported on first use: WeasyPrint takes about 0.9 s to import, and a
    parallel build's parent process, which reads the templates from here, never writes a PDF."""
    if name == "html_to_pdf":
        from springback.render.pdf import html_to_pdf

        return html_to_pdf
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
