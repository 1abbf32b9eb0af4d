"""Rendering: the Jinja environment, the typed booklet context, HTML and PDF writing."""

from __future__ import annotations

from springback.render.context import (
    EDITIONS,
    PARTICIPANT_SECTIONS,
    THERAPIST_SECTIONS,
    BookletContext,
    build_context,
)
from springback.render.env import make_environment, template_search_path
from springback.render.html import render_edition, render_overview
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
