"""Carry-over ("inertia") and the continuous-time recovery rate on irregular prompt times.

Inertia: the lag-1 autocorrelation as Pearson's r on admissible pairs (two answers on the same
study day at most `max_gap_hours` apart; never across a night). Pearson's r on a short
autocorrelated series is biased low by about (1 + 3 rho) / n (Marriott & Pope 1954, "Bias in
the estimation of autocorrelations", Biometrika 41:390-402, from memory): 0.02 to 0.04 at two
to four weeks of five prompts a day in simulations. The delete-one-day jackknife removes that
first-order bias (Quenouille 1956, "Notes on bias in estimation", Biometrika 43:353-360) and its
spread gives the standard error (Tukey 1958, Ann Math Stat 29:614, from memory); days are the
deleted blocks because pairs within a day are dependent and days nearly independent (Künsch
1989, "The jackknife and the bootstrap for general stationary observations", Ann Stat
17:1217-1241). The 95% interval is the corrected r +/- t(days - 1) standard errors. A day-block
percentile bootstrap around the uncorrected r covered the truth in 81-94% of simulated people
(the bias shifts it), the jackknife interval in 93-97%.
Kuppens, Allen & Sheeber 2010, "Emotional inertia and psychological maladjustment",
Psychological Science 21:984-991 (the concept); Pearson on pairs rather than the ACF or the
AR(1) slope is a design choice among the usual lag-1 estimators.

Recovery rate: mood x(t) is an Ornstein-Uhlenbeck process dx = -kappa (x - mu) dt + s dW
(Uhlenbeck & Ornstein 1930, "On the theory of the Brownian motion", Phys Rev 36:823, from
memory) with stationary variance s2, and each answer is y = x + e with answer noise
e ~ N(0, r2) (item noise in the composite). Over a gap dt the exact transition is
x_j - mu = phi (x_i - mu) + w, phi = exp(-kappa dt), Var(w) = s2 (1 - phi^2) (Gardiner 2009,
"Stochastic methods", §3.8.4). The exact likelihood of this state-space model on the real
intervals comes from a Kalman filter by the prediction-error decomposition (Harvey 1989,
"Forecasting, structural time series models and the Kalman filter", ch. 3, from memory); each
run of admissible prompts starts from the stationary distribution, so nights are not bridged.
mu and s2 are concentrated out in closed form; kappa and the noise ratio r2/s2 are found by
Nelder-Mead from two starts; the interval for kappa is from the profile likelihood (chi-square,
1 df). Half-life = ln 2 / kappa. Without the noise term, answer noise looks like fast
recovery and half-lives come out too short (Oravecz, Tuerlinckx & Vandekerckhove 2011,
"A hierarchical latent stochastic differential equation model for affective dynamics",
Psychological Methods 16:468-490, OU with measurement error for ESM, from memory).
When most of the variation is noise, or the profile likelihood stays flat up to a search bound,
the rate is not identified at these prompt intervals and is reported missing with a reason and
a status code (`rate_status`): 'no_carry_over' (return faster than the prompts show),
'no_return' (persistence, fast return excluded) or 'cannot_tell' (slow return and answer noise
trade off along a flat likelihood; Oravecz et al. 2011 on this identifiability limit).

Both are computed on the ratings as given, around the person's own mean. The slow trend of the
early-warning indicators (`metrics.detrend`) is not removed here: a 7-day Gaussian trend also
takes away part of a stationary person's carry-over (inertia 0.02-0.03 too low, 79-90% interval
coverage in simulations). A gradual change of level over the study therefore adds to carry-over;
the course of the level is its own reading, and `slow_trend_share` (the share of the variance
in the 7-day trend) says how much of the variation such a change holds.

Minimum data: `metrics.min_pairs` admissible pairs (default 30), a reporting minimum that is a
design choice, not a published rule.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy import optimize, stats

from springback.metrics import _rolling as rl
from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family
from springback.settings import StudySettings

LOG_KAPPA_BOUNDS = (math.log(1e-3), math.log(50.0))
"""Rates searched, per hour: half-lives from about 50 seconds to about four weeks."""
LOG_RATIO_BOUNDS = (math.log(1e-4), math.log(20.0))
"""Noise-to-signal variance ratios r2/s2 searched: noise shares from 0.01% to 95%."""
MAX_NOISE_SHARE = 0.6
"""Above this share of noise in the answers' variance the rate is not reported (design choice:
the noise and a fast rate then trade off along a flat likelihood ridge in simulations)."""
CONFIDENCE = 0.95


def pearson(a: np.ndarray, b: np.ndarray) -> float:
    """Pearson's r of two equal-length arrays (NaN when either side has no variance)."""
    if len(a) < 3:
        return float("nan")
    da, db = a - a.mean(), b - b.mean()
    denom = math.sqrt(float(da @ da) * float(db @ db))
    return float(da @ db / denom) if denom > 0 else float("nan")


def day_jackknife(x0: np.ndarray, x1: np.ndarray, day: np.ndarray,
                  confidence: float = CONFIDENCE) -> tuple[float, float, float, int]:
    """Delete-one-day jackknife of the pair correlation: corrected r, interval, days.

    Each day's pair sums are added once; leaving a day out subtracts its row from the total,
    so all leave-one-out correlations are one array operation. With fewer than three days, or
    a day whose removal leaves no variation, the plain r is returned with no interval.
    """
    _, which = np.unique(day, return_inverse=True)
    parts = np.column_stack([np.ones_like(x0), x0, x1, x0 * x0, x1 * x1, x0 * x1])
    sums = np.zeros((which.max() + 1, 6))
    np.add.at(sums, which, parts)
    n_days = len(sums)
    total = sums.sum(axis=0)
    r = float(_pair_correlation(total[None, :])[0])
    if n_days < 3:
        return r, float("nan"), float("nan"), n_days
    loo = _pair_correlation(total[None, :] - sums)
    if not np.all(np.isfinite(loo)):
        return r, float("nan"), float("nan"), n_days
    centre = float(loo.mean())
    corrected = n_days * r - (n_days - 1) * centre
    se = math.sqrt((n_days - 1) / n_days * float(np.sum((loo - centre) ** 2)))
    q = float(stats.t.ppf(0.5 + confidence / 2, n_days - 1))
    corrected = min(max(corrected, -1.0), 1.0)
    return corrected, max(corrected - q * se, -1.0), min(corrected + q * se, 1.0), n_days


def _pair_correlation(sums: np.ndarray) -> np.ndarray:
    """Pearson's r from rows of (n, sum a, sum b, sum a^2, sum b^2, sum ab)."""
    n, sa, sb, saa, sbb, sab = sums.T
    with np.errstate(invalid="ignore", divide="ignore"):
        out: np.ndarray = (sab - sa * sb / n) / np.sqrt((saa - sa * sa / n) *
                                                          (sbb - sb * sb / n))
    return out


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


def segments(hours: np.ndarray, y: np.ndarray, admissible: np.ndarray
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Lay runs of admissible prompts out as rows, longest first: values, gaps, run lengths.

    A run ends where a pair is not admissible (night, new study day, gap > max_gap_hours);
    runs of one prompt carry no information on the rate and are left out. Longest first, the
    runs still going at step k are the first rows, so the filter slices instead of masking.
    """
    if len(y) == 0:
        return np.zeros((0, 0)), np.zeros((0, 0)), np.zeros(0, dtype=int)
    seg = np.concatenate([[0], np.cumsum(~admissible)])
    length = np.bincount(seg)
    start = np.concatenate([[0], np.cumsum(length)[:-1]])
    pos = np.arange(len(y)) - start[seg]
    keep = length[seg] >= 2
    runs = np.flatnonzero(length >= 2)
    order = runs[np.argsort(-length[runs], kind="stable")]
    row_of = np.empty(len(length), dtype=int)
    row_of[order] = np.arange(len(order))
    shape = (len(order), int(length[order].max()) if len(order) else 0)
    values, gaps = np.zeros(shape), np.zeros(shape)
    r, c = row_of[seg[keep]], pos[keep]
    values[r, c] = y[keep]
    gaps[r, c] = np.concatenate([[0.0], np.diff(hours)])[keep] * (c > 0)
    return values, gaps, length[order]


def _innovations(kappa: float, ratio: float, values: np.ndarray, gaps: np.ndarray,
                 lengths: np.ndarray, conditioned: bool = False
                 ) -> tuple[float, float, float, float, int]:
    """Run the Kalman filter of the scaled OU-plus-noise model over all runs at once.

    The state is scaled by the stationary variance s2 and the noise variance is ratio * s2, so
    the filter depends on (kappa, ratio) only. It is run on the data and on a constant 1 with a
    zero mean: the innovations for mean mu are v_y - mu v_1 (both linear in the data with the
    same gains), which profiles mu out by generalised least squares. Returns sum log f,
    sum v_y^2/f, sum v_y v_1/f, sum v_1^2/f and the number of observations, f the scaled
    innovation variance (Harvey 1989, prediction-error decomposition, from memory).

    `conditioned` starts each run from its first answer instead of the stationary
    distribution (a diffuse prior on the first state, so the first answer only places it:
    state y_0 - mu with variance ratio; Harvey 1989, ch. 3, from memory); the first answers
    then add no term and are not counted.
    """
    active = (lengths[None, :] > np.arange(values.shape[1])[:, None]).sum(axis=1)
    a_y, a_1 = np.zeros(len(lengths)), np.zeros(len(lengths))
    p = np.ones(len(lengths))
    logf = yy = y1 = ones = 0.0
    for k, n_k in enumerate(active):
        a_y, a_1, p = a_y[:n_k], a_1[:n_k], p[:n_k]
        if conditioned and not k:
            a_y, a_1, p = values[:n_k, 0].copy(), np.ones(n_k), np.full(n_k, ratio)
            continue
        if k:
            phi = np.exp(-kappa * gaps[:n_k, k])
            a_y, a_1 = phi * a_y, phi * a_1
            p = phi * phi * p + (1.0 - phi * phi)
        f = p + ratio
        v_y, v_1 = values[:n_k, k] - a_y, 1.0 - a_1
        w = 1.0 / f
        logf -= float(np.log(w).sum())
        wy, w1 = w * v_y, w * v_1
        yy, y1, ones = yy + float(wy @ v_y), y1 + float(wy @ v_1), ones + float(w1 @ v_1)
        a_y, a_1 = a_y + p * wy, a_1 + p * w1
        p = p * ratio * w
    return logf, yy, y1, ones, int(lengths.sum()) - (len(lengths) if conditioned else 0)


def ou_noise_loglik(values: np.ndarray, gaps: np.ndarray, lengths: np.ndarray, kappa: float,
                    mu: float, s2: float, r2: float) -> float:
    """Exact Gaussian log-likelihood of OU (rate kappa, mean mu, variance s2) seen with noise r2.

    Each run starts from the stationary distribution, so nights are never bridged.
    """
    logf, yy, y1, ones, n = _innovations(kappa, r2 / s2, values, gaps, lengths)
    ssq = yy - 2.0 * mu * y1 + mu * mu * ones
    return -0.5 * (n * math.log(2 * math.pi * s2) + logf + ssq / s2)


def _concentrated(theta: np.ndarray, values: np.ndarray, gaps: np.ndarray,
                  lengths: np.ndarray, conditioned: bool = False,
                  free_mean: bool = True) -> tuple[float, float, float]:
    """Log-likelihood at (log kappa, log noise ratio) with mu and s2 at their ML values.

    `free_mean=False` holds mu at 0 (deviations from a known level).
    """
    logf, yy, y1, ones, n = _innovations(math.exp(theta[0]), math.exp(theta[1]), values, gaps,
                                         lengths, conditioned)
    mu = y1 / ones if ones > 0 and free_mean else 0.0
    s2 = (yy - mu * y1) / n
    if not s2 > 0:
        return float("-inf"), mu, s2
    return -0.5 * (n * (math.log(2 * math.pi * s2) + 1.0) + logf), mu, s2

def fit_ou_noise(values: np.ndarray, gaps: np.ndarray, lengths: np.ndarray,
                 start_kappa: float, conditioned: bool = False,
                 free_mean: bool = True, xatol: float = 1e-8) -> dict[str, float]:
    """Fit OU plus answer noise by exact maximum likelihood; kappa with a profile interval.

    `conditioned` and `free_mean` are passed to the likelihood (`_innovations`,
    `_concentrated`): runs that start from their first answer, and a mean held at 0.
    `xatol` is the optimiser's tolerance on the logs (1e-4: half-lives to 0.01%).
    """
    def neg(theta: np.ndarray) -> float:
        ll = _concentrated(theta, values, gaps, lengths, conditioned, free_mean)[0]
        return -ll if math.isfinite(ll) else 1e300

    bounds = [LOG_KAPPA_BOUNDS, LOG_RATIO_BOUNDS]
    lk0 = float(np.clip(math.log(start_kappa), *LOG_KAPPA_BOUNDS))
    # The pure-OU rate is too fast when there is noise, so the second start is slower and
    # noisier; the better of the two optima is kept.
    starts = [(lk0, math.log(0.05)),
              (max(lk0 + math.log(0.6), LOG_KAPPA_BOUNDS[0]), math.log(0.5))]
    # Nelder-Mead rather than L-BFGS-B: same optimum, but L-BFGS-B's per-iteration BLAS calls
    # cost about 5 ms each on a busy two-core machine (measured), Nelder-Mead 10 ms in all.
    best = min((optimize.minimize(neg, np.array(s0), method="Nelder-Mead", bounds=bounds,
                                  options={"xatol": xatol, "fatol": xatol * 1e-2})
                for s0 in starts), key=lambda res: res.fun)
    theta = best.x
    loglik, mu, s2 = _concentrated(theta, values, gaps, lengths, conditioned, free_mean)

    def profile(lk: float) -> float:
        inner = optimize.minimize_scalar(lambda lr: neg(np.array([lk, lr])),
                                         bounds=LOG_RATIO_BOUNDS, method="bounded",
                                         options={"xatol": 1e-2})
        return -min(float(inner.fun), neg(np.array([lk, LOG_RATIO_BOUNDS[0]])))

    drop = stats.chi2.ppf(CONFIDENCE, 1) / 2.0
    lo, hi = LOG_KAPPA_BOUNDS
    slow_edge, fast_edge = theta[0] <= lo + 1e-3, theta[0] >= hi - 1e-3

    def excess(lk: float) -> float:
        return profile(lk) - (loglik - drop)

    # An interval end is searched only on a side away from the optimum's own bound; NaN means
    # the profile stays within the cut-off all the way to that bound (the side is open).
    lower = upper = float("nan")
    if not slow_edge and excess(lo) < 0:
        lower = math.exp(optimize.brentq(excess, lo, theta[0], xtol=1e-3))
    if not fast_edge and excess(hi) < 0:
        upper = math.exp(optimize.brentq(excess, theta[0], hi, xtol=1e-3))
    ratio = math.exp(theta[1])
    return {"kappa": math.exp(theta[0]), "lower": lower, "upper": upper, "mu": mu, "s2": s2,
            "r2": ratio * s2, "noise_share": ratio / (1.0 + ratio), "loglik": loglik,
            "at_edge": float(slow_edge or fast_edge), "slow_edge": float(slow_edge),
            "fast_edge": float(fast_edge),
            "noise_at_edge": float(theta[1] >= LOG_RATIO_BOUNDS[1] - 1e-3)}


def carry_over(series: Series, settings: StudySettings, participant: str = "") -> Family:
    """Compute inertia (lag-1 r on admissible pairs) and the OU recovery rate and half-life.

    `participant` is accepted for the common family signature; every step here is exact, so
    no random numbers are drawn.
    """
    m = settings.metrics
    ok = series.admissible
    # The ratings as given, around the person's mean (no slow trend removed; module notes).
    resid = series.value - series.value.mean() if series.n else series.value
    x0, x1 = resid[:-1][ok], resid[1:][ok]
    dt = series.gaps[ok]
    n_pairs = len(dt)
    rule = f"pairs on the same study day at most {m.max_gap_hours:g} h apart"
    pairs = pd.DataFrame({"local_time": series.local_time.iloc[:-1][ok].reset_index(drop=True)
                          if series.n else series.local_time,
                          "value": series.value[:-1][ok], "next_value": series.value[1:][ok],
                          "gap_hours": dt, "deviation": x0, "next_deviation": x1})
    est: dict[str, Estimate] = {"n_pairs": Estimate(float(n_pairs), n=n_pairs, note=rule),
                                "slow_trend_share": slow_trend_share(series, m.bandwidth_days)}
    params = {"max_gap_hours": m.max_gap_hours, "min_pairs": m.min_pairs, "pair_rule": rule,
              "inertia_estimator": "Pearson correlation on admissible pairs, delete-one-day "
                                   "jackknife bias correction",
              "inertia_interval": "95% delete-one-day jackknife, t with days - 1 df",
              "rate_estimator": "Ornstein-Uhlenbeck with answer noise, exact maximum "
                                "likelihood by Kalman filter on irregular times",
              "rate_interval": "profile likelihood, 95%",
              "max_noise_share": MAX_NOISE_SHARE,
              "detrend": "none (ratings around the person's mean)"}
    if n_pairs < m.min_pairs:
        why = f"needs at least {m.min_pairs} consecutive pairs ({rule}); there were {n_pairs}"
        for name in ("inertia", "recovery_rate_per_hour", "half_life_hours"):
            est[name] = Estimate.missing(why, n=n_pairs, status="too_few_pairs")
        return Family(estimates=est, tables={"pairs": pairs}, params=params)
    r = pearson(x0, x1)
    if math.isnan(r):
        why = "the ratings did not vary, so carry-over is undefined"
        for name in ("inertia", "recovery_rate_per_hour", "half_life_hours"):
            est[name] = Estimate.missing(why, n=n_pairs, status="no_variation")
        return Family(estimates=est, tables={"pairs": pairs}, params=params)
    corrected, lo, hi, n_days = day_jackknife(x0, x1, series.day_index[:-1][ok])
    params.update(inertia_uncorrected=r, inertia_days=n_days)
    how = (f"lag-1 correlation over {rule}; median gap {np.median(dt):.1f} h; ")
    how += (f"jackknife over {n_days} days (uncorrected r {r:.3f})" if math.isfinite(lo) else
            f"no bias correction or interval from {n_days} study day(s)")
    est["inertia"] = Estimate(corrected, _finite(lo), _finite(hi), n=n_pairs, note=how)
    # The pure-OU fit on the pairs gives the starting rate and the comparison in params.
    pure = fit_ou(x0, x1, dt)
    values, gaps, lengths = segments(series.hours, resid, ok)
    fit = fit_ou_noise(values, gaps, lengths, pure["kappa"])
    params.update(ou_mean_deviation=fit["mu"], ou_stationary_variance=fit["s2"],
                  ou_noise_variance=fit["r2"], noise_share=fit["noise_share"],
                  n_runs=int(values.shape[0]),
                  half_life_without_noise_term=math.log(2) / pure["kappa"])
    status, why = rate_status(fit)
    if status:
        est["recovery_rate_per_hour"] = Estimate.missing(why, n=n_pairs, status=status)
        est["half_life_hours"] = Estimate.missing(why, n=n_pairs, status=status)
    else:
        k, k_lo, k_hi = fit["kappa"], fit["lower"], fit["upper"]
        note = ("Ornstein-Uhlenbeck fit with answer noise by maximum likelihood on the real "
                f"intervals; noise share {fit['noise_share']:.0%}")
        est["recovery_rate_per_hour"] = Estimate(
            k, _finite(k_lo), _finite(k_hi), n=n_pairs, note=note)
        est["half_life_hours"] = Estimate(
            math.log(2) / k, _finite(math.log(2) / k_hi), _finite(math.log(2) / k_lo),
            n=n_pairs, note=note + "; half-life = ln 2 / rate")
    return Family(estimates=est, tables={"pairs": pairs}, params=params)


def slow_trend_share(series: Series, bandwidth_days: float) -> Estimate:
    """Share of the ratings' variance in their slow trend (Gaussian kernel, SD in days).

    Carry-over here includes any slow change of the usual level; this share tells how much
    of the variance such a change holds (the same kernel as the early-warning detrending,
    Dakos et al. 2012). Simulated stationary OU people (half-lives 1.5-12 h, 14-56 days) had
    a median share of 0.005 and at most 0.08; the example study's gradual changes 0.33-0.77.
    """
    if series.n < 3 or not np.ptp(series.value) > 0:
        return Estimate.missing("fewer than three answers, or no variation", n=series.n,
                                status="no_variation")
    trend = rl.gaussian_trend(series.hours, series.value, bandwidth_days * 24.0)
    share = float(np.var(trend) / np.var(series.value))
    return Estimate(min(share, 1.0), n=series.n,
                    note=f"variance of the Gaussian trend (kernel SD {bandwidth_days:g} days) "
                         "over the variance of the ratings")


CANNOT_TELL = ("the data cannot tell how quickly mood returns (most of the variation looks "
               "like answer noise)")


def rate_status(fit: dict[str, float]) -> tuple[str, str]:
    """Status code and plain reason why the fitted rate cannot be reported, or ('', '').

    Codes of `recovery_rate_per_hour` and `half_life_hours` (besides 'too_few_pairs' and
    'no_variation'), read off the profile likelihood of the rate:
    'no_carry_over': the profile is open only towards fast rates (return quicker than the
    prompts can show); 'no_return': the best rate is the slowest searched, fast rates are
    excluded and little of the variance is answer noise; 'cannot_tell': the profile is open
    towards slow rates from an optimum inside the range, open on both sides (flat), or most of
    the variance goes to answer noise.
    """
    slow_open, fast_open = not math.isfinite(fit["lower"]), not math.isfinite(fit["upper"])
    if fast_open and not slow_open:
        return "no_carry_over", "no measurable carry-over at these prompt intervals"
    if slow_open and fast_open:
        return "cannot_tell", CANNOT_TELL
    noisy = bool(fit["noise_at_edge"]) or fit["noise_share"] > MAX_NOISE_SHARE
    if fit["slow_edge"] and not noisy:
        return "no_return", "no return towards the usual level was seen"
    if slow_open or noisy:
        return "cannot_tell", CANNOT_TELL + f"; noise share {fit['noise_share']:.0%}"
    return "", ""


def _finite(value: float) -> float | None:
    """Drop NaN/inf interval ends (an open interval is reported as empty)."""
    return float(value) if math.isfinite(value) else None
