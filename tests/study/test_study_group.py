"""Group-level estimates against simulated cohorts with known parameters, and the 2x2 table
of warning readings against a hand count."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from springback.study import group
from tests.study.cohort import ar1_cohort, findings_rows


def test_mixed_inertia_covers_the_simulated_group_mean() -> None:
    """Check MixedLM's mean slope on 30 simulated AR(1) people with known mean phi 0.4."""
    # Source: a simulated process with known parameters (AR(1), phi_i ~ N(0.4, 0.1)).
    pairs, phis = ar1_cohort(30, 0.4, 0.1, seed=1)
    fit = group.mixed_inertia(pairs)
    assert fit["people"] == 30 and fit["pairs"] == len(pairs)
    assert fit["lower"] < 0.4 < fit["upper"]
    assert fit["lower"] < phis.mean() < fit["upper"]
    assert fit["phi"] == pytest.approx(0.4, abs=0.04)
    # The random slopes' SD recovers the spread of the people's phi (0.1, drawn 0.09 here).
    assert fit["slope_sd"] == pytest.approx(np.std(phis, ddof=1), abs=0.04)


def test_mixed_inertia_interval_covers_the_truth_in_most_cohorts() -> None:
    """Check the Wald 95% interval's coverage over 12 simulated cohorts (mean phi 0.3)."""
    # Source: simulated cohorts with known mean phi; with 95% coverage, 9 or fewer hits out of
    # 12 has binomial probability below 0.02.
    hits = 0
    for seed in range(12):
        pairs, _ = ar1_cohort(20, 0.3, 0.1, days=30, seed=100 + seed)
        fit = group.mixed_inertia(pairs)
        hits += fit["lower"] < 0.3 < fit["upper"]
    assert hits >= 10
    assert stats.binom.cdf(9, 12, 0.95) < 0.02


def test_group_half_life_of_a_homogeneous_ou_cohort() -> None:
    """Check the group half-life against the Ornstein-Uhlenbeck truth ln 2 / kappa."""
    # Source: an OU process sampled every 2.5 h is AR(1) with phi = exp(-kappa * 2.5)
    # (Oravecz, Tuerlinckx & Vandekerckhove 2009, Psychometrika 74:395-418, from memory).
    kappa = 0.25
    phi = math.exp(-kappa * 2.5)
    pairs, _ = ar1_cohort(30, phi, 0.0, seed=7, gap_hours=2.5)
    people = pd.DataFrame({"participant": sorted(set(pairs["participant"])),
                           "inertia": phi, "half_life_hours": math.log(2) / kappa})
    est = group.group_estimates(people, pairs).set_index("estimate")
    hl = est.loc["half_life_mixed"]
    assert hl["lower"] < math.log(2) / kappa < hl["upper"]
    assert est.loc["inertia_mixed", "n"] == 30


def test_person_mean_and_trends_match_scipy() -> None:
    """Check the mean of person-level estimates and its interval against scipy's t test."""
    # Source: scipy.stats.ttest_1samp(...).confidence_interval (Student's t).
    rng = np.random.default_rng(3)
    people = pd.DataFrame({"participant": [f"P{i}" for i in range(12)],
                           "inertia": rng.uniform(0.1, 0.6, 12),
                           "half_life_hours": rng.uniform(1, 5, 12),
                           "warning_tau_inertia": rng.uniform(-0.4, 0.6, 12)})
    people.loc[3, "warning_tau_inertia"] = np.nan
    pairs, _ = ar1_cohort(12, 0.35, 0.1, seed=4)
    pairs["participant"] = pairs["participant"].str.replace("S", "P").str.replace("P0", "P")
    est = group.group_estimates(people, pairs).set_index("estimate")
    for name, column in (("inertia_person_mean", "inertia"),
                         ("trend_inertia", "warning_tau_inertia")):
        x = people[column].dropna().to_numpy()
        ci = stats.ttest_1samp(x, 0.0).confidence_interval(0.95)
        row = est.loc[name]
        assert row["value"] == pytest.approx(x.mean())
        assert (row["lower"], row["upper"]) == pytest.approx((ci.low, ci.high))
        assert row["n"] == len(x)


def _wilson_by_hand(k: int, n: int, z: float = 1.959963984540054) -> tuple[float, float]:
    # Source: Wilson 1927, "Probable inference, the law of succession, and statistical
    # inference", JASA 22:209-212: (p + z^2/2n -+ z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n).
    p = k / n
    centre, half = p + z * z / (2 * n), z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    return (centre - half) / (1 + z * z / n), (centre + half) / (1 + z * z / n)


SMALL_STUDY = [
    ("A", "abrupt_shift", "rising"), ("B", "abrupt_shift", "rising"),
    ("C", "abrupt_shift", "not_rising"), ("D", "abrupt_shift", "not_enough_data"),
    ("E", "no_clear_change", "rising"), ("F", "no_clear_change", "not_rising"),
    ("G", "gradual_change", "not_rising"), ("H", "switching", "not_rising"),
    ("I", "not_enough_data", "rising"),
]


def test_warning_table_against_a_hand_count() -> None:
    """Check the 2x2 table, sensitivity, specificity and Wilson intervals on nine people."""
    # Hand count of SMALL_STUDY: shift rising A, B; shift not rising C; D not read; without a
    # shift rising E, not rising F, G, H; I has no course reading and is left out.
    counts = group.warning_counts(findings_rows(SMALL_STUDY)).set_index("group")
    assert counts.loc["abrupt_shift"].to_dict() == {"rising": 2, "not_rising": 1, "read": 3,
                                                    "not_read": 1}
    assert counts.loc["no_shift"].to_dict() == {"rising": 1, "not_rising": 3, "read": 4,
                                                "not_read": 0}
    acc = group.warning_accuracy(counts.reset_index(), alpha=0.05).set_index("statistic")
    assert acc.loc["sensitivity", "value"] == pytest.approx(2 / 3)
    assert acc.loc["specificity", "value"] == pytest.approx(3 / 4)
    for stat, k, n in (("sensitivity", 2, 3), ("specificity", 3, 4),
                       ("rising_without_shift", 1, 4)):
        assert (acc.loc[stat, "lower"], acc.loc[stat, "upper"]) == pytest.approx(
            _wilson_by_hand(k, n))
        assert (acc.loc[stat, "count"], acc.loc[stat, "of"]) == (k, n)
    # Seven readings, each rising with probability 0.05 under no change: 0.35 expected.
    assert acc.loc["rising_expected", "value"] == pytest.approx(0.35)
    assert acc.loc["rising_expected", "count"] == 3
    # Source: the binomial tail by hand, 1 - sum_{k<3} C(7,k) 0.05^k 0.95^(7-k).
    tail = 1 - sum(math.comb(7, k) * 0.05**k * 0.95 ** (7 - k) for k in range(3))
    assert acc.loc["rising_chance_p", "value"] == pytest.approx(tail)


def test_warning_accuracy_without_shifts_has_no_sensitivity() -> None:
    """Check a study without shifts reports no sensitivity rather than a number."""
    counts = group.warning_counts(findings_rows([("A", "no_clear_change", "not_rising")]))
    acc = group.warning_accuracy(counts, alpha=0.05).set_index("statistic")
    assert math.isnan(acc.loc["sensitivity", "value"])
    assert math.isnan(acc.loc["sensitivity", "lower"])
    assert acc.loc["specificity", "value"] == 1.0
