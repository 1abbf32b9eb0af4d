"""The findings stage: the only place where anything about a participant is concluded.

`decide` is a pure function of the metrics' results, the safety flags and the settings. It
returns one frozen `Finding` per topic (a reading code, a certainty grade, the numbers behind
it and the reason when there is none); templates, chart captions, the overview and delivery
texts only phrase them. Topics and their readings:

  course         no_clear_change | gradual_change | abrupt_shift | switching
  warning        rising | not_rising (on the lead-up of an abrupt shift, else on all data)
  pattern        the combination: shift_after_rising | shift_without_rising |
                 rising_no_shift | gradual_change | switching | no_clear_change
  level          better_side | middle | worse_side | changed (the course moved)
  variability    small | moderate | large
  recovery       within_hours | within_a_day | days
  carry_over     none | weak | moderate | strong
  landscape      one_level | several_levels (the valleys of the mood landscape) |
                 moved_away (one level, but the last two weeks lay outside the typical range)
  load           worse_with_load | better_with_load | about_the_same (mood and daily load)
  questionnaire_<key>  improved | worsened | no_reliable_change | one_score
  participation  high | medium | low
  help           refer | hold | none

Every topic can also read `not_enough_data`, with the reason.
"""

from __future__ import annotations

from collections.abc import Sequence

import pandas as pd

from springback.findings import topics
from springback.findings.course import course
from springback.findings.records import (
    CERTAINTIES,
    FINDINGS_CSV_COLUMNS,
    NOT_ENOUGH_DATA,
    Certainty,
    Finding,
    Findings,
    missing,
)
from springback.findings.warning import warning
from springback.metrics.results import ParticipantResults
from springback.model import Flag
from springback.settings import StudySettings

__all__ = ["CERTAINTIES", "FINDINGS_CSV_COLUMNS", "NOT_ENOUGH_DATA", "Certainty", "Finding",
           "Findings", "decide", "missing"]

SUMMARY_POINTS = 3
"""At most this many findings lead a booklet (Bartels et al. 2023, Heliyon 9:e20084: few
topics, a summary first)."""


def decide(results: ParticipantResults, flags: Sequence[Flag],
           settings: StudySettings) -> Findings:
    """Every finding of one participant, decided once."""
    pid = results.participant
    scale, worse = results.series.scale, results.series.higher_is_worse
    alpha = settings.metrics.alpha
    fams = results.families
    shape = course(pid, fams, alpha, worse)
    shift_day = (pd.Timestamp(shape.numbers["date"]) if shape.reading == "abrupt_shift"
                 else None)
    warn = warning(pid, fams, shape, alpha, shift_day)
    items = [
        shape, warn, overall(pid, shape, warn),
        topics.level(results, scale, worse, shape.reading), topics.variability(results, scale),
        topics.recovery(results), topics.carry_over(results), topics.landscape(results),
        topics.load(results, worse, alpha),
        *topics.questionnaires(results, settings),
        topics.participation(results), topics.help_needed(pid, flags),
    ]
    summary = {
        "participant": _summary(items, settings.booklet.show_change_to_participant),
        "therapist": _summary(items, True),
    }
    return Findings(pid, tuple(items), summary)


def overall(participant: str, shape: Finding, warn: Finding) -> Finding:
    """The therapist's overall pattern: the course combined with the warning reading."""
    numbers = {"course": shape.reading, "warning": warn.reading}
    if not shape.known:
        return missing(participant, "pattern", shape.reason, **numbers)
    rising = warn.reading == "rising"
    if shape.reading == "abrupt_shift":
        reading = "shift_after_rising" if rising else "shift_without_rising"
    elif rising and shape.reading in ("no_clear_change", "gradual_change"):
        reading = "rising_no_shift"
    else:
        reading = shape.reading
    certainty = shape.certainty
    if reading == "rising_no_shift" and shape.reading == "no_clear_change":
        certainty = warn.certainty  # the reading is the warning's alone
    elif rising and CERTAINTIES.index(warn.certainty) > CERTAINTIES.index(certainty):
        certainty = warn.certainty  # as sure as the less sure of the two
    evidence = shape.evidence + (warn.evidence if rising or reading.startswith("shift") else ())
    return Finding(participant, "pattern", reading, certainty, numbers, evidence=evidence)


def _summary(items: Sequence[Finding], show_warning: bool) -> tuple[str, ...]:
    """Topics a summary states, most important first: the course always; a reliable change
    in a questionnaire; rising indicators (where shown); then level and recovery."""
    by = {f.topic: f for f in items}
    chosen = ["course"]
    chosen += [f.topic for f in items if f.topic.startswith("questionnaire_")
               and f.reading in ("improved", "worsened")]
    if show_warning and by["warning"].reading == "rising":
        chosen.append("warning")
    chosen += [t for t in ("level", "recovery", "carry_over")
               if by[t].known and by[t].reading != "changed"]
    return tuple(chosen[:SUMMARY_POINTS])

