"""Time in each state: switching between two valleys, residence times and rising flickering.

Classification with a hysteresis band (core sets): a prompt enters the low state only when its
value is at or below the midpoint between the barrier and the low valley, and the high state only
at or above the midpoint between the barrier and the high valley; values in between keep the
previous state, so noise near the border does not count as switching. This is the transition-
based assignment of Buchete & Hummer 2008 ("Coarse master equations for peptide folding
dynamics", J. Phys. Chem. B 112:6057-6069, from memory). Prompts before the first core entry
have no state ('').

Residence times are measured in real time: a switch is placed midway between the last prompt of
the old state and the first prompt of the new one. The first and last stays are censored (their
start or end is not seen), so the mean residence time is estimated as total observed time in the
state divided by the number of observed exits, the maximum-likelihood mean under exponential
stays with censoring (Cox & Oakes 1984, "Analysis of Survival Data", ch. 3, from memory). The
interval is a percentile bootstrap over stays (Efron & Tibshirani 1993).

Flickering: Kendall's tau of the number of switches in rolling windows against time; a rise
is a proposed early signal of noise-driven transitions (Dakos, van Nes & Scheffer 2013,
"Flickering as an early warning signal", Theoretical Ecology 6:309-317). Its p-value comes from
surrogates that shuffle the order of the uncensored stays, which keeps every stay length and
destroys any trend in how often switches happen.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from springback.metrics.surrogates import kendall_tau_rows, surrogate_pvalue

LOW, HIGH, NONE = 0, 1, -1
BOOTSTRAP = 1000
MIN_SWITCHES_FLICKER = 4
"""Fewer switches than this cannot show a trend in switching."""


@dataclass(frozen=True)
class Residence:
    """Mean residence time of one state, with a bootstrap interval (hours)."""

    mean_hours: float | None
    lower: float | None
    upper: float | None
    stays: int
    exits: int
    hours_in_state: float


def core_bounds(low_valley: float, barrier: float, high_valley: float) -> tuple[float, float]:
    """Return the low and high core thresholds: halfway from the barrier to each valley."""
    return (barrier + low_valley) / 2.0, (barrier + high_valley) / 2.0


def classify(values: np.ndarray, low_core: float, high_core: float) -> np.ndarray:
    """Label each value LOW, HIGH or NONE (before the first core entry), with hysteresis."""
    v = np.asarray(values, dtype=float)
    core = np.where(v <= low_core, LOW, np.where(v >= high_core, HIGH, NONE))
    last = np.where(core != NONE, np.arange(v.size), -1)
    last = np.maximum.accumulate(last) if v.size else last
    return np.where(last >= 0, core[np.maximum(last, 0)], NONE)


def stays(labels: np.ndarray, hours: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return each stay's state, duration in hours and whether it ended in an observed exit."""
    idx = np.flatnonzero(labels != NONE)
    if idx.size == 0:
        return np.array([], int), np.array([]), np.array([], bool)
    lab = labels[idx[0]:]
    t = hours[idx[0]:]
    starts = np.concatenate([[0], np.flatnonzero(lab[1:] != lab[:-1]) + 1])
    switch_t = (t[starts[1:] - 1] + t[starts[1:]]) / 2.0
    begin = np.concatenate([[t[0]], switch_t])
    end = np.concatenate([switch_t, [t[-1]]])
    exited = np.ones(starts.size, bool)
    exited[-1] = False
    return lab[starts], end - begin, exited


def switch_indicator(labels: np.ndarray) -> np.ndarray:
    """Return 1 at each prompt whose state differs from the previous labelled prompt's."""
    sw = np.zeros(labels.size, dtype=np.int64)
    if labels.size > 1:
        sw[1:] = (labels[1:] != labels[:-1]) & (labels[:-1] != NONE)
    return sw


def residence(
    state: int, kinds: np.ndarray, durations: np.ndarray, exited: np.ndarray,
    rng: np.random.Generator, n_boot: int = BOOTSTRAP,
) -> Residence:
    """Estimate a state's mean residence time (hours) with a percentile bootstrap interval."""
    mine = kinds == state
    d, e = durations[mine], exited[mine].astype(float)
    total, exits = float(d.sum()), int(e.sum())
    if exits == 0:
        return Residence(None, None, None, int(mine.sum()), 0, total)
    pick = rng.integers(0, d.size, size=(n_boot, d.size))
    boot_exits = e[pick].sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        boot = np.where(boot_exits > 0, d[pick].sum(axis=1) / boot_exits, np.inf)
    # Why: order statistics (no interpolation), so an infinite resample only affects the upper end.
    lo, hi = np.quantile(boot, [0.025, 0.975], method="inverted_cdf")
    return Residence(
        total / exits, float(lo) if math.isfinite(lo) else None,
        float(hi) if math.isfinite(hi) else None, int(mine.sum()), exits, total,
    )


def rolling_counts(sw: np.ndarray, window: int) -> np.ndarray:
    """Return switches inside each window of `window` prompts (rows of sw), step one prompt."""
    sw = np.atleast_2d(sw)
    cs = np.concatenate([np.zeros((sw.shape[0], 1), sw.dtype), np.cumsum(sw, axis=1)], axis=1)
    # A switch at prompt i lies inside window [j, j+w-1] when j < i <= j+w-1.
    return cs[:, window:] - cs[:, 1:cs.shape[1] - window + 1]


def flicker_surrogates(
    labels: np.ndarray, n: int, rng: np.random.Generator
) -> np.ndarray:
    """Return n switch-indicator rows with the uncensored stays (in prompts) shuffled."""
    sw = switch_indicator(labels)
    pos = np.flatnonzero(sw)
    first = int(np.flatnonzero(labels != NONE)[0])
    runs = np.diff(np.concatenate([[first], pos, [labels.size]]))
    inner = runs[1:-1]
    shuffled = rng.permuted(np.tile(inner, (n, 1)), axis=1)
    new_pos = first + runs[0] + np.concatenate(
        [np.zeros((n, 1), int), np.cumsum(shuffled, axis=1)], axis=1)
    out = np.zeros((n, labels.size), dtype=np.int64)
    np.put_along_axis(out, new_pos, 1, axis=1)
    return out


def flicker_trend(
    labels: np.ndarray, window: int, n_surrogates: int, rng: np.random.Generator
) -> tuple[float, float | None, np.ndarray]:
    """Return Kendall tau of rolling switch counts, its surrogate p (or None) and the counts."""
    counts = rolling_counts(switch_indicator(labels), window)[0]
    tau = float(kendall_tau_rows(counts[None, :].astype(float))[0])
    n_switches = int(switch_indicator(labels).sum())
    if n_switches < 3 or not math.isfinite(tau):
        return tau, None, counts
    null = kendall_tau_rows(
        rolling_counts(flicker_surrogates(labels, n_surrogates, rng), window).astype(float))
    return tau, surrogate_pvalue(tau, null[np.isfinite(null)], increase=True), counts
