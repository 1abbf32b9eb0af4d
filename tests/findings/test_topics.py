"""The descriptive topics: cut-offs and certainty grades decided by the findings stage."""

from __future__ import annotations

import pytest

from springback.findings import topics
from springback.metrics.results import Estimate, Family, ParticipantResults, SeriesDescription

MOOD = SeriesDescription("mood", True, (1.0, 7.0))


def _results(**estimates: Estimate) -> ParticipantResults:
    return ParticipantResults("S1", "mood", {"x": Family(estimates=dict(estimates))}, True,
                              series=MOOD)


@pytest.mark.parametrize(("r", "reading"), [(0.05, "none"), (0.2, "weak"), (0.4, "moderate"),
                                            (0.7, "strong"), (-0.35, "moderate")])
def test_carry_over_strength_follows_cohens_cut_offs(r: float, reading: str) -> None:
    """Check the carry-over reading against Cohen's (1988) small / medium / large r."""
    f = topics.carry_over(_results(inertia=Estimate(r, r - 0.1, r + 0.1, n=200)))
    assert f.reading == reading


def test_carry_over_certainty_follows_its_interval() -> None:
    """Check an interval holding 0 is 'no clear sign', one excluding it 'clear', none
    'cannot tell' (a 95% interval and the value meaning no carry-over; from memory)."""
    assert topics.carry_over(_results(inertia=Estimate(0.1, -0.1, 0.3))).certainty == \
        "no_clear_sign"
    assert topics.carry_over(_results(inertia=Estimate(0.4, 0.2, 0.6))).certainty == "clear"
    assert topics.carry_over(_results(inertia=Estimate(0.4))).certainty == "cannot_tell"


def test_carry_over_is_not_read_over_a_drifting_level() -> None:
    """Check a slow trend carrying over a fifth of the variance withholds the reading."""
    f = topics.carry_over(_results(inertia=Estimate(0.89, 0.8, 0.95),
                                   slow_trend_share=Estimate(0.77)))
    assert f.reading == "not_enough_data" and "drifted" in f.reason


@pytest.mark.parametrize(("z", "reading", "certainty"), [
    (-1.964, "improved", "some_signs"), (-3.1, "improved", "clear"),
    (1.5, "no_reliable_change", "no_clear_sign"), (2.7, "worsened", "clear")])
def test_reliable_change_grades(z: float, reading: str, certainty: str) -> None:
    """Check reliable change beyond 1.96 (Jacobson & Truax 1991) is a change, graded 'clear'
    only beyond the 99% normal quantile 2.576 (scipy.stats.norm.ppf(0.995))."""
    import pandas as pd
    from scipy import stats

    from springback.settings import from_mapping

    assert stats.norm.ppf(0.995) == pytest.approx(topics.RCI_CLEAR_Z, abs=1e-3)
    settings, _problems = from_mapping({
        "study": {"title": "T", "timezone": "UTC", "languages": ["en"]},
        "items": {"mood": {"scale": [1, 7], "higher_is": "worse"}}, "about": "mood",
        "questionnaires": {"phq9": {"range": [0, 27], "higher_is": "worse",
                                    "bands": [[0, "minimal"], [10, "moderate"]]}}})
    fam = Family(estimates={"questionnaire_last_phq9": Estimate(12.0, note="moderate"),
                            "reliable_change_phq9": Estimate(z)},
                 tables={"scores_phq9": pd.DataFrame({"score": [14.0, 12.0]})})
    res = ParticipantResults("S1", "mood", {"questionnaires": fam}, True, series=MOOD)
    f = topics.questionnaires(res, settings)[0]
    assert (f.reading, f.certainty) == (reading, certainty)
