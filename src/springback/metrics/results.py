"""Frozen result records shared by every metric family, the safety rules and the renderer.

An `Estimate` is either a number (with optional interval and n) or "not enough data" with the
reason in `note`: never a made-up number. `status` is the machine-readable state behind a
missing value (a fixed code, the same in every language), so later stages can tell apart
reasons that read alike; each family's module lists the codes it uses.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from typing import Any

import pandas as pd


@dataclass(frozen=True)
class Estimate:
    """A value with optional interval, sample size and note; `value is None` means not available."""

    value: float | None
    lower: float | None = None
    upper: float | None = None
    n: int | None = None
    note: str = ""
    """Why the value is missing, or how it was computed (method, rule used)."""
    status: str = ""
    """'' for a reported number; for a missing value a fixed code ('missing' unless the family
    names the reason, e.g. dynamics' 'cannot_tell' versus 'no_return')."""

    @property
    def ok(self) -> bool:
        return self.value is not None and math.isfinite(self.value)

    @classmethod
    def missing(cls, reason: str, n: int | None = None, status: str = "missing") -> Estimate:
        """Not enough data (or undefined), with the reason a reader sees and its code."""
        return cls(None, n=n, note=reason, status=status)


@dataclass(frozen=True)
class Family:
    """Base for a metric family's result: named estimates plus frames for charts and tables."""

    estimates: dict[str, Estimate] = field(default_factory=dict)
    """Measure name (as in out/metrics.csv) -> estimate."""
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    """Named frames the charts and data tables use (documented per family)."""
    params: dict[str, Any] = field(default_factory=dict)
    """Parameters actually used (window, bandwidth, seed, rule names...), for the methods text."""


@dataclass(frozen=True)
class SeriesDescription:
    """What the booklet's series is, decided once (`metrics._series.description`) from the
    settings and the answers; charts, findings and booklets read it instead of the settings."""

    variable: str
    """The composite or item."""
    higher_is_worse: bool
    """Its polarity (a composite's `higher_is`; an item is worse upwards unless reverse-scored)."""
    scale: tuple[float, float]
    """Its scale (low, high); a composite's is its items' common range."""
    first_day: dt.date | None = None
    """First study day with an answer (None without answers)."""
    last_day: dt.date | None = None
    """Last study day with an answer."""
    periods: int = 0
    """Measurement periods with an answer (runs of one period number; 0 without answers)."""

    @property
    def scale_low(self) -> float:
        return float(self.scale[0])

    @property
    def scale_high(self) -> float:
        return float(self.scale[1])


@dataclass(frozen=True)
class ParticipantResults:
    """Everything computed for one participant, family by family."""

    participant: str
    variable: str
    """The composite or item the results are about (the same as `series.variable`)."""
    families: dict[str, Family]
    """Family name ('descriptives', 'dynamics', 'recovery', 'warnings', 'questionnaires',
    'shifts', 'landscape', ...) -> its result."""
    enough_data: bool
    """False when the participant has too few answers for a booklet at all."""
    reason: str = ""
    series: SeriesDescription = field(kw_only=True)
    """The series the results are about: variable, polarity, scale, days and periods."""

    def __post_init__(self) -> None:
        if self.series.variable != self.variable:
            raise ValueError(f"results about {self.variable!r} carry the description of "
                             f"{self.series.variable!r}")

    def estimate(self, measure: str) -> Estimate:
        """Look a measure up across families (KeyError if no family reports it)."""
        for fam in self.families.values():
            if measure in fam.estimates:
                return fam.estimates[measure]
        raise KeyError(measure)

    def measures(self) -> dict[str, Estimate]:
        """All measures of all families, in family order."""
        out: dict[str, Estimate] = {}
        for fam in self.families.values():
            out.update(fam.estimates)
        return out


METRICS_CSV_COLUMNS = ("participant", "measure", "value", "lower", "upper", "n", "note")


def to_rows(results: ParticipantResults) -> list[dict[str, Any]]:
    """Rows of out/metrics.csv for one participant (missing values empty, reason in note)."""
    rows = []
    for name, est in results.measures().items():
        rows.append(
            {
                "participant": results.participant,
                "measure": name,
                "value": est.value if est.ok else None,
                "lower": est.lower,
                "upper": est.upper,
                "n": est.n,
                "note": est.note,
            }
        )
    return rows
