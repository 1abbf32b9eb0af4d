"""Complexity over time: rolling permutation entropy of the composite and its Kendall trend.

Permutation entropy (Bandt & Pompe 2002, "Permutation entropy: a natural complexity measure for
time series", Physical Review Letters 88:174102): the Shannon entropy of the frequencies of the
ordinal patterns of `order` values spaced `delay` prompts apart, divided by ln(order!) so that
0 means one pattern only (e.g. a monotone series) and 1 means all patterns equally often (white
noise). Equal values are ranked by their order of occurrence, as Bandt & Pompe propose (a stable
sort); Likert data have many ties, which this rule reads as rising patterns (Riedl, Mueller &
Wessel 2013, "Practical considerations of permutation entropy", Eur. Phys. J. Special Topics
222:249-262, discuss the resulting bias; from memory).

Patterns are only formed from prompts of the same study day with no gap longer than
`metrics.max_gap_hours` between them (the pair rule of the other indicators), so a night does
not count as one step. Rolling windows hold `metrics.window` of the patterns (step one pattern;
value placed at the window end) and need at least max(min_window_prompts, 5 x order!) patterns.

Trend and test: Kendall's tau of the rolling entropy against time, with a p-value from AR(1)
surrogates of the composite (the null model of the other indicators; Dakos et al. 2012, PLoS ONE
7:e41010) run through the identical pipeline. Surrogate values are replaced rank for rank by
the sorted observed values (amplitude adjustment as in Theiler et al. 1992, Physica D 58:77-94),
so they keep the answers' ties. The test is two-sided, because the literature gives no agreed
direction of change in entropy before a shift.
"""

from __future__ import annotations

import math
from itertools import permutations

import numpy as np
import pandas as pd
from numpy.lib.stride_tricks import sliding_window_view

from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family
from springback.metrics.surrogates import (
    ar1_surrogates,
    kendall_tau_rows,
    participant_rng,
    surrogate_pvalue,
)
from springback.settings import StudySettings

MIN_PATTERNS_PER_KIND = 5
"""A window needs this many patterns per possible pattern (order!) to estimate frequencies."""
MIN_WINDOWS = 10
CELLS_PER_CHUNK = 20_000_000
"""Bounds the memory of the surrogate step (rows x patterns x order! counters)."""


def pattern_codes(x: np.ndarray, order: int, delay: int) -> np.ndarray:
    """Return the ordinal pattern index (0..order!-1) of every embedding vector (last axis).

    The pattern is the rank vector: rank k = #{j: v_j < v_k} + #{j < k: v_j = v_k}, so equal
    values are ranked by order of occurrence (the same order a stable sort gives). Pairwise
    comparisons (order^2 array passes) are much faster than sorting many short vectors.
    """
    x = np.asarray(x, dtype=float)
    span = (order - 1) * delay + 1
    if x.shape[-1] < span:
        return np.zeros((*x.shape[:-1], 0), dtype=np.int64)
    n = x.shape[-1] - span + 1
    cols = [x[..., k * delay:k * delay + n] for k in range(order)]
    code = np.zeros(cols[0].shape, dtype=np.int64)
    for k in range(order):
        rank = np.zeros(cols[0].shape, dtype=np.int64)
        for j in range(order):
            if j != k:
                rank += (cols[j] < cols[k]) | ((cols[j] == cols[k]) & (j < k))
        code += rank * order**k
    return _lookup(order)[code]


def _lookup(order: int) -> np.ndarray:
    """Map base-`order` codes of permutations (rank vectors) to 0..order!-1."""
    table = np.full(order**order, -1, dtype=np.int64)
    for k, perm in enumerate(permutations(range(order))):
        table[int(np.dot(perm, order ** np.arange(order)))] = k
    return table


def entropy_of_counts(counts: np.ndarray, order: int) -> np.ndarray:
    """Return normalised Shannon entropy over the last axis of integer pattern counts."""
    counts = np.asarray(counts).astype(np.int64)
    total = counts.sum(axis=-1)
    # Why: H = ln W - sum(c ln c) / W; c ln c from a table of the few possible integer counts.
    top = int(counts.max()) if counts.size else 0
    c = np.arange(top + 1, dtype=float)
    clogc = np.concatenate([[0.0], c[1:] * np.log(c[1:])])
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.log(total) - clogc[counts].sum(axis=-1) / total
    return h / math.log(math.factorial(order))


def permutation_entropy(x: np.ndarray, order: int = 3, delay: int = 1) -> float:
    """Return the normalised permutation entropy of a whole series."""
    codes = pattern_codes(x, order, delay)
    if codes.size == 0:
        return float("nan")
    counts = np.bincount(codes, minlength=math.factorial(order))
    return float(entropy_of_counts(counts, order))


def rolling_entropy(codes: np.ndarray, order: int, window: int) -> np.ndarray:
    """Return normalised entropy of every window of `window` patterns (rows of codes)."""
    codes = np.atleast_2d(codes)
    kinds = math.factorial(order)
    onehot = codes[..., None] == np.arange(kinds)
    cum = np.concatenate(
        [np.zeros((codes.shape[0], 1, kinds), np.int32), np.cumsum(onehot, axis=1, dtype=np.int32)],
        axis=1,
    )
    return entropy_of_counts(cum[:, window:] - cum[:, :-window], order)


def valid_patterns(admissible: np.ndarray, order: int, delay: int) -> np.ndarray:
    """Return a mask of embedding vectors whose consecutive answers are all admissible pairs."""
    span = (order - 1) * delay + 1
    if len(admissible) + 1 < span:
        return np.zeros(0, bool)
    return np.asarray(sliding_window_view(np.asarray(admissible, bool), span - 1).all(axis=1))


def _remap(surrogates: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Replace each surrogate row's values rank for rank by the sorted observed values."""
    order = np.argsort(surrogates, axis=1)
    out = np.empty(surrogates.shape)
    np.put_along_axis(out, order, np.broadcast_to(np.sort(x), surrogates.shape), axis=1)
    return out


def complexity_family(series: Series, participant: str, settings: StudySettings) -> Family:
    """Compute rolling permutation entropy and its trend test for one participant."""
    m = settings.metrics
    order, delay = m.entropy_order, m.entropy_delay
    x, local_time = series.value, series.local_time
    span = (order - 1) * delay + 1
    params = {"order": order, "delay": delay, "window": m.window, "surrogates": m.surrogates,
              "surrogate_kind": "AR(1), rank-matched to the answers", "test": "two-sided",
              "seed": m.seed, "pattern_rule": f"within one study day, gaps <= {m.max_gap_hours} h"}
    empty = pd.DataFrame({"local_time": local_time.iloc[:0], "entropy": pd.Series([], dtype=float)})
    mask = valid_patterns(series.admissible, order, delay)
    n_pat = int(mask.sum())
    window = round(m.window * n_pat)
    need = max(m.min_window_prompts, MIN_PATTERNS_PER_KIND * math.factorial(order))
    if window < need or n_pat - window + 1 < MIN_WINDOWS:
        reason = (f"rolling entropy needs windows of at least {need} patterns of {order} answers "
                  f"and {MIN_WINDOWS} windows; there were {n_pat} patterns")
        return Family(
            estimates={"entropy_tau": Estimate.missing(reason, n=n_pat),
                       "entropy_p": Estimate.missing(reason, n=n_pat)},
            tables={"rolling": empty}, params=params,
        )
    codes = pattern_codes(x, order, delay)[mask]
    ends = np.flatnonzero(mask)[window - 1:] + span - 1
    rolling = rolling_entropy(codes, order, window)[0]
    tau = float(kendall_tau_rows(rolling[None, :])[0])
    table = pd.DataFrame({"local_time": local_time.iloc[ends].reset_index(drop=True),
                          "entropy": rolling})
    note = (f"Kendall tau of rolling permutation entropy (order {order}, delay {delay}, "
            f"windows of {window} patterns)")
    if not math.isfinite(tau):
        reason = "the rolling entropy did not change, so it has no trend"
        return Family(
            estimates={"entropy_tau": Estimate.missing(reason, n=n_pat),
                       "entropy_p": Estimate.missing(reason, n=n_pat)},
            tables={"rolling": table}, params=params | {"window_patterns": window},
        )
    rng = participant_rng(m.seed, participant, "entropy")
    surrogates = _remap(ar1_surrogates(x, m.surrogates, rng), x)
    chunk = max(1, CELLS_PER_CHUNK // max(1, n_pat * math.factorial(order)))
    null = np.concatenate([
        kendall_tau_rows(rolling_entropy(pattern_codes(s, order, delay)[:, mask], order, window))
        for s in np.array_split(surrogates, range(chunk, len(surrogates), chunk))
    ])
    p = surrogate_pvalue(abs(tau), np.abs(null), increase=True)
    return Family(
        estimates={
            "entropy_tau": Estimate(tau, n=n_pat, note=note),
            "entropy_p": Estimate(p, n=m.surrogates,
                                  note="two-sided, from rank-matched AR(1) surrogates"),
        },
        tables={"rolling": table},
        params=params | {"window_patterns": window, "mean_entropy": float(rolling.mean())},
    )
