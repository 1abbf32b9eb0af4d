"""Check level and variability measures against published worked values and outside libraries."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest

from springback.metrics._series import prepare
from springback.metrics.descriptives import (
    describe,
    max_sd,
    mssd,
    relative_variability,
    variance_parts,
)
from tests.support.metrics_sim import participant, prompt_hours, settings_for, simulate_ou


def _brute_max_sd(mean: float, n: int, low: float, high: float, steps: int) -> float:
    """Largest SD over every rating vector on a fine grid with the given mean (exhaustive)."""
    grid = np.linspace(low, high, steps)
    best = 0.0
    for combo in itertools.combinations_with_replacement(grid, n):
        if abs(sum(combo) / n - mean) < 1e-9:
            best = max(best, float(np.std(combo, ddof=1)))
    return best


@pytest.mark.parametrize(("mean", "n"), [(2.0, 4), (2.5, 4), (1.75, 5), (3.0, 3), (1.2, 5)])
def test_max_sd_equals_exhaustive_search(mean, n):
    """Check the vertex formula for the largest SD against an exhaustive grid search."""
    # Mestdagh et al. 2018, Psychological Methods 23:690-707: the relative variability index
    # divides by the largest SD possible for the mean; checked here by brute force on 1..4.
    assert max_sd(mean, n, 1.0, 4.0) == pytest.approx(_brute_max_sd(mean, n, 1.0, 4.0, 13),
                                                      abs=1e-9)


def test_max_sd_limits_and_relative_variability():
    """Check the large-n limit sqrt((M-a)(b-M) n/(n-1)) and RVI = 1 at the extremes."""
    # With k = n (M - a)/(b - a) an integer every rating sits at an end: the maximum is exact.
    n, low, high, mean = 10, 1.0, 7.0, 2.8
    assert max_sd(mean, n, low, high) == pytest.approx(
        math.sqrt((mean - low) * (high - mean) * n / (n - 1)))
    x = np.array([1.0] * 7 + [7.0] * 3)
    assert relative_variability(x, 1, 7) == pytest.approx(1.0)
    assert math.isnan(relative_variability(np.full(5, 7.0), 1, 7))
    assert 0 < relative_variability(np.array([2, 3, 4, 3, 2.0]), 1, 7) < 1


def test_mssd_published_and_computed_values():
    """Check MSSD (von Neumann et al. 1941) on the REAT mssd() example and time-adjusted values."""
    # [published: R package REAT docs, mssd() example; recomputed] d1 -> 25, d2 -> 212.5.
    d1 = np.array([10, 10, 10, 20, 20, 20, 30, 30, 30.0])
    d2 = np.array([20, 10, 30, 10, 30, 20, 30, 20, 10.0])
    assert mssd(np.diff(d1), np.ones(8)) == pytest.approx(25.0)
    assert mssd(np.diff(d2), np.ones(8)) == pytest.approx(212.5)
    assert math.sqrt(mssd(np.diff(d2), np.ones(8))) == pytest.approx(14.577380, abs=1e-6)
    # [computed] Jahng, Wood & Trull 2008 time adjustment: x at t = [0, 1, 3, 4, 8] h.
    x, t = np.array([3, 5, 4, 6, 5.0]), np.array([0, 1, 3, 4, 8.0])
    for lam, want in ((0.0, 2.5), (0.5, 3.28125), (1.0, 4.675781)):
        assert mssd(np.diff(x), np.diff(t), lam) == pytest.approx(want, abs=1e-6)


def test_rmssd_uses_valid_pairs_only():
    """Check a skipped answer drops its pairs: MSSD 14/3 = 4.666667, not 3.5 (computed by hand)."""
    hours = np.array([9.0, 10, 11, 12, 13, 14])
    values = np.array([3, 5, np.nan, 6, 5, 2.0])
    settings = settings_for(min_pairs=3)
    data = participant(hours, values)
    # The skipped answer makes 10:00 -> 12:00 a 2 h pair; a 1.5 h maximum gap leaves 3 pairs.
    settings = settings.model_copy(update={"metrics": settings.metrics.model_copy(
        update={"max_gap_hours": 1.5})})
    fam = describe(prepare(data, settings), data, settings)
    assert fam.estimates["rmssd"].value ** 2 == pytest.approx(14 / 3, abs=1e-6)
    assert fam.estimates["rmssd"].n == 3


def test_variance_parts_match_pandas_groupby():
    """Check within-day (pooled) and between-day variance against a pandas groupby."""
    rng = np.random.default_rng(2)
    days = np.repeat(np.arange(6), [3, 5, 4, 5, 2, 5])
    x = rng.normal(size=len(days)) + days * 0.3
    within, between, n_days = variance_parts(x, days)
    frame = pd.DataFrame({"d": days, "x": x})
    g = frame.groupby("d")["x"]
    ss = ((frame["x"] - g.transform("mean")) ** 2).sum()
    assert within == pytest.approx(ss / (len(x) - 6))
    assert between == pytest.approx(g.mean().var(ddof=1))
    assert n_days == 6


def test_describe_family_shape_and_values():
    """Check the family's names, tables and that mean/SD equal numpy's on the same answers."""
    rng = np.random.default_rng(4)
    hours = prompt_hours(20, 5, rng)
    x = np.clip(simulate_ou(hours, 0.3, 1.0, 3.5, rng), 1, 7)
    data = participant(hours, x, rng=rng)
    settings = settings_for()
    fam = describe(prepare(data, settings), data, settings)
    est = fam.estimates
    assert est["n_answered"].value == 100 and est["compliance"].value == pytest.approx(1.0)
    assert est["mean"].value == pytest.approx(np.mean(x))
    assert est["sd"].value == pytest.approx(np.std(x, ddof=1))
    assert list(fam.tables["series"].columns) == ["local_time", "value"]
    assert list(fam.tables["daily"].columns) == ["study_day", "mean", "sd", "n", "scheduled"]
    assert fam.tables["daily"]["n"].sum() == 100
    assert list(fam.tables["diurnal"].columns) == ["hour", "mean", "n"]
    assert fam.params["typical_low"] == pytest.approx(np.percentile(x, 25))
