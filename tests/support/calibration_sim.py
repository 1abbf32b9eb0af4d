"""Simulated classes of mood processes with known truth, for calibrating the findings' readings.

Each class draws `n` people at once (arrays of shape (n, prompts)) through `springback.simulate`
(stratified prompt times, the exact Ornstein-Uhlenbeck transition, the double-well Langevin
process) and returns one `ParticipantData` per person (tests/support/metrics_sim.participant:
three items on 1-7, composite low_mood, higher = worse). The design is the example study's:
five prompts a day between 08:00 and 22:00, here for DAYS days.

The parameters of every class are in CLASSES; what each class *is* (the truth a reading must
agree with) is stated in tests/findings/test_calibration.py.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from springback import simulate
from springback.findings import Findings, decide
from springback.metrics import early_warning, landscape, leadup, shifts
from springback.metrics._series import description, prepare
from springback.metrics.results import Family, ParticipantResults
from springback.model import ParticipantData
from springback.settings import StudySettings
from tests.support import metrics_sim

DAYS = 56
PER_DAY = 5
BLOCKS = [(8.0 + 14.0 * i / PER_DAY, 8.0 + 14.0 * (i + 1) / PER_DAY) for i in range(PER_DAY)]
LEVEL = 3.5
"""Usual level of the composite (1-7 scale, higher = worse)."""
SD = 0.6
"""Stationary SD of the momentary composite around its level."""
HALF_LIFE = 3.0
"""Usual recovery half-life in hours (rate ln 2 / 3 per hour)."""


def calibration_settings(surrogates: int = 199) -> StudySettings:
    """The metrics_sim study with few surrogates and a one-cell sensitivity grid (speed)."""
    return metrics_sim.settings_for(surrogates=surrogates, windows=[0.5], bandwidths_days=[7.0])


def prompt_hours(n: int, rng: np.random.Generator) -> np.ndarray:
    """Prompt times of `n` people, shape (n, DAYS * PER_DAY), one per block of the day."""
    return simulate.stratified_times(DAYS, BLOCKS, rng, size=n, margin=0.25)


def _ou(t: np.ndarray, rng: np.random.Generator, *, mean: np.ndarray | float = LEVEL,
        half_life: np.ndarray | float = HALF_LIFE, sd: np.ndarray | float = SD) -> np.ndarray:
    """OU values at `t` with the given (possibly time-varying) mean, half-life and SD."""
    rate = np.broadcast_to(np.asarray(simulate.rate_for_half_life(half_life)), t.shape)
    noise = simulate.noise_for_sd(rate, np.broadcast_to(np.asarray(sd, dtype=float), t.shape))
    mean_arr = np.broadcast_to(np.asarray(mean, dtype=float), t.shape)
    return np.asarray(simulate.ou_path(t, mean=mean_arr, rate=rate, noise=noise, rng=rng))


def _share(t: np.ndarray) -> np.ndarray:
    """Time as a share of the study (0 at the first prompt, 1 at the last), per person."""
    return (t - t[:, :1]) / (t[:, -1:] - t[:, :1])


def stationary(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Stationary OU: level 3.5, SD 0.6, half-life 3 h."""
    return _ou(t, rng)


def drift(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """OU whose mean drifts linearly from 3.0 to 4.2 over the study (2 stationary SDs)."""
    return _ou(t, rng, mean=3.0 + 1.2 * _share(t))


def slowing(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """OU whose half-life rises linearly from 1 h to 12 h, stationary SD held at 0.6."""
    return _ou(t, rng, half_life=1.0 + 11.0 * _share(t))


def slowing_rising_variance(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Critical slowing down: half-life 1 h to 12 h at a fixed noise level, so the stationary
    SD rises with it (SD = noise / sqrt(2 rate): 0.35 to 1.2), no jump."""
    half_life = 1.0 + 11.0 * _share(t)
    sd = 0.35 * np.sqrt(half_life)
    return _ou(t, rng, half_life=half_life, sd=sd)


def jump(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Stationary OU with an abrupt rise of 1.2 (2 SDs) of its mean on day 42, no slowing."""
    return _ou(t, rng, mean=LEVEL + simulate.step_shift(t, 42 * 24.0, 1.2))


def episode(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Stationary OU whose mean rises by 1.2 (2 SDs) from day 24 for 8 days and then comes
    back: a passing episode, no lasting shift."""
    return _ou(t, rng, mean=LEVEL + simulate.step_shift(t, 24 * 24.0, 1.2)
               - simulate.step_shift(t, 32 * 24.0, 1.2))


def staircase(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """OU whose mean climbs in 6 steps of 0.25 (0.4 SD each), one every 8 days from day 4:
    1.5 in all, built up over 40 days."""
    steps = np.floor((t / 24.0 - 4.0) / 8.0) + 1.0
    return _ou(t, rng, mean=3.0 + 0.25 * np.clip(steps, 0.0, 6.0))


def _telegraph(t: np.ndarray, rng: np.random.Generator, residence_hours: float) -> np.ndarray:
    """A two-state Markov switch in continuous time: 0/1 at each time, exponential stays."""
    n = t.shape[0]
    horizon = float(t.max() - t.min()) + 1.0
    draws = int(3 * horizon / residence_hours) + 20
    stays = rng.exponential(residence_hours, (n, draws))
    switch_at = t[:, :1] + np.cumsum(stays, axis=1) - stays[:, :1] * rng.random((n, 1))
    first = rng.integers(0, 2, (n, 1))
    count = np.stack([np.searchsorted(switch_at[i], t[i], side="right") for i in range(n)])
    return ((first + count) % 2).astype(float)


def switch_close(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Two-state switch between close levels 3.3 and 3.7 (two thirds of an SD apart), stays of
    two days on average, OU (SD 0.6, half-life 3 h) within a state."""
    state = _telegraph(t, rng, 48.0)
    return _ou(t, rng, mean=3.3 + 0.4 * state)


def switch_far(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Two-state switch between far levels 2.5 and 5.0 (six within-state SDs apart), stays of
    two days on average, OU (SD 0.4, half-life 3 h) within a state."""
    state = _telegraph(t, rng, 48.0)
    return _ou(t, rng, mean=2.5 + 2.5 * state, sd=0.4)


def tilted_double_well(t: np.ndarray, rng: np.random.Generator, *, low: float, high: float,
                       barrier: float, noise: float, tilt: float, step: float = 0.1
                       ) -> np.ndarray:
    """Euler-Maruyama path of dX = (-U'(X) - tilt) dt + noise dW read at `t` (hours).

    U is simulate.double_well_drift's quartic (wells at `low` and `high`, barrier height
    `barrier`); a constant `tilt` adds the linear term tilt * x to U, which deepens the low
    well when positive (an asymmetric double well). With tilt 0 this is
    simulate.double_well_path.
    """
    if tilt == 0.0:
        return np.asarray(simulate.double_well_path(t, low=low, high=high, barrier=barrier,
                                                    noise=noise, rng=rng, step=step))
    origin = t[:, :1]
    index = np.floor((t - origin) / step + 1e-9).astype(np.int64)
    steps = int(index.max()) + 1
    x = np.where(rng.random(t.shape[0]) < 0.5, low, high).astype(float)
    path = np.empty((t.shape[0], steps))
    scale = noise * math.sqrt(step)
    for g in range(steps):
        path[:, g] = x
        x = x + (simulate.double_well_drift(x, low, high, barrier) - tilt) * step \
            + scale * rng.standard_normal(x.shape[0])
    return np.take_along_axis(path, index, axis=1)


DW_LOW, DW_HIGH = 2.5, 5.0
DW_BARRIER = 0.06
DW_NOISE = 0.3


def double_well(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Symmetric double well: wells at 2.5 and 5.0, about half the time in each."""
    return tilted_double_well(t, rng, low=DW_LOW, high=DW_HIGH, barrier=DW_BARRIER,
                              noise=DW_NOISE, tilt=0.0)


DW_TILT = 0.01
"""Tilt that puts about 60% of the time in the low well (59% measured over 40 seeded people,
with two humps in the pooled histogram: the trough at a quarter of the taller peak)."""


def double_well_asymmetric(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Asymmetric double well: the same wells, the low one deeper (about 60/40 of the time)."""
    return tilted_double_well(t, rng, low=DW_LOW, high=DW_HIGH, barrier=DW_BARRIER,
                              noise=DW_NOISE, tilt=DW_TILT)


@dataclass(frozen=True)
class SimClass:
    """One simulated class: its simulator, how many people and the seed."""

    simulate: Callable[[np.ndarray, np.random.Generator], np.ndarray]
    n: int
    seed: int


CLASSES: dict[str, SimClass] = {
    "stationary": SimClass(stationary, 200, 101),
    "drift": SimClass(drift, 40, 102),
    "slowing": SimClass(slowing, 50, 103),
    "slowing_rising_variance": SimClass(slowing_rising_variance, 50, 104),
    "jump": SimClass(jump, 40, 105),
    "double_well": SimClass(double_well, 40, 106),
    "double_well_asymmetric": SimClass(double_well_asymmetric, 40, 107),
    "switch_close": SimClass(switch_close, 40, 108),
    "switch_far": SimClass(switch_far, 40, 109),
    "staircase": SimClass(staircase, 40, 110),
    "episode": SimClass(episode, 40, 111),
}


def people(name: str, seed: int | None = None, n: int | None = None) -> list[ParticipantData]:
    """The people of one class (its own seed and size unless given)."""
    spec = CLASSES[name]
    rng = np.random.default_rng(spec.seed if seed is None else seed)
    count = spec.n if n is None else n
    t = prompt_hours(count, rng)
    values = spec.simulate(t, rng)
    return [metrics_sim.participant(t[i], values[i], pid=f"{name}-{i:03d}", rng=rng)
            for i in range(count)]


def reading_families(data: ParticipantData, settings: StudySettings) -> ParticipantResults:
    """The families the course and warning readings use, computed as metrics.compute does."""
    series = prepare(data, settings)
    fams: dict[str, Family] = {"shifts": shifts.shift_family(series, settings)}
    fams["warnings"] = early_warning.early_warnings(series, settings, data.participant)
    before = leadup.leadup_warnings(series, fams["shifts"], settings, data.participant)
    if before is not None:
        fams["warnings_leadup"] = before
    fams["landscape"] = landscape.landscape_family(series, data, settings)
    return ParticipantResults(participant=data.participant, variable=series.variable,
                              families=fams, enough_data=True, reason="",
                              series=description(series))


def readings(data: ParticipantData, settings: StudySettings) -> Findings:
    """Every finding of one simulated person, from the reading families."""
    return decide(reading_families(data, settings), [], settings)
