"""Early-warning indicators: rolling carry-over, variance, skewness and item correlation trends.

Procedure (Dakos et al. 2012, "Methods for detecting early warnings of critical transitions
in time series illustrated using simulated ecological data", PLoS ONE 7:e41010; Scheffer et al.
2009, Nature 461:53-59; van de Leemput et al. 2014, PNAS 111:87-92 for the item correlation):

1. Remove the slow trend (Gaussian kernel on real time with SD `bandwidth_days`, a straight
   line, or nothing), within each measurement period on its own.
2. Rolling windows: each covers `window` of its measurement period, ends at an answer and holds
   answers of that period only; a window with fewer than `min_window_prompts` answers (or
   fewer than 3 consecutive pairs inside it) is skipped and counted.
3. In each window: lag-1 correlation over admissible pairs (the carry-over estimator), variance
   and SD, skewness, mean correlation between the composite's items.
4. Trend: Kendall's tau-b of each indicator against window order, over the windows of all
   periods in time order (see Periods below). With many windows, the test
   uses at most TREND_POINTS evenly spaced window ends (design choice: neighbouring windows
   share almost all answers, and it keeps 1000 surrogates affordable).
5. Significance by surrogates only (the textbook Kendall p-value is invalid for overlapping
   windows; Gamot, Thibeau-Sutre & Van Dooren 2026, "On the robustness of Mann-Kendall tests
   used to forecast critical transitions", arXiv:2604.15230): half AR(1)-fitted, half Fourier
   phase-randomised surrogates of the detrended series run through steps 2-4;
   p = (1 + #{tau* >= tau}) / (B + 1) over all B surrogates of both kinds (each kind's own p
   is kept in the parameters). Surrogate running sums are kept in single precision: it moves
   a surrogate's tau by a pair or two at most and halves the memory traffic.
   Item correlations use multivariate phase surrogates only (shared phases keep the items'
   cross-correlation; Prichard & Theiler 1994).
6. Sensitivity: the same test over every window share x bandwidth in the settings.
   `warning_robustness` is the share of those settings in which carry-over or variance rose
   significantly (p < alpha); `warning_robustness_inertia` and `_variance` give each alone.

Periods. Nothing spans the gap between two measurement periods (Series.periods): each
period is detrended on its own and every window lies inside one period, so a change of level
between periods enters no window and cannot make variance or carry-over "rise". The trend is
one test over the windows of all periods in time order, not one per period: the question is
the one the field asks of a single series, whether the indicators rose over the person's
measured time (Dakos et al. 2012; Wichers et al. 2016, "Critical slowing down as a
personalized early warning signal for depression", Psychother Psychosom 85:114-116), and
periods of a study are usually too short for a trend test each (Bringmann et al. 2013: six
days). A period whose windows carry more variance or carry-over than an earlier one's is a
rise; a period's level is not. The surrogates are one stationary null for the whole measured
time: AR(1) and phase surrogates of the concatenated within-period residuals (mean zero in each
period), cut by the same windows, so no surrogate window spans a gap either.

Minimum data: windows of at least `min_window_prompts` answers (default 20) and at least
MIN_TREND_WINDOWS usable windows; both are design choices, not published rules.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, cast

import numpy as np
import pandas as pd

from springback.metrics import _rolling as rl
from springback.metrics._series import Series
from springback.metrics.results import Estimate, Family
from springback.metrics.surrogates import (
    ar1_surrogates,
    kendall_tau_columns,
    participant_rng,
    phase_surrogates,
    phase_surrogates_multi,
    surrogate_pvalue,
)
from springback.settings import StudySettings

TREND_POINTS = 100
"""Most window ends used for one Kendall tau (evenly spaced; all when there are fewer)."""
MIN_TREND_WINDOWS = 10
"""Usable windows needed before a trend is tested (design choice)."""
KINDS = ("AR(1)", "phase-randomised")
TESTED = ("ar1", "variance")


@dataclass(frozen=True)
class _Detrended:
    """One detrending of the series with its surrogates, reused by every window share."""

    bandwidth: float | None
    resid: np.ndarray
    observed: rl.Prefix
    surrogates: rl.Prefix
    kind: np.ndarray
    """Per surrogate row: 0 = AR(1), 1 = phase-randomised."""


@dataclass(frozen=True)
class _Cell:
    """The trend test for one window share and one detrending."""

    share: float
    bandwidth: float | None
    windows: int
    skipped: int
    used: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int))
    tested: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int))
    observed: dict[str, np.ndarray] = field(default_factory=dict)
    tau: dict[str, float] = field(default_factory=dict)
    p: dict[str, float] = field(default_factory=dict)
    p_kind: dict[str, tuple[float, float]] = field(default_factory=dict)
    reason: str = ""


def _thin(count: int) -> np.ndarray:
    """Indices of at most TREND_POINTS evenly spaced items out of `count`."""
    if count <= TREND_POINTS:
        return np.arange(count)
    return np.unique(np.round(np.linspace(0, count - 1, TREND_POINTS)).astype(int))


def _detrended(series: Series, method: str, bandwidth: float | None, n_sur: int,
               seed: int, pid: str) -> _Detrended:
    """Detrend the series and draw its AR(1) and phase surrogates (one seeded stream each)."""
    kernel = bandwidth * 24.0 if bandwidth else None
    resid = rl.detrend_within(series.hours, series.value, series.periods, method, kernel)
    rng = participant_rng(seed, pid, f"warnings/{method}/{bandwidth}")
    n_ar = n_sur // 2
    sur = np.vstack([ar1_surrogates(resid, n_ar, rng), phase_surrogates(resid, n_sur - n_ar, rng)])
    kind = np.repeat([0, 1], [n_ar, n_sur - n_ar])
    pairs = rl.within_periods(series.admissible, series.periods)
    return _Detrended(bandwidth, resid, rl.prefix_sums(resid, pairs, True),
                      rl.prefix_sums(sur.T, pairs, dtype=np.float32), kind)


def _cell(series: Series, det: _Detrended, share: float, min_prompts: int) -> _Cell:
    """Run the rolling indicators and their surrogate trend test for one window share."""
    starts, ends = rl.period_windows(series.hours, series.periods, share)
    if len(ends) == 0:
        return _Cell(share, det.bandwidth, 0, 0, reason="too few answers for rolling windows")
    obs = {k: v[:, 0] if v.ndim == 2 else v
           for k, v in rl.window_stats(det.observed, starts, ends).items()}
    ok = (obs["n"] >= min_prompts) & np.isfinite(obs["ar1"]) & np.isfinite(obs["skewness"])
    used = np.flatnonzero(ok)
    skipped = int(len(ends) - len(used))
    if len(used) < MIN_TREND_WINDOWS:
        return _Cell(share, det.bandwidth, len(ends), skipped, used=used, observed=obs,
                     reason=f"only {len(used)} of {len(ends)} rolling windows held at least "
                            f"{min_prompts} answers (and 3 consecutive pairs); a trend needs "
                            f"{MIN_TREND_WINDOWS}")
    tested = used[_thin(len(used))]
    sur = rl.window_stats(det.surrogates, starts[tested], ends[tested])
    p: dict[str, float] = {}
    p_kind: dict[str, tuple[float, float]] = {}
    # Kendall's tau is column by column: one call over all columns gives the same numbers.
    shown = ("ar1", "variance", "skewness")
    observed = kendall_tau_columns(np.column_stack([obs[name][tested] for name in shown]))
    tau = {name: float(t) for name, t in zip(shown, observed, strict=True)}
    nulls = np.split(kendall_tau_columns(np.hstack([sur[name] for name in TESTED])),
                     len(TESTED))
    for name, null in zip(TESTED, nulls, strict=True):
        p_kind[name] = cast(tuple[float, float],
                            tuple(surrogate_pvalue(tau[name], null[det.kind == k]) for k in (0, 1)))
        p[name] = surrogate_pvalue(tau[name], null)
    return _Cell(share, det.bandwidth, len(ends), skipped, used, tested, obs, tau, p, p_kind)


def _crosscorr(series: Series, method: str, bandwidth: float | None, cell: _Cell,
               n_sur: int, seed: int, pid: str) -> tuple[np.ndarray, float, float, str]:
    """Rolling mean item correlation at the cell's windows; its tau and surrogate p."""
    if series.items.shape[1] < 2:
        return np.full(len(cell.used), np.nan), math.nan, math.nan, "the variable is one item"
    items = series.items.copy()
    gaps = ~np.isfinite(items)
    if gaps.any():
        # A skipped item in one answer gets its own mean, which adds no correlation.
        items[gaps] = np.take(np.nanmean(items, axis=0), np.nonzero(gaps)[1])
    resid = rl.detrend_within(series.hours, items, series.periods, method,
                              bandwidth * 24.0 if bandwidth else None)
    starts, ends = rl.period_windows(series.hours, series.periods, cell.share)
    rolling = rl.window_crosscorr(resid, starts[cell.used], ends[cell.used])[:, 0]
    if len(cell.tested) == 0:
        return rolling, math.nan, math.nan, cell.reason
    observed = rl.window_crosscorr(resid, starts[cell.tested], ends[cell.tested])[:, 0]
    keep = cell.tested[np.isfinite(observed)]
    if len(keep) < MIN_TREND_WINDOWS:
        return rolling, math.nan, math.nan, "the items did not vary enough within the windows"
    tau = float(kendall_tau_columns(observed[np.isfinite(observed)])[0])
    rng = participant_rng(seed, pid, f"warnings/items/{method}/{bandwidth}")
    sur = phase_surrogates_multi(resid, n_sur, rng).transpose(1, 2, 0).astype(np.float32)
    null = kendall_tau_columns(rl.window_crosscorr(sur, starts[keep], ends[keep]))
    return rolling, tau, surrogate_pvalue(tau, null), ""


def early_warnings(series: Series, settings: StudySettings, participant: str) -> Family:
    """Compute rolling early-warning indicators, their trends, p-values and the sensitivity grid."""
    m = settings.metrics
    method = m.detrend
    bandwidths: list[float | None] = list(m.bandwidths_days) if method == "gaussian" else [None]
    main_bw = m.bandwidth_days if method == "gaussian" else None

    def detrended(bw: float | None) -> _Detrended:
        return _detrended(series, method, bw, m.surrogates, m.seed, participant)

    params: dict[str, Any]
    params = {"window": m.window, "detrend": method, "bandwidth_days": main_bw,
              "surrogates": m.surrogates, "surrogate_kinds": list(KINDS),
              "crosscorr_surrogates": "multivariate phase-randomised", "seed": m.seed,
              "alpha": m.alpha, "min_window_prompts": m.min_window_prompts,
              "ar1_estimator": "Pearson correlation on admissible pairs within the window",
              "trend": "Kendall tau-b against window order", "trend_points": TREND_POINTS,
              "p_value": "(1 + #{surrogate tau >= tau}) / (B + 1), both kinds pooled",
              "windows": list(m.windows), "bandwidths_days": bandwidths}
    if series.n < 2 * m.min_window_prompts:
        why = (f"needs at least {2 * m.min_window_prompts} answers for rolling windows; "
               f"there were {series.n}")
        return Family(estimates=all_missing(why, series.n), tables=_empty_tables(),
                      params=params)
    grid: dict[tuple[float, float | None], _Cell] = {}
    for bw in bandwidths:  # one bandwidth's surrogates in memory at a time (17 MB each)
        det = detrended(bw)
        for w in m.windows:
            grid[(w, bw)] = _cell(series, det, w, m.min_window_prompts)
        del det
    main = grid.get((m.window, main_bw)) or _cell(series, detrended(main_bw), m.window,
                                                   m.min_window_prompts)
    cc_roll, cc_tau, cc_p, cc_why = _crosscorr(series, method, main_bw, main, m.surrogates,
                                               m.seed, participant)
    est = _main_estimates(main, cc_tau, cc_p, cc_why or main.reason, m.surrogates)
    est.update(_robustness(list(grid.values()), m.alpha))
    params["p_by_kind"] = {
        name: dict(zip(KINDS, main.p_kind.get(name, (math.nan, math.nan)), strict=True))
        for name in TESTED}
    rolling = _rolling_table(series, main, cc_roll)
    return Family(estimates=est, tables={"rolling": rolling, "grid": _grid_table(grid)},
                  params=params)


def _rolling_table(series: Series, cell: _Cell, crosscorr: np.ndarray) -> pd.DataFrame:
    """The main setting's indicators at every usable window end (for the chart and table)."""
    used, obs = cell.used, cell.observed
    if len(used) == 0:
        return _empty_tables()["rolling"]
    ends = rl.period_windows(series.hours, series.periods, cell.share)[1][used]
    return pd.DataFrame({
        "local_time": series.local_time.iloc[ends].reset_index(drop=True),
        "ar1": obs["ar1"][used], "variance": obs["variance"][used],
        "sd": np.sqrt(obs["variance"][used]), "skewness": obs["skewness"][used],
        "crosscorr": crosscorr, "n": obs["n"][used].astype(int)})


def _main_estimates(cell: _Cell, cc_tau: float, cc_p: float, cc_why: str,
                    n_sur: int) -> dict[str, Estimate]:
    """Turn the main cell's trend test into named estimates."""
    n = len(cell.tested)
    est: dict[str, Estimate] = {}
    how = f"{n} windows; {n_sur} surrogates ({' and '.join(KINDS)})"
    pairs = (("inertia", "ar1"), ("variance", "variance"))
    for label, key in pairs:
        if key in cell.tau and math.isfinite(cell.tau[key]):
            est[f"warning_tau_{label}"] = Estimate(cell.tau[key], n=n, note="Kendall tau-b")
            est[f"warning_p_{label}"] = Estimate(cell.p[key], n=n_sur, note=how)
        else:
            est[f"warning_tau_{label}"] = Estimate.missing(cell.reason or "undefined", n=n)
            est[f"warning_p_{label}"] = Estimate.missing(cell.reason or "undefined", n=n)
    if "variance" in cell.tau and math.isfinite(cell.tau["variance"]):
        est["warning_tau_sd"] = Estimate(cell.tau["variance"], n=n,
                                         note="same ranking as the variance")
    else:
        est["warning_tau_sd"] = Estimate.missing(cell.reason or "undefined", n=n)
    skew = cell.tau.get("skewness", math.nan)
    est["warning_tau_skewness"] = (Estimate(skew, n=n, note="Kendall tau-b; not tested")
                                   if math.isfinite(skew) else
                                   Estimate.missing(cell.reason or "undefined", n=n))
    if math.isfinite(cc_tau):
        est["warning_tau_crosscorr"] = Estimate(cc_tau, n=n, note="Kendall tau-b")
        est["warning_p_crosscorr"] = Estimate(cc_p, n=n_sur,
                                              note=f"{n} windows; {n_sur} multivariate "
                                                   "phase-randomised surrogates")
    else:
        est["warning_tau_crosscorr"] = Estimate.missing(cc_why or "undefined", n=n)
        est["warning_p_crosscorr"] = Estimate.missing(cc_why or "undefined", n=n)
    est["warning_windows_skipped"] = Estimate(
        float(cell.skipped), n=cell.windows,
        note="rolling windows with too few answers or consecutive pairs")
    return est


def _robustness(cells: list[_Cell], alpha: float) -> dict[str, Estimate]:
    """Share of grid settings with a significant rise: either indicator, and each one."""
    done = [c for c in cells if c.p]
    if not done:
        why = "no setting of the sensitivity grid had enough windows"
        return {name: Estimate.missing(why, n=len(cells)) for name in
                ("warning_robustness", "warning_robustness_inertia",
                 "warning_robustness_variance")}
    sig = {k: np.array([c.p[k] < alpha for c in done]) for k in TESTED}
    share = len(done)
    note = f"share of {share} window x detrending settings with p < {alpha:g}"
    return {
        "warning_robustness": Estimate(float(np.mean(sig["ar1"] | sig["variance"])), n=share,
                                       note=note + " for carry-over or variance"),
        "warning_robustness_inertia": Estimate(float(np.mean(sig["ar1"])), n=share,
                                               note=note + " for carry-over"),
        "warning_robustness_variance": Estimate(float(np.mean(sig["variance"])), n=share,
                                                note=note + " for variance"),
    }


def _grid_table(grid: dict[tuple[float, float | None], _Cell]) -> pd.DataFrame:
    """One row per sensitivity setting with both indicators' tau and p."""
    rows = []
    for (w, bw), c in grid.items():
        rows.append({"window": w, "bandwidth_days": bw if bw is not None else np.nan,
                     "tau_inertia": c.tau.get("ar1", np.nan), "p_inertia": c.p.get("ar1", np.nan),
                     "tau_variance": c.tau.get("variance", np.nan),
                     "p_variance": c.p.get("variance", np.nan),
                     "windows_used": len(c.tested), "windows_skipped": c.skipped})
    return pd.DataFrame(rows, columns=["window", "bandwidth_days", "tau_inertia", "p_inertia",
                                       "tau_variance", "p_variance", "windows_used",
                                       "windows_skipped"])


def all_missing(why: str, n: int) -> dict[str, Estimate]:
    """Every warning estimate as not available, with the same reason."""
    names = ("warning_tau_inertia", "warning_p_inertia", "warning_tau_variance",
             "warning_p_variance", "warning_tau_sd", "warning_tau_skewness",
             "warning_tau_crosscorr", "warning_p_crosscorr", "warning_robustness",
             "warning_robustness_inertia", "warning_robustness_variance",
             "warning_windows_skipped")
    return {name: Estimate.missing(why, n=n) for name in names}


def _empty_tables() -> dict[str, pd.DataFrame]:
    """The rolling and grid tables with their columns but no rows."""
    return {"rolling": pd.DataFrame(columns=["local_time", "ar1", "variance", "sd", "skewness",
                                             "crosscorr", "n"]),
            "grid": _grid_table({})}
