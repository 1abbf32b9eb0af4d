"""Two-state classification with hysteresis, residence times and the flickering trend."""

from __future__ import annotations

import numpy as np
import pytest

from springback.metrics.states import (
    HIGH,
    LOW,
    NONE,
    classify,
    core_bounds,
    flicker_surrogates,
    flicker_trend,
    residence,
    rolling_counts,
    stays,
    switch_indicator,
)


def test_core_bounds_are_halfway_to_each_valley() -> None:
    """Check the hysteresis band runs from halfway-to-low to halfway-to-high."""
    assert core_bounds(2.0, 4.0, 7.0) == (3.0, 5.5)


def test_classify_keeps_state_inside_the_band() -> None:
    """Check values inside the band keep the previous state; before any core entry: none."""
    # Worked by hand: cores <= 2 (low) and >= 6 (high).
    v = np.array([5, 3, 1, 3, 5, 7, 5, 3, 1], float)
    assert classify(v, 2.0, 6.0).tolist() == [NONE, NONE, LOW, LOW, LOW, HIGH, HIGH, HIGH, LOW]


def test_stays_and_residence_by_hand() -> None:
    """Check stay durations (switch at midpoints, censored ends) and residence means by hand."""
    # Worked by hand: low 2 -> 4.5 (exit), high 4.5 -> 7.5 (exit), low 7.5 -> 8 (censored).
    labels = np.array([NONE, NONE, LOW, LOW, LOW, HIGH, HIGH, HIGH, LOW])
    kinds, dur, exited = stays(labels, np.arange(9.0))
    assert kinds.tolist() == [LOW, HIGH, LOW]
    np.testing.assert_allclose(dur, [2.5, 3.0, 0.5])
    assert exited.tolist() == [True, True, False]
    rng = np.random.default_rng(0)
    low = residence(LOW, kinds, dur, exited, rng)
    assert low.mean_hours == pytest.approx(3.0) and low.exits == 1 and low.stays == 2
    assert residence(HIGH, kinds, dur, exited, rng).mean_hours == pytest.approx(3.0)
    assert switch_indicator(labels).sum() == 2


def test_state_without_exit_has_no_residence() -> None:
    """Check a state never left gives no mean (only censored time), not a number."""
    labels = np.array([LOW, LOW, HIGH, HIGH])
    kinds, dur, exited = stays(labels, np.arange(4.0))
    r = residence(HIGH, kinds, dur, exited, np.random.default_rng(0))
    assert r.mean_hours is None and r.exits == 0


def test_residence_recovers_exponential_means_of_a_telegraph_process() -> None:
    """Check estimated mean stays match a two-state Markov process with known mean stays."""
    # Source: simulated telegraph process, exponential stays with means 20 h (low) and 50 h
    # (high); total time / exits is the exponential ML mean with censoring (Cox & Oakes 1984).
    rng = np.random.default_rng(11)
    means = {LOW: 20.0, HIGH: 50.0}
    t, state, bounds = 0.0, LOW, []
    while t < 20_000:
        t += rng.exponential(means[state])
        bounds.append((t, state))
        state = HIGH if state == LOW else LOW
    times = np.arange(0.0, 20_000, 0.5)
    ends = np.array([b[0] for b in bounds])
    labels = np.array([b[1] for b in bounds])[np.searchsorted(ends, times)]
    kinds, dur, exited = stays(labels, times)
    for state, mean in means.items():
        r = residence(state, kinds, dur, exited, np.random.default_rng(1))
        assert r.mean_hours == pytest.approx(mean, rel=0.12)
        assert r.lower < mean < r.upper


def test_rolling_counts_match_a_direct_loop() -> None:
    """Check rolling switch counts against a direct count of switches inside each window."""
    rng = np.random.default_rng(2)
    labels = np.where(rng.uniform(size=60) < 0.3, HIGH, LOW)
    labels[:3] = NONE
    sw = switch_indicator(labels)
    w = 15
    direct = [sum(labels[i] != labels[i - 1] and labels[i - 1] != NONE
                  for i in range(j + 1, j + w)) for j in range(60 - w + 1)]
    assert rolling_counts(sw, w)[0].tolist() == direct


def test_flicker_surrogates_keep_stays_and_switch_count() -> None:
    """Check shuffled-stay surrogates keep the number of switches and the stay lengths."""
    labels = np.array([NONE] * 3 + [LOW] * 10 + [HIGH] * 4 + [LOW] * 7 + [HIGH] * 2 + [LOW] * 9)
    sur = flicker_surrogates(labels, 50, np.random.default_rng(3))
    sw = switch_indicator(labels)
    assert (sur.sum(axis=1) == sw.sum()).all()
    inner = sorted(np.diff(np.flatnonzero(sw)).tolist())
    for row in sur:
        assert sorted(np.diff(np.flatnonzero(row)).tolist()) == inner
        assert np.flatnonzero(row)[0] == np.flatnonzero(sw)[0]


def test_rising_switching_gives_positive_tau_and_small_p() -> None:
    """Check stays that shorten over time give a positive flicker tau with a small p-value."""
    # Source: constructed process with known truth: stays shrink from 40 to 4 prompts.
    runs = np.linspace(40, 4, 20).round().astype(int)
    labels = np.concatenate([np.full(r, LOW if k % 2 == 0 else HIGH) for k, r in enumerate(runs)])
    tau, p, counts = flicker_trend(labels, labels.size // 2, 199, np.random.default_rng(4))
    assert tau > 0.8
    assert p is not None and p < 0.05
    assert counts.size == labels.size - labels.size // 2 + 1


def test_steady_switching_gives_no_small_p() -> None:
    """Check exchangeable stays (random order) rarely give a significant flicker trend."""
    # Source: simulated stays, i.i.d. geometric lengths, so no trend in switching exists.
    small = 0
    for seed in range(10):
        rng = np.random.default_rng(seed)
        runs = rng.geometric(1 / 12, 30)
        labels = np.concatenate([np.full(r, k % 2) for k, r in enumerate(runs)])
        _, p, _ = flicker_trend(labels, labels.size // 2, 99, rng)
        small += p is not None and p < 0.05
    assert small <= 2
