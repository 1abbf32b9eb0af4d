"""Check carry-over and the Ornstein-Uhlenbeck half-life against outside references."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from statsmodels.tsa.ar_model import AutoReg

from springback.metrics._series import prepare
from springback.metrics.dynamics import carry_over, fit_ou
from tests.support.metrics_sim import participant, prompt_hours, settings_for, simulate_ou

# Irregular-sampling check [computed with scipy 1.17]: one person, two days (hours since day 0
# midnight).
TWO_DAYS_HOURS = np.array([9, 12, 15, 21, 33, 37, 39, 44.0])
TWO_DAYS_VALUES = np.array([3, 4, 4, 6, 2, 3, 5, 4.0])


def _with(**metrics: object):
    return settings_for(**{"detrend": "none", **metrics})


def test_inertia_same_day_pairs_worked_values():
    """Check same-day Pearson 0.369274 and the 5 h rule 0.310087 (computed with scipy 1.17)."""
    data = participant(TWO_DAYS_HOURS, TWO_DAYS_VALUES)
    settings = _with(min_pairs=3, max_gap_hours=12)
    fam = carry_over(prepare(data, settings), settings)
    assert fam.estimates["inertia"].value == pytest.approx(0.369274, abs=1e-6)
    assert fam.estimates["inertia"].n == 6
    settings = _with(min_pairs=3, max_gap_hours=5)
    fam = carry_over(prepare(data, settings), settings)
    assert fam.estimates["inertia"].value == pytest.approx(0.310087, abs=1e-6)
    assert list(fam.tables["pairs"].columns) == ["local_time", "value", "next_value",
                                                 "gap_hours", "deviation", "next_deviation"]
    assert len(fam.tables["pairs"]) == 5


def test_inertia_is_the_day_jackknife_of_scipy_pearson_on_admissible_pairs():
    """Check inertia against scipy.stats.pearsonr on the pairs, deleting one day at a time."""
    # Delete-one-group jackknife (Quenouille 1956, Biometrika 43:353-360; Tukey 1958 for the
    # standard error, from memory), recomputed here by brute force with scipy's Pearson r.
    rng = np.random.default_rng(11)
    hours = prompt_hours(40, 5, rng)
    x = simulate_ou(hours, 0.25, 1.0, 3.0, rng)
    settings = _with()
    series = prepare(participant(hours, x), settings)
    fam = carry_over(series, settings, "p11")
    ok = series.admissible
    a, b, day = series.value[:-1][ok], series.value[1:][ok], series.day_index[:-1][ok]
    full = stats.pearsonr(a, b).statistic
    days = np.unique(day)
    loo = np.array([stats.pearsonr(a[day != d], b[day != d]).statistic for d in days])
    d = len(days)
    want = d * full - (d - 1) * loo.mean()
    se = math.sqrt((d - 1) / d * np.sum((loo - loo.mean()) ** 2))
    q = stats.t.ppf(0.975, d - 1)
    est = fam.estimates["inertia"]
    assert fam.params["inertia_uncorrected"] == pytest.approx(full, abs=1e-12)
    assert est.value == pytest.approx(want, abs=1e-10)
    assert est.lower == pytest.approx(want - q * se, abs=1e-10)
    assert est.upper == pytest.approx(want + q * se, abs=1e-10)
    assert est.value > full  # the correction undoes the low bias of r on a short series
    assert carry_over(series, settings, "p11").estimates["inertia"] == est  # deterministic


def test_inertia_interval_matches_the_spread_of_estimates():
    """Check the day-bootstrap interval's width matches the simulated spread of inertia."""
    # 60 seeded OU series at high carry-over (kappa 0.08/h, lag-1 r near 0.8), where a Fisher z
    # interval (independent pairs) is about 25% too narrow. Normal-theory half-width / 1.96
    # should be close to the SD of the estimates across simulations.
    settings = _with()
    values, halves, bounds = [], [], []
    for seed in range(60):
        rng = np.random.default_rng(seed)
        hours = prompt_hours(60, 5, rng)
        x = simulate_ou(hours, 0.08, 1.0, 3.0, rng)
        est = carry_over(prepare(participant(hours, x), settings), settings,
                         f"p{seed}").estimates["inertia"]
        values.append(est.value)
        halves.append((est.upper - est.lower) / 2 / stats.norm.ppf(0.975))
        bounds.append((est.lower, est.upper))
    centre = np.mean(values)
    assert np.mean(halves) == pytest.approx(np.std(values), rel=0.25)
    assert np.mean([lo < centre < hi for lo, hi in bounds]) >= 0.85


def test_ou_fit_on_equal_spacing_equals_autoreg():
    """Check kappa = -ln(phi_AutoReg)/dt on equally spaced pairs (OU sampled = AR(1))."""
    # Equal spacing: the OU transition is an AR(1) with intercept, whose conditional ML slope
    # is the OLS slope of statsmodels AutoReg(x, 1, trend='c') (AR(1) <-> OU: standard result,
    # Gardiner 2009, "Stochastic methods", §3.8.4).
    rng = np.random.default_rng(5)
    hours = 5.0 + 0.5 * np.arange(44)  # one study day, every half hour
    x = simulate_ou(hours, 0.4, 1.0, 2.0, rng)
    fit = fit_ou(x[:-1], x[1:], np.full(43, 0.5))
    phi = AutoReg(x, 1, trend="c").fit().params[1]
    assert fit["kappa"] == pytest.approx(-math.log(phi) / 0.5, rel=1e-6)
    assert fit["lower"] < fit["kappa"] < fit["upper"]


def test_half_life_worked_conversion():
    """Check phi 0.8 per hour -> kappa 0.223144, half-life 3.106284 h (computed with numpy)."""
    x0 = np.array([1.0, -1.0, 2.0, 0.5, -0.7, 1.3, -2.0, 0.1])
    fit = fit_ou(x0, 0.8 * x0 + 0.0, np.ones(8))
    # Noise-free pairs with mean 0 and phi = 0.8 pin kappa at -ln 0.8.
    assert fit["kappa"] == pytest.approx(0.223144, abs=1e-5)
    assert math.log(2) / fit["kappa"] == pytest.approx(3.106284, abs=1e-4)


def test_half_life_recovers_simulated_ou_on_irregular_prompts():
    """Check the OU half-life on 600 irregular prompts (5/day, nights) is within 15% of truth."""
    # Simulated Ornstein-Uhlenbeck with known rate (exact transition, Gillespie 1996), no answer
    # noise (the OU-plus-noise fit then finds a noise share near 0). The estimator's sampling
    # SD at 600 prompts is about 12%, so each seeded run is checked at 15% and the mean of the
    # runs at 5% (unbiasedness); tests/test_metrics_dynamics_noise.py adds answer noise.
    # With the default detrending (Gaussian, 7 days) a little slow variance goes with the
    # trend: about 4% shorter on average over 40 simulations, checked here at 10%.
    truth = 3.0
    settings, default = _with(), settings_for()
    ratios, default_ratios = [], []
    for seed in (1, 2, 5, 6):
        rng = np.random.default_rng(seed)
        hours = prompt_hours(120, 5, rng)
        x = simulate_ou(hours, math.log(2) / truth, 1.0, 4.0, rng)
        data = participant(hours, x)
        fam = carry_over(prepare(data, settings), settings)
        est = fam.estimates["half_life_hours"]
        assert est.n == 480  # 4 same-day pairs a day, never across the night
        assert abs(est.value / truth - 1) < 0.15
        assert est.lower < truth < est.upper
        ratios.append(est.value / truth)
        default_est = carry_over(prepare(data, default), default).estimates["half_life_hours"]
        default_ratios.append(default_est.value / truth)
    assert abs(np.mean(ratios) - 1) < 0.05
    assert abs(np.mean(default_ratios) - 1) < 0.10


def test_too_few_pairs_and_flat_ratings_are_missing_with_reason():
    """Check fewer than min_pairs pairs, or no variation, give reasons and no number."""
    data = participant(TWO_DAYS_HOURS, TWO_DAYS_VALUES)
    settings = _with()
    est = carry_over(prepare(data, settings), settings).estimates
    assert est["inertia"].value is None and "at least 30" in est["inertia"].note
    flat = participant(5.0 + np.arange(40) * 0.25, np.full(40, 4.0))
    est = carry_over(prepare(flat, settings), settings).estimates
    assert est["half_life_hours"].value is None and "did not vary" in est["inertia"].note


def test_inertia_is_pearson_on_pairs_not_the_acf():
    """Check the named estimator: Pearson on pairs -0.180683, not statsmodels acf -0.175236."""
    from statsmodels.tsa.stattools import acf

    # Check values [computed with scipy 1.17 and statsmodels 0.15] for x = [3, 1, 4, 1, 5, 9,
    # 2, 6], hourly, one day.
    x = np.array([3, 1, 4, 1, 5, 9, 2, 6.0])
    settings = _with(min_pairs=3)
    fam = carry_over(prepare(participant(9.0 + np.arange(8), x), settings), settings)
    assert fam.estimates["inertia"].value == pytest.approx(-0.180683, abs=1e-6)
    assert acf(x, nlags=1, fft=False)[1] == pytest.approx(-0.175236, abs=1e-6)
    assert "Pearson" in fam.params["inertia_estimator"]


def test_half_life_interval_covers_truth_about_95_percent():
    """Check the profile-likelihood 95% interval covers the true half-life in most simulations."""
    # 60 seeded OU series of 300 irregular prompts (Gillespie 1996 exact simulation); nominal
    # coverage 0.95, binomial SD about 0.03.
    settings = _with()
    covered = []
    for seed in range(60):
        rng = np.random.default_rng(300 + seed)
        hours = prompt_hours(60, 5, rng)
        x = simulate_ou(hours, math.log(2) / 3, 1.0, 3.0, rng)
        est = carry_over(prepare(participant(hours, x), settings), settings).estimates
        covered.append(est["half_life_hours"].lower < 3 < est["half_life_hours"].upper)
    assert 0.85 <= np.mean(covered) <= 1.0


def test_carry_over_is_not_detrended_whatever_the_rolling_indicators_use():
    """Check inertia and half-life are the same under every `detrend` setting (raw ratings)."""
    # The detrend setting is for the rolling early-warning indicators only: a 7-day Gaussian
    # trend also removes part of a stationary person's carry-over (see the calibration test in
    # test_metrics_inertia.py). A straight drift of the level therefore raises inertia.
    rng = np.random.default_rng(21)
    hours = prompt_hours(60, 5, rng)
    x = simulate_ou(hours, math.log(2) / 3, 0.7, 3.0, rng)
    data = participant(hours, x)
    got = {}
    for how in ("gaussian", "linear", "none"):
        settings = settings_for(detrend=how)
        got[how] = carry_over(prepare(data, settings), settings).estimates
    for name in ("inertia", "half_life_hours"):
        assert got["gaussian"][name] == got["linear"][name] == got["none"][name]
    drifting = participant(hours, x + 3.0 * hours / hours[-1])
    settings = settings_for()
    moved = carry_over(prepare(drifting, settings), settings)
    assert moved.estimates["inertia"].value > got["none"]["inertia"].value
    assert moved.params["detrend"].startswith("none")
