"""Bouncing back: how fast ratings return to the person's usual level after upsets and dips.

Episodes start at the first answer after an upsetting event (when it is worse than usual by
more than the recovery band) or at a data-driven dip (an answer more than `dip_k` rolling SDs
worse than the rolling baseline of the previous `baseline_days`). An episode ends at the first
later answer back within `recovery_band_sd` SDs of the baseline; it is censored when the study
day ends (night or a gap longer than `max_gap_hours`), the data end, the measurement period
ends (its last answer) or the next upsetting event comes first. Censored episodes count as "not
yet recovered", never as fast recoveries. Nothing spans a gap between measurement periods: the
baseline, each episode, its follow-up for the pooled fit and the drifting level's trend are
taken within the answer's own period.

Sources: van Nes & Scheffer 2007, "Slow recovery from perturbations as a generic indicator of
a nearby catastrophic shift", American Naturalist 169:738-747 (recovery speed as resilience);
Kuranova et al. 2020, "Measuring resilience prospectively as the speed of affect recovery in
daily life", BMC Medicine 18:36 (event-based recovery in ESM). The median time to baseline is
the Kaplan & Meier 1958 product-limit median, which treats censored episodes correctly.

The pooled half-life follows each episode past the night: mood keeps returning while nobody
is asked, so the next morning's answers still carry the return. The deviation from the
episode's baseline is an Ornstein-Uhlenbeck process (rate k, stationary variance s2) seen with
answer noise r2; over any gap dt, the night included, the exact transition is
x_j - m = e^{-k dt} (x_i - m) + w, Var(w) = s2 (1 - e^{-2 k dt}) (Uhlenbeck & Ornstein 1930,
"On the theory of the Brownian motion", Phys Rev 36:823; Gardiner 2009, "Stochastic methods",
§3.8.4). Each episode is conditioned on its first answer (however the upset arose, the return
from there is the same process) and followed until the next upsetting event, the next
episode, the end of data or `FOLLOW_HOURS`. Deviations are from the person's mean, or, when the
level itself drifts (`slow_trend_share` above `TREND_REFERENCE_SHARE`), from the slow trend of
the early-warning detrending (which shortens a stationary 24 h half-life by a fifth, so it is
kept for drifting levels). The exact likelihood comes from the Kalman filter of `dynamics`
(Harvey 1989, from memory) with m (the level returned to, relative to the reference), s2 and
r2 profiled out; the interval for k is from the profile likelihood
(chi-square, 1 df). Half-life = ln 2 / k. Ended at night, the same episodes gave half-lives of
0.6-0.7 of a simulated 12 h truth, or none at all.

Status codes of `recovery_half_life_hours` when it is missing: 'too_few_episodes',
'not_fitted', 'too_fast' (back faster than the prompts can show), 'no_return' (fast return
excluded, the best rate the slowest searched) and 'cannot_tell' (slow return and answer
noise trade off along a flat likelihood).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from springback.metrics import _rolling as rl
from springback.metrics._series import Series, hours_since
from springback.metrics.dynamics import (
    fit_ou,
    fit_ou_noise,
    rate_status,
    segments,
    slow_trend_share,
)
from springback.metrics.results import Estimate, Family
from springback.model import ParticipantData
from springback.settings import StudySettings

MIN_BASELINE_ANSWERS = 10
"""Answers needed in the baseline window before a dip can be judged (design choice)."""
MIN_EPISODES = 3
"""Episodes needed for the pooled recovery curve (design choice)."""
MIN_FIT_POINTS = 8
"""Followed answers needed for the pooled recovery fit (design choice: 4 parameters' worth)."""
FOLLOW_HOURS = 48.0
"""Longest follow-up of an episode for the pooled fit (design choice: two nights, twice the
slowest half-life checked in the tests)."""
TREND_REFERENCE_SHARE = 0.25
"""Above this `slow_trend_share` the followed deviations are taken from the slow trend instead
of the person's mean (design choice: simulated stationary people with half-lives up to 24 h
stayed below 0.22, the example study's drifting and shifting people were at 0.33-0.77)."""


def period_bounds(series: Series) -> tuple[np.ndarray, np.ndarray]:
    """First and last (inclusive) answer index of each answer's measurement period.

    A period is a run of consecutive answers with the same period number, so a period number
    that comes back after another one is a new run.
    """
    n = series.n
    if n == 0:
        return np.zeros(0, dtype=int), np.zeros(0, dtype=int)
    new = np.concatenate([[True], np.diff(series.periods) != 0])
    run = np.cumsum(new) - 1
    firsts = np.flatnonzero(new)
    lasts = np.concatenate([firsts[1:] - 1, [n - 1]])
    return firsts[run], lasts[run]


def rolling_baseline(series: Series, days: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Mean, SD and count of the answers in the `days` before each answer (itself excluded),
    within the answer's own measurement period."""
    t, x = series.hours, series.value
    start = np.maximum(np.searchsorted(t, t - days * 24.0, side="left"),
                       period_bounds(series)[0])
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
    period_last = period_bounds(series)[1]
    # Can we follow i -> i + 1? Not across a night or long gap, nor out of the period.
    gap_ok = np.concatenate([series.admissible, [False]]) & (np.arange(n) < period_last)
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
                censored_by = "end" if j == n - 1 else \
                    "period end" if j == period_last[j] else "night"
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
        episodes.append({"index": i, "baseline": float(b), "trigger": trigger, "event": ev_i,
                         "depth": float(worse[i]),
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


def follow_up(series: Series, episodes: list[dict], events: np.ndarray,
              reference: np.ndarray | None = None
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Every episode's answers for the pooled fit, nights included: episode, hours, deviation.

    An episode is followed from its first answer up to the next episode's first answer, and
    never to an answer after the next upsetting event, beyond FOLLOW_HOURS or past the last
    answer of its measurement period. The deviation is
    from `reference` (one level per answer; default the person's mean), positive = worse. The
    level returned to is fitted: a baseline per episode would add its own error to each
    episode and read as slow return (12 h came out as 14 h with 85% coverage).
    """
    t = series.hours
    if reference is None:
        reference = np.full(series.n, float(series.value.mean()) if series.n else 0.0)
    starts = [ep["index"] for ep in episodes]
    period_last = period_bounds(series)[1]
    parts: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
    for e_no, ep in enumerate(episodes, start=1):
        i = ep["index"]
        later = events[events > t[i]]
        until = min(later[0] if len(later) else math.inf, t[i] + FOLLOW_HOURS + 1e-9)
        # The next episode's first answer ends this one too (its transition is data here; it
        # only conditions the next), unless an upsetting event came in between.
        stop = min(int(np.searchsorted(t, until, side="left")),
                   starts[e_no] + 1 if e_no < len(starts) else series.n,
                   int(period_last[i]) + 1)
        dev = series.worse(series.value[i:stop] - reference[i:stop])
        parts.append((np.full(stop - i, e_no), t[i:stop] - t[i], dev))
    if not parts:
        return np.zeros(0, dtype=int), np.zeros(0), np.zeros(0)
    no, hours, dev = (np.concatenate(c) for c in zip(*parts, strict=True))
    return no, hours, dev


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
                                  note="episodes cut off by the night, the end of a period or "
                                       "of the data, or the next event before recovery")}
    share = slow_trend_share(series, m.bandwidth_days)
    drifting = share.ok and float(share.value or 0.0) > TREND_REFERENCE_SHARE
    reference = _trend_by_period(series, m.bandwidth_days * 24.0) if drifting else None
    est["recovery_half_life_hours"], fit_df, followed = _pooled_estimate(
        series, episodes, events, aligned_df, reference)
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
        tables={"episodes": table, "aligned": aligned_df, "fit": fit_df,
                "followed": followed},
        params={"dip_k": m.dip_k, "baseline_days": m.baseline_days,
                "recovery_band_sd": m.recovery_band_sd, "max_gap_hours": m.max_gap_hours,
                "min_baseline_answers": MIN_BASELINE_ANSWERS, "min_episodes": MIN_EPISODES,
                "events_upsetting": len(events), "follow_hours": FOLLOW_HOURS,
                "reference": f"Gaussian trend, kernel SD {m.bandwidth_days:g} days"
                             if drifting else "the person's mean",
                "curve": "Ornstein-Uhlenbeck with answer noise, exact transitions across "
                         "nights, each episode from its first answer; profile-likelihood "
                         "interval",
                "median": "Kaplan-Meier"},
    )


def _trend_by_period(series: Series, bandwidth_hours: float) -> np.ndarray:
    """The slow Gaussian trend of the ratings, smoothed within each measurement period."""
    first, last = period_bounds(series)
    trend = np.empty(series.n)
    for a in np.unique(first):
        b = int(last[a]) + 1
        trend[a:b] = rl.gaussian_trend(series.hours[a:b], series.value[a:b], bandwidth_hours)
    return trend


_REASONS = {
    "too_fast": "ratings were back to usual faster than the time between prompts can show",
    "no_return": "no return towards the usual level was seen after upsets",
    "cannot_tell": "the data cannot tell how quickly mood returns after upsets (most of the "
                   "variation looks like answer noise)",
}
_STATUS = {"no_carry_over": "too_fast", "no_return": "no_return", "cannot_tell": "cannot_tell"}


def pooled_fit(episode: np.ndarray, hours: np.ndarray, dev: np.ndarray) -> dict[str, float]:
    """Fit the OU-plus-noise return to the followed episodes, each from its first answer."""
    same = np.diff(episode) == 0
    values, gaps, lengths = segments(hours, dev, same)
    pure = fit_ou(dev[:-1][same], dev[1:][same], np.diff(hours)[same])
    # A looser optimiser tolerance than carry-over's: 40% less time, half-lives to 0.01%.
    return fit_ou_noise(values, gaps, lengths, pure["kappa"], conditioned=True, xatol=1e-4)


def _pooled_estimate(series: Series, episodes: list[dict], events: np.ndarray,
                     aligned: pd.DataFrame, reference: np.ndarray | None
                     ) -> tuple[Estimate, pd.DataFrame, pd.DataFrame]:
    """Fit the pooled return across nights; the half-life with interval, curve and answers."""
    n_ep = len(episodes)
    no, h, d = follow_up(series, episodes, events, reference)
    followed = pd.DataFrame({"episode": no, "hours": h, "deviation": d})
    empty = pd.DataFrame({"hours": pd.Series([], dtype=float),
                          "deviation": pd.Series([], dtype=float)})
    n_used = int(len(h) - len(np.unique(no)))  # answers after each episode's first
    if n_ep < MIN_EPISODES or n_used < MIN_FIT_POINTS:
        return Estimate.missing(
            f"needs at least {MIN_EPISODES} upsets or dips with {MIN_FIT_POINTS} later answers "
            f"in all; there were {n_ep} with {n_used}", n=n_ep,
            status="too_few_episodes"), empty, followed
    if np.ptp(d) == 0:
        return Estimate.missing("the ratings after the upsets did not vary", n=n_ep,
                                status="not_fitted"), empty, followed
    fit = pooled_fit(no, h, d)
    status, _ = rate_status(fit)
    if status:
        code = _STATUS[status]
        return Estimate.missing(_REASONS[code] + f"; noise share {fit['noise_share']:.0%}",
                                n=n_ep, status=code), empty, followed
    k, k_lo, k_hi = fit["kappa"], fit["lower"], fit["upper"]
    # The typical way back, as the chart shows episodes: from the mean depth below the
    # baseline towards it (the OU mean path, depth e^{-k h}).
    depth = float(np.mean([ep["depth"] for ep in episodes]))
    grid = np.linspace(0.0, float(max(aligned["hours"].max(), 1.0)), 50)
    curve = pd.DataFrame({"hours": grid, "deviation": depth * np.exp(-k * grid)})
    nights = int(np.sum((np.diff(h) > series.max_gap_hours) & (np.diff(no) == 0)))
    return Estimate(math.log(2) / k, math.log(2) / k_hi, math.log(2) / k_lo, n=n_ep,
                    note=f"exact Ornstein-Uhlenbeck return over {n_ep} episodes ({len(h)} "
                         f"answers, {nights} nights bridged); noise share "
                         f"{fit['noise_share']:.0%}; half-life = ln 2 / rate"), curve, followed
