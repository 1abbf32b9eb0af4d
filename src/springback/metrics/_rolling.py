"""Detrending and rolling-window statistics by prefix sums, for one series or thousands at once.

A window statistic is a difference of cumulative sums, so every window of every surrogate comes
from a handful of array passes: no per-window or per-series Python loop.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def gaussian_trend(hours: np.ndarray, x: np.ndarray, kernel_sd_hours: float) -> np.ndarray:
    """Nadaraya-Watson smooth of x (n,) or (n, p) on real time with a Gaussian kernel.

    Dakos et al. 2012, "Methods for detecting early warnings of critical transitions in time
    series illustrated using simulated ecological data", PLoS ONE 7:e41010 (Gaussian filtering);
    the bandwidth here is the kernel's SD in hours (METHODS.md §2 on the R ksmooth convention).
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
        return x - gaussian_trend(hours, x, float(kernel_sd_hours))
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


def count_windows(n: int, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Windows of `width` consecutive answers, step 1 (Dakos et al. 2012)."""
    ends = np.arange(width - 1, n)
    return ends - width + 1, ends


def _prefix(a: np.ndarray) -> np.ndarray:
    """Cumulative sums down the first (time) axis with a leading zero row."""
    out = np.empty((a.shape[0] + 1, *a.shape[1:]))
    out[0] = 0.0
    if a.ndim == 2 and a.shape[1] >= 64:
        # Adding whole rows is about twice as fast as numpy's cumsum down a wide array.
        for i in range(a.shape[0]):
            np.add(out[i], a[i], out=out[i + 1])
    else:
        np.cumsum(a, axis=0, out=out[1:])
    return out


@dataclass(frozen=True)
class Prefix:
    """Prefix sums of series y (n, m), time down the rows, one series per column.

    Time-major layout: a window statistic gathers whole rows, which are contiguous.
    """

    s1: np.ndarray
    s2: np.ndarray
    s3: np.ndarray | None
    pa: np.ndarray
    pb: np.ndarray
    paa: np.ndarray
    pbb: np.ndarray
    pab: np.ndarray
    pn: np.ndarray


def prefix_sums(y: np.ndarray, admissible: np.ndarray, third: bool = False) -> Prefix:
    """Build the prefix sums of y (n,) or (n, m); pairs (i, i+1) count only where `admissible`."""
    y = y.reshape(len(y), -1)
    w = admissible.astype(float)[:, None]
    a, b = y[:-1] * w, y[1:] * w
    return Prefix(
        s1=_prefix(y), s2=_prefix(y * y), s3=_prefix(y * y * y) if third else None,
        pa=_prefix(a), pb=_prefix(b), paa=_prefix(a * a), pbb=_prefix(b * b),
        pab=_prefix(a * b), pn=_prefix(w[:, 0]),
    )


def window_stats(p: Prefix, starts: np.ndarray, ends: np.ndarray) -> dict[str, np.ndarray]:
    """Variance (n - 1), skewness (biased, as scipy.stats.skew) and lag-1 pair correlation.

    Each result is (windows, m). The lag-1 correlation is Pearson's r over the admissible pairs
    with both answers inside the window (pairs start..end-1), the carry-over estimator.
    """
    e1, s = ends + 1, starts
    n = (e1 - s).astype(float)[:, None]
    s1 = p.s1[e1] - p.s1[s]
    s2 = p.s2[e1] - p.s2[s]
    mean = s1 / n
    m2 = np.maximum(s2 / n - mean * mean, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = {"n": n[:, 0], "variance": m2 * n / (n - 1)}
    if p.s3 is not None:
        s3 = p.s3[e1] - p.s3[s]
        m3 = s3 / n - 3 * mean * s2 / n + 2 * mean ** 3
        with np.errstate(invalid="ignore", divide="ignore"):
            out["skewness"] = np.where(m2 > 0, m3 / m2 ** 1.5, np.nan)
    k = (p.pn[ends] - p.pn[s])[:, None]
    sa, sb = p.pa[ends] - p.pa[s], p.pb[ends] - p.pb[s]
    saa, sbb = p.paa[ends] - p.paa[s], p.pbb[ends] - p.pbb[s]
    sab = p.pab[ends] - p.pab[s]
    with np.errstate(invalid="ignore", divide="ignore"):
        cov = sab - sa * sb / k
        va, vb = saa - sa * sa / k, sbb - sb * sb / k
        r = cov / np.sqrt(va * vb)
    out["ar1"] = np.where((k >= 3) & (va > 0) & (vb > 0), r, np.nan)
    out["pairs"] = k[:, 0]
    return out


def window_crosscorr(items: np.ndarray, starts: np.ndarray, ends: np.ndarray) -> np.ndarray:
    """Mean pairwise Pearson correlation between items in each window.

    items: (n, q) for one series of q items or (n, m, q) for m series; returns (windows, m).
    """
    if items.ndim == 2:
        items = items[:, None, :]
    q = items.shape[2]
    e1 = ends + 1
    count = (e1 - starts).astype(float)[:, None]

    def window_sum(a: np.ndarray) -> np.ndarray:
        c = _prefix(a)
        return c[e1] - c[starts]

    mean = [window_sum(items[:, :, i]) / count for i in range(q)]
    var = [window_sum(items[:, :, i] ** 2) / count - mu * mu for i, mu in enumerate(mean)]
    total = np.zeros((len(ends), items.shape[1]))
    for i in range(q):
        for j in range(i + 1, q):
            cov = window_sum(items[:, :, i] * items[:, :, j]) / count - mean[i] * mean[j]
            with np.errstate(invalid="ignore", divide="ignore"):
                total += cov / np.sqrt(var[i] * var[j])
    return total / (q * (q - 1) / 2)
