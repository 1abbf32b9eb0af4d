"""Abrupt shifts: PELT (Killick et al. 2012) on daily means, checked on computed values and
simulations."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import ruptures as rpt

from springback.metrics._series import description, prepare
from springback.metrics.results import Family, ParticipantResults
from springback.metrics.shifts import (
    daily_means,
    noise_scale,
    optimal_partition,
    pelt_changepoints,
    shift_family,
    shift_rows,
)
from tests.support.shifts_sim import brute_force_partition, participant, prompt_hours, settings


def test_pelt_matches_methods_check_values() -> None:
    """Check PELT (L2, pen 1, min_size 2, jump 1) on two step inputs (Killick et al. 2012)."""
    # Source: [computed with ruptures 1.1.10]: ends [5, 10] and [7, 12].
    assert pelt_changepoints(np.array([0.0] * 5 + [5.0] * 5), 1.0, 2) == [5]
    assert pelt_changepoints(np.array([0.0] * 7 + [5.0] * 5), 1.0, 2) == [7]


def test_ruptures_default_jump_misplaces_the_change() -> None:
    """Check the library's default jump=5 gives [5, 10, 12], which is why jump=1 is pinned."""
    # Source: [computed with ruptures 1.1.10]: default jump=5 -> [5, 10, 12].
    y = np.array([0.0] * 7 + [5.0] * 5).reshape(-1, 1)
    assert rpt.Pelt(model="l2", min_size=2).fit(y).predict(pen=1) == [5, 10, 12]


def test_brute_force_matches_methods_value() -> None:
    """Check the independent optimal-partitioning loop gives [7, 12] on the same step input."""
    # Source: [computed with an unpruned optimal-partitioning loop]: brute force gives [7, 12].
    assert brute_force_partition(np.array([0.0] * 7 + [5.0] * 5), 1.0, 2) == [7, 12]


@pytest.mark.parametrize("seed", range(6))
def test_pelt_and_exact_partition_agree_with_brute_force(seed: int) -> None:
    """Check the segmentation used equals a brute-force optimal partitioning on small inputs."""
    # Source: Killick, Fearnhead & Eckley 2012 (PELT is exact for the penalised L2 objective);
    # brute force = the optimal-partitioning recursion without pruning (tests/_shifts_sim.py).
    rng = np.random.default_rng(seed)
    for _ in range(40):
        n = int(rng.integers(6, 22))
        min_size = int(rng.integers(1, 4))
        pen = float(rng.uniform(0.2, 4.0))
        y = rng.normal(0, 1, n) + np.repeat(rng.normal(0, 2, 3), [n // 3, n // 3, n - 2 * (n // 3)])
        expected = brute_force_partition(y, pen, min_size)[:-1]
        assert optimal_partition(y, pen, min_size) == expected
        if min_size == 1:
            # ruptures' pruning is exact without a minimum segment length
            assert pelt_changepoints(y, pen, min_size) == expected


def test_known_ruptures_pruning_defect_is_corrected() -> None:
    """Check the family uses the exact optimum where ruptures' PELT prunes too early."""
    # Source: deepcharles/ruptures pull request #383: [0,1,0,0,1], min_size 2, pen 0.1 gives
    # [2, 5] in ruptures while the optimum is [5] (objective 1.2 versus 1.2667).
    y = np.array([0.0, 1.0, 0.0, 0.0, 1.0])
    assert brute_force_partition(y, 0.1, 2) == [5]
    assert optimal_partition(y, 0.1, 2) == []


def test_noise_scale_estimates_day_to_day_sd() -> None:
    """Check the MAD-of-differences noise estimate recovers a known SD despite level shifts."""
    # Source: simulated N(0, 0.8^2) days with two steps of 3 points; MAD scaling 1.4826 from
    # Rousseeuw & Croux 1993; a difference of two days has variance 2 sigma^2.
    rng = np.random.default_rng(7)
    y = rng.normal(0, 0.8, 400) + np.repeat([0.0, 3.0, -1.0], [150, 150, 100])
    assert noise_scale(y) == pytest.approx(0.8, rel=0.12)


def test_daily_means_match_pandas_groupby() -> None:
    """Check per-day means and counts against pandas groupby."""
    rng = np.random.default_rng(1)
    days = np.array(["2026-03-01", "2026-03-01", "2026-03-03", "2026-03-02", "2026-03-03"],
                    dtype="datetime64[ns]")
    values = rng.normal(size=5)
    values[2] = np.nan
    got = daily_means(days, values)
    ref = pd.DataFrame({"d": days, "v": values}).dropna().groupby("d")["v"].agg(["mean", "size"])
    np.testing.assert_allclose(got["mean"], ref["mean"].to_numpy())
    assert got["n"].tolist() == ref["size"].tolist()


def _step_participant(seed: int, day: int, size: float, higher_is: str = "worse"):
    rng = np.random.default_rng(seed)
    hours = prompt_hours(60, 6, rng)
    values = 40 + rng.normal(0, 8, hours.size) + size * (hours >= day * 24 + 4)
    s = settings(higher_is=higher_is)
    data = participant(hours, np.clip(np.round(values), 0, 100))
    return prepare(data, s), s, data


@pytest.mark.parametrize("seed", range(5))
def test_step_change_is_found_within_three_days(seed: int) -> None:
    """Check a simulated step of 15 points on day 31 is found within 3 days, sign = worse."""
    # Source: simulated process with known truth (step at study day index 31).
    series, s, _ = _step_participant(seed, 31, 15.0)
    fam = shift_family(series, s)
    cps = fam.tables["change_points"]
    first = pd.Timestamp(fam.tables["daily"]["study_day"].iloc[0])
    found = [(d - first).days for d in cps["study_day"]]
    assert any(abs(f - 31) <= 3 for f in found)
    big = cps.loc[cps["exceeds_swings"]]
    assert len(big) == 1
    assert big["direction"].iloc[0] == "worse"
    assert big["size"].iloc[0] == pytest.approx(15.0, abs=4.0)
    assert fam.estimates["shift_largest"].value == pytest.approx(15.0, abs=4.0)


def test_polarity_turns_a_rise_into_better() -> None:
    """Check a rise on a 'higher is better' composite is reported as a negative size, better."""
    series, s, _ = _step_participant(0, 31, 15.0, higher_is="better")
    cps = shift_family(series, s).tables["change_points"]
    big = cps.loc[cps["exceeds_swings"]]
    assert big["direction"].tolist() == ["better"]
    assert big["size"].iloc[0] < 0


def test_no_step_gives_no_large_shift() -> None:
    """Check stationary noise gives no shift exceeding the person's own swings."""
    series, s, _ = _step_participant(3, 31, 0.0)
    cps = shift_family(series, s).tables["change_points"]
    assert not cps["exceeds_swings"].any()


def test_too_few_days_gives_missing_with_reason() -> None:
    """Check fewer than two minimum segments of days gives Estimate.missing with a reason."""
    rng = np.random.default_rng(0)
    hours = prompt_hours(5, 6, rng)
    s = settings()
    fam = shift_family(prepare(participant(hours, rng.uniform(0, 100, hours.size)), s), s)
    est = fam.estimates["n_shifts"]
    assert est.value is None and "at least 6 days" in est.note
    assert fam.tables["change_points"].empty


def test_questionnaire_sudden_loss_is_cross_referenced_and_rows_export() -> None:
    """Check a sudden loss near the shift is named, and shift_rows gives the CSV columns."""
    series, s, _data = _step_participant(1, 31, 15.0)
    day = pd.Timestamp("2026-03-02", tz="UTC") + pd.Timedelta(days=32, hours=12)
    questionnaires = Family(tables={"sudden_phq9": pd.DataFrame(
        {"local_time": [day], "kind": ["loss"], "change": [6.0]})})
    fam = shift_family(series, s, questionnaires)
    big = fam.tables["change_points"].loc[fam.tables["change_points"]["exceeds_swings"]]
    assert "sudden loss on phq9" in big["questionnaire_nearby"].iloc[0]
    results = ParticipantResults("p1", "low_mood", {"shifts": fam}, True,
                                 series=description(series))
    rows = shift_rows(results)
    assert rows and set(rows[0]) == {"participant", "date", "direction", "size", "method"}
    assert all(r["method"] == "PELT" and r["participant"] == "p1" for r in rows)
    assert math.isfinite(rows[0]["size"])
