"""The course of the mood level itself: no clear change, gradual change, an abrupt shift,
switching between two states, or not enough data. A cautious description, never a diagnosis.

The kinds of change are those described for systems with alternative states (Scheffer et al.
2009, "Early-warning signals for critical transitions", Nature 461:53-59; Dakos, van Nes &
Scheffer 2013, "Flickering as an early warning signal", Theoretical Ecology 6:309-317).

Rules, in this order (thresholds are those of the family that computed the numbers):
1. switching: the landscape has two robust valleys and the mood switched at least
   MIN_SWITCHES times (two round trips), or at least MIN_ALTERNATING large day-level shifts
   turn back at least MIN_ALTERNATING - 1 times (up, down, up: a same-direction pair on the
   way, as a level climbing out of a well in two steps, still counts) while the bimodality
   coefficient exceeds 5/9 or the dip test gives p < alpha (slow switching seen in daily means
   before the prompt-level landscape separates it);
2. abrupt shift: a change point larger than twice the usual day-to-day swing that *lasts*,
   and steps describe the daily means better than a gradual course. Steps: the PELT
   segmentation fits the daily means better than a straight line or a broken line with one
   knot (for drifts that start mid-study), penalised as PELT is: 2 ln n per change point,
   ln n for a slope, 3 ln n for slope, bend and knot, residuals in units of the day-to-day
   noise, i.e. BIC with known variance (Schwarz 1978, Annals of Statistics 6:461-464).
   Lasts: the largest large change point has at least PERSIST_DAYS days on either side; in
   the shift's direction, the mean of all days after it differs from the mean of all days
   before it by more than twice the swing, and so does the step over and above a straight
   line (least squares on intercept, day and step: a steady drift also makes the days after
   a point differ from those before); and the gradual course does not beat the model with
   that one step alone by more than BARE_MENTION (Kass & Raftery 1995, JASA 90:773-795). A
   change point that does not last (an excursion that comes back, a swing in the last days)
   is not a shift: slow processes (a long half-life, a variance that grows) wander for days
   at a time, and on simulated people with rising half-life and rising variance such wanders
   were read as shifts in about half of them without this test; with it, a jump of two SDs
   is still read as a shift in about nine in ten simulated people
   (tests/findings/test_calibration.py). A passing episode that returns to the usual level
   is therefore not a shift either (its evidence `shift_did_not_last`, with the date, the
   size and both level changes, says so); it is read by rule 4;
   a staircase (the largest step is less than half of a run of same-direction steps around
   it) is gradual, not abrupt;
3. gradual change: the Theil-Sen slope of the daily means (Sen 1968, JASA 63:1379-1389) has a
   95% interval that excludes 0 and the drift over the study exceeds twice the day-to-day
   noise; with several measurement periods the slope is taken within periods (pairs of days
   in the same period, Hirsch, Slack & Smith 1982) and the line has a level per period, so a
   difference between periods is never read as a drift through the weeks nobody answered;
4. passing episode: a segment of the daily level of at least EPISODE_MIN_DAYS days lies more
   than twice the swing away from the segments on both sides (same direction), and the level
   came back (those two differ by less than twice the swing), with a large change point among
   them: the mood dipped or rose for a while and came back;
5. otherwise no clear change.
PERSIST_DAYS (a week, the span over which weekly questionnaires can bracket a shift) and the
twice-the-swing level change are design choices, calibrated on the simulated classes of
tests/findings/test_calibration.py.
Certainty: `clear` when the evidence is strong on every count (a shift of more than
CLEAR_SHIFT_FACTOR swings whose step model wins by more than CLEAR_BIC, "very strong" on the
scale of Kass & Raftery 1995, JASA 90:773-795; a drift of more than CLEAR_DRIFT_FACTOR times
the noise; switching with both the landscape and the alternating steps agreeing), else
`some_signs`; no clear change is `no_clear_sign`.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from typing import Any, cast

import numpy as np
import pandas as pd
from scipy import stats

from springback.findings.records import Finding, missing
from springback.metrics.landscape import BC_THRESHOLD
from springback.metrics.results import Estimate, Family
from springback.metrics.shifts import SWING_FACTOR

COURSES = ("no_clear_change", "passing_episode", "gradual_change", "abrupt_shift", "switching",
           "not_enough_data")
MIN_SWITCHES = 4
MIN_ALTERNATING = 3
"""Large day-level steps alternating in direction that read as switching (with two peaks)."""
PERSIST_DAYS = 7
"""Days needed on either side of a change point for it to read as a lasting shift."""
STAIRCASE_SHARE = 0.5
"""A largest step below this share of its same-direction run reads as a drift, not a jump."""
EPISODE_MIN_DAYS = 3
"""Days the level must stay away, and days back at the usual level after, for a passing
episode (design choice: longer than a bad day or two, calibrated in test_calibration.py)."""
BARE_MENTION = 2.0
"""A gradual course that beats the one-step model by more than this (BIC, on the 2 ln B scale)
reads as gradual: Kass & Raftery 1995 call a difference up to 2 "not worth more than a bare
mention"."""
CLEAR_SHIFT_FACTOR = 3.0
CLEAR_BIC = 10.0
CLEAR_DRIFT_FACTOR = 3.0


def value(family: Family | None, name: str) -> float | None:
    """An estimate's value if the family reports it and it is a number, else None."""
    if family is None or name not in family.estimates:
        return None
    est: Estimate = family.estimates[name]
    return float(cast(float, est.value)) if est.ok else None


def within_slopes(days: np.ndarray, y: np.ndarray, groups: np.ndarray,
                  alpha: float = 0.95) -> tuple[float, float, float]:
    """Sen's slope over pairs of days in the same measurement period, with its confidence
    interval: the seasonal Kendall slope estimator of Hirsch, Slack & Smith 1982 ("Techniques
    of trend analysis for monthly water quality data", Water Resources Research 18:107-121),
    periods in the place of seasons. The interval takes the ranks (N -+ z sqrt(Var S)) / 2 of
    the N sorted pairwise slopes (as scipy counts them), Var S the sum of each period's
    n(n - 1)(2n + 5)/18 (no ties in the days); with one period it is scipy's `theilslopes` on
    untied data."""
    slopes = []
    var_s = 0.0
    for g in np.unique(groups):
        x, v = days[groups == g], y[groups == g]
        i, j = np.triu_indices(len(x), 1)
        slopes.append((v[j] - v[i]) / (x[j] - x[i]))
        var_s += len(x) * (len(x) - 1) * (2 * len(x) + 5) / 18.0
    pairs = np.sort(np.concatenate(slopes))
    z = stats.norm.ppf(0.5 + alpha / 2.0)
    c = z * math.sqrt(var_s)
    lower = int(np.round((len(pairs) - c) / 2.0)) - 1
    upper = int(np.round((len(pairs) + c) / 2.0))
    lower, upper = max(lower, 0), min(upper, len(pairs) - 1)
    return float(np.median(pairs)), float(pairs[lower]), float(pairs[upper])


def trend(days: np.ndarray, y: np.ndarray, level: np.ndarray, n_cp: int, s: float,
          groups: np.ndarray | None = None) -> dict[str, float | bool]:
    """Compare a gradual course (line or broken line) with the step model of PELT.

    With `groups` (the measurement period of each day, more than one) the slope is taken
    within periods only and each period has its own intercept, as the step model has its own
    levels per period: a difference between periods says nothing about how the mood changed
    while nobody answered (it is `period_difference` of the shifts family)."""
    n = len(y)
    scale = s * s if s > 0 else float(np.var(y)) or 1.0
    if groups is not None and len(np.unique(groups)) > 1:
        _, lo, hi = within_slopes(days, y, groups)
        base = (groups[:, None] == np.unique(groups)[None, :]).astype(float)
    else:
        groups = None
        _, _, lo, hi = stats.theilslopes(y, days, alpha=0.95)
        base = np.ones((n, 1))
    if groups is None:
        fit = np.polyval(np.polyfit(days, y, 1), days)
    else:
        design = np.column_stack([base, days])
        fit = design @ np.linalg.lstsq(design, y, rcond=None)[0]
    cost_gradual = float(np.sum((y - fit) ** 2)) / scale + math.log(n)
    for knot in days[2:n - 2]:
        design = np.column_stack([base, days, np.maximum(days - knot, 0.0)])
        coef, *_ = np.linalg.lstsq(design, y, rcond=None)
        cost = float(np.sum((y - design @ coef) ** 2)) / scale + 3 * math.log(n)
        if cost < cost_gradual:
            fit, cost_gradual = design @ coef, cost
    cost_step = float(np.sum((y - level) ** 2)) / scale + 2 * n_cp * math.log(n)
    if groups is None:
        drift = float(fit[-1] - fit[0])
    else:
        drift = float(sum(fit[groups == g][-1] - fit[groups == g][0] for g in np.unique(groups)))
    return {"drift": drift, "slope_low": float(lo), "slope_high": float(hi),
            "slope_excludes_zero": bool(lo > 0 or hi < 0),
            "bic_gradual_minus_step": cost_gradual - cost_step,
            "line_better": cost_gradual <= cost_step}


def day_groups(daily: pd.DataFrame, shifts: Family) -> np.ndarray | None:
    """The measurement period of each daily row (from the shifts family's `period_levels`),
    or None with one period."""
    periods = shifts.tables.get("period_levels")
    if periods is None or len(periods) < 2:
        return None
    starts = pd.to_datetime(periods["first_day"]).to_numpy()
    return np.searchsorted(starts, pd.to_datetime(daily["study_day"]).to_numpy(),
                           side="right") - 1


def staircase(cps: pd.DataFrame) -> dict[str, Any] | None:
    """Describe the same-direction run around the largest shift if it does not dominate it."""
    if cps.empty:
        return None
    sizes = cps["size"].to_numpy(float)
    k = int(np.argmax(np.abs(sizes)))
    sign = np.sign(sizes[k])
    a = k
    while a > 0 and np.sign(sizes[a - 1]) == sign:
        a -= 1
    b = k
    while b < sizes.size - 1 and np.sign(sizes[b + 1]) == sign:
        b += 1
    total = float(np.sum(sizes[a:b + 1]))
    share = abs(sizes[k]) / abs(total)
    if b == a or share >= STAIRCASE_SHARE:
        return None
    span = (cps["study_day"].iloc[b] - cps["study_day"].iloc[a]).days
    return {"code": "staircase", "steps": b - a + 1, "days": span, "share": share}


def lasting(days: np.ndarray, y: np.ndarray, level: np.ndarray, at: int, s: float,
            swing: float) -> dict[str, Any]:
    """Whether the change point starting day `at` lasts: days on both sides, the level change
    (all days after against all days before, and the step over and above a straight-line
    trend), and the one-step model against a gradual one."""
    up = 1.0 if level[at] > level[at - 1] else -1.0
    after_step = np.arange(len(y)) >= at
    contrast = up * float(np.mean(y[after_step]) - np.mean(y[~after_step]))
    design = np.column_stack([np.ones(len(y)), days, after_step])
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    net = up * float(coef[2])
    before, after = float(days[at] - days[0]), float(days[-1] - days[at] + 1)
    one_step = np.where(after_step, np.mean(y[after_step]), np.mean(y[~after_step]))
    tr = trend(days, y, one_step, 1, s)
    lasts = (before >= PERSIST_DAYS and after >= PERSIST_DAYS
             and min(contrast, net) > SWING_FACTOR * swing
             and float(tr["bic_gradual_minus_step"]) > -BARE_MENTION)
    return {"lasts": bool(lasts), "contrast": contrast, "net_of_trend": net,
            "days_before": before, "days_after": after,
            "bic": float(tr["bic_gradual_minus_step"])}


def episode(daily: pd.DataFrame, swing: float, higher_is_worse: bool) -> dict[str, Any] | None:
    """The largest passing episode of the segmented daily level: a segment of at least
    EPISODE_MIN_DAYS days that lies more than twice the swing away from the segments on both
    sides, in the same direction, while those two differ by less than twice the swing (the
    level came back) and the one after lasts EPISODE_MIN_DAYS days too. None without one."""
    level = daily["level"].to_numpy(float)
    if level.size < 3 or not swing > 0:
        return None
    starts = [0, *(int(i) for i in np.flatnonzero(np.diff(level) != 0) + 1), level.size]
    runs = list(itertools.pairwise(starts))
    best: dict[str, Any] | None = None
    for k in range(1, len(runs) - 1):
        (a, _), (c, d), (e, f) = runs[k - 1], runs[k], runs[k + 1]
        away, before, after = level[c], level[a], level[e]
        sign = np.sign(away - before)
        gap = float(min((away - before) * sign, (away - after) * sign))
        if (d - c < EPISODE_MIN_DAYS or f - e < EPISODE_MIN_DAYS
                or np.sign(away - before) != np.sign(away - after)
                or gap <= SWING_FACTOR * swing or abs(after - before) >= SWING_FACTOR * swing):
            continue
        if best is None or gap > best["size"]:
            day = daily["study_day"]
            best = {"start": pd.Timestamp(day.iloc[c]).date().isoformat(),
                    "end": pd.Timestamp(day.iloc[d - 1]).date().isoformat(),
                    "days": int((pd.Timestamp(day.iloc[d - 1]) - pd.Timestamp(day.iloc[c])).days)
                    + 1, "size": float(gap),
                    "direction": "worse" if (away > before) == higher_is_worse else "better"}
    return best


def course(participant: str, families: Mapping[str, Family], alpha: float,
           higher_is_worse: bool) -> Finding:
    """Read the course of the mood level from the shifts and landscape families."""
    shifts, land = families.get("shifts"), families.get("landscape")
    daily = shifts.tables.get("daily") if shifts else None
    if shifts is None or daily is None or "level" not in daily or len(daily) < 2:
        n_days = 0 if daily is None else len(daily)
        reason = shifts.estimates["n_shifts"].note if shifts and "n_shifts" in \
            shifts.estimates and not shifts.estimates["n_shifts"].ok else \
            "there were too few days with answers to judge the course"
        return missing(participant, "course", reason, days=n_days)
    cps = shifts.tables["change_points"]
    big = cps[cps["exceeds_swings"].astype(bool)]
    s = float(shifts.params.get("noise_sd", 0.0))
    swing = float(shifts.params.get("within_segment_sd", s))
    days = ((daily["study_day"] - daily["study_day"].iloc[0]).dt.days).to_numpy(dtype=float)
    y, level = daily["mean"].to_numpy(float), daily["level"].to_numpy(float)
    tr = trend(days, y, level, len(cps), s, day_groups(daily, shifts))
    stairs = staircase(cps)
    shift: dict[str, Any] | None = None
    if not big.empty:
        sizes = big["size"].to_numpy(float)
        k = int(np.argmax(np.abs(sizes)))
        largest_day = big["study_day"].to_numpy()[k]
        at = int(np.searchsorted(daily["study_day"].to_numpy(), largest_day))
        shift = lasting(days, y, level, at, s, swing)
        shift.update(date=pd.Timestamp(largest_day).date().isoformat(), size=abs(sizes[k]))
    valleys, switches = value(land, "landscape_valleys"), value(land, "switches")
    bc, dip_p = value(land, "bimodality_coefficient"), value(land, "dip_p")
    dirs = list(big["direction"])
    turns = sum(a != b for a, b in itertools.pairwise(dirs))
    alternating = len(dirs) >= MIN_ALTERNATING and turns >= MIN_ALTERNATING - 1
    two_peaked = (bc is not None and bc > BC_THRESHOLD) or (dip_p is not None and dip_p < alpha)
    two_valleys = valleys == 2 and (switches or 0) >= MIN_SWITCHES
    drift_worse = (tr["drift"] > 0) == higher_is_worse

    numbers: dict[str, Any] = {
        "days": len(daily), "change_points": len(cps), "large_shifts": len(big),
        "noise_sd": s, "drift": tr["drift"], "slope_low": tr["slope_low"],
        "slope_high": tr["slope_high"], "bic_gradual_minus_step": tr["bic_gradual_minus_step"],
        "valleys": valleys, "switches": switches, "bimodality_coefficient": bc, "dip_p": dip_p}
    if shift is not None:
        numbers.update(shift_contrast=shift["contrast"],
                       shift_net_of_trend=shift["net_of_trend"],
                       days_before_shift=shift["days_before"],
                       days_after_shift=shift["days_after"],
                       bic_gradual_minus_one_step=shift["bic"])
    evidence: list[dict[str, Any]] = []
    if two_valleys or (alternating and two_peaked):
        for code, n in (("valleys", valleys), ("switches", switches)):
            if n is not None:
                evidence.append({"code": code, "n": n})
        if bc is not None:
            evidence.append({"code": "bc_above" if bc > BC_THRESHOLD else "bc_not_above",
                             "bc": bc})
        if dip_p is not None:
            evidence.append({"code": "dip", "p": dip_p})
        if alternating:
            evidence.append({"code": "alternating", "n": len(dirs)})
        sure = two_valleys and alternating and two_peaked
        return Finding(participant, "course", "switching", "clear" if sure else "some_signs",
                       numbers, evidence=tuple(evidence))
    if shift is not None and shift["lasts"] and not tr["line_better"] and not stairs:
        ordered = big.iloc[np.argsort(-np.abs(big["size"].to_numpy(float)), kind="stable")]
        largest = ordered.iloc[0]
        for row in cast(Any, ordered.itertuples()):
            evidence.append({"code": f"shift_{row.direction}", "size": abs(row.size),
                             "date": row.study_day.date().isoformat(), "factor": SWING_FACTOR})
            if row.questionnaire_nearby:
                evidence.append({"code": "questionnaire_nearby",
                                 "text": row.questionnaire_nearby})
        evidence.append({"code": "steps_better"})
        first = pd.Timestamp(big["study_day"].iloc[0])
        numbers.update(direction=str(largest["direction"]), size=abs(float(largest["size"])),
                       date=pd.Timestamp(largest["study_day"]).date().isoformat(),
                       first_date=first.date().isoformat(), swing_sd=swing)
        sure = (abs(float(largest["size"])) > CLEAR_SHIFT_FACTOR * swing
                and shift["bic"] > CLEAR_BIC)
        return Finding(participant, "course", "abrupt_shift", "clear" if sure else "some_signs",
                       numbers, evidence=tuple(evidence))
    if tr["slope_excludes_zero"] and abs(tr["drift"]) > SWING_FACTOR * s:
        evidence += [{"code": "drift", "drift": tr["drift"], "noise": s},
                     *([{"code": "line_better"}] if tr["line_better"] else [])]
        evidence += [stairs] if stairs else []
        evidence.append({"code": "drift_worse" if drift_worse else "drift_better"})
        numbers["direction"] = "worse" if drift_worse else "better"
        sure = abs(tr["drift"]) > CLEAR_DRIFT_FACTOR * s
        return Finding(participant, "course", "gradual_change",
                       "clear" if sure else "some_signs", numbers, evidence=tuple(evidence))
    passing = episode(daily, swing, higher_is_worse) if not big.empty else None
    if passing is not None:
        numbers.update(direction=passing["direction"], size=passing["size"],
                       episode_start=passing["start"], episode_end=passing["end"],
                       episode_days=passing["days"], swing_sd=swing)
        evidence.append({"code": f"episode_{passing['direction']}", **passing})
        if shift is not None and not shift["lasts"]:
            evidence.append({"code": "shift_did_not_last", "date": shift["date"],
                             "size": shift["size"], "contrast": shift["contrast"],
                             "net_of_trend": shift["net_of_trend"],
                             "days_before": shift["days_before"],
                             "days_after": shift["days_after"], "factor": SWING_FACTOR})
        sure = passing["size"] > CLEAR_SHIFT_FACTOR * swing
        return Finding(participant, "course", "passing_episode",
                       "clear" if sure else "some_signs", numbers, evidence=tuple(evidence))
    if shift is None:
        evidence.append({"code": "no_big_shift"})
    elif shift["lasts"] or tr["line_better"]:
        evidence.append({"code": "line_better"})
    else:
        evidence.append({"code": "shift_did_not_last", "date": shift["date"],
                         "size": shift["size"], "contrast": shift["contrast"],
                         "net_of_trend": shift["net_of_trend"],
                         "days_before": shift["days_before"], "days_after": shift["days_after"],
                         "factor": SWING_FACTOR})
    evidence.append({"code": "nothing_stood_out"})
    return Finding(participant, "course", "no_clear_change", "no_clear_sign", numbers,
                   evidence=tuple(evidence))
