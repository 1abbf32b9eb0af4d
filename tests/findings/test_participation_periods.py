"""The participation finding carries the measurement periods and the kind of times."""

from __future__ import annotations

import dataclasses
from collections.abc import Callable

import numpy as np
import pandas as pd

from springback.findings import topics
from springback.metrics import compute
from springback.model import ParticipantData
from tests.support.metrics_sim import participant, prompt_hours, settings_for


def _person(period: Callable[[np.ndarray], np.ndarray] | None, scheduled: bool) -> ParticipantData:
    rng = np.random.default_rng(4)
    hours = prompt_hours(28, 5, rng)
    data = participant(hours, rng.normal(3.0, 0.8, len(hours)))
    m = data.momentary if period is None else data.momentary.assign(period=period(hours))
    return dataclasses.replace(data, momentary=m, times_scheduled=scheduled)


def test_two_periods_and_scheduled_times_are_in_the_finding() -> None:
    # Known truth of the simulation: days 0-13 period 1, days 14-27 period 2, 5 prompts a day.
    data = _person(lambda h: np.where(h < 14 * 24, 1, 2), True)
    f = topics.participation(compute(data, settings_for(surrogates=19)))
    n = f.numbers
    assert (n["periods"], n["measured_in"], n["times"]) == (2, "periods", "scheduled")
    days = pd.to_datetime(data.momentary["study_day"])
    first_2 = days[data.momentary["period"] == 2].min()
    assert n["period_1_first"] == days.min().date().isoformat()
    assert n["period_2_first"] == first_2.date().isoformat()
    assert n["period_1_answered"] + n["period_2_answered"] == n["answered"] == 28 * 5
    assert "measured_in=periods" in f.detail()


def test_one_period_with_answer_times() -> None:
    f = topics.participation(compute(_person(None, False), settings_for(surrogates=19)))
    assert (f.numbers["periods"], f.numbers["measured_in"], f.numbers["times"]) == \
        (1, "one_period", "answered")
