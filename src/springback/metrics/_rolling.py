"""Detrending and rolling-window statistics by prefix sums, for one series or thousands at once.

A window statistic is a difference of cumulative sums, so every window of every surrogate comes
from a handful of array passes: no per-window or per-series Python loop.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import cast

import numpy as np


def gaussian_trend(hours: np.ndarray, x: np.ndarray, kernel_sd_hours: float) -> np.ndarray:
    """Nadaraya-Watson smooth of x (n,) or (n, p) on real time with a Gaussian kernel.

    Dakos et al. 2012, "Methods for detecting early warnings of critical transitions in time
    series illustrated using simulated ecological data", PLoS ONE 7:e41010 (Gaussian filtering);
    the bandwidth here is the kernel's SD in hours, not R's ksmooth bandwidth, which puts the
    kernel's quartiles at +-0.25 bandwidth (R stats documentation, ksmooth), so that
    SD = 0.370651 bandwidth (computed with scipy 1.17).
    """
    z = (hours[:, None] - hours[None, :]) / kernel_sd_hours
    weights = np.exp(-0.5 * z * z)
    return weights @ x / weights.sum(axis=1).reshape((-1,) + (1,) * (x.ndim - 1))


def linear_trend(hours: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Least-squares straight line of x (n,) or (n, p) against time."""
    design = np.column_stack([np.ones_like(hours), hours - hours.mean()])
    coef, *_ = np.linalg.lstsq(design, x, rcond=None)
    return design @ coef


def detrend(hours: np.ndarray, x: np.ndarray, method: str,
            kernel_sd_hours: float | None) -> np.ndarray:
    """Residuals after removing the slow trend ('gaussian', 'linear' or 'none')."""
    if method == "gaussian":
        return x - gaussian_trend(hours, x, float(cast(float, kernel_sd_hours)))
    if method == "linear":
        return x - linear_trend(hours, x)
    return x - x.mean(axis=0)


def time_windows(hours: np.ndarray, share: float) -> tuple[np.ndarray, np.ndarray]:
    """Windows covering `share` of the observed period, one ending at each later answer.

    Returns inclusive start and end indices. A window ending at answer j holds the answers in
    (t_j - span, t_j], span = share x (last - first answer time); only windows that fit inside
    the observed period are made, so none reaches back before the first answer.
    """
    if len(hours) < 2:
        return np.zeros(0, dtype=int), np.zeros(0, dtype=int)
    span = share * (hours[-1] - hours[0])
    ends = np.flatnonzero(hours >= hours[0] + span)
    starts = np.searchsorted(hours, hours[ends] - span, side="right")
    return starts, ends


def period_runs(periods: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) of each run of consecutive answers with the same measurement period."""
    if len(periods) == 0:
        return []
    edges = np.concatenate([[0], np.flatnonzero(np.diff(periods) != 0) + 1, [len(periods)]])
    return list(zip(edges[:-1].tolist(), edges[1:].tolist(), strict=True))


def detrend_within(hours: np.ndarray, x: np.ndarray, periods: np.ndarray, method: str,
                   kernel_sd_hours: float | None) -> np.ndarray:
    """`detrend` applied to each measurement period on its own (one period: the same call)."""
    runs = period_runs(periods)
    if len(runs) <= 1:
        return detrend(hours, x, method, kernel_sd_hours)
    return np.concatenate([detrend(hours[a:b], x[a:b], method, kernel_sd_hours)
                           for a, b in runs], axis=0)


def period_windows(hours: np.ndarray, periods: np.ndarray,
                   share: float) -> tuple[np.ndarray, np.ndarray]:
    """`time_windows` within each measurement period, in time order, as indices of the whole.

    Each window covers `share` of its own period and holds answers of that period only.
    """
    runs = period_runs(periods)
    if len(runs) <= 1:
        return time_windows(hours, share)
    parts = [time_windows(hours[a:b], share) for a, b in runs]
    return (np.concatenate([s + a for (s, _e), (a, _b) in zip(parts, runs, strict=True)]),
            np.concatenate([e + a for (_s, e), (a, _b) in zip(parts, runs, strict=True)]))


def within_periods(admissible: np.ndarray, periods: np.ndarray) -> np.ndarray:
    """The admissible pairs less any pair whose two answers fall in different periods."""
    return admissible & (np.diff(periods) == 0)


def count_windows(n: int, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Windows of `width` consecutive answers, step 1 (Dakos et al. 2012)."""
    ends = np.arange(width - 1, n)
    return ends - width + 1, ends


def _prefix(a: np.ndarray) -> np.ndarray:
    """Cumulative sums down the first (time) axis with a leading zero row."""
    out = np.empty((a.shape[0] + 1, *a.shape[1:]), dtype=a.dtype)
    out[0] = 0.0
    if a[0].size >= 64:
        # Adding whole time slices is about twice as fast as numpy's cumsum down a wide array.
        for i in range(a.shape[0]):
            np.add(out[i], a[i], out=out[i + 1])
    else:
        np.cumsum(a, axis=0, out=out[1:])
    return out


S1, S2, PA, PB, PAA, PBB, PAB, S3 = range(8)
"""Rows of the stacked prefix sums: answer sums and squares, then the admissible pairs'
first and second members, their squares and products, then cubes (only for skewness)."""


@dataclass(frozen=True)
class Prefix:
    """Prefix sums of series y (n, m): time down the first axis, one series per column.

    All quantities sit in one (n + 1, k, m) array so a window statistic is two row gathers.
    """

    sums: np.ndarray
    pairs: np.ndarray
    """(n + 1,) prefix count of admissible pairs."""
    third: bool


def prefix_sums(y: np.ndarray, admissible: np.ndarray, third: bool = False,
                dtype: type = np.float64) -> Prefix:
    """Build the prefix sums of y (n,) or (n, m); pairs (i, i+1) count only where `admissible`.

    `dtype=np.float32` halves the memory traffic for large surrogate sets; running sums over a
    few hundred answers then carry relative errors near 1e-6, far below what separates
    windows in a trend test.
    """
    y = y.reshape(len(y), -1).astype(dtype, copy=False)
    w: np.ndarray = admissible.astype(dtype)[:, None]
    q: np.ndarray = np.zeros((y.shape[0], 8 if third else 7, y.shape[1]), dtype=dtype)
    q[:, S1], q[:, S2] = y, y * y
    a, b = y[:-1] * w, y[1:] * w
    q[:-1, PA], q[:-1, PB], q[:-1, PAA], q[:-1, PBB], q[:-1, PAB] = a, b, a * a, b * b, a * b
    if third:
        q[:, S3] = y * y * y
    return Prefix(_prefix(q), _prefix(np.append(w[:, 0], 0.0).astype(float)), third)


def window_stats(p: Prefix, starts: np.ndarray, ends: np.ndarray) -> dict[str, np.ndarray]:
    """Variance (n - 1), skewness (biased, as scipy.stats.skew) and lag-1 pair correlation.

    Each result is (windows, m). The lag-1 correlation is Pearson's r over the admissible pairs
    with both answers inside the window (pairs start..end-1), the carry-over estimator.
    """
    at_start = p.sums[starts]
    win = p.sums[ends + 1] - at_start   # answers start..end
    pair = p.sums[ends] - at_start       # pairs start..end-1
    n = (ends + 1 - starts).astype(float)[:, None]
    mean = win[:, S1] / n
    m2 = np.maximum(win[:, S2] / n - mean * mean, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = {"n": n[:, 0], "variance": m2 * n / (n - 1)}
        if p.third:
            m3 = win[:, S3] / n - 3 * mean * win[:, S2] / n + 2 * mean ** 3
            out["skewness"] = np.where(m2 > 0, m3 / m2 ** 1.5, np.nan)
        k = (p.pairs[ends] - p.pairs[starts])[:, None]
        sa, sb = pair[:, PA], pair[:, PB]
        cov = pair[:, PAB] - sa * sb / k
        va, vb = pair[:, PAA] - sa * sa / k, pair[:, PBB] - sb * sb / k
        r = cov / np.sqrt(va * vb)
    out["ar1"] = np.where((k >= 3) & (va > 0) & (vb > 0), r, np.nan)
    out["pairs"] = k[:, 0]
    return out


SERIES_PER_BLOCK = 100
"""Series whose item correlations are summed together (bounds the running sums' memory)."""


def window_crosscorr(items: np.ndarray, starts: np.ndarray, ends: np.ndarray) -> np.ndarray:
    """Mean pairwise Pearson correlation between items in each window (defined pairs only).

    items: (n, q) for one series of q items, or (n, q, m) for m series; returns (windows, m).
    """
    if items.ndim == 2:
        items = items[:, :, None]
    if items.shape[2] > SERIES_PER_BLOCK:
        # Columns are independent: blocks give the same numbers in a tenth of the memory
        # (all 1000 surrogates of 7 items at once took over 200 MB of running sums).
        return np.concatenate([
            window_crosscorr(items[:, :, i:i + SERIES_PER_BLOCK], starts, ends)
            for i in range(0, items.shape[2], SERIES_PER_BLOCK)], axis=1)
    q = items.shape[1]
    pairs = [(i, j) for i in range(q) for j in range(i + 1, q)]
    stacked = np.concatenate([items, items * items,
                              np.stack([items[:, i] * items[:, j] for i, j in pairs], axis=1)],
                             axis=1)
    c = _prefix(stacked)
    win = (c[ends + 1] - c[starts]) / (ends + 1 - starts).astype(float)[:, None, None]
    mean, sq, cross = win[:, :q], win[:, q:2 * q], win[:, 2 * q:]
    var = sq - mean * mean
    total = np.zeros((len(ends), items.shape[2]))
    defined = np.zeros(total.shape)
    with np.errstate(invalid="ignore", divide="ignore"):
        for k, (i, j) in enumerate(pairs):
            r = (cross[:, k] - mean[:, i] * mean[:, j]) / np.sqrt(var[:, i] * var[:, j])
            # An item that did not vary in a window has no correlation there: leave it out.
            ok = np.isfinite(r) & (var[:, i] > 0) & (var[:, j] > 0)
            total += np.where(ok, r, 0.0)
            defined += ok
        return np.where(defined > 0, total / defined, np.nan)
