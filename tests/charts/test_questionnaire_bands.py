"""The questionnaire chart and the booklet's text show one band table (settings.band_table).

Expected bands: the PHQ-9 severity bands of Kroenke, Spitzer & Williams 2001, "The PHQ-9:
validity of a brief depression severity measure", J Gen Intern Med 16(9):606-613 (0-4
minimal, 5-9 mild, 10-14 moderate, 15-19 moderately severe, 20-27 severe).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from springback.charts.common import Inputs
from springback.charts.questionnaires import _bands
from springback.findings import decide
from springback.metrics import compute
from springback.render.context import build_context
from springback.settings import from_mapping
from tests.support.metrics_sim import ZONE, participant, prompt_hours, questionnaire_scores

NAMES = {"en": ("minimal", "mild", "moderate", "moderately severe", "severe"),
         "nl": ("minimaal", "licht", "matig", "matig ernstig", "ernstig")}
SCORES = ((0, 4), (5, 9), (10, 14), (15, 19), (20, 27))


@pytest.mark.parametrize("language", ["en", "nl"])
def test_chart_and_booklet_show_the_published_phq9_bands(language: str) -> None:
    settings, _ = from_mapping({
        "study": {"timezone": ZONE, "prompts_per_day": 5},
        "items": {"sad": {"scale": [1, 7]}, "down": {"scale": [1, 7]},
                  "cheerful": {"scale": [1, 7], "reverse": True}},
        "composites": {"low_mood": {"items": ["sad", "down", "cheerful"], "higher_is": "worse"}},
        "booklet": {"about": "low_mood", "min_prompts": 30},
        "questionnaires": {"phq9": {
            "range": [0, 27], "bands": [[lo, name] for (lo, _), name in
                                          zip(SCORES, NAMES["en"], strict=True)],
            "band_labels": {"nl": list(NAMES["nl"])}}},
    })
    rng = np.random.default_rng(3)
    hours = prompt_hours(14, 5, rng)
    data = participant(hours, np.clip(rng.normal(3.5, 0.8, len(hours)), 1, 7), rng=rng,
                       questionnaires=questionnaire_scores([0, 13], [14, 8]))
    results = compute(data, settings)
    booklet = build_context(
        settings=settings, data=data, results=results,
        findings=decide(results, [], settings), flags=[], review_state="approved", charts={},
        edition="participant", language=language, version=1,
        built_at=dt.datetime(2026, 4, 1, tzinfo=dt.UTC), tool_version="test")
    (view,) = booklet["questionnaires"]
    assert view.bands == tuple((name, float(lo), float(hi))
                               for name, (lo, hi) in zip(NAMES[language], SCORES, strict=True))
    ctx = Inputs(data, results, settings, language, lambda s: s)
    score_range, drawn = _bands(ctx, "phq9")
    assert score_range == (0.0, 27.0)
    # Each band is drawn from its lowest score up to the next band's lowest (the last up to 27).
    ends = [lo for lo, _ in SCORES[1:]] + [27]
    assert drawn == [(float(lo), float(end), name)
                     for (lo, _), end, name in zip(SCORES, ends, NAMES[language], strict=True)]
    assert [(d[0], d[2]) for d in drawn] == [(b[1], b[0]) for b in view.bands]
