"""Abrupt shifts are looked for within measurement periods, never across the gap between two."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from springback.intake import load_study
from springback.metrics._series import prepare
from springback.metrics.shifts import shift_family
from tests.support.shifts_sim import brute_force_partition, settings, two_periods


def test_a_level_difference_between_periods_is_not_a_shift() -> None:
    """Simulated known truth: steady within each period, 25 points worse in the second."""
    found_in_gap = 0
    for seed in range(5):
        rng = np.random.default_rng(seed)
        data = two_periods(rng, np.full(14, 40.0), np.full(14, 65.0), 40, 10.0)
        s = settings()
        fam = shift_family(prepare(data, s), s)
        cps = fam.tables["change_points"]
        second = pd.Timestamp(fam.tables["daily"]["study_day"].iloc[14])
        found_in_gap += int((cps["study_day"] == second).sum()) if len(cps) else 0
        assert fam.params["periods"] == 2
        diff = fam.estimates["period_difference"]
        # Truth 25 points; each period's level is the mean of 14 daily means of 6 answers
        # (SD 10 / sqrt 6), so the difference has SE 10 / sqrt(6 * 14) * sqrt 2 = 1.54.
        assert abs(diff.value - 25.0) < 4 * 1.54
        levels = fam.tables["period_levels"]
        assert levels["days"].tolist() == [14, 14]
        assert "within each of 2 measurement periods" in fam.estimates["n_shifts"].note
    assert found_in_gap == 0
    # The same days read as one period do put a shift at the second period's first day.
    one = dataclasses.replace(data, momentary=data.momentary.drop(columns="period"))
    cps = shift_family(prepare(one, settings()), settings()).tables["change_points"]
    assert second in set(cps["study_day"])


def test_change_points_within_periods_are_the_optimal_partition_of_each_period() -> None:
    """With a fixed penalty, the change points are each period's own optimal partitioning
    (brute-force recursion of Jackson et al. 2005 as restated in Killick et al. 2012)."""
    rng = np.random.default_rng(7)
    level_1 = np.concatenate([np.full(8, 30.0), np.full(8, 60.0)])    # shift on day 8
    level_2 = np.concatenate([np.full(10, 45.0), np.full(9, 20.0)])   # shift on day 10
    data = two_periods(rng, level_1, level_2, 21, 8.0)
    penalty = 400.0
    s = settings(metrics={"pelt_penalty": penalty})
    fam = shift_family(prepare(data, s), s)
    daily = fam.tables["daily"]
    y = daily["mean"].to_numpy()
    want = [e for e in brute_force_partition(y[:16], penalty, 3)[:-1]] + \
        [16 + e for e in brute_force_partition(y[16:], penalty, 3)[:-1]]
    got = [int(np.searchsorted(daily["study_day"], d)) for d in
           fam.tables["change_points"]["study_day"]]
    assert got == want == [8, 26]
    sizes = fam.tables["change_points"]["size"].to_numpy()
    assert sizes[0] == pytest.approx(30.0, abs=4 * 8 / np.sqrt(6 * 8) * np.sqrt(2))
    assert sizes[1] == pytest.approx(-25.0, abs=4 * 8 / np.sqrt(6 * 9) * np.sqrt(2))
    # The period difference: period 1's end level (60) to period 2's start level (45).
    assert fam.estimates["period_difference"].value == pytest.approx(-15.0, abs=4.0)


def test_too_short_periods_say_so() -> None:
    """Two periods of 5 days each: no period holds two segments of 3 days."""
    rng = np.random.default_rng(2)
    data = two_periods(rng, np.full(5, 40.0), np.full(5, 60.0), 30, 5.0)
    fam = shift_family(prepare(data, settings()), settings())
    assert not fam.estimates["n_shifts"].ok
    assert "in one measurement period" in fam.estimates["n_shifts"].note
    assert "the longest of the 2 periods had 5" in fam.estimates["n_shifts"].note


@pytest.fixture(scope="module")
def bringmann(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    from tests.intake.test_intake_bringmann import _project

    return load_study(_project(tmp_path_factory.mktemp("bringmann") / "study"))


def test_bringmann_shifts_never_fall_on_a_period_s_first_day(bringmann) -> None:  # type: ignore[no-untyped-def]
    """Open data with two six-day periods ten weeks apart (Bringmann et al. 2013, PLoS ONE
    8:e60188): no change point on the first answered day of a period; the difference
    between the periods is reported as such, and equals the levels read from the file."""
    settings_ = bringmann.settings
    both = 0
    for person in bringmann.roster["participant"]:
        data = bringmann.slice(person)
        series = prepare(data, settings_)
        fam = shift_family(series, settings_)
        assert fam.params["periods"] == len(set(series.periods))
        if fam.params["periods"] < 2:
            assert "period_levels" not in fam.tables
            continue
        both += 1
        levels = fam.tables["period_levels"]
        firsts = set(levels["first_day"])
        assert not firsts & set(fam.tables["change_points"]["study_day"])
        # Independent check from the answers: each period's mean of daily means.
        frame = pd.DataFrame({"day": series.study_day, "p": series.periods, "x": series.value})
        daily = frame.groupby(["p", "day"])["x"].mean().groupby("p").mean()
        assert levels["mean"].to_numpy() == pytest.approx(daily.to_numpy())
        if fam.tables["change_points"].empty:
            sign = 1.0 if series.higher_is_worse else -1.0
            assert fam.estimates["period_difference"].value == pytest.approx(
                sign * (daily.iloc[1] - daily.iloc[0]))
    assert both >= 3  # four of the five answered in both periods
