"""Seeded simulated processes with known truth for the shifts, landscape and entropy tests."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pandas as pd

from springback.model import ParticipantData
from springback.settings import StudySettings
from tests.support import sim

START = pd.Timestamp("2026-03-02 00:00", tz="UTC")


def settings(scale: tuple[float, float] = (0, 100), higher_is: str = "worse",
             **sections: Any) -> StudySettings:
    """Study settings with one item 'mood', one item 'stress' and composite 'low_mood' = mood."""
    raw: dict[str, Any] = {
        "items": {"mood": {"scale": list(scale)}, "stress": {"scale": [0, 10]}},
        "composites": {"low_mood": {"items": ["mood"], "higher_is": higher_is}},
    }
    raw.update(sections)
    return StudySettings.model_validate(raw)


def prompt_hours(days: int, per_day: int, rng: np.random.Generator,
                 first: float = 8.0, last: float = 22.0) -> np.ndarray:
    """Stratified random prompt times (hours since START), inside the middle 80% of each slot."""
    return sim.prompt_hours(days, per_day, rng, first, last, within=(0.1, 0.9))


def participant(hours: np.ndarray, values: np.ndarray, pid: str = "p1",
                stress: np.ndarray | None = None, events: pd.DataFrame | None = None,
                tz: str = "UTC") -> ParticipantData:
    """Build ParticipantData per model.py's column contract (study day starts 04:00)."""
    time = START + pd.to_timedelta(np.asarray(hours), unit="h")
    local = time.tz_convert(tz)
    study_day = (local - pd.Timedelta(hours=4)).tz_localize(None).normalize()
    n = len(values)
    momentary = pd.DataFrame({
        "participant": pid,
        "time": time,
        "local_time": local,
        "study_day": study_day.astype("datetime64[ns]"),
        "scheduled": pd.Series(pd.NaT, index=range(n), dtype="datetime64[ns, UTC]"),
        "source_row": np.arange(2, n + 2),
        "mood": np.asarray(values, float),
        "stress": np.asarray(stress, float) if stress is not None else np.full(n, np.nan),
        "low_mood": np.asarray(values, float),
    })
    if events is None:
        events = pd.DataFrame({"participant": pd.Series([], dtype=str),
                               "time": pd.Series([], dtype="datetime64[ns, UTC]"),
                               "local_time": pd.Series([], dtype=f"datetime64[ns, {tz}]"),
                               "kind": pd.Series([], dtype=str),
                               "intensity": pd.Series([], dtype=float),
                               "upsetting": pd.Series([], dtype=bool)})
    empty = pd.DataFrame()
    return ParticipantData(participant=pid, language="en", region="default", consent="yes",
                           feedback=True, therapist=True, momentary=momentary, events=events,
                           questionnaires=empty, quality=empty, set_aside=empty)


def double_well(hours: np.ndarray, rng: np.random.Generator, sigma: float = 0.7,
                unit_hours: float = 6.0, dt: float = 0.01) -> tuple[np.ndarray, np.ndarray,
                                                                    np.ndarray]:
    """Euler-Maruyama path of dx = (x - x^3) dt + sigma dW (time unit `unit_hours`).

    Returns the latent value at each prompt, the fine time grid (hours) and the fine path.
    Wells at -1 and +1, barrier at 0 (Kramers' double well; e.g. Gardiner 2009, "Stochastic
    Methods", ch. 11, from memory).
    """
    steps = math.ceil(hours[-1] / unit_hours / dt) + 2
    noise = rng.standard_normal(steps) * sigma * math.sqrt(dt)
    path = np.empty(steps)
    x = -1.0 if rng.uniform() < 0.5 else 1.0
    for i in range(steps):
        path[i] = x
        x = x + (x - x**3) * dt + noise[i]
    grid = np.arange(steps) * dt * unit_hours
    return np.interp(hours, grid, path), grid, path


def single_well(hours: np.ndarray, rng: np.random.Generator, phi_per_hour: float = 0.8
                ) -> np.ndarray:
    """Unit-variance Ornstein-Uhlenbeck values at irregular times (exact discretisation)."""
    return sim.ou_values(hours, rate=-math.log(phi_per_hour), sd=1.0, mean=0.0, rng=rng)


def latent_residence(grid: np.ndarray, path: np.ndarray, low: float, high: float
                     ) -> dict[str, float]:
    """Mean residence (hours) per core state of a fine latent path: time in state / exits.

    Written as a plain loop, independently of springback.metrics.states, for cross-checking.
    """
    state = None
    entered = 0.0
    time_in = {"low": 0.0, "high": 0.0}
    exits = {"low": 0, "high": 0}
    for t, x in zip(grid, path, strict=True):
        new = "low" if x <= low else "high" if x >= high else state
        if new != state:
            if state is not None:
                time_in[state] += t - entered
                exits[state] += 1
            entered = t
            state = new
    if state is not None:
        time_in[state] += grid[-1] - entered
    return {k: time_in[k] / exits[k] if exits[k] else math.nan for k in time_in}


def brute_force_partition(y: np.ndarray, penalty: float, min_size: int) -> list[int]:
    """Optimal partitioning without pruning (Jackson et al. 2005 recursion as restated in
    Killick et al. 2012): F(t) = min over tau of F(tau) + C(y[tau:t]) + penalty, F(0) = -penalty,
    L2 cost, every segment at least min_size long. Returns segment ends including n."""
    y = np.asarray(y, float)
    n = len(y)
    cs = np.concatenate([[0.0], np.cumsum(y)])
    cs2 = np.concatenate([[0.0], np.cumsum(y * y)])

    def cost(a: int, b: int) -> float:
        s = cs[b] - cs[a]
        return float(cs2[b] - cs2[a] - s * s / (b - a))

    best = [math.inf] * (n + 1)
    prev = [0] * (n + 1)
    best[0] = -penalty
    for t in range(min_size, n + 1):
        for tau in range(0, t - min_size + 1):
            if tau != 0 and tau < min_size:
                continue
            if best[tau] == math.inf:
                continue
            v = best[tau] + cost(tau, t) + penalty
            if v < best[t] - 1e-12:
                best[t], prev[t] = v, tau
    ends = []
    t = n
    while t > 0:
        ends.append(t)
        t = prev[t]
    return sorted(ends)


def two_periods(rng: np.random.Generator, level_1: np.ndarray, level_2: np.ndarray,
                gap_days: int, noise: float, per_day: int = 6) -> ParticipantData:
    """Daily levels of two measurement periods, `gap_days` apart, each day's `per_day`
    answers around its level (the momentary rows carry their period, 1 or 2)."""
    days_1, days_2 = len(level_1), len(level_2)
    hours = np.concatenate([prompt_hours(days_1, per_day, rng),
                            prompt_hours(days_2, per_day, rng) + (days_1 + gap_days) * 24.0])
    levels = np.repeat(np.concatenate([level_1, level_2]), per_day)
    values = np.clip(levels + rng.normal(0.0, noise, len(levels)), 0, 100)
    data = participant(hours, values)
    period = np.repeat([1, 2], [days_1 * per_day, days_2 * per_day])
    return dataclasses.replace(data, momentary=data.momentary.assign(period=period))
