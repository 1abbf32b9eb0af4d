"""The one Jinja environment factory: template search path, autoescaping, gettext and filters.

Templates are a study's own code, so they run in Jinja's sandbox (no attribute that starts with
'_', no calls that reach Python's internals) and are read only from inside the project's
`templates/` folder and springback's packaged templates: a link leading out of them is refused.
Both refusals raise `TemplateRefused`, a message that names the template and how to fix it.
"""

from __future__ import annotations

import base64
import datetime as dt
import gettext
import math
import sys
from collections.abc import Callable
from functools import cache
from pathlib import Path
from typing import Any

import jinja2
import jinja2.bccache
import jinja2.sandbox
import markupsafe
import pandas as pd

from springback.errors import SpringbackError
from springback.i18n import language as i18n
from springback.render import phrases

PACKAGED_TEMPLATES = Path(__file__).resolve().parents[1] / "templates"
"""The packaged templates (`src/springback/templates/`)."""

FONT_FAMILY = "Atkinson Hyperlegible"
_FONT_FACES = (("Regular", "normal", 400), ("Bold", "normal", 700), ("Italic", "italic", 400))


class TemplateRefused(SpringbackError):
    """A template tried something a booklet template may not do (reported, never run)."""


def _shown(path: Path) -> str:
    """A template's path from its templates/ folder on (templates/sections/mood.html)."""
    parts = path.parts
    at = max((i for i, part in enumerate(parts) if part == "templates"), default=len(parts) - 1)
    return "/".join(parts[at:])


class _ConfinedLoader(jinja2.FileSystemLoader):
    """A file loader that refuses any template whose real path is outside its folders."""

    def __init__(self, folders: list[Path]):
        super().__init__([str(f) for f in folders])
        self.roots = [(f, _real_root(f)) for f in folders]

    def get_source(self, environment: jinja2.Environment,
                   template: str) -> tuple[str, str, Callable[[], bool]]:
        source, filename, uptodate = super().get_source(environment, template)
        real = Path(filename).resolve()
        if not any(real.is_relative_to(root) for _, root in self.roots):
            folder = next((f for f, _ in self.roots
                           if Path(filename).is_relative_to(f)), Path(filename).parent)
            raise TemplateRefused(
                f"{folder.name}/{template}: the template leads to {real}, outside the project's "
                "templates/ folder and springback's own templates, so it was not read. Fix: "
                "copy the file into templates/ instead of linking to it")
        return source, filename, uptodate


def _real_root(folder: Path) -> Path:
    """Where a template folder really is; a project's templates/ must lie in the project."""
    if folder == PACKAGED_TEMPLATES:
        return PACKAGED_TEMPLATES.resolve()
    return Path(folder).absolute().parent.resolve() / Path(folder).name


def _template_in_use() -> str:
    """The name of the template whose code is running (from the call stack), or ''."""
    frame = sys._getframe(1)
    while frame is not None:
        name = frame.f_code.co_filename
        if name.endswith((".html", ".htm", ".xml", ".css", ".txt")):
            return _shown(Path(name))
        frame = frame.f_back  # type: ignore[assignment]
    return ""


class _CompiledTemplates(jinja2.BytecodeCache):
    """Compiled templates kept in this process, shared by every environment it makes.

    A worker makes one environment per booklet language and participant; without this each
    one compiled every template again (a fifth of a booklet's HTML time). Jinja keys an entry
    by the template's name and file and checks it against a hash of the source, so a changed
    template is compiled afresh; every environment here has the same options, so the code is
    the same.
    """

    def __init__(self) -> None:
        self._code: dict[str, bytes] = {}

    def load_bytecode(self, bucket: jinja2.bccache.Bucket) -> None:
        code = self._code.get(bucket.key)
        if code is not None:
            bucket.bytecode_from_string(code)

    def dump_bytecode(self, bucket: jinja2.bccache.Bucket) -> None:
        self._code[bucket.key] = bucket.bytecode_to_string()


_COMPILED = _CompiledTemplates()


class _Sandbox(jinja2.sandbox.SandboxedEnvironment):
    """Jinja's sandbox, refusing an unsafe attribute at once with a message a user can act on."""

    def unsafe_undefined(self, obj: Any, attribute: str) -> jinja2.Undefined:
        where = _template_in_use() or "a template"
        raise TemplateRefused(
            f"{where}: the template reaches for '{attribute}' of a {type(obj).__name__} value, "
            "which booklet templates may not use (they run in a sandbox, so they cannot run "
            "programs or read files). Fix: remove that expression from the template in "
            "templates/; a template may use the values and filters springback gives it")


def make_environment(
    project_templates: Path | None, language: str, *, timezone: str = "UTC"
) -> jinja2.Environment:
    """Build the Jinja environment: project templates first, then packaged; i18n and filters on."""
    env = _Sandbox(
        loader=_ConfinedLoader(template_search_path(project_templates)),
        autoescape=jinja2.select_autoescape(["html", "htm", "xml"], default_for_string=True),
        extensions=["jinja2.ext.i18n"],
        undefined=jinja2.StrictUndefined,
        lstrip_blocks=True,
        bytecode_cache=_COMPILED,
    )
    catalogue = i18n.translations(language)
    env.install_gettext_translations(catalogue, newstyle=True)  # type: ignore[attr-defined]
    i18n.register_filters(env, language, timezone)
    env.filters["cell"] = _cell_filter(env, catalogue)
    env.filters["share_words"] = lambda x: phrases.share_of_prompts(float(x), catalogue)
    env.filters["duration_words"] = lambda x: phrases.duration(float(x), catalogue)
    env.filters["count_words"] = lambda x: phrases.count(int(x), catalogue)
    env.filters["number_words"] = lambda x: phrases.number_word(int(x), catalogue)
    env.filters["keep_together"] = phrases.keep_together
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
