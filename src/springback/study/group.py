"""Group-level estimates of the cohort: mean inertia and half-life from a multilevel model
beside the mean of the person-level estimates, the group trend of the rolling indicators,
and the study's own count of rising indicators before shifts.

Inertia across participants: a linear mixed model of the next answer on the current one's
deviation from the person's mean, with a random intercept (the person's level) and a random
slope per participant, on the same pairs the person-level inertia uses (answers on one study
day at most metrics.max_gap_hours apart); the predictor is centred on the person's mean so the
slope is the within-person carry-over (Hamaker & Grasman 2015, "To center or not to center?
Investigating inertia with a multilevel autoregressive model", Frontiers in Psychology
5:1492). Fitted by REML with statsmodels' MixedLM (Seabold & Perktold 2010,
"statsmodels: Econometric and statistical modeling with Python", Proc. 9th Python in Science
Conference); the fixed slope is the group's mean lag-1 autoregression (the multilevel AR(1) of
Suls, Green & Hillis 1998, Pers Soc Psychol Bull 24:127-136, and Kuppens et al. 2010), with a
Wald 95% interval. Its half-life uses the pairs' median gap: half-life = gap ln 2 / -ln(phi).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterable
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from springback.metrics._series import prepare
from springback.model import Study

PAIR_COLUMNS = ("participant", "deviation", "next_value", "gap_hours")
GROUP_COLUMNS = ("estimate", "label", "value", "lower", "upper", "n", "method")
TABLE_COLUMNS = ("group", "rising", "not_rising", "read", "not_read")
ACCURACY_COLUMNS = ("statistic", "label", "value", "lower", "upper", "count", "of", "method")
TREND_MEASURES = (("warning_tau_inertia", "carry-over (lag-1 autocorrelation)"),
                  ("warning_tau_variance", "variance"),
                  ("warning_tau_crosscorr", "cross-correlation of the items"))
Z95 = float(stats.norm.ppf(0.975))


def within_day_pairs(study: Study, people: Iterable[str]) -> pd.DataFrame:
    """Each participant's admissible pairs (the carry-over pairs of
    springback.metrics.dynamics): the answer as a deviation from the person's mean, the next
    answer as given; read one participant at a time."""
    parts = []
    for pid in people:
        series = prepare(study.slice(pid), study.settings)
        if series.n < 2:
            continue
        resid = series.value - series.value.mean()
        ok = series.admissible
        parts.append(pd.DataFrame({"participant": pid, "deviation": resid[:-1][ok],
                                   "next_value": series.value[1:][ok],
                                   "gap_hours": series.gaps[ok]}))
    if not parts:
        return pd.DataFrame(columns=list(PAIR_COLUMNS))
    return pd.concat(parts, ignore_index=True)


def mixed_inertia(pairs: pd.DataFrame) -> dict[str, Any]:
    """The group's mean lag-1 slope from MixedLM (random intercept and slope by participant).

    Returns phi, its Wald 95% interval, the SD of the random slopes, the number of
    participants and pairs, and whether the optimiser converged."""
    from statsmodels.regression.mixed_linear_model import MixedLM

    groups = pairs["participant"].astype(str).to_numpy()
    n_people = len(set(groups))
    out: dict[str, Any] = {"phi": math.nan, "lower": math.nan, "upper": math.nan,
                           "slope_sd": math.nan, "people": n_people, "pairs": len(pairs),
                           "converged": False, "note": ""}
    if n_people < 3 or len(pairs) < 10:
        out["note"] = f"needs 3 participants with pairs; there were {n_people}"
        return out
    x0 = pairs["deviation"].to_numpy(float)
    exog = np.column_stack([np.ones_like(x0), x0])
    model = MixedLM(pairs["next_value"].to_numpy(float), exog, groups=groups, exog_re=exog)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fit = model.fit(reml=True, method=["lbfgs", "powell"])
    phi, se = float(fit.fe_params[1]), float(fit.bse_fe[1])
    cov_re = np.asarray(fit.cov_re, dtype=float)
    out.update(phi=phi, lower=phi - Z95 * se, upper=phi + Z95 * se,
               slope_sd=math.sqrt(max(float(cov_re[1, 1]), 0.0)),
               converged=bool(fit.converged))
    # statsmodels says "may be on the boundary" whenever a random-effect variance is below
    # 0.01 on the data's scale; a slope SD of 0.1 (variance 0.01) is not a boundary, so the
    # message is kept only when a variance is 0 for all practical purposes.
    at_edge = float(np.min(np.diag(cov_re))) < 1e-8
    shown = sorted({str(w.message).rstrip(".") for w in caught
                    if at_edge or "boundary" not in str(w.message)})
    out["note"] = "; ".join((["did not converge"] if not fit.converged else []) + shown)
    return out


def _mean_interval(x: np.ndarray) -> tuple[float, float, float]:
    """Mean with the t-based 95% interval (NaN ends below two values)."""
    if x.size == 0:
        return math.nan, math.nan, math.nan
    mean = float(np.mean(x))
    if x.size < 2:
        return mean, math.nan, math.nan
    half = float(stats.t.ppf(0.975, x.size - 1) * np.std(x, ddof=1) / math.sqrt(x.size))
    return mean, mean - half, mean + half


def half_life(phi: float, gap: float) -> float:
    """Hours to half a deviation for a lag-1 slope over `gap` hours (NaN outside (0, 1))."""
    if not 0.0 < phi < 1.0 or not gap > 0:
        return math.inf if phi >= 1.0 else math.nan
    return gap * math.log(2) / -math.log(phi)


def group_estimates(table: pd.DataFrame, pairs: pd.DataFrame) -> pd.DataFrame:
    """Mean inertia and half-life (MixedLM and mean of the person-level estimates), and the
    mean Kendall tau of each rolling indicator across participants."""
    with_inertia = set(table.loc[np.isfinite(table.get("inertia", pd.Series(
        dtype=float)).to_numpy(float)), "participant"].astype(str)) if "inertia" in table \
        else set()
    used = pairs[pairs["participant"].astype(str).isin(with_inertia)]
    mixed = mixed_inertia(used)
    gap = float(np.median(used["gap_hours"])) if len(used) else math.nan
    rows: list[dict[str, Any]] = [
        {"estimate": "inertia_mixed", "label": "Mean inertia, multilevel model",
         "value": mixed["phi"], "lower": mixed["lower"], "upper": mixed["upper"],
         "n": mixed["people"], "method": (
             f"MixedLM next answer ~ deviation from the person's mean, random intercept and "
             f"slope by participant, "
             f"REML, Wald 95%; {mixed['pairs']} pairs; random-slope SD "
             f"{mixed['slope_sd']:.3f}" + (f"; {mixed['note']}" if mixed["note"] else ""))},
    ]
    x = table["inertia"].to_numpy(float) if "inertia" in table else np.zeros(0)
    mean, lo, hi = _mean_interval(x[np.isfinite(x)])
    rows.append({"estimate": "inertia_person_mean", "label": "Mean of person-level inertia",
                 "value": mean, "lower": lo, "upper": hi, "n": int(np.isfinite(x).sum()),
                 "method": "mean of the participants' inertia, t 95% interval"})
    # The half-life grows with phi, so the interval's ends are those of phi's ends.
    ends = (half_life(mixed["lower"], gap), half_life(mixed["upper"], gap))
    rows.append({"estimate": "half_life_mixed", "label": "Half-life in hours, multilevel model",
                 "value": half_life(mixed["phi"], gap), "lower": ends[0], "upper": ends[1],
                 "n": mixed["people"],
                 "method": f"median gap {gap:.2f} h x ln 2 / -ln(phi) of the multilevel model; "
                           "interval from the ends of phi's interval"})
    h = table["half_life_hours"].to_numpy(float) if "half_life_hours" in table else np.zeros(0)
    h = h[np.isfinite(h)]
    mean, lo, hi = _mean_interval(h)
    rows.append({"estimate": "half_life_person_mean", "label": "Mean of person-level half-life",
                 "value": mean, "lower": lo, "upper": hi, "n": int(h.size),
                 "method": "mean of the participants' Ornstein-Uhlenbeck half-lives, t 95% "
                           f"interval; median {float(np.median(h)) if h.size else math.nan:.2f} h"})
    for name, label in TREND_MEASURES:
        if name not in table:
            continue
        tau = table[name].to_numpy(float)
        tau = tau[np.isfinite(tau)]
        mean, lo, hi = _mean_interval(tau)
        rows.append({"estimate": f"trend_{name.removeprefix('warning_tau_')}",
                     "label": f"Mean trend (Kendall tau) of rolling {label}",
                     "value": mean, "lower": lo, "upper": hi, "n": int(tau.size),
                     "method": f"mean of the participants' {name}, t 95% interval; "
                               f"{int((tau > 0).sum())} of {tau.size} above 0"})
    return pd.DataFrame(rows, columns=list(GROUP_COLUMNS))


def _reading(findings: pd.DataFrame, topic: str) -> pd.Series:
    rows = findings[findings["topic"] == topic].drop_duplicates("participant")
    return rows.set_index(rows["participant"].astype(str))["reading"].astype(str)


def warning_counts(findings: pd.DataFrame) -> pd.DataFrame:
    """The 2x2 table: warning reading (rising or not) by course (an abrupt shift or not).

    A participant is read when both the course and the warning have a reading; the shift row
    holds the warning read on the lead-up, the other row the warning on all data."""
    course, warn = _reading(findings, "course"), _reading(findings, "warning")
    people = sorted(set(course.index) | set(warn.index))
    rows = []
    for group, is_shift in (("abrupt_shift", True), ("no_shift", False)):
        members = [p for p in people if course.get(p, "not_enough_data") != "not_enough_data"
                   and (course.get(p) == "abrupt_shift") == is_shift]
        readings = [warn.get(p, "not_enough_data") for p in members]
        rising = sum(r == "rising" for r in readings)
        not_rising = sum(r == "not_rising" for r in readings)
        rows.append({"group": group, "rising": rising, "not_rising": not_rising,
                     "read": rising + not_rising,
                     "not_read": len(members) - rising - not_rising})
    return pd.DataFrame(rows, columns=list(TABLE_COLUMNS))


def wilson(count: int, total: int) -> tuple[float, float]:
    """Wilson score 95% interval of a proportion (statsmodels' proportion_confint)."""
    from statsmodels.stats.proportion import proportion_confint

    if total == 0:
        return math.nan, math.nan
    lo, hi = proportion_confint(count, total, alpha=0.05, method="wilson")
    return round(float(lo), 12), round(float(hi), 12)


def warning_accuracy(counts: pd.DataFrame, alpha: float) -> pd.DataFrame:
    """Sensitivity and specificity of `rising` for the study's shifts, with Wilson intervals,
    and the `rising` readings expected if nothing changed (alpha per participant read: the
    family-wise rate the warning reading holds by Holm's method)."""
    cells = {(str(r["group"]), k): int(r[k]) for r in counts.to_dict("records")
             for k in ("rising", "not_rising")}
    a, b = cells["abrupt_shift", "rising"], cells["abrupt_shift", "not_rising"]
    c, d = cells["no_shift", "rising"], cells["no_shift", "not_rising"]
    read = a + b + c + d
    rows = []
    for stat, label, k, n in (("sensitivity", "Rising before a shift (sensitivity)", a, a + b),
                              ("specificity", "Not rising without a shift (specificity)", d,
                               c + d),
                              ("rising_without_shift", "Rising without a shift", c, c + d)):
        lo, hi = wilson(k, n)
        rows.append({"statistic": stat, "label": label, "value": k / n if n else math.nan,
                     "lower": lo, "upper": hi, "count": k, "of": n,
                     "method": "proportion, Wilson score 95% interval"})
    rows.append({"statistic": "rising_expected", "label": "Rising readings expected by chance",
                 "value": alpha * read, "lower": math.nan, "upper": math.nan, "count": a + c,
                 "of": read, "method": f"alpha {alpha:g} x {read} participants read; count is "
                                       "the rising readings seen"})
    p = float(stats.binom.sf(a + c - 1, read, alpha)) if read else math.nan
    rows.append({"statistic": "rising_chance_p", "label": "Chance of at least this many rising",
                 "value": p, "lower": math.nan, "upper": math.nan, "count": a + c, "of": read,
                 "method": f"binomial tail, {read} readings each rising with probability "
                           f"{alpha:g} if nothing changed"})
    return pd.DataFrame(rows, columns=list(ACCURACY_COLUMNS))

