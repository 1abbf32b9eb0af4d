"""The course reading across measurement periods: a slope is taken within periods only, so a
difference between two periods is not read as a gradual change over the weeks nobody answered.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
from scipy import stats

from springback.findings.course import course, day_groups, trend, within_slopes
from springback.metrics._series import prepare
from springback.metrics.shifts import shift_family
from springback.model import ParticipantData
from tests.support.shifts_sim import settings, two_periods

DAYS = 14



def _read(data: ParticipantData) -> tuple[str, dict[str, float | bool], dict[str, float | bool]]:
    """The course reading, and the trend comparison within periods and across the gap."""
    s = settings()
    fam = shift_family(prepare(data, s), s)
    daily = fam.tables["daily"]
    days = ((daily["study_day"] - daily["study_day"].iloc[0]).dt.days).to_numpy(float)
    y, level = daily["mean"].to_numpy(float), daily["level"].to_numpy(float)
    noise = float(fam.params["noise_sd"])
    n_cp = len(fam.tables["change_points"])
    within = trend(days, y, level, n_cp, noise, day_groups(daily, fam))
    across = trend(days, y, level, n_cp, noise)
    return course("p1", {"shifts": fam}, 0.05, True).reading, within, across


def test_one_period_is_scipys_theil_sen() -> None:
    """Source: scipy.stats.theilslopes (Sen 1968, JASA 63:1379-1389) on untied data; with one
    period the seasonal Kendall slope of Hirsch, Slack & Smith 1982 is Sen's slope."""
    rng = np.random.default_rng(3)
    for n in (9, 20, 41):
        x = np.sort(rng.choice(200, n, replace=False)).astype(float)
        y = 0.05 * x + rng.normal(0, 1, n)
        ours = within_slopes(x, y, np.zeros(n, dtype=int))
        theirs = stats.theilslopes(y, x, alpha=0.95)
        assert ours == (theirs.slope, theirs.low_slope, theirs.high_slope)


def test_within_period_slope_against_a_hand_count() -> None:
    """Hand count: two periods of three days, y = day within each, periods 10 apart in level;
    the six within-period pairs all have slope 1, the gap's pairs are left out."""
    x = np.array([0.0, 1, 2, 50, 51, 52])
    y = np.array([0.0, 1, 2, 10, 11, 12])
    slope, low, high = within_slopes(x, y, np.array([0, 0, 0, 1, 1, 1]))
    assert (slope, low, high) == (1.0, 1.0, 1.0)
    assert stats.theilslopes(y, x).slope != 1.0  # across the gap the slope is another


def test_a_difference_between_periods_is_not_a_gradual_change() -> None:
    """Simulated known truth: steady within each period (14 days, SD 10 a prompt), 25 points
    worse in the second, 60 days apart. Across the gap Sen's slope excludes 0 in every person
    (the reading the course took before); within the periods it does so in at most 1 of 10
    (a 95% interval), so at most that one is read as a gradual change, and none as an
    abrupt shift."""
    readings, across_sure, within_sure = [], 0, 0
    for seed in range(10):
        rng = np.random.default_rng(seed)
        data = two_periods(rng, np.full(DAYS, 40.0), np.full(DAYS, 65.0), 60, 10.0)
        reading, within, across = _read(data)
        readings.append(reading)
        across_sure += bool(across["slope_excludes_zero"])
        within_sure += bool(within["slope_excludes_zero"])
    assert across_sure == 10
    assert within_sure <= 1
    assert readings.count("gradual_change") <= within_sure, readings
    assert "abrupt_shift" not in readings, readings


def test_a_drift_within_the_periods_is_still_gradual() -> None:
    """Simulated known truth: the level rises 1 point a day in both periods (and went on
    rising between them, 30 to 87 on the 0-100 scale); the slope within periods covers 1 in
    at least 8 of 10 people (its 95% interval) and the course reads a gradual change in at
    least 8 of 10."""
    covered, gradual = 0, 0
    for seed in range(10):
        rng = np.random.default_rng(100 + seed)
        days_1 = np.arange(DAYS, dtype=float)
        days_2 = days_1 + DAYS + 30
        data = two_periods(rng, 30 + 1.0 * days_1, 30 + 1.0 * days_2, 30, 6.0)
        s = settings()
        fam = shift_family(prepare(data, s), s)
        daily = fam.tables["daily"]
        days = ((daily["study_day"] - daily["study_day"].iloc[0]).dt.days).to_numpy(float)
        _, low, high = within_slopes(days, daily["mean"].to_numpy(float), day_groups(daily, fam))
        covered += int(low <= 1.0 <= high)
        gradual += course("p1", {"shifts": fam}, 0.05, True).reading == "gradual_change"
    assert covered >= 8
    assert gradual >= 8


def test_day_groups_follow_the_period_levels() -> None:
    """Each daily row takes the period whose first day it follows (from period_levels)."""
    rng = np.random.default_rng(7)
    data = two_periods(rng, np.full(DAYS, 40.0), np.full(DAYS, 45.0), 20, 5.0)
    s = settings()
    fam = shift_family(prepare(data, s), s)
    groups = day_groups(fam.tables["daily"], fam)
    assert groups is not None and groups.tolist() == [0] * DAYS + [1] * DAYS
    one = dataclasses.replace(data, momentary=data.momentary.drop(columns="period"))
    fam_one = shift_family(prepare(one, s), s)
    assert day_groups(fam_one.tables["daily"], fam_one) is None
    assert isinstance(fam.tables["daily"]["study_day"].iloc[0], pd.Timestamp)
