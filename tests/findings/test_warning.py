"""The warning reading: Holm's adjustment, the lead-up of a shift, and certainty grades."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.multitest import multipletests

from springback.findings.records import Finding
from springback.findings.warning import holm, warning
from springback.metrics.leadup import SUFFIX, before
from springback.metrics.results import Estimate, Family


@pytest.mark.parametrize("ps", [[0.01, 0.04, 0.03], [0.5, 0.001, 0.2], [0.02, 0.02, 0.9],
                                [0.04], [0.3, 0.6, 0.01, 0.012]])
def test_holm_matches_statsmodels(ps: list[float]) -> None:
    """Check Holm-adjusted p-values against statsmodels' multipletests(method='holm')."""
    # Source: statsmodels.stats.multitest.multipletests (Holm 1979 step-down).
    expected = multipletests(ps, method="holm")[1]
    assert holm(ps) == pytest.approx(list(expected))


def _family(taus: dict[str, float], ps: dict[str, float], robust: float = 0.8,
            suffix: str = "") -> Family:
    est = {}
    for k in taus:
        est[f"warning_tau_{k}{suffix}"] = Estimate(taus[k])
        est[f"warning_p_{k}{suffix}"] = Estimate(ps[k])
    est[f"warning_robustness_inertia{suffix}"] = Estimate(robust)
    est[f"warning_robustness_variance{suffix}"] = Estimate(robust)
    return Family(estimates=est, params={"leadup_days": 40})


COURSE = Finding("S1", "course", "no_clear_change", "no_clear_sign")
SHIFT = Finding("S1", "course", "abrupt_shift", "clear")


def test_one_unadjusted_p_below_alpha_among_three_is_not_rising() -> None:
    """Check p = 0.035 for one of three tests (Holm: 0.105) is not read as rising."""
    # Source: Holm 1979; the smallest of three p-values is multiplied by 3.
    fam = _family({"inertia": 0.36, "variance": 0.78, "crosscorr": 0.1},
                  {"inertia": 0.31, "variance": 0.035, "crosscorr": 0.6})
    f = warning("S1", {"warnings": fam}, COURSE, 0.05, None)
    assert f.reading == "not_rising"
    assert f.numbers["p_holm_variance"] == pytest.approx(0.105)


def test_clear_rise_is_rising_and_its_grade_follows_the_grid() -> None:
    """Check a rise significant after Holm is 'rising', 'clear' only when the grid agrees."""
    taus, ps = {"inertia": 0.6, "variance": 0.2}, {"inertia": 0.004, "variance": 0.4}
    sure = warning("S1", {"warnings": _family(taus, ps, robust=0.8)}, COURSE, 0.05, None)
    weak = warning("S1", {"warnings": _family(taus, ps, robust=0.2)}, COURSE, 0.05, None)
    assert (sure.reading, sure.certainty) == ("rising", "clear")
    assert (weak.reading, weak.certainty) == ("rising", "some_signs")


def test_a_falling_indicator_is_never_rising() -> None:
    """Check a negative tau is not a rise however small its p-value."""
    fam = _family({"inertia": -0.7}, {"inertia": 0.001})
    assert warning("S1", {"warnings": fam}, COURSE, 0.05, None).reading == "not_rising"


def test_with_an_abrupt_shift_the_lead_up_is_read_not_all_data() -> None:
    """Check a shift's warning reads the lead-up's measures (all data rising, lead-up flat)."""
    all_data = _family({"inertia": 0.8}, {"inertia": 0.001})
    leadup = _family({"inertia": 0.05}, {"inertia": 0.6}, suffix=SUFFIX)
    day = pd.Timestamp("2026-04-06")
    f = warning("S1", {"warnings": all_data, "warnings_leadup": leadup}, SHIFT, 0.05, day)
    assert (f.reading, f.numbers["data"], f.numbers["shift_date"]) == \
        ("not_rising", "lead-up", "2026-04-06")
    g = warning("S1", {"warnings": all_data, "warnings_leadup": leadup}, COURSE, 0.05, None)
    assert (g.reading, g.numbers["data"]) == ("rising", "all data")


def test_lead_up_too_short_has_no_reading_with_its_reason() -> None:
    """Check a lead-up whose measures are missing gives not_enough_data and their reason."""
    why = "the first large shift came after 9 study days; the lead-up needs at least 14"
    leadup = Family(estimates={f"warning_tau_inertia{SUFFIX}": Estimate.missing(why)})
    f = warning("S1", {"warnings": _family({"inertia": 0.8}, {"inertia": 0.001}),
                       "warnings_leadup": leadup}, SHIFT, 0.05, pd.Timestamp("2026-01-10"))
    assert (f.reading, f.reason) == ("not_enough_data", why)


def test_before_cuts_the_series_at_the_start_of_the_shift_day() -> None:
    """Check the lead-up keeps exactly the answers on study days before the shift's day."""
    from springback.metrics._series import prepare
    from tests.support.shifts_sim import participant, prompt_hours, settings

    rng = np.random.default_rng(1)
    hours = prompt_hours(30, 5, rng)
    series = prepare(participant(hours, rng.normal(40, 5, hours.size)), settings())
    day = pd.Timestamp(series.study_day[0]) + pd.Timedelta(days=12)
    part = before(series, day)
    # Counted independently: answers whose study day is earlier than `day`.
    assert part.n == int((series.study_day < np.datetime64(day)).sum())
    assert len(part.admissible) == part.n - 1
    assert (part.hours == series.hours[:part.n]).all()


def test_rising_indicators_with_no_shift_are_their_own_pattern() -> None:
    """Check the case an early warning is for: indicators rising, no shift yet, graded as the
    warning reading is."""
    from springback.findings import overall

    warn = warning("S1", {"warnings": _family({"inertia": 0.6}, {"inertia": 0.004})}, COURSE,
                   0.05, None)
    p = overall("S1", COURSE, warn)
    assert (p.reading, p.certainty) == ("rising_no_shift", warn.certainty)
    assert any(e["code"] == "inertia_rose" for e in p.evidence)
