"""The one Jinja environment factory: template search path, autoescaping, gettext and filters."""

from __future__ import annotations

import base64
import datetime as dt
import gettext
import math
from collections.abc import Callable
from functools import cache
from pathlib import Path
from typing import Any

import jinja2
import markupsafe
import pandas as pd

from springback.i18n import language as i18n
from springback.render import phrases

PACKAGED_TEMPLATES = Path(__file__).resolve().parents[1] / "templates"
"""The packaged templates (`src/springback/templates/`)."""

FONT_FAMILY = "Atkinson Hyperlegible"
_FONT_FACES = (("Regular", "normal", 400), ("Bold", "normal", 700), ("Italic", "italic", 400))


def make_environment(
    project_templates: Path | None, language: str, *, timezone: str = "UTC"
) -> jinja2.Environment:
    """Build the Jinja environment: project templates first, then packaged; i18n and filters on."""
    search = [str(p) for p in template_search_path(project_templates)]
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(search),
        autoescape=jinja2.select_autoescape(["html", "htm", "xml"], default_for_string=True),
        extensions=["jinja2.ext.i18n"],
        undefined=jinja2.StrictUndefined,
        lstrip_blocks=True,
    )
    catalogue = i18n.translations(language)
    env.install_gettext_translations(catalogue, newstyle=True)  # type: ignore[attr-defined]
    i18n.register_filters(env, language, timezone)
    env.filters["cell"] = _cell_filter(env, catalogue)
    env.filters["share_words"] = lambda x: phrases.share_of_prompts(float(x), catalogue)
    env.filters["duration_words"] = lambda x: phrases.duration(float(x), catalogue)
    env.filters["count_words"] = lambda x: phrases.count(int(x), catalogue)
    env.filters["strength_words"] = lambda x: phrases.strength(float(x), catalogue)
    env.globals["sureness"] = lambda lo, hi, null=0.0: phrases.sureness(lo, hi, null, catalogue)
    env.globals["trend_sureness"] = lambda p, alpha: phrases.trend_sureness(p, alpha, catalogue)
    # The CSS holds only base64 text and fixed rules, so it is safe to mark as markup.
    env.globals["font_face_css"] = lambda: markupsafe.Markup(font_face_css())
    env.globals["language"] = language
    return env


def template_search_path(project_templates: Path | None) -> list[Path]:
    """Folders the loader searches, in order: the project's own templates, then the packaged."""
    search = [PACKAGED_TEMPLATES]
    if project_templates is not None and Path(project_templates).is_dir():
        search.insert(0, Path(project_templates))
    return search


def _cell_filter(
    env: jinja2.Environment, catalogue: gettext.NullTranslations
) -> Callable[[Any], str]:
    """Format one data-table cell by its type, with the environment's locale filters."""

    def cell(value: Any) -> str:
        if value is None or (isinstance(value, float) and math.isnan(value)):
            return "–"
        if value is pd.NaT:
            return "–"
        if isinstance(value, bool):
            return catalogue.gettext("yes") if value else catalogue.gettext("no")
        if isinstance(value, pd.Timestamp | dt.datetime):
            ts = pd.Timestamp(value)
            if ts.tzinfo is None and ts == ts.normalize():
                return env.filters["date_long"](ts)
            return env.filters["datetime_short"](ts)
        if isinstance(value, dt.date):
            return env.filters["date_long"](value)
        if isinstance(value, int) or (isinstance(value, float) and float(value).is_integer()):
            return env.filters["number"](value, 0)
        if isinstance(value, float):
            # small values (p-values, shares) keep a third decimal so they never read as 0
            return env.filters["number"](value, 3 if abs(value) < 0.1 else 2)
        if hasattr(value, "item"):  # numpy scalars
            return cell(value.item())
        return str(value)

    return cell


# -- Fonts --------------------------------------------------------------------------------


@cache
def font_face_css() -> str:
    """@font-face rules embedding Atkinson Hyperlegible as data URLs.

    Data URLs keep the HTML self-contained (the CSP forbids fetching) and WeasyPrint embeds the
    same faces in the PDF; a relative file URL would silently fall back to a system font.
    """
    from fontpkg_atkinson_hyperlegible import ROOT

    rules = []
    for name, style, weight in _FONT_FACES:
        data = (ROOT / "files" / f"AtkinsonHyperlegible-{name}.ttf").read_bytes()
        url = "data:font/ttf;base64," + base64.b64encode(data).decode("ascii")
        rules.append(
            f'@font-face {{ font-family: "{FONT_FAMILY}"; font-style: {style}; '
            f'font-weight: {weight}; src: url("{url}") format("truetype"); }}'
        )
    return "\n".join(rules)
