"""Carry-over ("inertia") and the continuous-time recovery rate on irregular prompt times.

Inertia: the lag-1 autocorrelation as Pearson's r on admissible pairs (two answers on the same
study day at most `max_gap_hours` apart; never across a night), with a percentile interval from
a bootstrap that resamples whole study days (pairs within a day are dependent, days nearly
independent; Künsch 1989, "The jackknife and the bootstrap for general stationary
observations", Ann Stat 17:1217-1241, on resampling blocks). The Fisher-z interval assumes
independent pairs and was 25% too narrow at high carry-over in simulations.
Kuppens, Allen & Sheeber 2010, "Emotional inertia and psychological maladjustment",
Psychological Science 21:984-991 (the concept); METHODS.md §1 estimator (a).

Recovery rate: an Ornstein-Uhlenbeck process dX = -kappa (X - mu) dt + s dW sampled at
irregular times has the exact transition X_j - mu = e^{-kappa dt}(X_i - mu) + e with
Var(e) = sigma^2 (1 - e^{-2 kappa dt}), sigma^2 the stationary variance (e.g. Gardiner 2009,
"Stochastic methods", §3.8.4; de Haan-Rietdijk et al. 2017, Frontiers in Psychology 8:1849 on
why the real intervals matter). kappa, mu and sigma^2 are fitted by maximum likelihood over the
admissible pairs (conditional on each pair's first answer); the interval for kappa comes from
the profile likelihood (chi-square, 1 df). Half-life = ln 2 / kappa.

Both are computed on the deviations from the slow trend removed as for the early-warning
indicators (`metrics.detrend`, `bandwidth_days`; 'none' keeps the raw ratings), so a gradual
change of level is not read as slow recovery.

Minimum data: `metrics.min_pairs` admissible pairs (default 30), a reporting minimum that is a
design choice (METHODS.md §1 edge cases), not a published rule.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy import optimize, stats

from springback.metrics import _rolling as rl
from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family
from springback.metrics.surrogates import participant_rng
from springback.settings import StudySettings

BOOTSTRAP_RESAMPLES = 2000
"""Day-block bootstrap resamples for the inertia interval (design choice; cheap: one matmul)."""
LOG_KAPPA_BOUNDS = (math.log(1e-3), math.log(50.0))
"""Rates searched, per hour: half-lives from about 50 seconds to about four weeks."""
CONFIDENCE = 0.95


def pearson(a: np.ndarray, b: np.ndarray) -> float:
    """Pearson's r of two equal-length arrays (NaN when either side has no variance)."""
    if len(a) < 3:
        return float("nan")
    da, db = a - a.mean(), b - b.mean()
    denom = math.sqrt(float(da @ da) * float(db @ db))
    return float(da @ db / denom) if denom > 0 else float("nan")


def day_bootstrap_interval(x0: np.ndarray, x1: np.ndarray, day: np.ndarray,
                           rng: np.random.Generator, resamples: int = BOOTSTRAP_RESAMPLES,
                           confidence: float = CONFIDENCE) -> tuple[float, float]:
    """Percentile interval of the pair correlation, resampling whole days with replacement.

    Each day's pair sums are added once; a resample is a vector of day counts, so all
    resamples are one (resamples x days) @ (days x 6) product.
    """
    _, which = np.unique(day, return_inverse=True)
    parts = np.column_stack([np.ones_like(x0), x0, x1, x0 * x0, x1 * x1, x0 * x1])
    sums = np.zeros((which.max() + 1, 6))
    np.add.at(sums, which, parts)
    n_days = len(sums)
    picks = rng.integers(0, n_days, (resamples, n_days))
    offsets = (np.arange(resamples) * n_days)[:, None]
    counts = np.bincount((picks + offsets).ravel(), minlength=resamples * n_days).reshape(
        resamples, n_days)
    n, sa, sb, saa, sbb, sab = (counts @ sums).T
    with np.errstate(invalid="ignore", divide="ignore"):
        r = (sab - sa * sb / n) / np.sqrt((saa - sa * sa / n) * (sbb - sb * sb / n))
    tail = (1 - confidence) / 2 * 100
    lo, hi = np.nanpercentile(r, [tail, 100 - tail])
    return float(lo), float(hi)


def ou_profile_loglik(log_kappa: float, x0: np.ndarray, x1: np.ndarray,
                      dt: np.ndarray) -> tuple[float, float, float]:
    """Profile log-likelihood of the OU transition at one rate; also the fitted mu and sigma^2.

    For fixed kappa the weighted least-squares mu and the mean weighted squared residual are
    the maximum-likelihood values, so only kappa needs a numerical search.
    """
    phi = np.exp(-math.exp(log_kappa) * dt)
    q = -np.expm1(-2.0 * math.exp(log_kappa) * dt)  # 1 - phi^2, accurate for small dt
    w = 1.0 / q
    c = 1.0 - phi
    mu = float(np.sum(w * c * (x1 - phi * x0)) / np.sum(w * c * c))
    e = (x1 - mu) - phi * (x0 - mu)
    sigma2 = float(np.mean(w * e * e))
    n = len(dt)
    if not sigma2 > 0:
        return float("-inf"), mu, sigma2
    loglik = -0.5 * n * (math.log(2 * math.pi * sigma2) + 1.0) - 0.5 * float(np.sum(np.log(q)))
    return loglik, mu, sigma2


def fit_ou(x0: np.ndarray, x1: np.ndarray, dt: np.ndarray) -> dict[str, float]:
    """Fit an OU process to pairs (x0 -> x1 after dt hours); kappa with a profile interval."""
    def neg(lk: float) -> float:
        return -ou_profile_loglik(lk, x0, x1, dt)[0]

    lo, hi = LOG_KAPPA_BOUNDS
    grid = np.linspace(lo, hi, 41)
    values = np.array([neg(g) for g in grid])
    i = int(np.argmin(values))
    bracket = (grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)])
    res = optimize.minimize_scalar(neg, bounds=bracket, method="bounded",
                                   options={"xatol": 1e-8})
    best = float(res.x)
    loglik, mu, sigma2 = ou_profile_loglik(best, x0, x1, dt)
    drop = stats.chi2.ppf(CONFIDENCE, 1) / 2.0

    def excess(lk: float) -> float:
        return ou_profile_loglik(lk, x0, x1, dt)[0] - (loglik - drop)

    lower = upper = float("nan")
    if excess(lo) < 0 < excess(best):
        lower = math.exp(optimize.brentq(excess, lo, best, xtol=1e-10))
    if excess(hi) < 0 < excess(best):
        upper = math.exp(optimize.brentq(excess, best, hi, xtol=1e-10))
    at_edge = best <= lo + 1e-3 or best >= hi - 1e-3
    return {"kappa": math.exp(best), "lower": lower, "upper": upper, "mu": mu,
            "sigma2": sigma2, "loglik": loglik, "at_edge": float(at_edge)}


def carry_over(series: Series, settings: StudySettings, participant: str = "") -> Family:
    """Compute inertia (lag-1 r on admissible pairs) and the OU recovery rate and half-life."""
    m = settings.metrics
    ok = series.admissible
    # Carry-over is measured around the person's slowly moving level (the same detrending as
    # the early-warning indicators): a gradual worsening is not slow recovery.
    kernel = m.bandwidth_days * 24.0 if m.detrend == "gaussian" else None
    resid = rl.detrend(series.hours, series.value, m.detrend, kernel) if series.n else \
        series.value
    x0, x1 = resid[:-1][ok], resid[1:][ok]
    dt = series.gaps[ok]
    n_pairs = len(dt)
    rule = f"pairs on the same study day at most {m.max_gap_hours:g} h apart"
    pairs = pd.DataFrame({"local_time": series.local_time.iloc[:-1][ok].reset_index(drop=True)
                          if series.n else series.local_time,
                          "value": series.value[:-1][ok], "next_value": series.value[1:][ok],
                          "gap_hours": dt, "deviation": x0, "next_deviation": x1})
    est: dict[str, Estimate] = {"n_pairs": Estimate(float(n_pairs), n=n_pairs, note=rule)}
    params = {"max_gap_hours": m.max_gap_hours, "min_pairs": m.min_pairs, "pair_rule": rule,
              "inertia_estimator": "Pearson correlation on admissible pairs",
              "inertia_interval": "95% percentile bootstrap over study days "
                                  f"({BOOTSTRAP_RESAMPLES} resamples)",
              "rate_estimator": "Ornstein-Uhlenbeck maximum likelihood on irregular times",
              "rate_interval": "profile likelihood, 95%",
              "detrend": m.detrend, "bandwidth_days": m.bandwidth_days if kernel else None}
    if n_pairs < m.min_pairs:
        why = f"needs at least {m.min_pairs} consecutive pairs ({rule}); there were {n_pairs}"
        for name in ("inertia", "recovery_rate_per_hour", "half_life_hours"):
            est[name] = Estimate.missing(why, n=n_pairs)
        return Family(estimates=est, tables={"pairs": pairs}, params=params)
    r = pearson(x0, x1)
    if math.isnan(r):
        why = "the ratings did not vary, so carry-over is undefined"
        for name in ("inertia", "recovery_rate_per_hour", "half_life_hours"):
            est[name] = Estimate.missing(why, n=n_pairs)
        return Family(estimates=est, tables={"pairs": pairs}, params=params)
    rng = participant_rng(m.seed, participant, "inertia/bootstrap")
    lo, hi = day_bootstrap_interval(x0, x1, series.day_index[:-1][ok], rng)
    est["inertia"] = Estimate(r, lo, hi, n=n_pairs,
                              note=f"lag-1 correlation over {rule}; median gap "
                                   f"{np.median(dt):.1f} h")
    fit = fit_ou(x0, x1, dt)
    params.update(ou_mean_deviation=fit["mu"], ou_stationary_variance=fit["sigma2"])
    if fit["at_edge"]:
        why = ("no measurable carry-over at these prompt intervals" if
               fit["kappa"] > 1 else "no return towards the usual level was seen")
        est["recovery_rate_per_hour"] = Estimate.missing(why, n=n_pairs)
        est["half_life_hours"] = Estimate.missing(why, n=n_pairs)
    else:
        k, k_lo, k_hi = fit["kappa"], fit["lower"], fit["upper"]
        note = "Ornstein-Uhlenbeck fit by maximum likelihood on the real intervals"
        est["recovery_rate_per_hour"] = Estimate(
            k, _finite(k_lo), _finite(k_hi), n=n_pairs, note=note)
        est["half_life_hours"] = Estimate(
            math.log(2) / k, _finite(math.log(2) / k_hi), _finite(math.log(2) / k_lo),
            n=n_pairs, note=note + "; half-life = ln 2 / rate")
    return Family(estimates=est, tables={"pairs": pairs}, params=params)


def _finite(value: float) -> float | None:
    """Drop NaN/inf interval ends (an open interval is reported as empty)."""
    return float(value) if math.isfinite(value) else None
