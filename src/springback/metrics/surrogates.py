"""Surrogate series and trend statistics for significance tests, vectorised over many series.

Every function works on whole arrays: all surrogates of a participant are one (n, len) array
and Kendall's tau is computed for all rows at once, so a test with 1000 surrogates costs a few
array passes instead of 1000 Python-level calls.
"""

from __future__ import annotations

import hashlib

import numpy as np
from scipy.signal import lfilter

AR1_CLIP = 0.99
"""Largest |phi| used to simulate AR(1) surrogates (keeps the null model stationary)."""


def participant_rng(seed: int, participant: str, stream: str = "") -> np.random.Generator:
    """Make a generator seeded from the study seed and the participant id, stable across runs."""
    # Python's hash() is salted per process; a digest gives the same stream in every worker.
    digest = hashlib.sha256(f"{participant}\x00{stream}".encode()).digest()
    return np.random.default_rng([int(seed) & 0xFFFFFFFF, int.from_bytes(digest[:8], "little")])


def fit_ar1(x: np.ndarray) -> tuple[float, float, float]:
    """Fit x[t+1] = c + phi x[t] + e by least squares; return (mean, phi, innovation SD)."""
    x = np.asarray(x, dtype=float)
    a, b = x[:-1], x[1:]
    da = a - a.mean()
    saa = float(da @ da)
    phi = float(da @ (b - b.mean()) / saa) if saa > 0 else 0.0
    phi = float(np.clip(phi, -AR1_CLIP, AR1_CLIP))
    resid = (b - b.mean()) - phi * da
    dof = max(len(resid) - 2, 1)
    sigma = float(np.sqrt(resid @ resid / dof))
    return float(x.mean()), phi, sigma


def ar1_surrogates(x: np.ndarray, n: int, rng: np.random.Generator) -> np.ndarray:
    """Simulate n stationary AR(1) series fitted to x (same mean, phi and innovation SD)."""
    x = np.asarray(x, dtype=float)
    mean, phi, sigma = fit_ar1(x)
    e = rng.standard_normal((n, len(x))) * sigma
    # Start each series in the stationary distribution so no burn-in is needed.
    e[:, 0] *= 1.0 / np.sqrt(1.0 - phi * phi)
    return lfilter([1.0], [1.0, -phi], e, axis=1) + mean


def phase_surrogates(x: np.ndarray, n: int, rng: np.random.Generator) -> np.ndarray:
    """Make n Fourier phase-randomised copies of x (same power spectrum and mean).

    Theiler et al. 1992, "Testing for nonlinearity in time series: the method of surrogate
    data": random phases on every frequency except the mean (and Nyquist for even length),
    which stay real so the inverse transform is a real series.
    """
    x = np.asarray(x, dtype=float)
    length = len(x)
    spectrum = np.fft.rfft(x)
    phases = rng.uniform(0.0, 2.0 * np.pi, (n, len(spectrum)))
    phases[:, 0] = 0.0
    if length % 2 == 0:
        phases[:, -1] = 0.0
    return np.fft.irfft(spectrum * np.exp(1j * phases), n=length, axis=1)


def phase_surrogates_multi(x: np.ndarray, n: int, rng: np.random.Generator) -> np.ndarray:
    """Make n phase-randomised copies of the columns of x (len, p) with shared random phases.

    Prichard & Theiler 1994, "Generating surrogate data for time series with several
    simultaneously measured variables", Phys Rev Lett 73:951: adding the same phases to every
    column keeps each power spectrum and the cross-spectra, hence the cross-correlations.
    Returns an (n, len, p) array.
    """
    x = np.asarray(x, dtype=float)
    length = x.shape[0]
    spectrum = np.fft.rfft(x.T, axis=1)  # (p, freq)
    phases = rng.uniform(0.0, 2.0 * np.pi, (n, spectrum.shape[1]))
    phases[:, 0] = 0.0
    if length % 2 == 0:
        phases[:, -1] = 0.0
    rotated = spectrum[None, :, :] * np.exp(1j * phases)[:, None, :]
    return np.fft.irfft(rotated, n=length, axis=2).transpose(0, 2, 1)


TIE_TOLERANCE = 1e-9
"""Values closer than this (relative to the column's largest size) are ties: window statistics
from running sums carry rounding noise that would otherwise break exact ties at random."""


def _dense_ranks(y: np.ndarray) -> np.ndarray:
    """Dense ranks (near-equal values share a rank) down each column, as small integers."""
    order = np.argsort(y, axis=0)
    sorted_y = np.take_along_axis(y, order, axis=0)
    step = np.ones(y.shape, dtype=bool)
    tol = TIE_TOLERANCE * np.abs(sorted_y).max(axis=0)
    step[1:] = (sorted_y[1:] - sorted_y[:-1]) > tol
    dtype = np.int16 if y.shape[0] < np.iinfo(np.int16).max else np.int32
    dense = (np.cumsum(step, axis=0) - 1).astype(dtype)
    ranks = np.empty(y.shape, dtype=dtype)
    np.put_along_axis(ranks, order, dense, axis=0)
    return ranks


def kendall_tau_rows(y: np.ndarray) -> np.ndarray:
    """Kendall's tau-b of each row of y (m, k) against its position 0..k-1 (NaN rows give NaN).

    Equals scipy.stats.kendalltau(range(k), row).statistic for each row.
    """
    return kendall_tau_columns(np.atleast_2d(np.asarray(y, dtype=float)).T)


def kendall_tau_columns(y: np.ndarray) -> np.ndarray:
    """Kendall's tau-b of each column of y (k, m) against its position 0..k-1.

    Time has no ties, so tau-b = S / sqrt(n0 * (n0 - T)) with S = sum over i<j of
    sign(y_j - y_i), n0 = k(k-1)/2 and T the pairs tied in y (Kendall 1945, "The treatment of
    ties in ranking problems", Biometrika 33:239-251). S is summed over lags: k - 1 vectorised
    steps over all columns, on small integer ranks (several times faster than on floats).
    """
    y = np.asarray(y, dtype=float)
    if y.ndim == 1:
        y = y[:, None]
    k, m = y.shape
    out = np.full(m, np.nan)
    if k < 2 or m == 0:
        return out
    bad = ~np.isfinite(y).all(axis=0)
    ranks = _dense_ranks(np.where(bad[None, :], 0.0, y))
    sign_sum = np.zeros((k, m), dtype=ranks.dtype)
    untied = np.zeros((k, m), dtype=ranks.dtype)
    buf = np.empty((k, m), dtype=ranks.dtype)
    for lag in range(1, k):
        t = buf[: k - lag]
        np.subtract(ranks[lag:], ranks[:-lag], out=t)
        np.sign(t, out=t)
        sign_sum[: k - lag] += t
        np.abs(t, out=t)
        untied[: k - lag] += t
    s = sign_sum.sum(axis=0, dtype=np.int64).astype(float)
    n_untied = untied.sum(axis=0, dtype=np.int64).astype(float)
    n0 = k * (k - 1) / 2.0
    with np.errstate(invalid="ignore", divide="ignore"):
        tau = s / np.sqrt(n0 * n_untied)
    tau[(n_untied == 0) | bad] = np.nan
    return tau


def surrogate_pvalue(observed: float, null: np.ndarray, increase: bool = True) -> float:
    """Monte-Carlo p-value (1 + #{null at least as extreme}) / (B + 1); NaN surrogates dropped.

    Davison & Hinkley 1997, "Bootstrap methods and their application" (the +1 correction);
    one-sided in the expected direction (rise when `increase`, fall otherwise).
    """
    null = np.asarray(null, dtype=float)
    null = null[np.isfinite(null)]
    if not np.isfinite(observed) or null.size == 0:
        return float("nan")
    hits = np.count_nonzero(null >= observed) if increase else np.count_nonzero(null <= observed)
    return float((1 + hits) / (null.size + 1))
