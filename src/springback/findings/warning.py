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
Journal of Statistics 6:65-70).

Certainty combines that test with the sensitivity grid (Dakos et al. 2012, PLoS ONE 7:e41010,
on checking the sensitivity to the window and the detrending): a grid cell *agrees* with a
rising indicator when the indicator also rose there with a Holm-adjusted p below alpha over
that cell's trend tests (carry-over and variance). `clear` when a rising indicator agrees in
at least ROBUST_SHARE of the grid's cells, `some_signs` when fewer do (and always for a rise
of the item correlation alone, which the grid does not test). Calibrated on simulated people with
the study's 5 x 5 grid (tests/findings/test_calibration.py): stationary people read `clear` in
1.5% at two seeds; people slowing down with constant variance in 32% and 44%.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
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
"""Share of the sensitivity grid's cells that must agree with a rising indicator for the
reading to be `clear` (design choice)."""
GRID_TESTS = ("inertia", "variance")
"""The trend tests of each grid cell (the grid table's tau_/p_ columns)."""
TREND_CUTS = (0.1, 0.3)
"""Kendall's tau of an indicator's whole-study trend in words: at least 0.3 `rose`, at least
0.1 `rose_slightly`, within 0.1 of 0 `about_same`, then `fell_slightly` and `fell` (design
choice for plain wording, not a test: the Holm-adjusted surrogate p does that)."""


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
    grid = grid_agreement(fam.tables.get("grid"), alpha)
    tests: list[tuple[str, float, float, float | None]] = []
    for label, _robust in INDICATORS:
        tau, p = value(fam, f"warning_tau_{label}{end}"), value(fam, f"warning_p_{label}{end}")
        if tau is None or p is None:
            continue
        tests.append((label, tau, p, grid.get(f"grid_agree_{label}")))
    if not tests:
        est = fam.estimates.get(f"warning_tau_inertia{end}")
        return missing(participant, "warning", est.note if est is not None else
                       "no early-warning trend could be computed", **base)
    adjusted = holm([p for _, _, p, _ in tests])
    numbers: dict[str, Any] = dict(base, tests=len(tests), **grid,
                                   **study_trends(families.get("warnings")))
    if on_leadup:
        numbers["leadup_days"] = fam.params.get("leadup_days")
    evidence: list[dict[str, Any]] = []
    rising: list[float] = []
    for (label, tau, p, robust), p_holm in zip(tests, adjusted, strict=True):
        rose = tau > 0 and p_holm < alpha
        numbers.update({f"tau_{label}": tau, f"p_{label}": p, f"p_holm_{label}": p_holm})
        robust_name = dict(INDICATORS)[label]
        share = value(fam, robust_name + end) if robust_name else None
        if share is not None:
            numbers[f"robustness_{label}"] = share
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


def agreeing_cells(grid: pd.DataFrame, alpha: float) -> dict[str, np.ndarray]:
    """Per indicator of GRID_TESTS, which of the grid's rows agree that it rose: tau above 0
    and a Holm-adjusted p below alpha over the row's tests (False where a test is missing)."""
    p = grid[[f"p_{t}" for t in GRID_TESTS]].to_numpy(float)
    tau = grid[[f"tau_{t}" for t in GRID_TESTS]].to_numpy(float)
    done = np.isfinite(p).all(axis=1) & np.isfinite(tau).all(axis=1)
    adjusted = np.ones_like(p)
    for row in np.flatnonzero(done):
        adjusted[row] = holm(list(p[row]))
    return {label: done & (tau[:, k] > 0) & (adjusted[:, k] < alpha)
            for k, label in enumerate(GRID_TESTS)}


def grid_agreement(grid: pd.DataFrame | None, alpha: float) -> dict[str, Any]:
    """How many of the sensitivity grid's cells agree that each indicator rose.

    Per cell, Holm's adjustment over the cell's tests (GRID_TESTS); a cell agrees on an
    indicator when its tau is above 0 and its adjusted p below alpha (`agreeing_cells`).
    Returns `grid_cells` (cells with every test computed), and per indicator `grid_up_<label>`
    (cells with tau above 0), `grid_rose_<label>` (cells that agree) and `grid_agree_<label>`
    (the agreeing share); empty without a grid."""
    if grid is None or grid.empty:
        return {}
    p = grid[[f"p_{t}" for t in GRID_TESTS]].to_numpy(float)
    tau = grid[[f"tau_{t}" for t in GRID_TESTS]].to_numpy(float)
    done = np.isfinite(p).all(axis=1) & np.isfinite(tau).all(axis=1)
    if not done.any():
        return {"grid_cells": 0}
    agree = agreeing_cells(grid, alpha)
    out: dict[str, Any] = {"grid_cells": int(done.sum())}
    for k, label in enumerate(GRID_TESTS):
        out[f"grid_up_{label}"] = int((tau[done, k] > 0).sum())
        out[f"grid_rose_{label}"] = int(agree[label].sum())
        out[f"grid_agree_{label}"] = float(agree[label].sum() / done.sum())
    return out


def trend_code(tau: float | None) -> str:
    """The direction of an indicator's trend in words (TREND_CUTS), or `not_judged`."""
    if tau is None:
        return "not_judged"
    if tau >= TREND_CUTS[1]:
        return "rose"
    if tau >= TREND_CUTS[0]:
        return "rose_slightly"
    if tau > -TREND_CUTS[0]:
        return "about_same"
    return "fell_slightly" if tau > -TREND_CUTS[1] else "fell"


def study_trends(fam: Family | None) -> dict[str, str]:
    """The whole study's trend of carry-over and variance in words (the indicator chart's
    lines), whatever span the reading rests on: `study_trend_inertia`, `_variance`."""
    return {f"study_trend_{label}": trend_code(value(fam, f"warning_tau_{label}"))
            for label in GRID_TESTS}
