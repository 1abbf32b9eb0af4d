"""Bouncing back: how fast ratings return to the person's usual level after upsets and dips.

Episodes start at the first answer after an upsetting event (when it is worse than usual by
more than the recovery band) or at a data-driven dip (an answer more than `dip_k` rolling SDs
worse than the rolling baseline of the previous `baseline_days`). An episode ends at the first
later answer back within `recovery_band_sd` SDs of the baseline; it is censored when the study
day ends (night or a gap longer than `max_gap_hours`), the data end, or the next upsetting event
comes first. Censored episodes count as "not yet recovered", never as fast recoveries.

Sources: van Nes & Scheffer 2007, "Slow recovery from perturbations as a generic indicator of
a nearby catastrophic shift", American Naturalist 169:738-747 (recovery speed as resilience);
Kuranova et al. 2020, "Measuring resilience prospectively as the speed of affect recovery in
daily life", BMC Medicine 18:36 (event-based recovery in ESM). The pooled exponential curve
A e^{-k h} is fitted with scipy's curve_fit (Virtanen et al. 2020); the median time to baseline
is the Kaplan & Meier 1958 product-limit median, which treats censored episodes correctly.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
from scipy import optimize, stats

from springback.metrics._series import Series, hours_since
from springback.metrics.results import Estimate, Family
from springback.model import ParticipantData
from springback.settings import StudySettings

MIN_BASELINE_ANSWERS = 10
"""Answers needed in the baseline window before a dip can be judged (design choice)."""
MIN_EPISODES = 3
"""Episodes needed for the pooled recovery curve (design choice)."""
MIN_FIT_POINTS = 8
"""Aligned points needed for the pooled recovery curve (design choice: 3 parameters' worth)."""


def rolling_baseline(series: Series, days: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Mean, SD and count of the answers in the `days` before each answer (itself excluded)."""
    t, x = series.hours, series.value
    start = np.searchsorted(t, t - days * 24.0, side="left")
    end = np.arange(len(t))  # exclusive: answers strictly before this one
    c1 = np.concatenate([[0.0], np.cumsum(x)])
    c2 = np.concatenate([[0.0], np.cumsum(x * x)])
    n = (end - start).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = (c1[end] - c1[start]) / n
        var = (c2[end] - c2[start] - n * mean * mean) / (n - 1)
    sd = np.sqrt(np.clip(var, 0.0, None))
    return mean, sd, n


def upsetting_events(data: ParticipantData, series: Series) -> tuple[np.ndarray, np.ndarray]:
    """Hours (since the first answer) and kinds of the upsetting events, in time order."""
    events = data.events
    if events is None or len(events) == 0:
        return np.zeros(0), np.array([], dtype=object)
    if "upsetting" in events.columns:
        events = events[events["upsetting"].astype(bool)]
    hours = hours_since(series, events["time"])
    kinds = events["kind"].astype(str).to_numpy(dtype=object) if "kind" in events.columns else \
        np.full(len(hours), "", dtype=object)
    order = np.argsort(hours, kind="stable")
    return hours[order], kinds[order]


def find_episodes(series: Series, events: np.ndarray, settings: StudySettings) -> list[dict]:
    """Find event and dip episodes and follow each until recovery or censoring."""
    m = settings.metrics
    base, sd, count = rolling_baseline(series, m.baseline_days)
    worse = series.worse(series.value - base)  # deviation, positive = worse than usual
    judged = (count >= MIN_BASELINE_ANSWERS) & (sd > 0)
    t, n = series.hours, series.n
    gap_ok = np.concatenate([series.admissible, [False]])  # can we follow i -> i + 1?
    starts: dict[int, tuple[str, int]] = {}
    for ev_i, te in enumerate(events):
        i = int(np.searchsorted(t, te, side="left"))
        # Only an answer soon after the event can show its impact (not one after a night).
        if i < n and t[i] - te <= m.max_gap_hours and judged[i] and \
                worse[i] > m.recovery_band_sd * sd[i]:
            starts.setdefault(i, ("event", ev_i))
    dips = np.flatnonzero(judged & (worse > m.dip_k * sd))
    episodes: list[dict] = []
    busy_until = -1
    for i in sorted(set(starts) | set(dips.tolist())):
        if i <= busy_until:
            continue  # already inside an episode: one upset, one episode
        trigger, ev_i = starts.get(i, ("dip", -1))
        b, band = base[i], m.recovery_band_sd * sd[i]
        next_event = events[events > t[i]]
        limit = next_event[0] if len(next_event) else math.inf
        j, censored_by, back = i, "", None
        points = [(0.0, float(worse[i]))]
        while True:
            if not gap_ok[j]:
                censored_by = "end" if j == n - 1 else "night"
                break
            if t[j + 1] >= limit:
                censored_by = "next event"
                break
            j += 1
            dev = float(series.worse(np.array([series.value[j] - b]))[0])
            points.append((t[j] - t[i], dev))
            if abs(dev) <= band:
                back = t[j] - t[i]
                break
        busy_until = j
        episodes.append({"index": i, "trigger": trigger, "event": ev_i, "depth": float(worse[i]),
                         "hours": back, "censored_by": censored_by, "points": points})
    return episodes


def km_median(times: np.ndarray, observed: np.ndarray) -> float:
    """Kaplan-Meier median: the first time the survival estimate drops below one half.

    Convention of Collett 2015, "Modelling survival data in medical research", §2.4 (from
    memory) and statsmodels' SurvfuncRight.quantile; NaN when it never drops below one half.
    """
    order = np.lexsort((~observed, times))  # events before censorings at tied times
    times, observed = times[order], observed[order]
    at_risk = len(times) - np.arange(len(times))
    surv = np.cumprod(np.where(observed, 1.0 - 1.0 / at_risk, 1.0))
    below = np.flatnonzero(observed & (surv < 0.5 - 1e-12))
    return float(times[below[0]]) if len(below) else float("nan")


def fit_pooled(hours: np.ndarray, dev: np.ndarray) -> tuple[float, float, float, float]:
    """Fit dev = A e^{-k h} to all aligned points; return A, k and k's 95% interval."""
    a0 = float(np.median(dev[hours == 0])) if np.any(hours == 0) else float(dev.max())
    (a, k), cov = optimize.curve_fit(lambda h, a, k: a * np.exp(-k * h), hours, dev,
                                     p0=(a0, 0.3), maxfev=5000, xtol=1e-12, ftol=1e-12)
    se = math.sqrt(cov[1, 1]) if np.isfinite(cov[1, 1]) else float("nan")
    q = stats.t.ppf(0.975, max(len(hours) - 2, 1))
    return float(a), float(k), k - q * se, k + q * se


def bounce_back(series: Series, data: ParticipantData, settings: StudySettings) -> Family:
    """Compute the recovery family: episodes, pooled half-life and median time to baseline."""
    m = settings.metrics
    events, kinds = upsetting_events(data, series)
    episodes = find_episodes(series, events, settings) if series.n >= 2 else []
    rows, aligned = [], []
    for e_no, ep in enumerate(episodes, start=1):
        rows.append({"episode": e_no, "start": series.local_time.iloc[ep["index"]],
                     "trigger": ep["trigger"],
                     "kind": str(kinds[ep["event"]]) if ep["event"] >= 0 else "",
                     "depth": ep["depth"],
                     "hours_to_baseline": ep["hours"] if ep["hours"] is not None else np.nan,
                     "censored": ep["hours"] is None, "censored_by": ep["censored_by"]})
        aligned += [{"episode": e_no, "hours": h, "deviation": d} for h, d in ep["points"]]
    table = pd.DataFrame(rows, columns=["episode", "start", "trigger", "kind", "depth",
                                        "hours_to_baseline", "censored", "censored_by"])
    aligned_df = pd.DataFrame(aligned, columns=["episode", "hours", "deviation"])
    n_ep = len(rows)
    n_cens = int(table["censored"].sum()) if n_ep else 0
    est = {"n_episodes": Estimate(float(n_ep), n=n_ep,
                                  note=f"{int((table['trigger'] == 'event').sum())} after events"
                                  if n_ep else "no upsets or dips found"),
           "n_censored": Estimate(float(n_cens), n=n_ep,
                                  note="episodes cut off by the night, the end of data or the "
                                       "next event before recovery")}
    fit_df = pd.DataFrame({"hours": pd.Series([], dtype=float),
                           "deviation": pd.Series([], dtype=float)})
    est["recovery_half_life_hours"], fit_df = _pooled_estimate(aligned_df, n_ep, fit_df)
    if n_ep >= MIN_EPISODES:
        times = np.where(table["censored"], 0.0, table["hours_to_baseline"].fillna(0.0))
        # A censored episode is known to last at least until its last observed answer.
        last_seen = aligned_df.groupby("episode")["hours"].max().to_numpy()
        times = np.where(table["censored"].to_numpy(), last_seen, times)
        med = km_median(times.astype(float), ~table["censored"].to_numpy(dtype=bool))
        est["median_recovery_hours"] = (
            Estimate(med, n=n_ep, note="Kaplan-Meier median; censored episodes counted as "
                                       "not yet recovered")
            if math.isfinite(med) else Estimate.missing(
                "half of the episodes or more were not seen to recover", n=n_ep))
    else:
        est["median_recovery_hours"] = Estimate.missing(
            f"needs at least {MIN_EPISODES} upsets or dips; there were {n_ep}", n=n_ep)
    return Family(
        estimates=est,
        tables={"episodes": table, "aligned": aligned_df, "fit": fit_df},
        params={"dip_k": m.dip_k, "baseline_days": m.baseline_days,
                "recovery_band_sd": m.recovery_band_sd, "max_gap_hours": m.max_gap_hours,
                "min_baseline_answers": MIN_BASELINE_ANSWERS, "min_episodes": MIN_EPISODES,
                "events_upsetting": len(events), "curve": "A * exp(-k * hours), curve_fit",
                "median": "Kaplan-Meier"},
    )


def _pooled_estimate(aligned: pd.DataFrame, n_ep: int,
                     empty: pd.DataFrame) -> tuple[Estimate, pd.DataFrame]:
    """Fit the pooled exponential curve and turn its rate into a half-life with interval."""
    if n_ep < MIN_EPISODES or len(aligned) < MIN_FIT_POINTS:
        return Estimate.missing(
            f"needs at least {MIN_EPISODES} upsets or dips with {MIN_FIT_POINTS} answers in "
            f"all; there were {n_ep} with {len(aligned)}", n=n_ep), empty
    h = aligned["hours"].to_numpy(dtype=float)
    d = aligned["deviation"].to_numpy(dtype=float)
    if np.ptp(h) == 0:
        return Estimate.missing("no answers followed the upsets on the same day", n=n_ep), empty
    try:
        with warnings.catch_warnings():
            # An undefined covariance means no usable interval: treat it as a failed fit.
            warnings.simplefilter("error", optimize.OptimizeWarning)
            a, k, k_lo, k_hi = fit_pooled(h, d)
    except (RuntimeError, ValueError, optimize.OptimizeWarning):
        return Estimate.missing("the recovery curve could not be fitted", n=n_ep), empty
    if not (math.isfinite(k) and k > 0 and a > 0):
        return Estimate.missing("no return towards the usual level was seen after upsets",
                                n=n_ep), empty
    first = float(h[h > 0].min())
    if math.log(2) / k < first / 2:
        return Estimate.missing(
            "ratings were back to usual faster than the time between prompts can show "
            f"(first answer after an upset came after {first:.1f} h)", n=n_ep), empty
    if math.log(2) / k > h.max():
        return Estimate.missing(
            f"the fitted return is slower than the {h.max():.1f} h the episodes were followed, "
            "so no half-life can be read from the data", n=n_ep), empty
    grid = np.linspace(0.0, float(h.max()), 50)
    fit = pd.DataFrame({"hours": grid, "deviation": a * np.exp(-k * grid)})
    lower = float(math.log(2) / k_hi) if k_hi > 0 and math.isfinite(k_hi) else None
    upper = float(math.log(2) / k_lo) if k_lo > 0 and math.isfinite(k_lo) else None
    return Estimate(math.log(2) / k, lower, upper, n=n_ep,
                    note=f"pooled curve over {n_ep} episodes ({len(h)} answers); "
                         "half-life = ln 2 / rate"), fit
