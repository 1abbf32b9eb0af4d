"""Did the early-warning indicators rise? `rising`, `not_rising` or `not_enough_data`.

The question a warning answers is whether the indicators rose *before* a shift: with an abrupt
shift, the trends are those of the lead-up (answers before the first large change point,
computed by springback.metrics.leadup; a jump inside the windows would make variance and
carry-over "rise" by itself). Without one, they are those of all the data, and a rise is the
case an early warning is for: rising indicators with no shift yet.

A reader sees several trend tests (carry-over, variance and, with several items, their mean
correlation), each with a one-sided surrogate p-value. The family-wise error rate of the
`rising` reading is held at the study's alpha by Holm's step-down method over the tests
reported (Holm 1979, "A simple sequentially rejective multiple test procedure", Scandinavian
Journal of Statistics 6:65-70). Certainty: `clear` when a rising indicator is also significant
in at least ROBUST_SHARE of the sensitivity grid's window x detrending settings, `some_signs`
when it is not (Dakos et al. 2012, PLoS ONE 7:e41010, on checking the sensitivity).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import pandas as pd

from springback.findings.course import value
from springback.findings.records import Finding, missing
from springback.metrics.leadup import SUFFIX
from springback.metrics.results import Family

INDICATORS = (("inertia", "warning_robustness_inertia"),
              ("variance", "warning_robustness_variance"),
              ("crosscorr", ""))
"""Trend tests a reader sees, with the robustness measure of each (none for items)."""
ROBUST_SHARE = 0.5
"""Share of the sensitivity grid in which a rising indicator must also be significant for the
reading to be `clear` (design choice)."""


def holm(pvalues: Sequence[float]) -> list[float]:
    """Holm-adjusted p-values (step-down, monotone, capped at 1), in the input order."""
    m = len(pvalues)
    order = sorted(range(m), key=lambda i: pvalues[i])
    adjusted = [0.0] * m
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (m - rank) * pvalues[i]))
        adjusted[i] = running
    return adjusted


def warning(participant: str, families: Mapping[str, Family], course: Finding, alpha: float,
            shift_day: pd.Timestamp | None) -> Finding:
    """Read whether the indicators rose, on the lead-up of an abrupt shift or on all data."""
    on_leadup = course.reading == "abrupt_shift" and shift_day is not None
    fam = families.get("warnings_leadup" if on_leadup else "warnings")
    span = "lead-up" if on_leadup else "all data"
    base: dict[str, Any] = {"data": span, "alpha": alpha}
    if on_leadup:
        base["shift_date"] = shift_day.date().isoformat() if shift_day is not None else ""
    if fam is None:
        return missing(participant, "warning", "the early-warning trends were not computed",
                       **base)
    if on_leadup and fam.params.get("leadup_end") not in (None, base["shift_date"]):
        return missing(participant, "warning", "the lead-up was computed up to "
                       f"{fam.params['leadup_end']}, not up to the shift of "
                       f"{base['shift_date']}", **base)
    end = SUFFIX if on_leadup else ""
    tests: list[tuple[str, float, float, float | None]] = []
    for label, robust_name in INDICATORS:
        tau, p = value(fam, f"warning_tau_{label}{end}"), value(fam, f"warning_p_{label}{end}")
        if tau is None or p is None:
            continue
        tests.append((label, tau, p, value(fam, robust_name + end) if robust_name else None))
    if not tests:
        est = fam.estimates.get(f"warning_tau_inertia{end}")
        return missing(participant, "warning", est.note if est is not None else
                       "no early-warning trend could be computed", **base)
    adjusted = holm([p for _, _, p, _ in tests])
    numbers: dict[str, Any] = dict(base, tests=len(tests))
    if on_leadup:
        numbers["leadup_days"] = fam.params.get("leadup_days")
    evidence: list[dict[str, Any]] = []
    rising: list[float] = []
    for (label, tau, p, robust), p_holm in zip(tests, adjusted, strict=True):
        rose = tau > 0 and p_holm < alpha
        numbers.update({f"tau_{label}": tau, f"p_{label}": p, f"p_holm_{label}": p_holm})
        if robust is not None:
            numbers[f"robustness_{label}"] = robust
        evidence.append({"code": f"{label}_{'rose' if rose else 'flat'}", "tau": tau, "p": p,
                         "p_holm": p_holm})
        if rose:
            rising.append(robust if robust is not None else 0.0)
    if not rising:
        return Finding(participant, "warning", "not_rising", "no_clear_sign", numbers,
                       evidence=tuple(evidence))
    sure = max(rising) >= ROBUST_SHARE
    return Finding(participant, "warning", "rising", "clear" if sure else "some_signs", numbers,
                   evidence=tuple(evidence))
