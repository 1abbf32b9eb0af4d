"""Check the surrogate generators, the row-wise Kendall tau and the Monte-Carlo p-value."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from statsmodels.tsa.ar_model import AutoReg

from springback.metrics.surrogates import (
    ar1_surrogates,
    fit_ar1,
    kendall_tau_rows,
    participant_rng,
    phase_surrogates,
    surrogate_pvalue,
)


def test_kendall_rows_match_scipy_with_and_without_ties():
    """Check tau-b of each row against scipy.stats.kendalltau (ties in rows included)."""
    rng = np.random.default_rng(3)
    y = rng.normal(size=(40, 57)).cumsum(axis=1)
    y[:10] = np.round(y[:10])  # ties
    y[10] = 2.0  # constant row: tau undefined
    got = kendall_tau_rows(y)
    for i, row in enumerate(y):
        want = stats.kendalltau(np.arange(y.shape[1]), row).statistic
        if np.isnan(want):
            assert np.isnan(got[i])
        else:
            assert got[i] == pytest.approx(want, abs=1e-12)


def test_kendall_rows_worked_value_and_nan_rows():
    """Check rolling SD of the worked example gives tau 29/55; NaN rows give NaN."""
    # Check values [computed with scipy 1.17]: SD in 11 windows, Kendall tau = 0.527273 = 29/55.
    sd = [0.3976, 0.3911, 0.3753, 0.3784, 0.3850, 0.4027, 0.4146, 0.3907, 0.4418, 0.4143, 0.4502]
    assert kendall_tau_rows(np.array([sd]))[0] == pytest.approx(29 / 55, abs=1e-6)
    assert kendall_tau_rows(np.arange(10.0)[None])[0] == pytest.approx(1.0)
    assert np.isnan(kendall_tau_rows(np.array([[1.0, np.nan, 3.0]]))[0])
    assert np.isnan(kendall_tau_rows(np.array([[1.0, np.inf, 3.0]]))[0])


def test_phase_surrogates_keep_spectrum_and_mean():
    """Check Fourier surrogates keep |rfft| and the mean (Theiler et al. 1992, Physica D 58)."""
    rng = np.random.default_rng(5)
    for n in (64, 65):
        x = rng.normal(size=n).cumsum()
        s = phase_surrogates(x, 20, rng)
        assert s.shape == (20, n)
        np.testing.assert_allclose(np.abs(np.fft.rfft(s, axis=1)),
                                   np.broadcast_to(np.abs(np.fft.rfft(x)), (20, n // 2 + 1)),
                                   atol=1e-9)
        np.testing.assert_allclose(s.mean(axis=1), x.mean(), atol=1e-12)
        assert not np.allclose(s[0], x)


def test_ar1_fit_matches_statsmodels_autoreg():
    """Check the AR(1) fit equals statsmodels AutoReg(x, 1, trend='c') on the same input."""
    # Check value [computed with statsmodels 0.15]: OLS/AutoReg slope -0.188623 (= -63/334).
    x = np.array([3, 1, 4, 1, 5, 9, 2, 6], dtype=float)
    _, phi, _ = fit_ar1(x)
    assert phi == pytest.approx(-63 / 334, abs=1e-6)
    rng = np.random.default_rng(8)
    y = np.zeros(400)
    for i in range(1, 400):
        y[i] = 0.6 * y[i - 1] + rng.normal()
    fit = AutoReg(y, 1, trend="c").fit()
    _, phi, sigma = fit_ar1(y)
    assert phi == pytest.approx(fit.params[1], abs=1e-10)
    assert sigma == pytest.approx(np.sqrt(fit.sigma2 * 399 / 397), rel=1e-9)


def test_ar1_surrogates_reproduce_phi_and_variance():
    """Check simulated AR(1) surrogates have the fitted phi and the stationary variance."""
    # Stationary AR(1) variance sigma^2 / (1 - phi^2): textbook result (Box & Jenkins 1976).
    rng = np.random.default_rng(9)
    y = np.zeros(2000)
    for i in range(1, 2000):
        y[i] = 0.7 * y[i - 1] + rng.normal()
    s = ar1_surrogates(y, 300, rng)
    lag1 = np.mean([np.corrcoef(r[:-1], r[1:])[0, 1] for r in s[:50]])
    assert lag1 == pytest.approx(0.7, abs=0.03)
    assert s.var() == pytest.approx(1 / (1 - 0.49), rel=0.08)
    assert s[:, 0].var() == pytest.approx(1 / (1 - 0.49), rel=0.2)


def test_pvalue_formula_and_direction():
    """Check p = (1 + k) / (B + 1): B = 999, k = 24 gives 0.025 (Davison & Hinkley 1997)."""
    null = np.concatenate([np.full(24, 0.9), np.full(975, 0.1)])
    assert surrogate_pvalue(0.5, null) == pytest.approx(0.025)
    assert surrogate_pvalue(0.5, null, increase=False) == pytest.approx(976 / 1000)
    assert surrogate_pvalue(2.0, null) == pytest.approx(1 / 1000)
    assert np.isnan(surrogate_pvalue(float("nan"), null))


def test_participant_rng_is_stable_and_distinct():
    """Check seeding depends only on seed, participant and stream (not on the process)."""
    a = participant_rng(1, "p01").integers(0, 1 << 30, 5)
    b = participant_rng(1, "p01").integers(0, 1 << 30, 5)
    c = participant_rng(1, "p02").integers(0, 1 << 30, 5)
    assert (a == b).all() and not (a == c).all()
