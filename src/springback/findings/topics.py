"""The descriptive topics: level, variability, recovery, carry-over, questionnaires,
participation and the help a flag asks for. Each is one reading code with its numbers.

Cut-offs are design choices (said so beside each) unless a source is named.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import pandas as pd
from scipy import stats

from springback.findings.course import value
from springback.findings.records import Certainty, Finding, missing
from springback.metrics.questionnaires import RCI_Z
from springback.metrics.results import Estimate, Family, ParticipantResults
from springback.model import Flag
from springback.settings import StudySettings

LEVEL_THIRDS = (1 / 3, 2 / 3)
"""The mean's place on the scale, in thirds of its range (design choice)."""
VARIABILITY_SHARES = (0.10, 0.20)
"""RMSSD as a share of the scale's range: below the first is `small`, below the second
`moderate`, else `large` (design choice; the printed number is the RMSSD itself)."""
CARRY_OVER_CUTS = (0.1, 0.3, 0.5)
"""Lag-1 correlation: below 0.1 `none`, 0.3 `weak`, 0.5 `moderate`, else `strong` (Cohen 1988,
Statistical Power Analysis for the Behavioral Sciences, small / medium / large r)."""
MAX_SLOW_TREND_SHARE = 0.2
"""Carry-over is not read when more than this share of the ratings' variance is a slow (7-day)
trend: a drifting level makes neighbouring answers alike without any carry-over (stationary
simulated people stay below 0.08; design choice)."""
CLEAR_INTERVAL_RATIO = 3.0
"""A half-life whose 95% interval spans at most this factor is `clear` (design choice)."""
RCI_CLEAR_Z = 2.576
"""A reliable change index beyond the 99% two-sided normal quantile is `clear`; between 1.96
(Jacobson & Truax 1991, JCCP 59:12-19) and this, `some_signs`."""
PARTICIPATION_CUTS = (0.4, 0.75)
"""Answered share of prompts sent: below 0.4 `low`, below 0.75 `medium`, else `high` (design
choice)."""


def _est(results: ParticipantResults, name: str) -> Estimate | None:
    try:
        return results.estimate(name)
    except KeyError:
        return None


def _numbers(est: Estimate, name: str) -> dict[str, Any]:
    return {name: est.value, f"{name}_lower": est.lower, f"{name}_upper": est.upper,
            "n": est.n}


def level(results: ParticipantResults, scale: tuple[float, float],
          higher_is_worse: bool, course: str = "no_clear_change") -> Finding:
    """Where the mean lies on the scale: `better_side`, `middle` or `worse_side`; `changed`
    when the course reading found a shift, a drift or switching (a mean over the whole study
    then describes no time the person lived through)."""
    pid = results.participant
    mean = _est(results, "mean")
    if mean is None or not mean.ok:
        return missing(pid, "level", mean.note if mean else "no answers")
    low, high = scale
    desc = results.families.get("descriptives")
    typical = {k: (desc.params.get(k) if desc else None) for k in ("typical_low", "typical_high")}
    if not (math.isfinite(low) and math.isfinite(high)) or high <= low:
        return missing(pid, "level", "the scale's range is not known", mean=mean.value)
    pos = (float(mean.value or 0.0) - low) / (high - low)
    worse_pos = pos if higher_is_worse else 1 - pos
    reading = ("better_side" if worse_pos < LEVEL_THIRDS[0] else
               "middle" if worse_pos < LEVEL_THIRDS[1] else "worse_side")
    sd = value(desc, "sd")
    n = mean.n or 0
    half = 1.96 * sd / math.sqrt(n) if sd is not None and n > 1 else math.inf
    # Clear when the mean's 95% interval lies inside one third of the scale.
    edges = [low + c * (high - low) for c in LEVEL_THIRDS]
    m = float(mean.value or 0.0)
    sure = all(not (m - half < e < m + half) for e in edges)
    numbers = {"mean": m, "scale_low": low, "scale_high": high, "n": n, **typical,
               "place": reading}
    if course in ("gradual_change", "abrupt_shift", "switching"):
        return Finding(pid, "level", "changed", "clear", numbers)
    return Finding(pid, "level", reading, "clear" if sure else "some_signs", numbers)


def variability(results: ParticipantResults, scale: tuple[float, float]) -> Finding:
    """How large the moment-to-moment ups and downs are, from the RMSSD the booklet prints."""
    pid = results.participant
    rmssd = _est(results, "rmssd")
    if rmssd is None or not rmssd.ok:
        return missing(pid, "variability", rmssd.note if rmssd else "no successive answers")
    width = scale[1] - scale[0]
    if not math.isfinite(width) or width <= 0:
        return missing(pid, "variability", "the scale's range is not known")
    share = float(rmssd.value or 0.0) / width
    reading = ("small" if share < VARIABILITY_SHARES[0] else
               "moderate" if share < VARIABILITY_SHARES[1] else "large")
    return Finding(pid, "variability", reading, "clear",
                   {"rmssd": rmssd.value, "scale_range": width, "share_of_range": share,
                    "pairs": rmssd.n})


def recovery(results: ParticipantResults) -> Finding:
    """How quickly mood got halfway back after upsets and dips.

    The reading rests on one number, the pooled half-life across episodes (`basis`); the
    Kaplan-Meier median time back to the usual level and the whole series' Ornstein-Uhlenbeck
    half-life are kept beside it, and when either falls in another band the reading is
    `some_signs`, never `clear` (`others_agree` is false)."""
    pid = results.participant
    half = _est(results, "recovery_half_life_hours")
    episodes = _est(results, "n_episodes")
    n_ep = int(episodes.value or 0) if episodes is not None and episodes.ok else 0
    if half is None or not half.ok:
        return missing(pid, "recovery", half.note if half else "no upsets or dips were found",
                       episodes=n_ep)
    hours = float(half.value or 0.0)
    lo, hi = half.lower, half.upper
    sure = lo is not None and hi is not None and lo > 0 and hi / lo <= CLEAR_INTERVAL_RATIO
    reading = _recovery_time(hours)
    numbers: dict[str, Any] = {**_numbers(half, "half_life_hours"), "episodes": n_ep,
                               "basis": "pooled_half_life"}
    others = {}
    for name, key in (("median_recovery_hours", "km_median_hours"),
                      ("half_life_hours", "series_half_life_hours")):
        est = _est(results, name)
        if est is not None and est.ok and est.value is not None:
            numbers[key] = float(est.value)
            others[key] = _recovery_time(float(est.value))
    numbers["others_agree"] = all(v == reading for v in others.values())
    # One reading, from the pooled half-life; another measure in another band makes it unsure.
    clear = sure and numbers["others_agree"]
    return Finding(pid, "recovery", reading, "clear" if clear else "some_signs", numbers)


RECOVERY_HOURS = (12.0, 36.0)
"""Hours below which a return reads `within_hours`, then `within_a_day`, else `days` (design
choice: a waking day, a day and a half)."""


def _recovery_time(hours: float) -> str:
    return ("within_hours" if hours < RECOVERY_HOURS[0] else
            "within_a_day" if hours < RECOVERY_HOURS[1] else "days")


def carry_over(results: ParticipantResults) -> Finding:
    """How much one moment's mood carries into the next (lag-1 correlation, inertia)."""
    pid = results.participant
    inertia = _est(results, "inertia")
    if inertia is None or not inertia.ok:
        return missing(pid, "carry_over", inertia.note if inertia else "no consecutive pairs")
    drift = _est(results, "slow_trend_share")
    if drift is not None and drift.ok and float(drift.value or 0.0) > MAX_SLOW_TREND_SHARE:
        share = float(drift.value or 0.0)
        return missing(pid, "carry_over",
                       f"the level drifted during the study ({share:.0%} of the variation is a "
                       "slow trend), so carry-over from one moment to the next cannot be told "
                       "apart from the drift", inertia=inertia.value, slow_trend_share=share)
    r = float(inertia.value or 0.0)
    reading = ("none" if abs(r) < CARRY_OVER_CUTS[0] else "weak" if abs(r) < CARRY_OVER_CUTS[1]
               else "moderate" if abs(r) < CARRY_OVER_CUTS[2] else "strong")
    lo, hi = inertia.lower, inertia.upper
    certainty: Certainty
    if lo is None or hi is None:
        certainty = "cannot_tell"
    elif lo <= 0 <= hi:
        certainty = "no_clear_sign"
    else:
        certainty = "clear"
    numbers = _numbers(inertia, "inertia")
    half = _est(results, "half_life_hours")
    if half is not None:
        numbers["half_life_hours"] = half.value
        numbers["half_life_note"] = half.note if not half.ok else ""
    return Finding(pid, "carry_over", reading, certainty, numbers)


def questionnaires(results: ParticipantResults, settings: StudySettings) -> list[Finding]:
    """Per questionnaire with scores: the latest band and the reliable change."""
    pid = results.participant
    fam: Family | None = results.families.get("questionnaires")
    out: list[Finding] = []
    if fam is None:
        return out
    for key, spec in settings.questionnaires.items():
        scores = fam.tables.get(f"scores_{key}")
        if scores is None or scores.empty:
            continue
        topic = f"questionnaire_{key}"
        last = fam.estimates.get(f"questionnaire_last_{key}")
        rc = fam.estimates.get(f"reliable_change_{key}")
        numbers: dict[str, Any] = {
            "last": last.value if last else None, "band": last.note if last else "",
            "scores": len(scores), "higher_is": spec.higher_is}
        sudden = _sudden(fam, key)
        numbers["sudden_gains"] = sum(1 for e in sudden if e["kind"] == "gain")
        numbers["sudden_losses"] = sum(1 for e in sudden if e["kind"] == "loss")
        if sudden:
            numbers["sudden_first"] = sudden[0]["kind"]
            numbers["sudden_date"] = sudden[0]["date"]
            numbers["sudden_change"] = sudden[0]["change"]
        if rc is None or not rc.ok:
            reason = rc.note if rc else "only one score"
            out.append(Finding(pid, topic, "one_score" if len(scores) < 2 else
                               "no_reliable_change", "cannot_tell", numbers, reason))
            continue
        z = float(rc.value or 0.0)
        numbers["reliable_change_index"] = z
        if abs(z) <= RCI_Z:
            out.append(Finding(pid, topic, "no_reliable_change", "no_clear_sign", numbers))
            continue
        worse = (z > 0) == (spec.higher_is == "worse")
        out.append(Finding(pid, topic, "worsened" if worse else "improved",
                           "clear" if abs(z) > RCI_CLEAR_Z else "some_signs", numbers))
    return out


def _sudden(fam: Family, key: str) -> list[dict[str, Any]]:
    """The sudden gains and losses of one questionnaire (Tang & DeRubeis 1999 criteria, as
    the questionnaires family found and the chart marks them), in time order."""
    table = fam.tables.get(f"sudden_{key}")
    if table is None or table.empty:
        return []
    return [{"kind": str(kind), "date": str(when)[:10], "change": float(change)}
            for when, kind, change in zip(table["local_time"], table["kind"], table["change"],
                                          strict=True)]


def participation(results: ParticipantResults) -> Finding:
    """How many of the prompts sent were answered (the one compliance number), in how many
    measurement periods (`measured_in`: `one_period` or `periods`, each period's first and last
    day and answers) and whether the times are the scheduled prompt times (`times`:
    `scheduled` or `answered`)."""
    pid = results.participant
    share = _est(results, "compliance")
    answered = _est(results, "n_answered")
    n = int(answered.value or 0) if answered is not None and answered.ok else 0
    when = _periods(results)
    if share is None or not share.ok:
        return missing(pid, "participation", share.note if share else
                       "the number of prompts sent is not known", answered=n, **when)
    s = float(share.value or 0.0)
    reading = ("low" if s < PARTICIPATION_CUTS[0] else "medium" if s < PARTICIPATION_CUTS[1]
               else "high")
    return Finding(pid, "participation", reading, "clear",
                   {"share": s, "answered": n, "sent": share.n, **when})


def _periods(results: ParticipantResults) -> dict[str, Any]:
    """The measurement periods and the kind of times, from the descriptives family."""
    desc = results.families.get("descriptives")
    if desc is None:
        return {}
    table = desc.tables.get("periods")
    rows: list[dict[Any, Any]] = [] if table is None else \
        table.sort_values("period").to_dict("records")
    numbers: dict[str, Any] = {
        "periods": len(rows), "measured_in": "periods" if len(rows) > 1 else "one_period",
        "times": "scheduled" if desc.params.get("times_scheduled") else "answered"}
    for k, row in enumerate(rows, start=1):
        numbers[f"period_{k}_first"] = pd.Timestamp(row["first_day"]).date().isoformat()
        numbers[f"period_{k}_last"] = pd.Timestamp(row["last_day"]).date().isoformat()
        numbers[f"period_{k}_answered"] = int(row.get("answered", 0))
    return numbers


def landscape(results: ParticipantResults) -> Finding:
    """How many levels the mood kept coming back to: `one_level` or `several_levels`;
    `moved_away` when there is one level but the last LAST_DAYS days' average lies outside
    the typical range (the middle half of all answers): the landscape then tells where the
    mood rested before, not where it is now, and the finding says both."""
    pid = results.participant
    valleys = _est(results, "landscape_valleys")
    if valleys is None or not valleys.ok:
        return missing(pid, "landscape", valleys.note if valleys else "no landscape")
    n = int(valleys.value or 0)
    numbers: dict[str, Any] = {"valleys": n}
    if n > 1:
        return Finding(pid, "landscape", "several_levels", "some_signs", numbers)
    table = results.families["landscape"].tables.get("valleys") \
        if "landscape" in results.families else None
    if table is not None and len(table):
        numbers["valley"] = float(table["x"].iloc[0])
    desc = results.families.get("descriptives")
    low, high = ((desc.params.get("typical_low"), desc.params.get("typical_high"))
                 if desc is not None else (None, None))
    last = _last_days_mean(results.families.get("shifts"))
    if last is None or low is None or high is None or "valley" not in numbers:
        return Finding(pid, "landscape", "one_level", "some_signs", numbers)
    numbers.update({"last_mean": last, "last_days": LAST_DAYS, "typical_low": low,
                    "typical_high": high})
    outside = not (float(low) <= last <= float(high))
    return Finding(pid, "landscape", "moved_away" if outside else "one_level", "some_signs",
                   numbers)


LAST_DAYS = 14
"""The 'last weeks' whose average is set against the landscape's one resting place (design
choice: two weeks of daily averages, like the booklet's first and last weeks)."""


def _last_days_mean(shifts: Family | None) -> float | None:
    """Mean of the daily averages of the last LAST_DAYS calendar days with answers."""
    daily = shifts.tables.get("daily") if shifts is not None else None
    if daily is None or daily.empty:
        return None
    days = pd.to_datetime(daily["study_day"])
    recent = daily[days > days.max() - pd.Timedelta(days=LAST_DAYS)]["mean"].astype(float)
    recent = recent[recent.notna()]
    return float(recent.mean()) if len(recent) else None


LOAD_RHO = 0.1
"""Spearman's rho between daily load and daily mood below which (in absolute value) mood reads
`about_the_same` on days with more and less load (design choice, as the chart had it)."""
MIN_LOAD_DAYS = 3
"""Days with both a load and a mood needed for the load reading (the chart's own minimum)."""


def load(results: ParticipantResults, higher_is_worse: bool, alpha: float) -> Finding:
    """Mood on days with more load: `worse_with_load`, `better_with_load` or `about_the_same`,
    from Spearman's rank correlation of the daily load with the daily mood (Spearman 1904;
    robust to a few extreme days). Certainty: `clear` when its p-value (scipy's spearmanr) is
    below alpha, else `some_signs`; `about_the_same` is `no_clear_sign`."""
    pid = results.participant
    fam = results.families.get("landscape")
    table = fam.tables.get("load") if fam is not None else None
    if table is None:
        return missing(pid, "load", "no daily load was recorded")
    days = table.dropna(subset=["load", "mood"])
    if len(days) < MIN_LOAD_DAYS:
        return missing(pid, "load", f"{len(days)} days had both a load and a mood; the "
                       f"reading needs {MIN_LOAD_DAYS}", days=len(days))
    x, y = days["load"].astype(float), days["mood"].astype(float)
    rho = float(x.corr(y, method="spearman"))
    numbers: dict[str, Any] = {"rho": rho, "days": len(days)}
    if not math.isfinite(rho) or abs(rho) < LOAD_RHO:
        return Finding(pid, "load", "about_the_same", "no_clear_sign", numbers)
    p = float(stats.spearmanr(x, y).pvalue)
    numbers["p"] = p
    worse = (rho > 0) == higher_is_worse
    return Finding(pid, "load", "worse_with_load" if worse else "better_with_load",
                   "clear" if p < alpha else "some_signs", numbers)


def help_needed(participant: str, flags: Sequence[Flag]) -> Finding:
    """Whether a safety rule asks for help (`refer`), a review (`hold`) or neither (`none`).

    The reason is the flag's own (its rule's detail); the strongest action leads."""
    own = [f for f in flags if f.participant == participant]
    for action in ("refer", "hold"):
        hits = [f for f in own if f.action == action]
        if hits:
            first = hits[0]
            return Finding(participant, "help", action, "clear",
                           {"rule": first.rule, "when": first.when, "value": first.value,
                            "rules": ",".join(sorted({f.rule for f in hits}))},
                           reason=first.detail)
    return Finding(participant, "help", "none", "no_clear_sign", {"rules": ""})
