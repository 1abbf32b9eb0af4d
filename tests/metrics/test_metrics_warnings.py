"""Check rolling early-warning indicators, their surrogate tests and the sensitivity grid."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from springback.metrics import _rolling as rl
from springback.metrics._series import prepare
from springback.metrics.early_warning import early_warnings
from springback.metrics.surrogates import kendall_tau_columns, phase_surrogates_multi
from tests.support.metrics_sim import participant, prompt_hours, settings_for, simulate_ou

# Check values [computed with numpy 2.4 and scipy 1.17]: n = 20, t = 0..19.
X20 = np.array([0.3, -0.5, 0.4, -0.2, 0.1, -0.6, 0.5, 0.2, -0.3, 0.4,
                0.9, 1.2, 0.6, 1.5, 1.9, 1.1, 2.2, 2.8, 2.0, 3.1])
T20 = np.arange(20.0)
ALL_PAIRS = np.ones(19, dtype=bool)


def _taus(x: np.ndarray, width: int, kernel_sd: float | None) -> tuple[float, float]:
    resid = rl.detrend(T20, x, "gaussian" if kernel_sd else "none", kernel_sd)
    st = rl.window_stats(rl.prefix_sums(resid, ALL_PAIRS, True), *rl.count_windows(20, width))
    sd_tau = kendall_tau_columns(np.sqrt(st["variance"]))[0]
    return sd_tau, kendall_tau_columns(st["ar1"])[0]


def test_gaussian_detrending_worked_values():
    """Check the Gaussian kernel trend and residuals (kernel SD 2; Dakos et al. 2012) on X20."""
    trend = [0.0098, -0.0074, -0.0213, -0.0302, -0.0256, 0.0033, 0.0621, 0.1547, 0.2899,
             0.4712, 0.6831, 0.9017, 1.1152, 1.3278, 1.5471, 1.7749, 2.0010, 2.2056, 2.3735,
             2.5039]
    np.testing.assert_allclose(rl.gaussian_trend(T20, X20, 2.0), trend, atol=5e-5)
    resid = rl.detrend(T20, X20, "gaussian", 2.0)
    assert resid[0] == pytest.approx(0.2902, abs=5e-5)
    assert resid[-1] == pytest.approx(0.5961, abs=5e-5)


def test_rolling_sd_and_ar1_worked_values():
    """Check rolling SD values and tau 29/55 (SD), 11/55 (AR1 Pearson), 0.807373 undetrended."""
    resid = rl.detrend(T20, X20, "gaussian", 2.0)
    st = rl.window_stats(rl.prefix_sums(resid, ALL_PAIRS, True), *rl.count_windows(20, 10))
    sd = [0.3976, 0.3911, 0.3753, 0.3784, 0.3850, 0.4027, 0.4146, 0.3907, 0.4418, 0.4143,
          0.4502]
    np.testing.assert_allclose(np.sqrt(st["variance"][:, 0]), sd, atol=5e-5)
    ar1 = [-0.5925, -0.5199, -0.3148, -0.3853, -0.4203, -0.2840, -0.2570, -0.4069, -0.2235,
           -0.4310, -0.5017]
    np.testing.assert_allclose(st["ar1"][:, 0], ar1, atol=5e-5)
    assert _taus(X20, 10, 2.0) == (pytest.approx(29 / 55, abs=1e-6),
                                   pytest.approx(11 / 55, abs=1e-6))
    # Without detrending the mean shift inflates the SD trend; tied SDs make it tau-b.
    assert _taus(X20, 10, None)[0] == pytest.approx(0.807373, abs=1e-6)


@pytest.mark.parametrize(("width", "kernel_sd", "sd_tau", "ar1_tau"), [
    (5, 1, 0.200000, 0.233333), (5, 2, 0.366667, 0.283333), (5, 4, 0.416667, 0.350000),
    (10, 1, 0.454545, 0.381818), (10, 2, 0.527273, 0.200000), (10, 4, 0.563636, 0.418182),
    (15, 1, 0.733333, 0.466667), (15, 2, 0.866667, 0.466667), (15, 4, 0.866667, 0.600000),
])
def test_sensitivity_grid_worked_values(width, kernel_sd, sd_tau, ar1_tau):
    """Check the sensitivity grid (tau of SD / AR1 Pearson; computed, scipy 1.17) cell by cell."""
    assert _taus(X20, width, kernel_sd) == (pytest.approx(sd_tau, abs=1e-6),
                                            pytest.approx(ar1_tau, abs=1e-6))


def test_rolling_moments_match_pandas_and_scipy():
    """Check running-sum variance and skewness equal pandas rolling var and scipy skew."""
    import pandas as pd

    rng = np.random.default_rng(2)
    x = rng.gamma(2.0, 1.0, 80)
    st = rl.window_stats(rl.prefix_sums(x, np.ones(79, dtype=bool), True),
                         *rl.count_windows(80, 25))
    want = pd.Series(x).rolling(25).var().to_numpy()[24:]
    np.testing.assert_allclose(st["variance"][:, 0], want, rtol=1e-9)
    skew = [stats.skew(x[i - 24: i + 1]) for i in range(24, 80)]
    np.testing.assert_allclose(st["skewness"][:, 0], skew, rtol=1e-7)


def test_rolling_ar1_uses_admissible_pairs_only():
    """Check the window lag-1 r equals scipy pearsonr over the admissible pairs inside it."""
    rng = np.random.default_rng(3)
    x = rng.normal(size=60)
    adm = rng.random(59) < 0.7
    st = rl.window_stats(rl.prefix_sums(x, adm), np.array([5]), np.array([44]))
    idx = np.flatnonzero(adm[5:44]) + 5
    want = stats.pearsonr(x[idx], x[idx + 1]).statistic
    assert st["ar1"][0, 0] == pytest.approx(want, abs=1e-10)


def test_multivariate_phase_surrogates_keep_cross_correlation():
    """Check shared random phases keep each spectrum and the lag-0 cross-correlation."""
    # Prichard & Theiler 1994, Phys Rev Lett 73:951: the cross-spectrum is unchanged.
    rng = np.random.default_rng(4)
    base = rng.normal(size=(128, 1)).cumsum(axis=0)
    items = base + rng.normal(size=(128, 3))
    sur = phase_surrogates_multi(items, 5, rng)
    centred = items - items.mean(axis=0)
    for s in sur:
        sc = s - s.mean(axis=0)
        np.testing.assert_allclose(sc.T @ sc, centred.T @ centred, rtol=1e-8)


def _null_settings(**extra: object):
    return settings_for(windows=[0.5], bandwidths_days=[7.0], surrogates=199, **extra)


@pytest.mark.slow
def test_false_alarm_rate_on_stationary_nulls():
    """Check p < 0.05 in 2-10% of 200 stationary OU series at irregular prompt times."""
    # Simulated nulls with known parameters (no change in rate): a valid test rejects ~5%.
    settings = _null_settings()
    p = []
    for seed in range(200):
        rng = np.random.default_rng(1000 + seed)
        hours = prompt_hours(60, 5, rng)
        x = simulate_ou(hours, 0.3, 1.0, 3.0, rng)
        est = early_warnings(prepare(participant(hours, x, rng=rng), settings), settings,
                             f"null{seed}").estimates
        p.append((est["warning_p_inertia"].value, est["warning_p_variance"].value))
    hits = np.array(p) < 0.05
    # All 400 tests together in [0.02, 0.10]; each indicator never liberal. (Over 600 further
    # nulls the rates were 0.038 for carry-over and 0.048 for variance.)
    assert 0.02 <= hits.mean() <= 0.10
    assert 0.01 <= hits[:, 0].mean() <= 0.10
    assert 0.01 <= hits[:, 1].mean() <= 0.10


def test_rising_variance_and_carry_over_before_a_fold():
    """Check most simulated approaches to a fold (rate falling tenfold) are significant."""
    # Critical slowing down (Scheffer et al. 2009, Nature 461:53-59): as kappa -> 0 under
    # constant noise, the variance s^2 / (2 kappa) and the lag-1 correlation both rise.
    settings = _null_settings()
    hits = []
    for seed in range(20):
        rng = np.random.default_rng(2000 + seed)
        hours = prompt_hours(60, 5, rng)
        kappa = np.linspace(0.6, 0.06, len(hours))
        x = simulate_ou(hours, kappa, 0.5 / np.sqrt(2 * kappa), 3.0, rng)
        est = early_warnings(prepare(participant(hours, x, rng=rng), settings), settings,
                             f"fold{seed}").estimates
        hits.append((est["warning_p_inertia"].value < 0.05,
                     est["warning_p_variance"].value < 0.05))
    hits = np.array(hits)
    assert hits[:, 1].mean() >= 0.7
    assert (hits[:, 0] | hits[:, 1]).mean() >= 0.7
    assert hits[:, 0].mean() >= 0.3


def test_family_shape_grid_and_no_asymptotic_p():
    """Check names, the 5 x 5 grid, reproducible p-values and no scipy asymptotic p exposed."""
    rng = np.random.default_rng(6)
    hours = prompt_hours(40, 5, rng)
    x = simulate_ou(hours, 0.3, 1.0, 3.0, rng)
    settings = settings_for(surrogates=99)
    series = prepare(participant(hours, x, rng=rng), settings)
    fam = early_warnings(series, settings, "p07")
    assert len(fam.tables["grid"]) == 25
    assert list(fam.tables["rolling"].columns) == ["local_time", "ar1", "variance", "sd",
                                                   "skewness", "crosscorr", "n"]
    for name in ("inertia", "variance", "crosscorr"):
        p = fam.estimates[f"warning_p_{name}"].value
        assert 1 / 100 <= p <= 1 and round(p * 100) == pytest.approx(p * 100)
    assert 0 <= fam.estimates["warning_robustness"].value <= 1
    again = early_warnings(series, settings, "p07")
    assert again.estimates["warning_p_inertia"] == fam.estimates["warning_p_inertia"]
    # scipy's asymptotic Kendall p is invalid here and must not be reported (Gamot,
    # Thibeau-Sutre & Van Dooren 2026, arXiv:2604.15230).
    rolling = fam.tables["rolling"]
    scipy_p = stats.kendalltau(np.arange(len(rolling)), rolling["sd"]).pvalue
    values = [e.value for e in fam.estimates.values() if e.value is not None]
    assert all(not math.isclose(v, scipy_p, rel_tol=1e-9) for v in values)
    assert not any("asymptotic" in k for k in fam.params)


def test_windows_with_too_few_answers_are_skipped_and_counted():
    """Check a three-week silence makes windows too thin; they are skipped and counted."""
    rng = np.random.default_rng(8)
    hours = prompt_hours(60, 5, rng)
    keep = (hours < 20 * 24) | (hours > 41 * 24)
    x = simulate_ou(hours, 0.3, 1.0, 3.0, rng)
    settings = settings_for(surrogates=19, windows=[0.3], bandwidths_days=[7.0], window=0.3,
                            min_window_prompts=40)
    fam = early_warnings(prepare(participant(hours[keep], x[keep], rng=rng), settings),
                         settings, "p08")
    skipped = fam.estimates["warning_windows_skipped"]
    assert 0 < skipped.value < skipped.n
    assert (fam.tables["rolling"]["n"] >= 40).all()
    assert fam.tables["grid"]["windows_skipped"].iloc[0] == skipped.value


def test_too_short_series_gives_reasons():
    """Check a short series gives no warning numbers and the reason in words."""
    settings = settings_for()
    hours = 9 + np.arange(30) * 0.4
    fam = early_warnings(prepare(participant(hours, np.sin(hours)), settings), settings, "p09")
    est = fam.estimates["warning_tau_inertia"]
    assert est.value is None and "at least 40 answers" in est.note


@pytest.mark.parametrize("method", ["linear", "none"])
def test_other_detrending_runs_one_grid_row_per_window(method):
    """Check linear and no detrending give one grid row per window share, no bandwidth."""
    rng = np.random.default_rng(12)
    hours = prompt_hours(30, 5, rng)
    x = simulate_ou(hours, 0.3, 1.0, 3.0, rng) + hours / 24 * 0.05
    settings = settings_for(surrogates=19, detrend=method, window=0.45)
    fam = early_warnings(prepare(participant(hours, x, rng=rng), settings), settings, "p10")
    grid = fam.tables["grid"]
    assert len(grid) == 5 and grid["bandwidth_days"].isna().all()
    assert fam.params["bandwidth_days"] is None
    assert fam.estimates["warning_tau_variance"].ok
    # The main window (0.45) is not in the grid, so it is computed on its own.
    assert 0.45 not in grid["window"].tolist()
    # Linear detrending leaves residuals without a straight-line trend (OLS residuals are
    # orthogonal to time); no detrending only centres the series.
    resid = rl.detrend(hours, x, method, None)
    if method == "linear":
        assert abs(np.polyfit(hours, resid, 1)[0]) < 1e-12
    else:
        np.testing.assert_allclose(resid, x - x.mean())


def test_crosscorr_leaves_out_items_that_do_not_vary():
    """Check a constant item is left out of the mean item correlation instead of spoiling it."""
    rng = np.random.default_rng(13)
    base = rng.normal(size=(60, 1))
    items = np.hstack([base + 0.3 * rng.normal(size=(60, 1)), base, np.full((60, 1), 1.0)])
    got = rl.window_crosscorr(items, np.array([0, 20]), np.array([39, 59]))[:, 0]
    want = [stats.pearsonr(items[s:e + 1, 0], items[s:e + 1, 1]).statistic
            for s, e in ((0, 39), (20, 59))]
    np.testing.assert_allclose(got, want, rtol=1e-9)
    assert np.isnan(rl.window_crosscorr(np.ones((30, 2)), np.array([0]), np.array([29]))[0, 0])


def test_crosscorr_of_many_series_is_computed_in_blocks_exactly():
    """Check that 250 series (three blocks) give each series' own values, matching scipy."""
    rng = np.random.default_rng(29)
    items = rng.normal(size=(80, 3, 250)).astype(np.float32)
    starts, ends = np.array([0, 10, 40]), np.array([39, 49, 79])
    got = rl.window_crosscorr(items, starts, ends)
    assert got.shape == (3, 250) and rl.SERIES_PER_BLOCK < 250
    for m in (0, 99, 100, 249):  # the same numbers as the series computed alone
        np.testing.assert_array_equal(got[:, m], rl.window_crosscorr(items[:, :, m:m + 1],
                                                                     starts, ends)[:, 0])
    # scipy.stats.pearsonr per item pair, averaged (the definition of the indicator)
    s, e = 10, 49
    x = items[s:e + 1, :, 249].astype(float)
    want = np.mean([stats.pearsonr(x[:, i], x[:, j]).statistic
                    for i, j in ((0, 1), (0, 2), (1, 2))])
    np.testing.assert_allclose(got[1, 249], want, rtol=1e-4)  # float32 running sums
