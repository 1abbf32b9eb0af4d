"""Turn an altair chart into an accessible, self-contained SVG string for inlining.

vl-convert renders the spec (no JavaScript reaches the booklet); the result then gets a
<title> and <desc> as direct children of the root (WeasyPrint takes the <title> as the PDF
figure's alternate text), role="img" with aria-labelledby, and every id renamed with a
per-chart prefix: vl-convert numbers clip paths with a process-wide counter, so two inlined
charts could share an id and the same chart could differ between runs without the renaming.

A worker renders the same spec more than once (a chart both editions show alike), so the last
RENDERED_KEPT specs' raw SVGs are kept by their JSON text: a repeat is neither validated nor
rendered again, and the renaming makes its SVG the same text as a fresh render's.
"""

from __future__ import annotations

import functools
import json
import re
import threading
import xml.etree.ElementTree as ET
from collections import OrderedDict
from collections.abc import Callable
from typing import Any, ParamSpec, TypeVar, cast

import altair as alt
import jsonschema
import vl_convert
from altair.utils.schemapi import debug_mode
from altair.vegalite.v6.schema import core

from springback.charts.palette import CHART, FONT_FAMILY

SVG_NS = "http://www.w3.org/2000/svg"
XLINK_NS = "http://www.w3.org/1999/xlink"
# ElementTree cannot be told to write SVG as the default namespace (it would write <ns0:svg>,
# which HTML parsers, WeasyPrint's included, do not take for SVG); `finish_svg` therefore
# strips the namespace from every tag and puts one xmlns on the root.

WIDTH = 640
"""Outer width of every chart in CSS pixels: one A4 text column at 96 px per inch."""
PLOT_WIDTH = WIDTH - 100
"""Width of a plot area: what is left for the data after a y axis with its title."""
FONT_SIZE = 14

_VEGA_LOCALES = {"en": "en-GB", "nl": "nl-NL", "de": "de-DE"}
_DATE_AXIS_FORMATS = {"de": "%-d. %b"}
_fonts_lock = threading.Lock()
_fonts_registered = False
RENDERED_KEPT = 24
"""Raw SVGs kept per process, by spec (a booklet pair's charts; a few MB at most)."""
_rendered: OrderedDict[tuple[str, str, Any], str] = OrderedDict()
_rendered_lock = threading.Lock()

THEME: dict[str, Any] = {
    # Vega's own ARIA labels are English and generic; the SVG carries ours instead.
    "aria": False,
    "background": CHART.background,
    "font": FONT_FAMILY,
    "padding": 6,
    "view": {"stroke": None},
    "axis": {
        "labelColor": CHART.ink, "titleColor": CHART.ink, "domainColor": CHART.axis,
        "tickColor": CHART.axis, "labelFontSize": FONT_SIZE - 1, "titleFontSize": FONT_SIZE,
        "titleFontWeight": "normal", "grid": False, "labelFont": FONT_FAMILY,
        "titleFont": FONT_FAMILY, "titlePadding": 8,
    },
    "legend": {
        "labelColor": CHART.ink, "titleColor": CHART.ink, "labelFontSize": FONT_SIZE - 1,
        "titleFontSize": FONT_SIZE, "titleFontWeight": "normal", "labelFont": FONT_FAMILY,
        "titleFont": FONT_FAMILY, "orient": "bottom", "direction": "horizontal",
        "symbolStrokeWidth": 2, "labelLimit": 260,
    },
    "header": {"labelColor": CHART.ink, "titleColor": CHART.ink, "labelFontSize": FONT_SIZE,
               "labelFont": FONT_FAMILY, "titleFont": FONT_FAMILY},
    "title": {"color": CHART.ink, "fontSize": FONT_SIZE, "fontWeight": "normal",
              "font": FONT_FAMILY, "anchor": "start"},
    "text": {"color": CHART.ink, "fontSize": FONT_SIZE - 1, "font": FONT_FAMILY},
    # Vega-Lite draws points at 70% opacity by default, which would lighten them below 3:1.
    "point": {"opacity": 1}, "circle": {"opacity": 1}, "square": {"opacity": 1},
}


def vega_locale(language: str) -> str:
    """Return the d3 locale name used for a booklet language (English as the fallback)."""
    return _VEGA_LOCALES.get(language, "en-GB")


def date_axis_format(language: str) -> str:
    """Return the d3 time format for day-and-month axis labels in a language."""
    return _DATE_AXIS_FORMATS.get(language, "%-d %b")


def _register_fonts() -> None:
    """Make vl-convert measure text with the booklet font (once per process)."""
    global _fonts_registered
    with _fonts_lock:
        if _fonts_registered:
            return
        try:
            import fontpkg_atkinson_hyperlegible as font
        except ImportError:  # the sans-serif fallback is measured instead
            _fonts_registered = True
            return
        vl_convert.register_font_directory(str(font.ROOT / "files"))
        _fonts_registered = True


@functools.cache
def _schema_validator() -> Any:
    """A jsonschema validator of the whole Vega-Lite schema altair bundles (made once)."""
    root = core.Root._rootschema
    cls = jsonschema.validators.validator_for(root)
    return cls(root, format_checker=cls.FORMAT_CHECKER)


def _all_objects(rows: Any) -> bool:
    return isinstance(rows, list) and all(isinstance(r, dict) for r in rows)


def _one_row_each(node: Any) -> Any:
    """The spec with every inline data set whose rows are all objects cut to its first row."""
    if isinstance(node, list):
        return [_one_row_each(v) for v in node]
    if not isinstance(node, dict):
        return node
    out: dict[str, Any] = {}
    for key, value in node.items():
        if key == "data" and isinstance(value, dict) and _all_objects(value.get("values")):
            out[key] = {**value, "values": value["values"][:1]}
        elif key == "datasets" and isinstance(value, dict):
            out[key] = {name: rows[:1] if _all_objects(rows) else rows
                        for name, rows in value.items()}
        else:
            out[key] = _one_row_each(value)
    return out


def validate_spec(spec: dict[str, Any]) -> None:
    """Raise jsonschema's ValidationError unless the spec is valid Vega-Lite (the schema's
    root: any top-level spec), as altair's `Root.validate` checks it.

    The schema takes any array of objects as a data set's values (InlineDataset: an array of
    numbers, of strings, of booleans or of objects, whatever the objects hold), so a data set
    whose rows are all objects is checked as its first row alone: the same verdict, without
    walking hundreds of rows through every branch of that anyOf (most of the check's time).
    """
    _schema_validator().validate(_one_row_each(spec))


P = ParamSpec("P")
T = TypeVar("T")


def checked_whole(build: Callable[P, T]) -> Callable[P, T]:
    """Run a chart builder without altair checking each part as it is made.

    By default (its debug mode) altair validates every schema object against the Vega-Lite
    schema when it is made, an inline data set row by row, and then copies it into each chart
    built on it. `to_svg` checks the finished spec against the same schema, once and whole
    (`validate_spec`), so an invalid chart still fails, only later; the parts' checks were
    about a sixth of a chart's build time.
    """
    @functools.wraps(build)
    def run(*args: P.args, **kwargs: P.kwargs) -> T:
        with debug_mode(False):
            return build(*args, **kwargs)

    return run


def _spec(chart: alt.TopLevelMixin) -> dict[str, Any]:
    """The Vega-Lite spec of an altair chart, without altair's own default theme (its view
    size and colours are not ours; the booklet theme is added by `to_svg`)."""
    with alt.theme.enable("none"):
        return chart.to_dict(validate=False)


def vega_lite(chart: alt.TopLevelMixin) -> dict[str, Any]:
    """The Vega-Lite spec of an altair chart, validated against the Vega-Lite schema."""
    spec = _spec(chart)
    validate_spec(spec)
    return spec


def to_svg(chart: alt.TopLevelMixin, key: str, title: str, description: str,
           language: str) -> str:
    """Render an altair chart, validated against the Vega-Lite schema, to an inline SVG with
    title, description and namespaced ids."""
    _register_fonts()
    spec = _spec(chart)
    locale = vega_locale(language)
    # The renderer is part of the key: a stand-in for vl-convert never shares its SVGs.
    render = vl_convert.vegalite_to_svg
    seen = (json.dumps(spec, sort_keys=True, default=repr), locale, render)
    with _rendered_lock:
        raw = _rendered.get(seen)
    if raw is None:
        validate_spec(spec)
        raw = render(
            {**spec, "config": THEME}, allowed_base_urls=[], format_locale=cast(Any, locale),
            time_format_locale=cast(Any, locale),
        )
        with _rendered_lock:
            _rendered[seen] = raw
            while len(_rendered) > RENDERED_KEPT:
                _rendered.popitem(last=False)
    return finish_svg(raw, key, title, description)


def _prefix(key: str) -> str:
    return "sb-" + re.sub(r"[^A-Za-z0-9_-]", "-", key)


def alt_text(title: str, description: str) -> str:
    """The full text alternative of a chart: its title, then the description."""
    if not description:
        return title
    return f"{title.rstrip('.:')}: {description}"


def finish_svg(raw: str, key: str, title: str, description: str) -> str:
    """Add <title>/<desc>, role and aria-labelledby, and prefix every id with the chart key."""
    root = ET.fromstring(raw)
    prefix = _prefix(key)
    renamed: dict[str, str] = {}
    for element in root.iter():
        old = element.get("id")
        if old is not None:
            renamed[old] = f"{prefix}-{len(renamed) + 1}"
            element.set("id", renamed[old])
    if renamed:
        pattern = re.compile(r"url\(#([^)]+)\)")

        def swap(match: re.Match[str]) -> str:
            return f"url(#{renamed.get(match.group(1), match.group(1))})"

        for element in root.iter():
            for name, value in element.attrib.items():
                if "url(#" in value:
                    element.set(name, pattern.sub(swap, value))
                elif name in ("href", f"{{{XLINK_NS}}}href") and value.startswith("#"):
                    element.set(name, "#" + renamed.get(value[1:], value[1:]))
    for element in root.iter():
        # Vega marks its groups with graphics roles and English role descriptions; inside an
        # image they are noise (axe: svg-img-alt), and the root's own name says everything.
        for name in [n for n in element.attrib if n == "role" or n.startswith("aria-")]:
            del element.attrib[name]
        # Plain tag names with one xmlns on the root serialise without ns0: prefixes; SVG 2
        # takes a plain href, which HTML parsers know (an xlink prefix they might not).
        element.tag = element.tag.removeprefix(f"{{{SVG_NS}}}")
        link = element.attrib.pop(f"{{{XLINK_NS}}}href", None)
        if link is not None:
            element.set("href", link)
    title_id, desc_id = f"{prefix}-title", f"{prefix}-desc"
    # WeasyPrint gives the PDF figure only the <title> as /Alt, so the title carries the
    # whole text alternative; the accessible name points at it alone, so nothing is read twice.
    title_el = ET.Element("title", {"id": title_id})
    title_el.text = alt_text(title, description)
    desc_el = ET.Element("desc", {"id": desc_id})
    desc_el.text = description
    root.insert(0, desc_el)
    root.insert(0, title_el)
    root.set("role", "img")
    root.set("aria-labelledby", title_id)
    root.attrib.pop("class", None)
    root.set("xmlns", SVG_NS)
    return ET.tostring(root, encoding="unicode")
