"""One participant's answered series of a variable, checked once, as plain arrays.

Every family of metrics-core reads this record instead of the frame, so sorting, polarity,
reverse scoring and the admissible-pair rule are decided in one place.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from springback.errors import DataError, error
from springback.metrics.results import SeriesDescription
from springback.model import ParticipantData
from springback.settings import StudySettings

NS_PER_HOUR = 3_600_000_000_000


@dataclass(frozen=True)
class Series:
    """Answered prompts of one variable, sorted by time (arrays share one index)."""

    variable: str
    higher_is_worse: bool
    scale: tuple[float, float]
    local_time: pd.Series
    """tz-aware answer times in the study time zone."""
    hours: np.ndarray
    """Hours since the first answer (real elapsed time)."""
    study_day: np.ndarray
    """datetime64[ns] naive midnight of each answer's study day."""
    day_index: np.ndarray
    """Whole days since the first study day (int)."""
    value: np.ndarray
    items: np.ndarray
    """(n, p) item ratings after reverse scoring (p = 1 for a single item)."""
    item_names: tuple[str, ...]
    admissible: np.ndarray
    """(n - 1) bool: answer i and i + 1 fall on the same study day within max_gap_hours."""
    max_gap_hours: float
    origin_ns: int = 0
    """UTC nanoseconds of the first answer (hours are measured from it)."""
    period: np.ndarray | None = None
    """int64 measurement period (1, 2, ...) of each answer; None = one period."""

    @property
    def n(self) -> int:
        return len(self.value)

    @property
    def periods(self) -> np.ndarray:
        """Measurement period of each answer (all 1 when the series has none)."""
        return self.period if self.period is not None else np.ones(self.n, dtype=np.int64)

    @property
    def gaps(self) -> np.ndarray:
        """Hours between consecutive answers."""
        return np.diff(self.hours)

    def worse(self, values: np.ndarray) -> np.ndarray:
        """Turn values into 'higher = worse' orientation (deviations keep their size)."""
        return values if self.higher_is_worse else -values


def _reject_non_finite(frame: pd.DataFrame, columns: list[str]) -> None:
    """Raise DataError naming the rows whose ratings are infinite or whose time is missing."""
    problems = []
    rows = frame.get("source_row", pd.Series(range(2, len(frame) + 2), index=frame.index))
    for col in columns:
        values = frame[col].to_numpy(dtype=float, na_value=np.nan)
        for i in np.flatnonzero(np.isinf(values)):
            problems.append(error("momentary data", "a rating is infinite", column=col,
                                  row=int(rows.iloc[i]), expected="a finite number",
                                  found=str(values[i]), code="value-not-finite"))
    for i in np.flatnonzero(frame["time"].isna().to_numpy()):
        problems.append(error("momentary data", "an answer has no time", column="time",
                              row=int(rows.iloc[i]), expected="a date and time",
                              code="time-missing"))
    if problems:
        raise DataError(problems)


def item_names(settings: StudySettings, variable: str) -> tuple[str, ...]:
    """Items making up a variable (the variable itself for a single item)."""
    if variable in settings.composites:
        return tuple(settings.composites[variable].items)
    return (variable,)


def prepare(data: ParticipantData, settings: StudySettings, variable: str | None = None) -> Series:
    """Build the answered series of a variable (default: the booklet's) from the momentary rows.

    Rows without a value (not answered) are left out; infinite ratings or missing times raise
    DataError, so no statistic ever sees them.
    """
    variable = variable or settings.about
    names = item_names(settings, variable)
    frame = data.momentary
    present = [c for c in (variable, *names) if c in frame.columns]
    _reject_non_finite(frame, present)
    # The source row breaks ties between equal times, so the input's row order never matters.
    keys = ["time", "source_row"] if "source_row" in frame.columns else ["time"]
    frame = frame.sort_values(keys, kind="stable")
    value = frame[variable].to_numpy(dtype=float, na_value=np.nan)
    keep = np.isfinite(value)
    frame = frame.loc[keep]
    value = value[keep]
    items = np.column_stack([
        _reversed(frame[i].to_numpy(dtype=float, na_value=np.nan), settings, i)
        for i in names
    ]) if set(names) <= set(frame.columns) else value[:, None]
    ns = pd.DatetimeIndex(frame["time"]).as_unit("ns").asi8
    hours = (ns - ns[0]) / NS_PER_HOUR if len(ns) else np.zeros(0)
    study_day = frame["study_day"].to_numpy().astype("datetime64[ns]")
    day_index = ((study_day - study_day[0]) // np.timedelta64(1, "D")).astype(int) if len(
        study_day) else np.zeros(0, dtype=int)
    max_gap = settings.metrics.max_gap_hours
    period = frame["period"].to_numpy(dtype=np.int64) if "period" in frame.columns else \
        np.ones(len(value), dtype=np.int64)
    admissible = (np.diff(day_index) == 0) & (np.diff(hours) <= max_gap) & (np.diff(hours) > 0)
    return Series(
        variable=variable,
        higher_is_worse=settings.higher_is_worse(variable),
        scale=settings.scale_of(variable),
        local_time=frame["local_time"].reset_index(drop=True),
        hours=hours,
        study_day=study_day,
        day_index=day_index,
        value=value,
        items=items,
        item_names=names,
        admissible=admissible,
        max_gap_hours=max_gap,
        origin_ns=int(ns[0]) if len(ns) else 0,
        period=period,
    )


def description(series: Series) -> SeriesDescription:
    """The series' description every later stage reads (`ParticipantResults.series`)."""
    days = series.study_day
    return SeriesDescription(
        variable=series.variable,
        higher_is_worse=series.higher_is_worse,
        scale=(float(series.scale[0]), float(series.scale[1])),
        first_day=pd.Timestamp(days.min()).date() if series.n else None,
        last_day=pd.Timestamp(days.max()).date() if series.n else None,
        periods=int(np.count_nonzero(np.diff(series.periods)) + 1) if series.n else 0,
    )


def hours_since(series: Series, times: pd.Series) -> np.ndarray:
    """Hours from the series' first answer to each of the given tz-aware times."""
    ns = pd.DatetimeIndex(times).as_unit("ns").asi8
    return (ns - series.origin_ns) / NS_PER_HOUR


def _reversed(values: np.ndarray, settings: StudySettings, item: str) -> np.ndarray:
    """Reverse-score an item rating when the settings say so."""
    spec = settings.items.get(item)
    if spec is None or not spec.reverse:
        return values
    return spec.scale[0] + spec.scale[1] - values
