"""The colours of booklets and charts, in one place, with the WCAG 2.1 contrast functions.

The stylesheet takes its colours from `css_variables()`; the charts take theirs from `CHART`
and the ramps below. Series colours derive from the Okabe–Ito colour-blind-safe set
(Okabe & Ito 2008, "Color Universal Design"), darkened where needed so that every line, mark
and swatch reaches 3:1 against the chart background (WCAG 2.1 SC 1.4.11) and every text 4.5:1
(SC 1.4.3). Colour is never the only code: charts add shapes, dashes and written labels.
Every pair listed in `TEXT_PAIRS` and `GRAPHIC_PAIRS` is checked in tests/test_contrast.py,
so a colour used together with another must be listed there.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, fields

TEXT_MIN = 4.5
"""WCAG 2.1 SC 1.4.3 (AA): contrast of body text against its background."""
GRAPHIC_MIN = 3.0
"""WCAG 2.1 SC 1.4.11 (AA): contrast of graphics needed to understand the content."""

_HEX = re.compile(r"^#[0-9a-fA-F]{6}$")


def _channel(value: int) -> float:
    """Linearise one 8-bit sRGB channel (W3C WCAG 2.1 definition of relative luminance)."""
    c = value / 255
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


def relative_luminance(colour: str) -> float:
    """Return the WCAG 2.1 relative luminance (0 black .. 1 white) of a '#rrggbb' colour."""
    if not _HEX.match(colour):
        raise ValueError(f"'{colour}' is not a colour like #1a2b3c")
    r, g, b = (int(colour[i : i + 2], 16) for i in (1, 3, 5))
    return 0.2126 * _channel(r) + 0.7152 * _channel(g) + 0.0722 * _channel(b)


def contrast_ratio(foreground: str, background: str) -> float:
    """Return the WCAG 2.1 contrast ratio (1..21) of two '#rrggbb' colours, in either order."""
    la, lb = relative_luminance(foreground), relative_luminance(background)
    lighter, darker = max(la, lb), min(la, lb)
    return (lighter + 0.05) / (darker + 0.05)


def readable_text_on(fill: str) -> str:
    """Pick the chart text colour (dark ink or white) with the higher contrast on a fill."""
    dark, light = CHART.ink, CHART.background
    return dark if contrast_ratio(dark, fill) >= contrast_ratio(light, fill) else light


@dataclass(frozen=True)
class PageColours:
    """Colours of the booklet stylesheet (HTML and print)."""

    background: str = "#FFFFFF"
    text: str = "#1A1A1A"
    text_muted: str = "#4D4D4D"
    heading: str = "#0A4F7A"
    link: str = "#005A8C"
    link_visited: str = "#6B3D8F"
    surface: str = "#F3F6F9"
    """Table headers, the glossary and other quiet boxes."""
    border: str = "#767676"
    """Table rules and the outline of collapsible tables (a user-interface boundary: 3:1)."""
    focus: str = "#B34700"
    caution_background: str = "#FFF3E0"
    caution_border: str = "#9E4400"
    help_background: str = "#E9F5EF"
    help_border: str = "#00704F"
    notice_background: str = "#FCE8EC"
    """The 'held for review' and flag notices of the therapist edition."""
    notice_border: str = "#8F3F71"


@dataclass(frozen=True)
class ChartColours:
    """Colours of chart parts; each role is used as the comment says."""

    background: str = "#FFFFFF"
    ink: str = "#1A1A1A"
    """Axis titles, labels and direct labels."""
    ink_soft: str = "#4D4D4D"
    """Secondary annotations (still 4.5:1)."""
    axis: str = "#595959"
    """Axis lines and ticks."""
    primary: str = "#0072B2"
    """The main series: daily mean, questionnaire score, fitted curve's partner line, potential."""
    secondary: str = "#00785A"
    """A second series (variance panel, trend lines)."""
    accent: str = "#B34700"
    """Events, fitted recovery curve, valley markers."""
    highlight: str = "#8F3F71"
    """Detected shifts and sudden gains or losses."""
    neutral: str = "#767676"
    """Single answers and single recovery episodes."""
    band: str = "#DCEAF5"
    """Fill of the person's typical range; its edges are drawn in `primary` (dashed)."""
    terrain: str = "#E6E6E6"
    """Fill under the mood-landscape curve."""


PAGE = PageColours()
CHART = ChartColours()

CALENDAR_RAMP: tuple[str, ...] = ("#FFFFFF", "#DCE9F4", "#A9CBE6", "#2F6FA3", "#0B3C63")
"""Share of prompts answered, from none to all; light to dark so it survives greyscale print.
The share is also written in every cell; cell outlines are drawn in `CHART.neutral`."""

DIVERGING: tuple[str, ...] = ("#1F5F8F", "#A9CBE6", "#F2F2F2", "#F4C7A6", "#A34200")
"""Kendall's tau in the sensitivity grid: strongly falling .. flat .. strongly rising.
The value is written in every cell, so the fill only repeats it."""

BAND_FILLS: tuple[str, ...] = ("#F2F2F2", "#E6E6E6")
"""Alternating fills of questionnaire severity bands; the bands are labelled in words."""

FONT_FAMILY = '"Atkinson Hyperlegible", sans-serif'


def _pairs(fgs: tuple[str, ...], bgs: tuple[str, ...]) -> list[tuple[str, str]]:
    return [(f, b) for f in fgs for b in bgs]


_PAGE_TEXT = ("text", "text_muted", "heading", "link", "link_visited")
_PAGE_BACKS = ("background", "surface", "caution_background", "help_background",
               "notice_background")
TEXT_PAIRS: list[tuple[str, str]] = [
    (getattr(PAGE, f), getattr(PAGE, b)) for f, b in _pairs(_PAGE_TEXT, _PAGE_BACKS)
] + [
    (getattr(CHART, f), getattr(CHART, b))
    for f, b in _pairs(("ink", "ink_soft"), ("background", "band", "terrain"))
] + [(CHART.ink, fill) for fill in BAND_FILLS] + [
    (readable_text_on(fill), fill) for fill in CALENDAR_RAMP + DIVERGING
]
"""Every (text colour, background colour) pair the stylesheet and charts use."""

_SERIES = ("primary", "secondary", "accent", "highlight", "neutral", "axis")
GRAPHIC_PAIRS: list[tuple[str, str]] = [
    (getattr(PAGE, f), getattr(PAGE, b))
    for f, b in _pairs(("border", "focus"), ("background", "surface"))
] + [
    (PAGE.caution_border, PAGE.caution_background), (PAGE.caution_border, PAGE.background),
    (PAGE.help_border, PAGE.help_background), (PAGE.help_border, PAGE.background),
    (PAGE.notice_border, PAGE.notice_background), (PAGE.notice_border, PAGE.background),
] + [
    (getattr(CHART, f), getattr(CHART, b))
    for f, b in _pairs(_SERIES, ("background", "band", "terrain"))
] + [(getattr(CHART, f), fill) for f in _SERIES for fill in BAND_FILLS] + [
    (CHART.neutral, CHART.background)
]
"""Every (graphic colour, adjacent colour) pair: lines, marks, swatches, borders, focus ring."""


def _css_name(field_name: str) -> str:
    return "--sb-" + field_name.replace("_", "-")


def css_variables() -> str:
    """Return a `:root { ... }` block declaring every page and chart colour as a CSS variable."""
    lines = [f"  {_css_name(f.name)}: {getattr(PAGE, f.name).lower()};" for f in fields(PAGE)]
    lines += [
        f"  {_css_name('chart_' + f.name)}: {getattr(CHART, f.name).lower()};"
        for f in fields(CHART)
    ]
    lines.append(f"  --sb-font: {FONT_FAMILY};")
    return ":root {\n" + "\n".join(lines) + "\n}\n"
