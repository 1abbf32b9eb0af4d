"""Level and variability: mean, SD, relative variability, RMSSD, day-level variance parts.

Sources: Mestdagh et al. 2018, "Sidelining the mean: the relative variability index as a
generic mean-corrected variability measure for bounded variables", Psychological Methods
23(4):690-707 (relative variability); Jahng, Wood & Trull 2008, "Analysis of affective
instability in ecological momentary assessment", Psychological Methods 13(4):354-375 (MSSD
on successive pairs and its time-adjusted form); von Neumann et al. 1941 (MSSD).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from springback.intake.schedule import add_periods, compliance, prompt_days, sent_by_rule
from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family
from springback.model import ParticipantData
from springback.settings import StudySettings


def max_sd(mean: float, n: int, low: float, high: float) -> float:
    """Largest sample SD (n - 1 denominator) n ratings on [low, high] with this mean can have.

    The sum of squared deviations is convex, so its maximum over the box with a fixed sum lies
    at a vertex of that polytope: k ratings at the top, n - k - 1 at the bottom and at most one
    rating r in between (Mestdagh et al. 2018, the maximum behind the relative variability index).
    """
    if n < 2 or not low <= mean <= high:
        return float("nan")
    width = high - low
    k = min(math.floor(n * (mean - low) / width + 1e-9), n - 1)
    r = n * mean - k * high - (n - k - 1) * low
    r = min(max(r, low), high)
    ss = k * (high - mean) ** 2 + (n - k - 1) * (low - mean) ** 2 + (r - mean) ** 2
    return math.sqrt(ss / (n - 1))


def relative_variability(x: np.ndarray, low: float, high: float) -> float:
    """SD divided by the largest SD possible for this mean and n on the scale (0..1)."""
    x = np.asarray(x, dtype=float)
    if len(x) < 2:
        return float("nan")
    top = max_sd(float(x.mean()), len(x), low, high)
    if not top > 0:
        return float("nan")
    return float(x.std(ddof=1) / top)


def successive_differences(series: Series) -> tuple[np.ndarray, np.ndarray]:
    """Differences x[i+1] - x[i] and their gaps in hours, over admissible pairs only."""
    ok = series.admissible
    return np.diff(series.value)[ok], series.gaps[ok]


def mssd(diffs: np.ndarray, gaps: np.ndarray, lam: float = 0.0) -> float:
    """Mean squared successive difference; with lam > 0 each difference is time-adjusted.

    Jahng, Wood & Trull 2008: d_i / (dt_i / median dt)^lam; lam = 0 gives the plain MSSD.
    The mean runs over the valid pairs (not n_obs - 1).
    """
    if len(diffs) == 0:
        return float("nan")
    if lam:
        diffs = diffs / (gaps / np.median(gaps)) ** lam
    return float(np.mean(diffs * diffs))


def variance_parts(values: np.ndarray, days: np.ndarray) -> tuple[float, float, int]:
    """Pooled within-day variance, variance of day means, and the number of days."""
    frame = pd.DataFrame({"d": days, "x": values})
    by_day = frame.groupby("d")["x"]
    means, counts = by_day.transform("mean").to_numpy(), by_day.size()
    n_days = len(counts)
    dof = len(values) - n_days
    within = float(((values - means) ** 2).sum() / dof) if dof > 0 else float("nan")
    day_means = by_day.mean().to_numpy()
    between = float(np.var(day_means, ddof=1)) if n_days > 1 else float("nan")
    return within, between, n_days


def participation(data: ParticipantData, settings: StudySettings,
                  variable: str | None = None) -> tuple[int, float, float]:
    """Answered prompts, prompts sent and compliance, by the rule of `intake.schedule`.

    Read from the quality report (the study's one computation); a participant record made
    without one (tests, tools) gets the same rule applied to its rows that answer `variable`
    (default: every row).
    """
    quality = data.quality
    if len(quality) and {"answered", "scheduled", "compliance"} <= set(quality.columns):
        row = quality.iloc[0]
        return (int(row["answered"]), float(row["scheduled"]),
                float(row["compliance"]) if pd.notna(row["compliance"]) else float("nan"))
    days = participant_schedule(data, settings, variable)
    answered, sent = days["answered"].sum(), days["sent"].sum(min_count=1)
    share = compliance(pd.Series([answered]), pd.Series([sent], dtype=float)).iloc[0]
    return int(answered), float(sent), float(share)


def participant_schedule(data: ParticipantData, settings: StudySettings,
                         variable: str | None = None) -> pd.DataFrame:
    """The participant's prompts sent and answered per day (`model.SCHEDULE_COLUMNS`)."""
    if len(data.schedule) or len(data.quality):
        return data.schedule
    m = data.momentary
    if variable is not None and variable in m.columns:
        m = m[m[variable].notna()]
    rows = pd.DataFrame({"participant": m["participant"].astype(str), "time": m["time"],
                         "scheduled": m["scheduled"], "answered": True})
    if "period" in m.columns:
        rows["period"] = m["period"].to_numpy()
    days = prompt_days(add_periods(rows, settings), settings)
    return sent_by_rule(days, settings, has_scheduled=False, lists_prompts=False)


def describe(series: Series, data: ParticipantData, settings: StudySettings) -> Family:
    """Compute the descriptives family for the booklet's variable."""
    m = settings.metrics
    x, n = series.value, series.n
    low, high = series.scale
    answered, scheduled, share = participation(data, settings, series.variable)
    schedule = participant_schedule(data, settings, series.variable)
    # Answered prompts by the same rule as the compliance, so "93 of 120" reads the same
    # everywhere (a prompt counts when any item was answered).
    est: dict[str, Estimate] = {
        "n_answered": Estimate(float(answered), n=answered, note="answered prompts")}
    if math.isfinite(share):
        est["compliance"] = Estimate(share, n=int(scheduled),
                                     note=f"{answered} of {scheduled:g} prompts answered")
    else:
        est["compliance"] = Estimate.missing(
            "the number of prompts sent is not known (set study.prompts_per_day, or give a "
            "'scheduled' column that lists unanswered prompts too)", n=n)
    if n >= 2:
        est["mean"] = Estimate(float(x.mean()), n=n)
        est["sd"] = Estimate(float(x.std(ddof=1)), n=n, note="n - 1 denominator")
        rvi = relative_variability(x, low, high)
        est["relative_variability"] = (
            Estimate(rvi, n=n, note=f"SD / largest SD possible for this mean on {low:g}-{high:g}")
            if math.isfinite(rvi) else
            Estimate.missing("every answer was at one end of the scale, so variability "
                             "relative to the scale is undefined", n=n))
    else:
        why = f"needs at least 2 answered prompts; there were {n}"
        est["mean"] = Estimate(float(x[0]), n=1) if n == 1 else Estimate.missing(why, n=n)
        for name in ("sd", "relative_variability"):
            est[name] = Estimate.missing(why, n=n)
    diffs, gaps = successive_differences(series)
    pairs = len(diffs)
    rule = f"pairs on the same study day at most {m.max_gap_hours:g} h apart"
    if pairs >= m.min_pairs:
        est["rmssd"] = Estimate(math.sqrt(mssd(diffs, gaps)), n=pairs, note=rule)
        est["ta_mssd"] = Estimate(mssd(diffs, gaps, m.ta_mssd_lambda), n=pairs,
                                  note=f"time-adjusted MSSD, lambda {m.ta_mssd_lambda:g}; {rule}")
    else:
        why = f"needs at least {m.min_pairs} consecutive pairs ({rule}); there were {pairs}"
        est["rmssd"] = Estimate.missing(why, n=pairs)
        est["ta_mssd"] = Estimate.missing(why, n=pairs)
    within, between, n_days = variance_parts(x, series.day_index)
    est["within_day_variance"] = (
        Estimate(within, n=n, note="pooled over days") if math.isfinite(within) else
        Estimate.missing("needs a day with at least two answers", n=n))
    est["between_day_variance"] = (
        Estimate(between, n=n_days, note="variance of the daily means") if math.isfinite(between)
        else Estimate.missing("needs answers on at least two days", n=n_days))
    typical = np.percentile(x, [25, 75]) if n else np.array([np.nan, np.nan])
    return Family(
        estimates=est,
        tables={"series": pd.DataFrame({"local_time": series.local_time, "value": x}),
                "daily": _daily(series, schedule), "diurnal": _diurnal(series),
                "periods": _periods(schedule)},
        params={"typical_low": float(typical[0]), "typical_high": float(typical[1]),
                "pair_rule": rule, "ta_mssd_lambda": m.ta_mssd_lambda,
                "times_scheduled": bool(data.times_scheduled)},
    )


def _daily(series: Series, schedule: pd.DataFrame) -> pd.DataFrame:
    """Per study day: mean, SD, answered prompts and prompts sent (NaN if unknown).

    Days on which prompts were sent without an answer are rows too (mean NaN, n 0), so the
    calendar shows the same prompts sent as the compliance.
    """
    frame = pd.DataFrame({"study_day": series.study_day, "x": series.value})
    g = frame.groupby("study_day", sort=True)["x"]
    out = pd.DataFrame({"mean": g.mean(), "sd": g.std(ddof=1), "n": g.size()}).reset_index()
    out["study_day"] = out["study_day"].astype("datetime64[ns]")
    sent = schedule["sent"].groupby(schedule["study_day"].astype("datetime64[ns]")).sum(
        min_count=1).rename("scheduled")
    out = out.merge(sent.rename_axis("study_day").reset_index(), on="study_day", how="outer")
    out["n"] = out["n"].fillna(0).astype("int64")
    out["scheduled"] = out["scheduled"].astype(float)
    return out.sort_values("study_day").reset_index(drop=True)[
        ["study_day", "mean", "sd", "n", "scheduled"]]


def _periods(schedule: pd.DataFrame) -> pd.DataFrame:
    """Each measurement period's first and last study day (charts break at the gaps) and its
    answered prompts."""
    days = schedule["study_day"].astype("datetime64[ns]")
    period = schedule["period"].astype("int64")
    by = days.groupby(period)
    answered = schedule["answered"].astype("int64").groupby(period).sum()
    return pd.DataFrame({"first_day": by.min(), "last_day": by.max(),
                         "answered": answered}).rename_axis("period").reset_index()


def _diurnal(series: Series) -> pd.DataFrame:
    """Mean rating per local clock hour (0..23) with the number of answers."""
    hours: np.ndarray | list[int] = (
        pd.DatetimeIndex(series.local_time).hour.to_numpy(dtype=int) if series.n else []
    )
    frame = pd.DataFrame({"hour": hours, "x": series.value})
    g = frame.groupby("hour", sort=True)["x"]
    return pd.DataFrame({"mean": g.mean(), "n": g.size()}).reset_index()
