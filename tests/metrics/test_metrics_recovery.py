"""Check recovery episodes, censoring, the pooled curve and the Kaplan-Meier median."""

from __future__ import annotations

import math

import numpy as np
import pytest
from statsmodels.duration.survfunc import SurvfuncRight

from springback.metrics._series import prepare
from springback.metrics.recovery import bounce_back, km_median, rolling_baseline
from tests.support.metrics_sim import events_at, participant, prompt_hours, settings_for
from tests.support.recovery_sim import upset_people

SLOTS = np.array([9, 12, 15, 18, 21.0])


def _steady_days(days: int) -> tuple[np.ndarray, np.ndarray]:
    hours = np.concatenate([d * 24 + SLOTS for d in range(days)])
    return hours, np.tile([3.0, 3.2, 3.0, 3.2, 3.0], days)


def test_episodes_are_censored_by_night_next_event_and_end():
    """Check each censoring cause and that censored episodes get no time to baseline."""
    hours, x = _steady_days(14)

    def at(day: int, hour: float) -> int:
        return int(np.flatnonzero(hours == day * 24 + hour)[0])

    x[at(10, 12)], x[at(10, 15)] = 5.0, 4.5   # dip, back at 18:00
    x[at(11, 21)] = 5.0                        # last answer of the day
    x[at(12, 12)], x[at(12, 15)] = 5.0, 4.8    # event 11:00, another at 13:00
    x[at(13, 21)] = 5.0                        # last answer of all
    data = participant(hours, x, events=events_at([12 * 24 + 11, 12 * 24 + 13]))
    settings = settings_for(dip_k=2, recovery_band_sd=1.5)
    fam = bounce_back(prepare(data, settings), data, settings)
    ep = fam.tables["episodes"]
    assert list(ep.columns) == ["episode", "start", "trigger", "kind", "depth",
                                "hours_to_baseline", "censored", "censored_by"]
    assert ep["trigger"].tolist() == ["dip", "dip", "event", "event", "dip"]
    assert ep["censored_by"].tolist() == ["", "night", "next event", "", "end"]
    assert ep["hours_to_baseline"].iloc[0] == pytest.approx(6.0)
    assert ep["hours_to_baseline"].iloc[3] == pytest.approx(3.0)
    assert ep["hours_to_baseline"][ep["censored"]].isna().all()
    assert ep["kind"].tolist()[2:4] == ["argument", "argument"]
    assert (ep["depth"] > 0).all()
    assert fam.estimates["n_censored"].value == 3
    # Kaplan-Meier: censored at 0, 0, 0 h; recoveries at 3 h (S = 1/2) and 6 h (S = 0).
    assert fam.estimates["median_recovery_hours"].value == pytest.approx(6.0)


def test_kaplan_meier_median_matches_statsmodels():
    """Check the product-limit median against statsmodels SurvfuncRight (Kaplan & Meier 1958)."""
    rng = np.random.default_rng(0)
    for _ in range(20):
        t = np.round(rng.exponential(3, 15), 1)
        seen = rng.random(15) < 0.7
        want = SurvfuncRight(t, seen.astype(int)).quantile(0.5)
        got = km_median(t, seen)
        assert (math.isnan(got) and (want is None or np.isnan(want))) or got == pytest.approx(want)


def test_rolling_baseline_matches_direct_means():
    """Check the running-sum baseline equals a direct mean/SD of the previous days' answers."""
    rng = np.random.default_rng(1)
    hours = prompt_hours(20, 5, rng)
    x = rng.normal(3, 1, len(hours))
    series = prepare(participant(hours, x), settings_for())
    mean, sd, n = rolling_baseline(series, 7.0)
    for i in (10, 50, 99):
        prev = series.value[(series.hours >= series.hours[i] - 168) & (series.hours <
                                                                        series.hours[i])]
        assert n[i] == len(prev)
        assert mean[i] == pytest.approx(prev.mean())
        assert sd[i] == pytest.approx(prev.std(ddof=1))


def test_recovery_half_life_from_simulated_upsets():
    """Check the pooled half-life brackets a known 2 h return after simulated events."""
    # Simulated OU with half-life 2 h whose event kicks decay at the process rate
    # (springback.simulate.shock_impulses; exact transition, Gillespie 1996), with answer
    # noise SD 0.3; events between 9:30 and 13:30. tests/metrics/test_metrics_recovery_nights.py
    # checks 4, 12 and 24 h.
    settings = settings_for()
    ratios = []
    for data in upset_people(2.0, 3, 0, first=9.5, last=13.5, noise_sd=0.3):
        est = bounce_back(prepare(data, settings), data, settings).estimates
        half = est["recovery_half_life_hours"]
        assert half.lower < 2.0 < half.upper
        ratios.append(half.value / 2.0)
    assert abs(np.mean(ratios) - 1) < 0.15


def test_too_few_episodes_is_missing_with_reason():
    """Check a calm series gives no half-life number and says why."""
    hours, x = _steady_days(10)
    data = participant(hours, x)
    settings = settings_for()
    est = bounce_back(prepare(data, settings), data, settings).estimates
    assert est["recovery_half_life_hours"].value is None
    assert "at least 3" in est["recovery_half_life_hours"].note
    assert est["n_episodes"].value == 0
