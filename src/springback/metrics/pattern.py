"""Which pattern of change the data resemble most: a cautious summary, never a diagnosis.

The candidates follow the kinds of change described for systems with alternative states
(Scheffer et al. 2009, "Early-warning signals for critical transitions", Nature 461:53-59;
Dakos, van Nes & Scheffer 2013, "Flickering as an early warning signal", Theoretical Ecology
6:309-317): a gradual change, an abrupt shift preceded by slowing down, an abrupt shift without
such a warning (Hastings & Wysham 2010, "Regime shifts in ecological systems can occur with no
warning", Ecology Letters 13:464-472), switching between two states, or no clear change.

Rules, applied in this order (each threshold is the one the family that computed it uses):
1. switching between two states: the landscape has two robust valleys and the mood switched
   at least MIN_SWITCHES times (two round trips), or at least MIN_ALTERNATING large day-level
   shifts alternate in direction while the bimodality coefficient exceeds 5/9 or the dip test
   gives p < alpha (slow switching seen in daily means before the prompt-level landscape
   separates it);
2. an abrupt shift: a change point larger than twice the usual day-to-day swing, and the step
   model fits the daily means better than a gradual course, i.e. a straight line or a broken
   line with one knot (drifts that start mid-study). Penalised as PELT does: 2 ln n per change
   point, ln n for a slope, 3 ln n for slope, bend and knot, residuals in units of the
   day-to-day noise, i.e. BIC with known variance (Schwarz 1978). It is "after slowing" when
   the early-warning family reports a rise in inertia or variance with surrogate p below
   alpha, and "without slowing" otherwise. A staircase (the largest step is less than half of
   a run of same-direction steps around it) is not read as abrupt;
3. gradual change: the Theil-Sen slope of the daily means (Sen 1968, JASA 63:1379-1389) has a
   95% interval that excludes 0 and the drift of the gradual course over the study exceeds
   twice the day-to-day noise;
4. otherwise no clear change.
The words are "resembles": with one person's data these are descriptions, not diagnoses or
predictions (Boettiger & Hastings 2012, J R Soc Interface 9:2527-2539, on error rates).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from typing import Any, cast

import numpy as np
import pandas as pd
from scipy import stats

from springback.metrics.landscape import BC_THRESHOLD
from springback.metrics.results import Estimate, Family
from springback.metrics.shifts import SWING_FACTOR
from springback.settings import StudySettings

GRADUAL = "gradual change"
SHIFT_SLOWING = "abrupt shift after slowing"
SHIFT_NO_SLOWING = "abrupt shift without slowing"
SWITCHING = "switching between two states"
NONE = "no clear change"
PATTERNS = (GRADUAL, SHIFT_SLOWING, SHIFT_NO_SLOWING, SWITCHING, NONE)
MIN_SWITCHES = 4
MIN_ALTERNATING = 3
STAIRCASE_SHARE = 0.5
"""A largest step below this share of its same-direction run reads as a drift, not a jump."""
"""Large day-level steps alternating in direction that read as switching (with two peaks)."""
PHRASES: dict[str, str] = {
    # Evidence; fields are numbers (or ISO dates) so that templates can format and translate.
    "valleys": "the mood landscape has {n:.0f} valley(s)",
    "switches": "the mood changed between the two resting places {n:.0f} times",
    "bc_above": "the bimodality coefficient is {bc:.2f}, above 0.56",
    "bc_not_above": "the bimodality coefficient is {bc:.2f}, not above 0.56",
    "dip": "the dip test gives p = {p:.3f}",
    "alternating": "the daily averages went back and forth in {n} large steps of alternating "
                   "direction",
    "shift_worse": "the daily averages moved {size:.1f} points towards feeling worse around "
                   "{date}, more than {factor:g} times the usual day-to-day swing",
    "shift_better": "the daily averages moved {size:.1f} points towards feeling better around "
                    "{date}, more than {factor:g} times the usual day-to-day swing",
    "questionnaire_nearby": "questionnaire scores near that date: {text}",
    "no_big_shift": "no change point was larger than the usual day-to-day swings",
    "inertia_rose": "carry-over (inertia) rose over the study (Kendall tau {tau:.2f}, "
                    "surrogate p {p:.3f})",
    "inertia_flat": "carry-over (inertia) did not clearly rise (Kendall tau {tau:.2f}, "
                    "surrogate p {p:.3f})",
    "variance_rose": "variability rose over the study (Kendall tau {tau:.2f}, surrogate p "
                     "{p:.3f})",
    "variance_flat": "variability did not clearly rise (Kendall tau {tau:.2f}, surrogate p "
                     "{p:.3f})",
    "no_warning_trend": "no early-warning trend could be computed",
    "staircase": "the change came as {steps} steps in the same direction over {days} days, "
                 "the largest only {share:.0%} of the total",
    "drift": "the steady trend over the study amounts to {drift:+.1f} points (day-to-day noise "
             "about {noise:.1f})",
    "line_better": "a steady (straight or bent) line describes the daily averages better than "
                   "steps",
    "steps_better": "steps describe the daily averages better than a steady line",
    "drift_worse": "the daily averages drifted towards feeling worse",
    "drift_better": "the daily averages drifted towards feeling better",
    "nothing_stood_out": "no shift, steady trend or switching between two states stood out "
                         "from the day-to-day ups and downs",
    "too_few_days": "there were too few days with answers to judge a pattern of change",
    # What would change the reading.
    "fewer_switches": "fewer switches, or a second resting place that disappears at other "
                      "smoothing, would weaken this reading",
    "one_state_run": "a run of weeks in one state only would suggest a lasting shift instead",
    "more_weeks_after": "more weeks after the shift would show whether the new level holds",
    "drifts_back": "if the level drifts back, the change was a passing episode",
    "warnings_weak": "early-warning trends are often absent or spurious in one person's data; "
                     "their presence or absence is weak evidence either way",
    "sudden_step": "a sudden step in the coming weeks would point to an abrupt shift instead",
    "levelling_off": "a levelling off would show the drift has stopped",
    "larger_change": "a larger or longer-lasting change than the usual day-to-day swings",
    "more_weeks": "more weeks of answers make smaller changes visible",
    "more_days": "more days of answers",
}
"""English sentence per evidence or reading code (params 'evidence_codes' and
'what_would_change_codes' carry the codes with their numbers for other languages)."""
CAVEAT = ("This says which pattern the numbers resemble most. It is not a diagnosis and does "
          "not predict what will happen.")


def _value(family: Family | None, name: str) -> float | None:
    """Return an estimate's value if the family reports it and it is a number."""
    if family is None or name not in family.estimates:
        return None
    est: Estimate = family.estimates[name]
    return float(cast(float, est.value)) if est.ok else None


def _slowing(warnings: Family | None, alpha: float) -> tuple[bool, list[dict[str, Any]]]:
    """Whether inertia or variance rose with surrogate p < alpha, and what was seen."""
    seen: list[dict[str, Any]] = []
    found = False
    for label in ("inertia", "variance"):
        tau = _value(warnings, f"warning_tau_{label}")
        p = _value(warnings, f"warning_p_{label}")
        if tau is None or p is None:
            continue
        rose = tau > 0 and p < alpha
        found |= rose
        seen.append({"code": f"{label}_{'rose' if rose else 'flat'}", "tau": tau, "p": p})
    if not seen:
        seen.append({"code": "no_warning_trend"})
    return found, seen


def _trend(days: np.ndarray, y: np.ndarray, level: np.ndarray, n_cp: int, s: float
           ) -> dict[str, float | bool]:
    """Compare a gradual course (line or broken line) with the step model of PELT."""
    _, _, lo, hi = stats.theilslopes(y, days, alpha=0.95)
    n = len(y)
    scale = s * s if s > 0 else float(np.var(y)) or 1.0
    line = np.polyval(np.polyfit(days, y, 1), days)
    cost_line = float(np.sum((y - line) ** 2)) / scale + math.log(n)
    fit, cost_gradual = line, cost_line
    for knot in days[2:n - 2]:
        # A broken line (one knot, BIC: slope, bend and knot) for drifts that start mid-study.
        design = np.column_stack([np.ones(n), days, np.maximum(days - knot, 0.0)])
        coef, *_ = np.linalg.lstsq(design, y, rcond=None)
        cost = float(np.sum((y - design @ coef) ** 2)) / scale + 3 * math.log(n)
        if cost < cost_gradual:
            fit, cost_gradual = design @ coef, cost
    cost_step = float(np.sum((y - level) ** 2)) / scale + 2 * n_cp * math.log(n)
    return {"drift": float(fit[-1] - fit[0]), "slope_excludes_zero": bool(lo > 0 or hi < 0),
            "line_better": cost_gradual <= cost_step}


def _staircase(cps: pd.DataFrame) -> dict[str, Any] | None:
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


def _english(item: dict[str, Any]) -> str:
    """Render one evidence or reading item in plain English."""
    return PHRASES[item["code"]].format(**{k: v for k, v in item.items() if k != "code"})


def pattern_family(families: Mapping[str, Family], settings: StudySettings) -> Family:
    """Summarise which pattern of change the computed families resemble most."""
    shifts, land = families.get("shifts"), families.get("landscape")
    alpha = settings.metrics.alpha
    daily = shifts.tables.get("daily") if shifts else None
    if shifts is None or daily is None or "level" not in daily or len(daily) < 2:
        return _result(NONE, {NONE: [{"code": "too_few_days"}]}, ["more_days"], {})
    cps = shifts.tables["change_points"]
    big = cps[cps["exceeds_swings"].astype(bool)]
    s = float(shifts.params.get("noise_sd", 0.0))
    days = ((daily["study_day"] - daily["study_day"].iloc[0]).dt.days).to_numpy(dtype=float)
    y, level = daily["mean"].to_numpy(float), daily["level"].to_numpy(float)
    trend = _trend(days, y, level, len(cps), s)
    stairs = _staircase(cps)
    slowing, slow_seen = _slowing(families.get("warnings"), alpha)
    valleys, switches = _value(land, "landscape_valleys"), _value(land, "switches")
    bc, dip_p = _value(land, "bimodality_coefficient"), _value(land, "dip_p")
    dirs = list(big["direction"])
    alternating = len(dirs) >= MIN_ALTERNATING and all(
        a != b for a, b in itertools.pairwise(dirs))
    two_peaked = (bc is not None and bc > BC_THRESHOLD) or (dip_p is not None and dip_p < alpha)

    ev: dict[str, list[dict[str, Any]]] = {p: [] for p in PATTERNS}
    sw = ev[SWITCHING]
    if valleys is not None:
        sw.append({"code": "valleys", "n": valleys})
    if switches is not None:
        sw.append({"code": "switches", "n": switches})
    if bc is not None:
        sw.append({"code": "bc_above" if bc > BC_THRESHOLD else "bc_not_above", "bc": bc})
    if dip_p is not None:
        sw.append({"code": "dip", "p": dip_p})
    if alternating:
        sw.append({"code": "alternating", "n": len(dirs)})
    shift_ev: list[dict[str, Any]] = []
    largest_first = big.iloc[np.argsort(-np.abs(big["size"].to_numpy(float)), kind="stable")]
    for row in cast(Any, largest_first.itertuples()):
        shift_ev.append({"code": f"shift_{row.direction}", "size": abs(row.size),
                         "date": row.study_day.date().isoformat(), "factor": SWING_FACTOR})
        if row.questionnaire_nearby:
            shift_ev.append({"code": "questionnaire_nearby", "text": row.questionnaire_nearby})
    shift_ev = shift_ev or [{"code": "no_big_shift"}]
    shift_ev += slow_seen + ([stairs] if stairs else [])
    ev[SHIFT_SLOWING] = list(shift_ev)
    ev[SHIFT_NO_SLOWING] = list(shift_ev)
    ev[GRADUAL] += [{"code": "drift", "drift": trend["drift"], "noise": s},
                    {"code": "line_better" if trend["line_better"] else "steps_better"}]
    ev[GRADUAL] += [stairs] if stairs else []

    if (valleys == 2 and (switches or 0) >= MIN_SWITCHES) or (alternating and two_peaked):
        resembles, change = SWITCHING, ["fewer_switches", "one_state_run"]
    elif len(big) > 0 and not trend["line_better"] and not stairs:
        resembles = SHIFT_SLOWING if slowing else SHIFT_NO_SLOWING
        change = ["more_weeks_after", "drifts_back", "warnings_weak"]
    elif trend["slope_excludes_zero"] and abs(trend["drift"]) > SWING_FACTOR * s:
        resembles, change = GRADUAL, ["sudden_step", "levelling_off"]
        higher_worse = settings.higher_is_worse(settings.about)
        ev[GRADUAL].append({"code": "drift_worse" if (trend["drift"] > 0) == higher_worse
                            else "drift_better"})
    else:
        resembles, change = NONE, ["larger_change", "more_weeks"]
        ev[NONE].append({"code": "nothing_stood_out"})
    return _result(resembles, ev, change, {
        "slowing_seen": slowing, "drift": trend["drift"],
        "line_better_than_steps": trend["line_better"]})


def _result(resembles: str, ev: dict[str, list[dict[str, Any]]], change: list[str],
            extra: dict[str, Any]) -> Family:
    """Pack the reading: codes with their numbers for translation, and English sentences."""
    ev = {p: ev.get(p, []) for p in PATTERNS}
    return Family(params={
        "resembles": resembles,
        "evidence": [_english(e) for e in ev[resembles]],
        "evidence_by_pattern": {p: [_english(e) for e in items] for p, items in ev.items()},
        "evidence_codes": ev,
        "what_would_change": [PHRASES[c] for c in change],
        "what_would_change_codes": change,
        "caveat": CAVEAT,
        **extra,
    })
