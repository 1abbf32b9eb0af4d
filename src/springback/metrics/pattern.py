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

import numpy as np
import pandas as pd
from scipy import stats

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
CAVEAT = ("This says which pattern the numbers resemble most. It is not a diagnosis and does "
          "not predict what will happen.")


def _value(family: Family | None, name: str) -> float | None:
    """Return an estimate's value if the family reports it and it is a number."""
    if family is None or name not in family.estimates:
        return None
    est: Estimate = family.estimates[name]
    return float(est.value) if est.ok else None


def _slowing(warnings: Family | None, alpha: float) -> tuple[bool, list[str]]:
    """Whether inertia or variance rose with surrogate p < alpha, and what was seen."""
    seen, found = [], False
    for label, words in (("inertia", "carry-over (inertia)"), ("variance", "variability")):
        tau = _value(warnings, f"warning_tau_{label}")
        p = _value(warnings, f"warning_p_{label}")
        if tau is None or p is None:
            continue
        rose = tau > 0 and p < alpha
        found |= rose
        seen.append(f"{words} {'rose' if rose else 'did not clearly rise'} over the study "
                    f"(Kendall tau {tau:.2f}, surrogate p {p:.3f})")
    if not seen:
        seen.append("no early-warning trend could be computed")
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


def _staircase(cps: pd.DataFrame) -> tuple[bool, str]:
    """Whether the largest shift is one of a run of same-direction steps it does not dominate."""
    if cps.empty:
        return False, ""
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
        return False, ""
    span = (cps["study_day"].iloc[b] - cps["study_day"].iloc[a]).days
    return True, (f"the change came as {b - a + 1} steps in the same direction over {span} "
                  f"days, the largest only {share:.0%} of the total")


def pattern_family(families: Mapping[str, Family], settings: StudySettings) -> Family:
    """Summarise which pattern of change the computed families resemble most."""
    shifts, land = families.get("shifts"), families.get("landscape")
    warnings = families.get("warnings")
    alpha = settings.metrics.alpha
    daily = shifts.tables.get("daily") if shifts else None
    if shifts is None or daily is None or "level" not in daily or len(daily) < 2:
        reason = "there were too few days with answers to judge a pattern of change"
        return Family(params={"resembles": NONE, "evidence": [reason],
                              "evidence_by_pattern": {NONE: [reason]},
                              "what_would_change": ["more days of answers"], "caveat": CAVEAT})
    cps = shifts.tables["change_points"]
    big = cps[cps["exceeds_swings"].astype(bool)]
    s = float(shifts.params.get("noise_sd", 0.0))
    days = ((daily["study_day"] - daily["study_day"].iloc[0]).dt.days).to_numpy(dtype=float)
    y, level = daily["mean"].to_numpy(float), daily["level"].to_numpy(float)
    trend = _trend(days, y, level, len(cps), s)
    stairs, stairs_text = _staircase(cps)
    slowing, slow_seen = _slowing(warnings, alpha)
    valleys, switches = _value(land, "landscape_valleys"), _value(land, "switches")
    bc, dip_p = _value(land, "bimodality_coefficient"), _value(land, "dip_p")
    rising = "worse" if settings.higher_is_worse(settings.about) else "better"

    ev: dict[str, list[str]] = {p: [] for p in PATTERNS}
    if valleys is not None:
        ev[SWITCHING].append(f"the mood landscape has {valleys:.0f} valley(s)")
    if switches is not None:
        ev[SWITCHING].append(f"the mood changed between the two resting places {switches:.0f} "
                             "times")
    if bc is not None:
        ev[SWITCHING].append(f"the bimodality coefficient is {bc:.2f} "
                             f"({'above' if bc > 5 / 9 else 'not above'} 0.56)")
    if dip_p is not None:
        ev[SWITCHING].append(f"the dip test gives p = {dip_p:.3f}")
    for _, row in big.iterrows():
        text = (f"the daily averages moved {abs(row['size']):.1f} points towards feeling "
                f"{row['direction']} around {row['study_day'].date().isoformat()}, more than "
                f"{SWING_FACTOR:g} times the usual day-to-day swing")
        if row.get("questionnaire_nearby"):
            text += f"; questionnaire: {row['questionnaire_nearby']}"
        ev[SHIFT_SLOWING].append(text)
        ev[SHIFT_NO_SLOWING].append(text)
    if len(big) == 0:
        ev[SHIFT_SLOWING].append("no change point was larger than the usual day-to-day swings")
        ev[SHIFT_NO_SLOWING].append(ev[SHIFT_SLOWING][-1])
    ev[SHIFT_SLOWING] += slow_seen
    ev[SHIFT_NO_SLOWING] += slow_seen
    ev[GRADUAL].append(f"the steady trend over the study amounts to {trend['drift']:+.1f} points "
                       f"(day-to-day noise about {s:.1f})")
    ev[GRADUAL].append("a steady (straight or bent) line describes the daily averages "
                       f"{'better than' if trend['line_better'] else 'less well than'} steps")

    dirs = list(big["direction"])
    alternating = len(dirs) >= MIN_ALTERNATING and all(
        a != b for a, b in itertools.pairwise(dirs))
    two_peaked = (bc is not None and bc > 5 / 9) or (dip_p is not None and dip_p < alpha)
    if alternating:
        ev[SWITCHING].append(f"the daily averages went back and forth in {len(dirs)} large "
                             "steps of alternating direction")
    if stairs:
        ev[GRADUAL].append(stairs_text)
        ev[SHIFT_SLOWING].append(stairs_text)
        ev[SHIFT_NO_SLOWING].append(stairs_text)
    if (valleys == 2 and (switches or 0) >= MIN_SWITCHES) or (alternating and two_peaked):
        resembles = SWITCHING
        change = ["fewer switches, or a second resting place that disappears at other "
                  "smoothing, would weaken this reading",
                  "a run of weeks in one state only would suggest a lasting shift instead"]
    elif len(big) > 0 and not trend["line_better"] and not stairs:
        resembles = SHIFT_SLOWING if slowing else SHIFT_NO_SLOWING
        change = ["more weeks after the shift would show whether the new level holds",
                  "if the level drifts back, the change was a passing episode"]
        change.append("early-warning trends are often absent or spurious in one person's data; "
                      "their presence or absence is weak evidence either way")
    elif trend["slope_excludes_zero"] and abs(trend["drift"]) > SWING_FACTOR * s:
        resembles = GRADUAL
        falling = "better" if rising == "worse" else "worse"
        direction = rising if trend["drift"] > 0 else falling
        ev[GRADUAL].append(f"the daily averages drifted towards feeling {direction}")
        change = ["a sudden step in the coming weeks would point to an abrupt shift instead",
                  "a levelling off would show the drift has stopped"]
    else:
        resembles = NONE
        ev[NONE].append("no shift, steady trend or switching between two states stood out "
                        "from the day-to-day ups and downs")
        change = ["a larger or longer-lasting change than the usual day-to-day swings",
                  "more weeks of answers make smaller changes visible"]
    return Family(params={"resembles": resembles, "evidence": ev[resembles],
                          "evidence_by_pattern": ev, "what_would_change": change,
                          "caveat": CAVEAT, "slowing_seen": slowing,
                          "drift": trend["drift"], "line_better_than_steps": trend["line_better"]})
