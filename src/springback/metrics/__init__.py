"""Resilience metrics: pure functions from one participant's data to frozen results.

`compute` is the recipe: each family is one line, in the order booklets present them.
"""

from __future__ import annotations

from typing import Any

from springback.metrics import (
    descriptives,
    dynamics,
    early_warning,
    entropy,
    landscape,
    leadup,
    questionnaires,
    recovery,
    shifts,
)
from springback.metrics._series import description, prepare
from springback.metrics.results import Family, ParticipantResults, to_rows
from springback.model import ParticipantData
from springback.settings import StudySettings

__all__ = ["compute", "results_rows"]


def compute(data: ParticipantData, settings: StudySettings) -> ParticipantResults:
    """Compute every metric family for one participant."""
    series = prepare(data, settings)
    enough = series.n >= settings.booklet.min_prompts
    reason = "" if enough else (
        f"{series.n} answered prompts; a booklet needs at least {settings.booklet.min_prompts}")
    families: dict[str, Family] = {}
    families["descriptives"] = descriptives.describe(series, data, settings)
    families["dynamics"] = dynamics.carry_over(series, settings, data.participant)
    families["recovery"] = recovery.bounce_back(series, data, settings)
    families["questionnaires"] = questionnaires.questionnaire_family(data.questionnaires, settings)
    families["shifts"] = shifts.shift_family(series, settings, families.get("questionnaires"))
    families["warnings"] = early_warning.early_warnings(series, settings, data.participant)
    before_shift = leadup.leadup_warnings(series, families["shifts"], settings, data.participant)
    if before_shift is not None:
        families["warnings_leadup"] = before_shift
    families["landscape"] = landscape.landscape_family(series, data, settings)
    families["complexity"] = entropy.complexity_family(series, data.participant, settings)
    return ParticipantResults(participant=data.participant, variable=series.variable,
                              families=families, enough_data=enough, reason=reason,
                              series=description(series))


def results_rows(results: ParticipantResults) -> list[dict[str, Any]]:
    """Rows of out/metrics.csv for one participant (missing values empty, reason in note)."""
    return to_rows(results)
