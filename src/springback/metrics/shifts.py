"""Abrupt shifts: change points in the daily means of the composite, found with PELT.

Method: PELT (Killick, Fearnhead & Eckley 2012, "Optimal detection of changepoints with a
linear computational cost", JASA 107:1590-1598) through the `ruptures` library (Truong, Oudre &
Vayatis 2020, "Selective review of offline change point detection methods", Signal Processing
167:107299), cost L2 (change in mean), every day a candidate (`jump=1`; the library's default of
5 moves change points to multiples of 5), shortest segment `metrics.min_segment_days`.

Penalty: `metrics.pelt_penalty` when set, else the BIC-type beta = 2 s^2 ln n on the L2 cost,
with n the number of days and s a robust estimate of the day-to-day noise SD: the median
absolute deviation (scaled by 1.4826 to estimate an SD under normality; Rousseeuw & Croux 1993,
JASA 88:1273-1283) of the first differences of the daily means, divided by sqrt 2 because a
difference of two independent days has twice the variance. Differencing makes s insensitive to
the level shifts being looked for (common practice in change-point work, e.g. Fryzlewicz 2014,
Annals of Statistics 42:2243-2281, from memory).

Days without answers are skipped: the series is the sequence of days with at least one answer.

Measurement periods: change points are looked for within each period, never across the gap
between two. Each period is its own run of days (the optimal segmentation with a forced break
at every period's start, i.e. PELT per period with the one penalty of all days), the noise
scale uses only differences of days in the same period, and the level difference between the
end of one period and the start of the next is reported as a difference between periods
(`period_levels`, `period_difference`), never as a shift on a day nobody answered.
"""

from __future__ import annotations

import math
from itertools import pairwise
from typing import Any

import numpy as np
import pandas as pd
import ruptures as rpt

from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family, ParticipantResults
from springback.settings import StudySettings

METHOD = "PELT"
MAD_TO_SD = 1.4826
"""Scales a median absolute deviation to an SD for normal data (Rousseeuw & Croux 1993)."""
SWING_FACTOR = 2.0
"""A shift 'exceeds the person's own swings' when |size| > 2 x the within-segment SD of days."""
NEARBY_DAYS = 7
"""Questionnaire sudden gains/losses this many days either side of a shift are cross-referenced;
questionnaires are typically weekly, so a week is the closest they can bracket a shift."""

NONE_FOUND = "none_found"
"""Status of `shift_largest` when PELT found no change point: there is no shift to measure,
which is not a lack of data (booklets say "none found")."""
SHIFT_CSV_COLUMNS = ("participant", "date", "direction", "size", "method")


def daily_means(study_day: np.ndarray, value: np.ndarray) -> pd.DataFrame:
    """Return study_day, mean and n of answered values per study day with an answer."""
    day = np.asarray(study_day, dtype="datetime64[ns]")
    value = np.asarray(value, dtype=float)
    keep = np.isfinite(value) & ~np.isnat(day)
    days, which = np.unique(day[keep], return_inverse=True)
    n = np.bincount(which, minlength=days.size)
    sums = np.bincount(which, weights=value[keep], minlength=days.size)
    return pd.DataFrame({"study_day": days, "mean": sums / np.maximum(n, 1), "n": n.astype(int)})


def day_periods(study_day: np.ndarray, period: np.ndarray, days: pd.Series) -> np.ndarray:
    """The measurement period of each of `days` (that of its first answer)."""
    day = np.asarray(study_day, dtype="datetime64[ns]")
    first = pd.Series(np.asarray(period, dtype=np.int64)).groupby(day, sort=True).first()
    return first.reindex(pd.DatetimeIndex(days)).to_numpy(dtype=np.int64)


def period_starts(period: np.ndarray) -> list[int]:
    """Indices (of the days) where a new measurement period begins, 0 excluded."""
    return [int(i) + 1 for i in np.flatnonzero(np.diff(np.asarray(period)) != 0)]


def noise_scale(y: np.ndarray, breaks: list[int] | None = None) -> float:
    """Estimate the day-to-day noise SD robustly: scaled MAD of first differences / sqrt 2.

    `breaks` are indices where a new period starts; differences across them are left out.
    """
    d = np.diff(np.asarray(y, dtype=float))
    if breaks:
        d = np.delete(d, [b - 1 for b in breaks])
    if d.size == 0:
        return 0.0
    mad = MAD_TO_SD * float(np.median(np.abs(d - np.median(d))))
    if mad > 0:
        return mad / math.sqrt(2.0)
    # Why: when most days repeat the same mean the MAD is 0; the mean absolute difference
    # (times sqrt(pi/2), its SD scaling under normality) still sees the few days that move.
    return float(np.mean(np.abs(d))) * math.sqrt(math.pi / 2.0) / math.sqrt(2.0)


def default_penalty(y: np.ndarray) -> float:
    """Return the BIC-type penalty 2 s^2 ln n for an L2 cost (s from `noise_scale`)."""
    n = len(y)
    s = noise_scale(y)
    return 2.0 * s * s * math.log(max(n, 2))


def pelt_changepoints(y: np.ndarray, penalty: float, min_size: int) -> list[int]:
    """Return the indices where a new segment starts (PELT, L2 cost, jump 1), 0 and n excluded."""
    y = np.asarray(y, dtype=float)
    if len(y) < 2 * min_size or penalty <= 0 or np.ptp(y) == 0:
        return []
    algo = rpt.Pelt(model="l2", min_size=min_size, jump=1).fit(y.reshape(-1, 1))
    ends = algo.predict(pen=penalty)
    return [int(e) for e in ends[:-1]]


def optimal_partition(y: np.ndarray, penalty: float, min_size: int) -> list[int]:
    """Return segment starts of the exact optimal partitioning (no pruning), L2 cost.

    The recursion PELT prunes: F(t) = min over tau of F(tau) + C(y[tau:t]) + beta, F(0) = -beta
    (Jackson et al. 2005, IEEE Signal Processing Letters 12:105-108, as restated in Killick et
    al. 2012). Used to check ruptures' PELT, whose pruning can discard a still-optimal candidate
    when segments have a minimum length (deepcharles/ruptures pull request #383, open in 2026).
    """
    y = np.asarray(y, dtype=float)
    n = len(y)
    if n < 2 * min_size or penalty <= 0:
        return []
    cs = np.concatenate([[0.0], np.cumsum(y)])
    cs2 = np.concatenate([[0.0], np.cumsum(y * y)])
    best = np.full(n + 1, np.inf)
    best[0] = -penalty
    prev = np.zeros(n + 1, dtype=int)
    for t in range(min_size, n + 1):
        tau = np.concatenate([[0], np.arange(min_size, t - min_size + 1)])
        s = cs[t] - cs[tau]
        cost = cs2[t] - cs2[tau] - s * s / (t - tau)
        total = best[tau] + cost + penalty
        k = int(np.argmin(total))
        best[t], prev[t] = total[k], tau[k]
    starts, t = [], n
    while t > 0:
        t = int(prev[t])
        if t > 0:
            starts.append(t)
    return sorted(starts)


def penalised_cost(y: np.ndarray, starts: list[int], penalty: float) -> float:
    """Return the L2 cost of a segmentation plus the penalty per change point."""
    y = np.asarray(y, dtype=float)
    bounds = [0, *starts, len(y)]
    rss = sum(float(np.sum((y[a:b] - y[a:b].mean()) ** 2)) for a, b in pairwise(bounds))
    return rss + penalty * len(starts)


def segment_levels(y: np.ndarray, starts: list[int]) -> tuple[np.ndarray, float]:
    """Return each day's segment mean and the pooled within-segment SD of the days."""
    y = np.asarray(y, dtype=float)
    bounds = [0, *starts, len(y)]
    level = np.empty_like(y)
    for a, b in pairwise(bounds):
        level[a:b] = y[a:b].mean()
    dof = len(y) - (len(bounds) - 1)
    pooled = math.sqrt(float(np.sum((y - level) ** 2)) / dof) if dof > 0 else float("nan")
    return level, pooled


def _sudden_events(questionnaires: Family | None) -> list[tuple[pd.Timestamp, str]]:
    """Collect (date, 'sudden gain on q' or 'sudden loss on q') from the questionnaires family."""
    if questionnaires is None:
        return []
    found = []
    for name, table in questionnaires.tables.items():
        if not name.startswith("sudden_") or table.empty:
            continue
        q = name.removeprefix("sudden_")
        for when, kind in zip(table["local_time"], table["kind"], strict=False):
            stamp = pd.Timestamp(when)
            # Why: local wall-clock date; the day-start shift is immaterial at a week's tolerance.
            day = (stamp.tz_localize(None) if stamp.tzinfo else stamp).normalize()
            found.append((day, f"sudden {kind} on {q}"))
    return found


def _nearby(day: pd.Timestamp, events: list[tuple[pd.Timestamp, str]]) -> str:
    """Describe questionnaire sudden gains/losses within NEARBY_DAYS of a shift's first day."""
    near = [
        f"{text} ({when.date().isoformat()})"
        for when, text in events
        if abs((when - day).days) <= NEARBY_DAYS
    ]
    return "; ".join(near)


def shift_family(
    series: Series, settings: StudySettings, questionnaires: Family | None = None
) -> Family:
    """Find abrupt shifts in daily means; `questionnaires` is that family's result, if any."""
    variable = series.variable
    worse_sign = 1.0 if series.higher_is_worse else -1.0
    min_size = settings.metrics.min_segment_days
    daily = daily_means(series.study_day, series.value)
    day_period = day_periods(series.study_day, series.periods, daily["study_day"])
    breaks = period_starts(day_period)
    n_periods = len(breaks) + 1
    params: dict[str, Any] = {"method": METHOD, "cost": "L2 (change in mean)", "jump": 1,
                              "min_segment_days": min_size, "swing_factor": SWING_FACTOR,
                              "nearby_days": NEARBY_DAYS, "variable": variable,
                              "periods": n_periods if len(daily) else 0}
    empty_cp = pd.DataFrame(
        {"study_day": pd.Series([], dtype="datetime64[ns]"), "direction": pd.Series([], dtype=str),
         "size": pd.Series([], dtype=float), "method": pd.Series([], dtype=str),
         "exceeds_swings": pd.Series([], dtype=bool),
         "questionnaire_nearby": pd.Series([], dtype=str)}
    )
    n_days = len(daily)
    bounds = [0, *breaks, n_days]
    longest = max((b - a for a, b in pairwise(bounds)), default=0)
    if longest < 2 * min_size:
        reason = (f"shifts need at least {2 * min_size} days with answers "
                  f"(two segments of {min_size} days); there were {n_days}")
        if n_periods > 1:
            reason = (f"shifts need at least {2 * min_size} days with answers in one "
                      f"measurement period (two segments of {min_size} days); the longest of "
                      f"the {n_periods} periods had {longest}")
        return Family(
            estimates={"n_shifts": Estimate.missing(reason, n=n_days),
                       "shift_largest": Estimate.missing(reason, n=n_days)},
            tables={"daily": daily[["study_day", "mean", "n"]], "change_points": empty_cp},
            params=params,
        )
    y = daily["mean"].to_numpy()
    s = noise_scale(y, breaks)
    penalty = settings.metrics.pelt_penalty or 2.0 * s * s * math.log(n_days)
    starts: list[int] = []
    missed = 0
    for a, b in pairwise(bounds):
        found, exact_found = _segment(y[a:b], penalty, min_size)
        missed += found != exact_found
        starts += [a + i for i in exact_found]
    check = "ruptures PELT matched the exact optimal partitioning"
    if missed:
        # Why: known pruning defect of ruptures with a minimum segment length; the exact
        # optimum of the same objective is what PELT is meant to return.
        check = "ruptures PELT missed the optimum (minimum-length pruning); exact result used"
    level, pooled = segment_levels(y, sorted([*starts, *breaks]))
    daily = daily.assign(level=level)
    params.update(penalty=penalty, penalty_rule="set in study.toml" if
                  settings.metrics.pelt_penalty else "2 s^2 ln n (BIC-type)",
                  noise_sd=s, within_segment_sd=pooled, optimality_check=check)
    events = _sudden_events(questionnaires)
    rows: list[dict[str, Any]] = []
    for i in starts:
        size = worse_sign * float(level[i] - level[i - 1])
        day = pd.Timestamp(daily["study_day"].iloc[i])
        rows.append({
            "study_day": day,
            "direction": "worse" if size > 0 else "better",
            "size": size,
            "method": METHOD,
            "exceeds_swings": bool(math.isfinite(pooled) and abs(size) > SWING_FACTOR * pooled),
            "questionnaire_nearby": _nearby(day, events),
        })
    change_points = pd.DataFrame(rows) if rows else empty_cp
    note = (f"PELT on {n_days} daily means, L2 cost, penalty {penalty:.3g}, "
            f"segments of at least {min_size} days")
    if n_periods > 1:
        note += f"; within each of {n_periods} measurement periods, never across a gap"
    if rows:
        largest = max(rows, key=lambda r: abs(r["size"]))
        n_big = sum(r["exceeds_swings"] for r in rows)
        shift_largest = Estimate(
            largest["size"], n=n_days,
            note=f"{largest['direction']} on {largest['study_day'].date().isoformat()}; "
                 f"{n_big} of {len(rows)} shifts exceed twice the usual day-to-day swing "
                 f"({pooled:.2f})",
        )
    else:
        shift_largest = Estimate.missing("no change point was found", n=n_days,
                                         status=NONE_FOUND)
    estimates = {"n_shifts": Estimate(float(len(rows)), n=n_days, note=note),
                 "shift_largest": shift_largest}
    tables = {"daily": daily[["study_day", "mean", "n", "level"]],
              "change_points": change_points}
    if n_periods > 1:
        tables["period_levels"] = period_levels(daily, day_period, worse_sign)
        estimates["period_difference"] = _largest_difference(tables["period_levels"], n_days)
    return Family(estimates=estimates, tables=tables, params=params)


def _segment(y: np.ndarray, penalty: float, min_size: int) -> tuple[list[int], list[int]]:
    """PELT's and the exact optimal partitioning's segment starts in one period's days."""
    found = pelt_changepoints(y, penalty, min_size)
    exact = optimal_partition(y, penalty, min_size)
    if penalised_cost(y, exact, penalty) < penalised_cost(y, found, penalty) - 1e-9 * (
            1.0 + penalty):
        return found, exact
    return found, found


def period_levels(daily: pd.DataFrame, day_period: np.ndarray, worse_sign: float
                  ) -> pd.DataFrame:
    """Per measurement period: its days, mean of the daily means, its level at the start and
    the end (the segment levels), and the difference from the previous period's end level to
    this period's start level (+ = worse; NaN for the first period)."""
    frame = daily.assign(period=day_period)
    g = frame.groupby("period", sort=True)
    out = pd.DataFrame({"first_day": g["study_day"].min(), "last_day": g["study_day"].max(),
                        "days": g.size(), "mean": g["mean"].mean(),
                        "level_start": g["level"].first(), "level_end": g["level"].last()})
    out["difference"] = worse_sign * (out["level_start"] - out["level_end"].shift(1))
    return out.rename_axis("period").reset_index()


def _largest_difference(levels: pd.DataFrame, n_days: int) -> Estimate:
    """The largest level difference between consecutive periods (+ = worse)."""
    diffs = levels["difference"].iloc[1:].to_numpy(float)
    k = int(np.argmax(np.abs(diffs)))
    row = levels.iloc[k + 1]
    return Estimate(float(diffs[k]), n=n_days,
                    note=f"period {int(row['period']) - 1} to period {int(row['period'])} "
                         f"({pd.Timestamp(row['first_day']).date().isoformat()}): level at "
                         "the start of a period minus the level at the end of the one before; "
                         "a difference between periods, not a shift")


def shift_rows(results: ParticipantResults) -> list[dict[str, Any]]:
    """Rows of out/shifts.csv for one participant (one per detected shift)."""
    family = results.families.get("shifts")
    if family is None or "change_points" not in family.tables:
        return []
    table = family.tables["change_points"]
    return [
        {
            "participant": results.participant,
            "date": pd.Timestamp(day).date().isoformat(),
            "direction": direction,
            "size": float(size),
            "method": method,
        }
        for day, direction, size, method in zip(
            table["study_day"], table["direction"], table["size"], table["method"], strict=False
        )
    ]
