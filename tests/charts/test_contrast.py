"""Contrast of the booklet's colours (WCAG 2.1), checked against W3C's definition first."""

from __future__ import annotations

import itertools
import re

import pytest

from springback.charts import palette
from springback.charts.palette import (
    CALENDAR_RAMP,
    CHART,
    DIVERGING,
    GRAPHIC_MIN,
    GRAPHIC_PAIRS,
    PAGE,
    TEXT_MIN,
    TEXT_PAIRS,
    contrast_ratio,
    css_variables,
    readable_text_on,
    relative_luminance,
)

# Source of the formula: W3C, Web Content Accessibility Guidelines (WCAG) 2.1 (2018), definitions
# of "relative luminance" and "contrast ratio". Values computed with that formula in plain
# Python ("computed"; identical with the old 0.03928 threshold).
W3C_CHECKS = [
    ("#000000", 0.0, 21.0),
    ("#767676", 0.181164, 4.5422),
    ("#777777", 0.184475, 4.4781),
    ("#595959", 0.099899, 7.0047),
    ("#949494", 0.296138, 3.0335),
    ("#959595", 0.300544, 2.9953),
    ("#999999", 0.318547, 2.8490),
    ("#888888", 0.246201, 3.5449),
    ("#FF0000", 0.2126, 3.9985),
    ("#0000FF", 0.0722, 8.5925),
    ("#FFFFFF", 1.0, 1.0),
]


@pytest.mark.parametrize(("colour", "luminance", "ratio"), W3C_CHECKS)
def test_luminance_and_ratio_match_w3c_definition(colour, luminance, ratio):
    """Check relative luminance and the ratio on white against the W3C-formula values."""
    assert relative_luminance(colour) == pytest.approx(luminance, abs=1e-6)
    assert contrast_ratio(colour, "#FFFFFF") == pytest.approx(ratio, abs=1e-4)


def test_ratio_is_symmetric_and_bounded():
    """Check that the order of the two colours does not matter and the range is 1..21."""
    assert contrast_ratio("#FFFFFF", "#767676") == contrast_ratio("#767676", "#FFFFFF")
    assert contrast_ratio("#123456", "#123456") == 1.0
    assert contrast_ratio("#000000", "#FFFFFF") == pytest.approx(21.0)


def test_thresholds_are_not_rounded():
    """Check the boundary greys: 2.9953 fails 3:1 and 4.4781 fails 4.5:1 (W3C: no rounding)."""
    # W3C, Understanding SC 1.4.11: "2.999:1 would not meet the 3:1 threshold".
    white = "#FFFFFF"
    assert contrast_ratio("#959595", white) < GRAPHIC_MIN <= contrast_ratio("#949494", white)
    assert contrast_ratio("#777777", white) < TEXT_MIN <= contrast_ratio("#767676", white)


@pytest.mark.parametrize("bad", ["767676", "#76767", "#GGGGGG", "red", "#7676761"])
def test_bad_colour_is_refused(bad):
    """Check that a malformed colour raises a ValueError naming it."""
    with pytest.raises(ValueError, match="is not a colour"):
        relative_luminance(bad)


@pytest.mark.parametrize(("fg", "bg"), TEXT_PAIRS)
def test_every_text_pair_meets_aa(fg, bg):
    """Check every text/background pair of the stylesheet and charts reaches 4.5:1."""
    assert contrast_ratio(fg, bg) >= TEXT_MIN, f"{fg} on {bg}"


@pytest.mark.parametrize(("fg", "bg"), GRAPHIC_PAIRS)
def test_every_graphic_pair_meets_non_text_contrast(fg, bg):
    """Check every line, mark, swatch, border and focus ring reaches 3:1 against its neighbour."""
    assert contrast_ratio(fg, bg) >= GRAPHIC_MIN, f"{fg} on {bg}"


def test_pairs_cover_every_colour_in_use():
    """Check that no page or chart colour escapes the pair lists (a new colour needs a pair)."""
    used = {c for pair in TEXT_PAIRS + GRAPHIC_PAIRS for c in pair}
    declared = set(vars(PAGE).values()) | set(vars(CHART).values())
    declared |= set(CALENDAR_RAMP) | set(DIVERGING) | set(palette.BAND_FILLS)
    assert declared <= used


def test_ramps_stay_ordered_in_greyscale():
    """Check that the calendar ramp darkens step by step, so greyscale print keeps its order."""
    lum = [relative_luminance(c) for c in CALENDAR_RAMP]
    assert lum == sorted(lum, reverse=True)
    # Neighbouring steps must differ in grey (design choice: at least 1.2:1); the share is
    # written in each cell anyway.
    assert all(contrast_ratio(a, b) >= 1.2 for a, b in itertools.pairwise(CALENDAR_RAMP))


def test_readable_text_picks_the_better_of_ink_and_white():
    """Check the automatic label colour on a dark and a light fill."""
    assert readable_text_on("#0B3C63") == CHART.background
    assert readable_text_on("#F2F2F2") == CHART.ink


def test_css_variables_declare_every_page_colour():
    """Check that the :root block declares each stylesheet colour exactly once, lower-case."""
    css = css_variables()
    assert css.startswith(":root {") and css.rstrip().endswith("}")
    names = re.findall(r"(--sb-[a-z-]+):", css)
    assert len(names) == len(set(names))
    assert f"--sb-text: {PAGE.text.lower()};" in css
    assert f"--sb-chart-primary: {CHART.primary.lower()};" in css
    assert "--sb-font:" in css and "Atkinson Hyperlegible" in css
