"""The records a build passes around: a participant's job and outcome, the build's report."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

import pandas as pd

from springback.model import EDITIONS as EDITIONS  # re-exported for callers
from springback.model import Flag, ParticipantData
from springback.settings import StudySettings

BOOKLETS = "booklets"


@dataclass(frozen=True)
class ParticipantOutcome:
    """What building one participant produced (files as bytes, rows for the study tables)."""

    participant: str
    status: str
    """'built', 'withdrawn', 'no feedback', 'not enough data', 'unchanged' or 'failed'."""
    reason: str = ""
    files: dict[str, bytes] = field(default_factory=dict)
    """Path relative to out/ -> content."""
    metrics_rows: list[dict[str, Any]] = field(default_factory=list)
    shift_rows: list[dict[str, Any]] = field(default_factory=list)
    finding_rows: list[dict[str, Any]] = field(default_factory=list)
    review_state: str = "not needed"
    fingerprint: str = ""
    version: int = 0
    period: tuple[str, str] = ("", "")
    compliance: float | None = None
    editions: tuple[str, ...] = ()
    flags: tuple[Flag, ...] = ()
    """The safety flags (out/flags.csv and the manifest take their rows, `Flag.to_row`)."""
    reused: bool = False
    """True when nothing this participant's booklet depends on changed since the last build."""
    stored: tuple[str, ...] = ()
    """Files already written to the build's staging folder (paths relative to out/)."""

    @property
    def outputs(self) -> list[str]:
        """Every output file of this participant, staged or still in memory."""
        return sorted({*self.stored, *self.files})


@dataclass(frozen=True)
class BuildReport:
    """The result of one build: where it went and what happened to each participant."""

    out_dir: Path
    build_id: str
    outcomes: tuple[ParticipantOutcome, ...]
    warnings: tuple[Any, ...] = ()

    @property
    def failed(self) -> list[ParticipantOutcome]:
        return [o for o in self.outcomes if o.status == "failed"]

    def counts(self) -> dict[str, int]:
        """Participants per summary line (see OUTCOME_LABELS), in that order, zeros left out."""
        out = dict.fromkeys(OUTCOME_LABELS, 0)
        for o in self.outcomes:
            out[summary_key(o)] += 1
        return {k: n for k, n in out.items() if n}


OUTCOME_LABELS = {
    "built": "built",
    "held": "built, held for review",
    "unchanged": "skipped: unchanged since the last build",
    "withdrawn": "withdrawn (no booklet)",
    "no feedback": "no feedback wanted (no booklet)",
    "not enough data": "not enough data (no booklet)",
    "failed": "failed",
}
"""Summary lines of a build, in the order they are shown."""


def summary_key(o: ParticipantOutcome) -> str:
    """The summary line an outcome counts under."""
    if o.reused and o.status == "built":
        return "unchanged"
    if o.status == "built" and o.review_state == "held":
        return "held"
    return o.status if o.status in OUTCOME_LABELS else "failed"


@dataclass(frozen=True)
class Job:
    """Everything one participant's work needs, picklable for a worker process."""

    project: Path
    data: ParticipantData
    settings: StudySettings
    fingerprint: str
    version: int
    built_at: datetime
    period_end: pd.Timestamp | None = None
    """The study's last prompt or score: silence rules look back from here."""
    decision: str = "held"
    """The review decision on this booklet version ('approved', 'rejected'; 'held' while
    there is none), from the build's `History`; it counts only when a hold flag is raised."""
    unreadable: str = ""
    """Why the review decisions could not be read (a booklet with a hold flag fails), else ''."""
