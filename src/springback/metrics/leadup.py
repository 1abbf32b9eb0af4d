"""The early-warning indicators of the lead-up: the answers before the largest shift.

A jump inside the rolling windows makes variance and carry-over "rise" by itself, so the
question whether the indicators rose *before* a shift is asked of the answers before it only
(Dakos et al. 2012, PLoS ONE 7:e41010, compute indicators up to the transition). The lead-up
ends at the start of the study day of the largest change point beyond the usual day-to-day
swings (springback.metrics.shifts), the one the course reading judges; it needs at least
MIN_LEADUP_DAYS study days and the answers the rolling windows need (design choices, not
published rules).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

from springback.metrics import early_warning
from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family
from springback.settings import StudySettings

SUFFIX = "_leadup"
"""The lead-up's measures carry the names of the whole study's with this suffix."""
MIN_LEADUP_DAYS = 14
"""Study days before a shift needed to test a trend in the lead-up (design choice)."""


def largest_shift(shifts: Family | None) -> pd.Timestamp | None:
    """Study day of the largest change point beyond the usual swings (the first of equals),
    the one the course reading judges as an abrupt shift; None without one."""
    cps = shifts.tables.get("change_points") if shifts is not None else None
    if cps is None or cps.empty:
        return None
    big = cps[cps["exceeds_swings"].astype(bool)]
    if big.empty:
        return None
    k = int(np.argmax(np.abs(big["size"].to_numpy(float))))
    return pd.Timestamp(big["study_day"].iloc[k])


def before(series: Series, day: pd.Timestamp) -> Series:
    """The series' answers on study days before `day` (same origin, so hours agree)."""
    k = int(np.searchsorted(series.study_day, day.to_datetime64()))
    return dataclasses.replace(
        series, local_time=series.local_time.iloc[:k].reset_index(drop=True),
        hours=series.hours[:k], study_day=series.study_day[:k], day_index=series.day_index[:k],
        value=series.value[:k], items=series.items[:k],
        admissible=series.admissible[:max(k - 1, 0)],
        period=None if series.period is None else series.period[:k])


def leadup_warnings(series: Series, shifts: Family | None, settings: StudySettings,
                    participant: str) -> Family | None:
    """Early-warning trends of the lead-up to the largest shift; None without one."""
    day = largest_shift(shifts)
    if day is None or series.n == 0:
        return None
    part = before(series, day)
    days = int(part.day_index[-1] + 1) if part.n else 0
    params = {"leadup_days": days, "leadup_end": day.date().isoformat()}
    if days < MIN_LEADUP_DAYS:
        why = (f"the shift came after {days} study days; the lead-up needs at "
               f"least {MIN_LEADUP_DAYS}")
        return Family(estimates=_renamed(early_warning.all_missing(why, part.n)), params=params)
    fam = early_warning.early_warnings(part, settings, participant)
    return Family(estimates=_renamed(fam.estimates), tables=fam.tables,
                  params={**fam.params, **params})


def _renamed(estimates: dict[str, Estimate]) -> dict[str, Estimate]:
    """The lead-up's measures as out/metrics.csv names them (`<measure>_leadup`)."""
    return {f"{name}{SUFFIX}": est for name, est in estimates.items()}
