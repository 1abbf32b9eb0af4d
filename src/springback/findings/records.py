"""The frozen records of the findings stage: one `Finding` per topic and participant."""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from typing import Any, Literal

Certainty = Literal["clear", "some_signs", "no_clear_sign", "cannot_tell"]
CERTAINTIES: tuple[Certainty, ...] = ("clear", "some_signs", "no_clear_sign", "cannot_tell")
"""Certainty grades, strongest first. Every language's certainty words come from these:
`clear` (the evidence agrees across tests and settings), `some_signs` (one test or setting
points that way, the others do not confirm it), `no_clear_sign` (nothing stood out from
chance), `cannot_tell` (the data cannot answer the question)."""

NOT_ENOUGH_DATA = "not_enough_data"
"""The reading of every topic whose question the data cannot answer (the reason says why)."""

FINDINGS_CSV_COLUMNS = ("participant", "topic", "reading", "certainty", "detail", "reason")
"""Columns of out/findings.csv, in order."""


@dataclass(frozen=True)
class Finding:
    """What the data say on one topic for one participant, decided once.

    `reading` is a fixed code per topic (see TOPICS in springback.findings); `numbers` are the
    values behind it (as in out/metrics.csv, plus the ones the decision computed); `reason`
    says why there is no reading (`reading == "not_enough_data"`) or, for a flag, its rule's
    own reason. `evidence` lists coded observations with their numbers, for the therapist's
    "what points that way" (translated per code).
    """

    participant: str
    topic: str
    reading: str
    certainty: Certainty
    numbers: Mapping[str, Any] = field(default_factory=dict)
    reason: str = ""
    evidence: tuple[Mapping[str, Any], ...] = ()

    @property
    def known(self) -> bool:
        """True when the data answered the topic's question."""
        return self.reading != NOT_ENOUGH_DATA

    def number(self, name: str) -> float | None:
        """A finite number behind the finding, or None."""
        v = self.numbers.get(name)
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            return None
        return float(v) if math.isfinite(v) else None

    def detail(self) -> str:
        """The numbers as `name=value` pairs (the findings.csv `detail` column)."""
        parts = []
        for key, value in self.numbers.items():
            if value is None or (isinstance(value, float) and not math.isfinite(value)):
                continue
            if isinstance(value, float):
                parts.append(f"{key}={value:.4g}")
            else:
                parts.append(f"{key}={value}")
        return "; ".join(parts)

    def row(self) -> dict[str, Any]:
        """This finding as a row of out/findings.csv."""
        return {"participant": self.participant, "topic": self.topic, "reading": self.reading,
                "certainty": self.certainty, "detail": self.detail(), "reason": self.reason}


def missing(participant: str, topic: str, reason: str, **numbers: Any) -> Finding:
    """The finding of a topic the data cannot answer, with the reason a reader sees."""
    return Finding(participant, topic, NOT_ENOUGH_DATA, "cannot_tell", numbers, reason)


@dataclass(frozen=True)
class Findings:
    """Every finding of one participant, in topic order, and the summary's choice."""

    participant: str
    items: tuple[Finding, ...]
    summary: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    """Edition -> the topics its summary states, most important first (at most three)."""

    def __iter__(self) -> Iterator[Finding]:
        return iter(self.items)

    def __len__(self) -> int:
        return len(self.items)

    def get(self, topic: str) -> Finding | None:
        """The finding of a topic, or None if the participant has none."""
        return next((f for f in self.items if f.topic == topic), None)

    def by_topic(self) -> dict[str, Finding]:
        return {f.topic: f for f in self.items}

    def rows(self) -> list[dict[str, Any]]:
        """Rows of out/findings.csv for this participant."""
        return [f.row() for f in self.items]
