"""Seeded simulators of mood processes with known dynamics, for the example study and tests.

Pure numpy: every function takes its random numbers from a `numpy.random.Generator` passed in,
so the same seed always gives the same series. Times are hours (floats) on one increasing axis
per series; arrays of shape (n,) are one series and (p, n) are p series simulated together.
Parameters given per series have shape (p,) or (p, 1); parameters given per time point have the
shape of the times (a time-varying rate, a moving mean).

The processes are the textbook ones used to think about resilience:

- Ornstein-Uhlenbeck (OU): dX = -rate (X - mean) dt + noise dW. Sampled at gap d it is an AR(1)
  with phi = exp(-rate d) and innovation variance noise^2 (1 - exp(-2 rate d)) / (2 rate); the
  recovery half-life is ln 2 / rate (standard result; Gardiner 2009, "Stochastic methods",
  §3.8.4).
- A double-well Langevin process, dX = -U'(X) dt + noise dW with a quartic potential U, which
  flickers between two states (Scheffer et al. 2009, Nature 461:53-59, "Early-warning signals for
  critical transitions").
- Shocks: a kick of a given size that decays with the process's own rate, so an event's effect
  halves every ln 2 / rate hours.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

LN2 = float(np.log(2.0))
_CHUNK = 64


def half_life(rate: float | np.ndarray) -> float | np.ndarray:
    """Return the recovery half-life (hours) of an OU process with this rate (per hour)."""
    return LN2 / np.asarray(rate, dtype=float) if np.ndim(rate) else LN2 / float(rate)


def rate_for_half_life(hours: float | np.ndarray) -> float | np.ndarray:
    """Return the OU rate (per hour) whose recovery half-life is `hours`."""
    return LN2 / np.asarray(hours, dtype=float) if np.ndim(hours) else LN2 / float(hours)


def stationary_sd(rate: float | np.ndarray, noise: float | np.ndarray) -> float | np.ndarray:
    """Return the stationary SD noise / sqrt(2 rate) of an OU process."""
    return np.asarray(noise, dtype=float) / np.sqrt(2.0 * np.asarray(rate, dtype=float))


def noise_for_sd(rate: float | np.ndarray, sd: float | np.ndarray) -> float | np.ndarray:
    """Return the OU noise level that gives stationary SD `sd` at this rate."""
    return np.asarray(sd, dtype=float) * np.sqrt(2.0 * np.asarray(rate, dtype=float))


def stratified_times(
    days: int,
    blocks: Sequence[tuple[float, float]],
    rng: np.random.Generator,
    size: int | None = None,
    margin: float = 0.0,
) -> np.ndarray:
    """Draw one prompt time uniformly inside each daily block, for `days` days.

    Blocks are (start, end) clock hours, e.g. five blocks between 08:00 and 22:00; the last
    `margin` hours of each block are left free, so prompts are at least `margin` apart (apps
    usually enforce such a spacing). Returns hours since midnight of day 0 on the local clock,
    shape (days * len(blocks),) or (size, days * len(blocks)), increasing along the last axis.
    """
    lo = np.array([b[0] for b in blocks], dtype=float)
    hi = np.array([b[1] for b in blocks], dtype=float)
    if np.any(hi - margin <= lo) or np.any(lo[1:] < hi[:-1]) or margin < 0:
        raise ValueError("blocks must be increasing, non-overlapping (start, end) hours, "
                         "each longer than the margin")
    hi = hi - margin
    shape = (1 if size is None else size, days, len(blocks))
    u = rng.random(shape)
    hours = np.arange(days, dtype=float)[None, :, None] * 24.0 + lo + u * (hi - lo)
    hours = hours.reshape(shape[0], -1)
    return hours[0] if size is None else hours


def linear_ramp(
    t: np.ndarray, start: np.ndarray | float, end: np.ndarray | float,
    before: np.ndarray | float, after: np.ndarray | float,
) -> np.ndarray:
    """Return `before` until time `start`, `after` from `end`, and a straight line between."""
    t = np.asarray(t, dtype=float)
    start, end, before, after = (_per_series(v, t) for v in (start, end, before, after))
    share = np.clip((t - start) / np.maximum(end - start, 1e-12), 0.0, 1.0)
    return before + share * (after - before)


def step_shift(t: np.ndarray, at: np.ndarray | float, size: np.ndarray | float) -> np.ndarray:
    """Return 0 before time `at` and `size` from then on (an abrupt shift of the mean)."""
    t = np.asarray(t, dtype=float)
    at, size = _per_series(at, t), _per_series(size, t)
    return np.where(t >= at, size, 0.0) + np.zeros_like(t)


def shock_response(
    t: np.ndarray, event_times: np.ndarray, sizes: np.ndarray, half_life_hours: float
) -> np.ndarray:
    """Return the summed effect of events on one series: size * 2^(-(t - event) / half-life).

    The deterministic part of the recovery, for checking recovery estimates; `t`, `event_times`
    and `sizes` are one-dimensional.
    """
    t = np.asarray(t, dtype=float)[:, None]
    since = t - np.asarray(event_times, dtype=float)[None, :]
    decay = np.where(since >= 0, np.exp2(-np.maximum(since, 0.0) / half_life_hours), 0.0)
    return decay @ np.asarray(sizes, dtype=float)


def shock_impulses(
    t: np.ndarray, event_times: np.ndarray, sizes: np.ndarray, rate: np.ndarray | float
) -> np.ndarray:
    """Return each event's kick, decayed to the first time at or after it, placed at that time.

    `t` is (n,) or (p, n) and increasing along each row; `event_times` and `sizes` are (e,) or
    (p, e), padded with NaN where a series has fewer events. `rate` (per hour) is a scalar, one
    per series, or one per time point (the rate of the interval ending there). Events after the
    last time are dropped. Feed the result to `ou_path(kicks=...)`.
    """
    t2 = np.atleast_2d(np.asarray(t, dtype=float))
    events = np.atleast_2d(np.asarray(event_times, dtype=float))
    sizes2 = np.atleast_2d(np.asarray(sizes, dtype=float))
    rates = np.broadcast_to(_per_series(rate, t2), t2.shape)
    if np.any(np.diff(t2, axis=1) <= 0):
        raise ValueError("times must increase along each series")
    if events.shape != sizes2.shape or (events.size and events.shape[0] != t2.shape[0]):
        raise ValueError("give one row of event times and sizes per series")
    out = np.zeros_like(t2)
    if events.size == 0:
        return out if np.ndim(t) == 2 else out[0]
    # Offsetting each row by a large constant lets one searchsorted serve every series.
    low = min(np.nanmin(t2), np.nanmin(events))
    width = max(np.nanmax(t2), np.nanmax(events)) - low + 1.0
    offset = (np.arange(t2.shape[0], dtype=float) * width)[:, None]
    flat_t = (t2 - low + offset).ravel()
    flat_e = (events - low + offset[: events.shape[0]]).ravel()
    flat_s = sizes2.ravel()
    keep = ~np.isnan(flat_e) & ~np.isnan(flat_s)
    flat_e, flat_s = flat_e[keep], flat_s[keep]
    rows = np.repeat(np.arange(events.shape[0]), events.shape[1])[keep]
    at = np.searchsorted(flat_t, flat_e, side="left")
    inside = (at < flat_t.size) & (at // t2.shape[1] == rows)
    at, flat_e, flat_s = at[inside], flat_e[inside], flat_s[inside]
    gain = flat_s * np.exp(-rates.ravel()[at] * (flat_t[at] - flat_e))
    np.add.at(out.reshape(-1), at, gain)
    return out if np.ndim(t) == 2 else out[0]


def ou_path(
    t: np.ndarray,
    *,
    mean: np.ndarray | float,
    rate: np.ndarray | float,
    noise: np.ndarray | float,
    rng: np.random.Generator,
    start: np.ndarray | float | None = None,
    kicks: np.ndarray | None = None,
) -> np.ndarray:
    """Simulate an Ornstein-Uhlenbeck process exactly at the increasing times `t` (hours).

    `mean` and `rate` may vary over time (their value at t_j holds on the interval ending at
    t_j); `noise` is the diffusion level per sqrt(hour). The first value is `start`, or drawn
    from the stationary distribution at the first time. `kicks` (same shape as `t`) are added
    at each time and then decay with the process (see `shock_impulses`).
    """
    t2 = np.atleast_2d(np.asarray(t, dtype=float))
    means = np.broadcast_to(_per_series(mean, t2), t2.shape)
    rates = np.broadcast_to(_per_series(rate, t2), t2.shape)
    noises = np.broadcast_to(_per_series(noise, t2), t2.shape)
    if np.any(rates <= 0):
        raise ValueError("the rate must be positive")
    gaps = np.diff(t2, axis=1)
    if np.any(gaps <= 0):
        raise ValueError("times must increase along each series")
    add = np.zeros_like(t2) if kicks is None else np.atleast_2d(np.asarray(kicks, dtype=float))
    z = rng.standard_normal(t2.shape)
    x = np.empty_like(t2)
    if start is None:
        x[:, 0] = means[:, 0] + stationary_sd(rates[:, 0], noises[:, 0]) * z[:, 0]
    else:
        x[:, 0] = np.broadcast_to(np.asarray(start, dtype=float).ravel(), t2.shape[:1])
    x[:, 0] += add[:, 0]
    phi = np.exp(-rates[:, 1:] * gaps)
    innovation_sd = noises[:, 1:] * np.sqrt((1.0 - phi**2) / (2.0 * rates[:, 1:]))
    for j in range(1, t2.shape[1]):
        m = means[:, j]
        shock = add[:, j] + innovation_sd[:, j - 1] * z[:, j]
        x[:, j] = m + (x[:, j - 1] - m) * phi[:, j - 1] + shock
    return x if np.ndim(t) == 2 else x[0]


def double_well_drift(
    x: np.ndarray, low: np.ndarray | float, high: np.ndarray | float, barrier: np.ndarray | float
) -> np.ndarray:
    """Return -U'(x) for U(x) = barrier * ((x - c)^2 / d^2 - 1)^2, wells at low and high.

    c = (low + high) / 2 and d = (high - low) / 2; `barrier` is the height of U at c above the
    wells; the curvature at each well is 8 barrier / d^2 (the local recovery rate).
    """
    c = (np.asarray(low) + np.asarray(high)) / 2.0
    d = (np.asarray(high) - np.asarray(low)) / 2.0
    u = (x - c) / d
    return -4.0 * np.asarray(barrier) * (u * u - 1.0) * u / d


def well_rate(low: float, high: float, barrier: float) -> float:
    """Return the curvature U'' at each well (per hour): the recovery rate inside a state."""
    d = (high - low) / 2.0
    return 8.0 * barrier / d**2


def kramers_residence_hours(low: float, high: float, barrier: float, noise: float) -> float:
    """Return the Kramers approximation of the mean time (hours) spent in a well between switches.

    For dX = -U'(X) dt + noise dW the escape rate is sqrt(U''(well) |U''(top)|) / (2 pi) *
    exp(-2 barrier / noise^2) (Kramers 1940, Physica 7:284-304; from memory). The approximation
    is rough when the barrier is low relative to noise^2 / 2.
    """
    d = (high - low) / 2.0
    curv_well, curv_top = 8.0 * barrier / d**2, 4.0 * barrier / d**2
    escape = np.sqrt(curv_well * curv_top) / (2.0 * np.pi) * np.exp(-2.0 * barrier / noise**2)
    return float(1.0 / escape)


def double_well_path(
    t: np.ndarray,
    *,
    low: np.ndarray | float,
    high: np.ndarray | float,
    barrier: np.ndarray | float,
    noise: np.ndarray | float,
    rng: np.random.Generator,
    step: float = 0.1,
    start: np.ndarray | float | None = None,
    event_times: np.ndarray | None = None,
    sizes: np.ndarray | None = None,
) -> np.ndarray:
    """Simulate a double-well Langevin process (Euler-Maruyama on a fine grid), read at `t`.

    Parameters are scalars or one per series; the grid starts at each series' first time and has
    spacing `step` hours; each time in `t` reads the grid point at or just before it. Events
    (`event_times`, `sizes`, NaN-padded per series) kick the state on the grid.
    """
    t2 = np.atleast_2d(np.asarray(t, dtype=float))
    p = t2.shape[0]
    low_, high_, barrier_, noise_ = (
        np.broadcast_to(np.asarray(v, dtype=float).reshape(-1), (p,)).copy()
        for v in (low, high, barrier, noise)
    )
    origin = t2[:, :1]
    index = np.floor((t2 - origin) / step + 1e-9).astype(np.int64)
    steps = int(index.max()) + 1
    kick_grid = np.zeros((p, steps))
    if event_times is not None and sizes is not None:
        ev = np.atleast_2d(np.asarray(event_times, dtype=float))
        sz = np.atleast_2d(np.asarray(sizes, dtype=float))
        ok = ~np.isnan(ev) & ~np.isnan(sz)
        rows = np.broadcast_to(np.arange(p)[:, None], ev.shape)[ok]
        at = np.ceil((ev[ok] - origin[rows, 0]) / step).astype(np.int64)
        inside = (at >= 0) & (at < steps)
        np.add.at(kick_grid, (rows[inside], at[inside]), sz[ok][inside])
    if start is None:
        x0 = np.where(rng.random(p) < 0.5, low_, high_)
    else:
        x0 = np.broadcast_to(np.asarray(start, dtype=float).ravel(), (p,)).copy()
    out = np.empty_like(t2)
    # Series are walked in chunks so the stored grid paths stay small (chunk x steps floats).
    for first in range(0, p, _CHUNK):
        rows = slice(first, min(first + _CHUNK, p))
        path = np.empty((rows.stop - first, steps))
        x = x0[rows].copy()
        scale = noise_[rows] * np.sqrt(step)
        for g in range(steps):
            x += kick_grid[rows, g]
            path[:, g] = x
            drift = double_well_drift(x, low_[rows], high_[rows], barrier_[rows])
            x += drift * step + scale * rng.standard_normal(x.shape[0])
        out[rows] = np.take_along_axis(path, index[rows], axis=1)
    return out if np.ndim(t) == 2 else out[0]


def _per_series(value: np.ndarray | float, t: np.ndarray) -> np.ndarray:
    """Shape a scalar, per-series (p,) or per-time value to broadcast against times `t`."""
    v = np.asarray(value, dtype=float)
    if v.ndim == 0 or v.shape == t.shape:
        return v
    if t.ndim == 2 and v.ndim == 1 and v.shape[0] == t.shape[0]:
        return v[:, None]
    if t.ndim == 2 and v.shape == (t.shape[0], 1):
        return v
    raise ValueError(f"a parameter of shape {v.shape} does not fit times of shape {t.shape}")
