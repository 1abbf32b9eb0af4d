"""Simulated people who are upset by recorded events, for the recovery tests.

Mood is one Ornstein-Uhlenbeck process per person; each upsetting event kicks it and the kick
decays with the process's own rate (`springback.simulate.shock_impulses`), so the known
half-life of the return after an event is ln 2 / rate. The process runs on through the night;
only the prompts are missing there.
"""

from __future__ import annotations

import numpy as np

from springback.model import ParticipantData
from springback.simulate import noise_for_sd, ou_path, rate_for_half_life, shock_impulses
from tests.support.metrics_sim import events_at, participant, prompt_hours


def upset_people(half_life: float, count: int, seed: int, *, days: int = 60,
                 every: int = 3, size: float = 3.0, sd: float = 1.0,
                 first: float = 10.0, last: float = 12.0,
                 noise_sd: float = 0.0, drift: float = 0.0) -> list[ParticipantData]:
    """`count` seeded people: 5 prompts a day (09-21), an upsetting event every `every` days
    at a random time between `first` and `last` o'clock (late morning by default), kicking mood
    `size` worse; `noise_sd` adds white answer noise to the composite and `drift` a straight
    worsening of the level by that much over the study."""
    rng = np.random.default_rng(seed)
    rate = float(rate_for_half_life(half_life))
    people = []
    for p in range(count):
        hours = prompt_hours(days, 5, rng)
        events = np.arange(1, days, every) * 24.0 + rng.uniform(first, last, len(range(
            1, days, every)))
        kicks = shock_impulses(hours, events, np.full(len(events), size), rate)
        x = ou_path(hours, mean=3.0, rate=rate, noise=noise_for_sd(rate, sd), rng=rng,
                    kicks=kicks)
        y = np.asarray(x) + (rng.normal(0.0, noise_sd, len(hours)) if noise_sd else 0.0)
        y = y + drift * (hours - hours[0]) / np.ptp(hours)
        people.append(participant(hours, y, pid=f"u{p:02d}", rng=rng,
                                  events=events_at(list(events), pid=f"u{p:02d}")))
    return people
