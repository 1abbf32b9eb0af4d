"""Permutation entropy (Bandt & Pompe 2002): direct computation, known values, rolling trend."""

from __future__ import annotations

import math
from itertools import permutations

import numpy as np
import pytest

from springback.metrics._series import prepare
from springback.metrics.entropy import (
    complexity_family,
    pattern_codes,
    permutation_entropy,
    rolling_entropy,
    valid_patterns,
)
from tests.support.shifts_sim import participant, prompt_hours, settings


def _direct_entropy(x: list[float], order: int, delay: int = 1) -> float:
    """Count ordinal patterns with a stable sort in plain Python and return normalised entropy."""
    counts: dict[tuple[int, ...], int] = {}
    span = (order - 1) * delay
    for t in range(len(x) - span):
        vec = [x[t + k * delay] for k in range(order)]
        key = tuple(sorted(range(order), key=lambda k: vec[k]))  # stable: ties by occurrence
        counts[key] = counts.get(key, 0) + 1
    total = sum(counts.values())
    h = -sum(c / total * math.log(c / total) for c in counts.values())
    return h / math.log(math.factorial(order))


def test_bandt_pompe_worked_example() -> None:
    """Check the series (4, 7, 9, 10, 6, 11, 3) of Bandt & Pompe's paper at orders 2 and 3."""
    # Source: Bandt & Pompe 2002, PRL 88:174102, worked example (from memory): order 2 has four
    # rising and two falling pairs; order 3 has patterns with frequencies 2/5, 2/5, 1/5.
    x = np.array([4, 7, 9, 10, 6, 11, 3], float)
    h2 = -(4 / 6 * math.log(4 / 6) + 2 / 6 * math.log(2 / 6)) / math.log(2)
    h3 = -(2 * 0.4 * math.log(0.4) + 0.2 * math.log(0.2)) / math.log(6)
    assert permutation_entropy(x, 2) == pytest.approx(h2, abs=1e-12)
    assert permutation_entropy(x, 3) == pytest.approx(h3, abs=1e-12)
    assert sorted(np.bincount(pattern_codes(x, 3, 1), minlength=6).tolist()) == [0, 0, 0, 1, 2, 2]


@pytest.mark.parametrize("order", [2, 3, 4, 5])
@pytest.mark.parametrize("delay", [1, 2])
def test_entropy_matches_direct_count_with_ties(order: int, delay: int) -> None:
    """Check the vectorised patterns against a plain stable-sort count on tied Likert data."""
    rng = np.random.default_rng(order * 10 + delay)
    x = rng.integers(1, 6, 80).astype(float)
    assert permutation_entropy(x, order, delay) == pytest.approx(
        _direct_entropy(x.tolist(), order, delay), abs=1e-12)


def test_monotone_series_has_zero_entropy() -> None:
    """Check a monotone series (also with ties, ranked by occurrence) has entropy 0."""
    # Source: Bandt & Pompe 2002: one pattern only gives H = 0; ties ranked by occurrence.
    assert permutation_entropy(np.arange(50.0), 3) == 0.0
    assert permutation_entropy(np.repeat(np.arange(10.0), 5), 4) == 0.0
    assert permutation_entropy(-np.arange(50.0), 3) == 0.0


def test_white_noise_approaches_one() -> None:
    """Check i.i.d. noise has normalised entropy close to 1 (all patterns equally likely)."""
    # Source: Bandt & Pompe 2002: for white noise every order pattern has probability 1/order!.
    x = np.random.default_rng(0).normal(size=20_000)
    for order in (3, 4, 5):
        assert permutation_entropy(x, order) > 0.995


def test_codes_are_one_to_one_with_stable_sort_patterns() -> None:
    """Check two vectors get the same code exactly when their stable-sort orders agree."""
    perms = list(permutations(range(4)))
    codes = pattern_codes(np.array([list(p) for p in perms], float), 4, 1)[:, 0]
    assert sorted(codes.tolist()) == list(range(24))
    tied = pattern_codes(np.array([[2.0, 2.0, 1.0]]), 3, 1)[0, 0]
    same = pattern_codes(np.array([[2.0, 3.0, 1.0]]), 3, 1)[0, 0]
    assert tied == same  # the earlier of two equal values ranks lower


def test_rolling_entropy_equals_entropy_of_each_window() -> None:
    """Check every rolling value against the entropy of that window's patterns computed alone."""
    rng = np.random.default_rng(5)
    x = rng.integers(1, 8, 120).astype(float)
    codes = pattern_codes(x, 3, 1)
    w = 40
    got = rolling_entropy(codes, 3, w)[0]
    for j in range(0, codes.size - w + 1, 7):
        assert got[j] == pytest.approx(permutation_entropy(x[j:j + w + 2], 3), abs=1e-12)


def test_patterns_do_not_cross_nights() -> None:
    """Check a pattern is valid only when all its consecutive pairs are admissible."""
    admissible = np.array([True, True, False, True, True, True])
    assert valid_patterns(admissible, 3, 1).tolist() == [True, False, False, True, True]


def _participant(values_fn, seed: int = 0, days: int = 60, per_day: int = 10):
    rng = np.random.default_rng(seed)
    hours = prompt_hours(days, per_day, rng)
    s = settings(metrics={"surrogates": 199})
    data = participant(hours, values_fn(rng, hours))
    return prepare(data, s), s


def test_falling_entropy_is_detected_against_surrogates() -> None:
    """Check answers that become steadily more regular give a negative tau with a small p."""
    # Source: constructed process with known truth: noise mixed with a slow daily rise whose
    # weight grows from 0 to 1, so within-day patterns become monotone (entropy falls).
    def values(rng, hours):
        a = hours / hours[-1]
        within_day = (hours % 24 - 8) / 14
        return np.round(50 + 30 * ((1 - a) * rng.normal(size=hours.size) + a * within_day))

    series, s = _participant(values)
    fam = complexity_family(series, "p1", s)
    assert fam.estimates["entropy_tau"].value < -0.5
    assert fam.estimates["entropy_p"].value < 0.05
    assert list(fam.tables["rolling"].columns) == ["local_time", "entropy"]


def test_stationary_noise_gives_a_valid_p_value() -> None:
    """Check i.i.d. answers give an entropy p-value that is not small (no trend exists)."""
    # Source: simulated i.i.d. uniform Likert answers; two-sided surrogate p is (1 + #)/(B + 1).
    series, s = _participant(lambda rng, h: rng.integers(1, 8, h.size).astype(float), seed=3)
    est = complexity_family(series, "p1", s).estimates
    assert 0.05 < est["entropy_p"].value <= 1.0
    assert (est["entropy_p"].value * 200) == pytest.approx(round(est["entropy_p"].value * 200))


def test_too_few_patterns_gives_missing() -> None:
    """Check short series give entropy estimates missing with a plain reason."""
    series, s = _participant(lambda rng, h: rng.integers(1, 8, h.size).astype(float), days=4)
    est = complexity_family(series, "p1", s).estimates
    assert est["entropy_tau"].value is None and "patterns" in est["entropy_tau"].note
    assert est["entropy_p"].value is None
