"""Simulated prompt times and mood processes for the tests, on the product's own simulators.

Every test simulator draws through `springback.simulate` (stratified prompt times, the exact
Ornstein-Uhlenbeck transition), so there is one implementation of each; the helpers here only
name the schedules and parameterisations the tests use.
"""

from __future__ import annotations

import numpy as np

from springback.simulate import noise_for_sd, ou_path, stratified_times


def prompt_hours(days: int, per_day: int, rng: np.random.Generator, first: float = 9.0,
                 last: float = 21.0, within: tuple[float, float] = (0.0, 1.0)) -> np.ndarray:
    """One random prompt per equal slot of the day between `first` and `last` (hours since day 0
    midnight); `within` is the part of each slot a prompt may fall in (0-1 = anywhere)."""
    slot = (last - first) / per_day
    blocks = [(first + slot * (i + within[0]), first + slot * (i + within[1]))
              for i in range(per_day)]
    return stratified_times(days, blocks, rng)


def ou_values(hours: np.ndarray, *, rate: float | np.ndarray, sd: float | np.ndarray,
              mean: float, rng: np.random.Generator) -> np.ndarray:
    """An Ornstein-Uhlenbeck process sampled exactly at `hours`, with stationary SD `sd`.

    Exact transition (Gillespie 1996, "Exact numerical simulation of the Ornstein-Uhlenbeck
    process and its integral", Phys Rev E 54:2084): X(t+dt) - mu = e^{-rate dt}(X(t) - mu)
    + sd sqrt(1 - e^{-2 rate dt}) Z. A rate or SD per time gives a slowly changing process.
    """
    t = np.asarray(hours, dtype=float)[None, :]
    rate_arr = np.broadcast_to(np.asarray(rate, dtype=float), t.shape)
    sd_arr = np.broadcast_to(np.asarray(sd, dtype=float), t.shape)
    return np.asarray(ou_path(t, mean=mean, rate=rate_arr, noise=noise_for_sd(rate_arr, sd_arr),
                              rng=rng))[0]
