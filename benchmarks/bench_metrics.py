# ruff: noqa: E402  (thread pools are pinned before numpy is imported)
"""Metrics benchmark: one participant of 600 prompts, 1000 surrogates, a 5 x 5 sensitivity grid.

Prints a table; asserts nothing. Measures `springback.metrics.compute` (all metric families)
on one core, and compares the early-warning part with a straightforward implementation of the
same indicators: pandas `rolling().apply` with a Python function per window, and
`scipy.stats.kendalltau` per surrogate. The straightforward version is timed on a sample of
surrogates and grid cells in the same run and scaled to the full job (it would take hours).

Usage: python benchmarks/bench_metrics.py [--prompts 600] [--repeat 5] [--sample 8]
"""

from __future__ import annotations

import os

# One core: pin the BLAS and FFT thread pools before numpy is imported.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import statistics
import time

import numpy as np
import pandas as pd
from scipy import stats

from springback import metrics
from springback.metrics import _rolling as rl
from springback.metrics import descriptives, dynamics, questionnaires, recovery
from springback.metrics._series import prepare
from springback.metrics.early_warning import TREND_POINTS, early_warnings
from springback.metrics.surrogates import ar1_surrogates, participant_rng, phase_surrogates
from springback.model import ParticipantData
from springback.settings import from_mapping

ZONE = "Europe/Amsterdam"


def make_participant(prompts: int, seed: int = 1) -> tuple[ParticipantData, object]:
    """A fictional participant: 5 prompts a day, OU mood with slowing recovery, three items."""
    rng = np.random.default_rng(seed)
    days = -(-prompts // 5)
    hours = (np.repeat(np.arange(days), 5) * 24.0 + 9 + np.tile(np.arange(5), days) * 2.4
             + rng.uniform(0, 2.4, days * 5))[:prompts]
    kappa = np.linspace(0.5, 0.1, prompts)
    x = np.empty(prompts)
    x[0] = 3.0
    for i in range(1, prompts):
        phi = np.exp(-kappa[i] * (hours[i] - hours[i - 1]))
        sd = 0.5 / np.sqrt(2 * kappa[i])
        x[i] = 3.0 + phi * (x[i - 1] - 3.0) + sd * np.sqrt(1 - phi * phi) * rng.normal()
    local = pd.Timestamp("2026-03-02", tz=ZONE) + pd.to_timedelta(hours, unit="h")
    noise = rng.normal(0, 0.4, (prompts, 2))
    frame = pd.DataFrame({
        "participant": "bench", "time": local.tz_convert("UTC"), "local_time": local,
        "study_day": (local - pd.Timedelta(hours=4)).tz_localize(None).normalize(),
        "scheduled": pd.Series(pd.NaT, index=range(prompts), dtype="datetime64[ns, UTC]"),
        "source_row": np.arange(2, prompts + 2),
        "sad": x + noise[:, 0], "down": x + noise[:, 1], "tense": x - noise.sum(axis=1),
        "low_mood": x,
    })
    ev_local = local[::23] - pd.Timedelta(minutes=20)
    events = pd.DataFrame({"participant": "bench", "time": ev_local.tz_convert("UTC"),
                           "local_time": ev_local, "kind": "argument", "intensity": 4.0,
                           "upsetting": True})
    q_local = pd.Timestamp("2026-03-02 10:00", tz=ZONE) + pd.to_timedelta(
        np.arange(0, days, 7), unit="D")
    quest = pd.DataFrame({"participant": "bench", "time": q_local.tz_convert("UTC"),
                          "local_time": q_local, "questionnaire": "phq9",
                          "score": np.clip(np.round(8 + rng.normal(0, 3, len(q_local))), 0, 27)})
    data = ParticipantData("bench", "en", "default", "yes", True, True, frame, events, quest,
                           pd.DataFrame(), pd.DataFrame())
    settings, _ = from_mapping({
        "study": {"timezone": ZONE, "prompts_per_day": 5},
        "items": {i: {"scale": [1, 7]} for i in ("sad", "down", "tense")},
        "composites": {"low_mood": {"items": ["sad", "down", "tense"], "higher_is": "worse"}},
        "questionnaires": {"phq9": {"range": [0, 27], "reliability": 0.84, "sd": 5.0,
                                    "bands": [[0, "minimal"], [5, "mild"], [10, "moderate"]]}},
    })
    return data, settings


def timed(fn, repeat: int) -> tuple[float, float]:
    """Median and best CPU seconds of fn over `repeat` runs (after one warm-up run)."""
    fn()
    runs = []
    for _ in range(repeat):
        t0 = time.process_time()
        fn()
        runs.append(time.process_time() - t0)
    return statistics.median(runs), min(runs)


def straightforward_cell(series, resid: np.ndarray, surrogates: np.ndarray,
                         share: float) -> list[tuple[float, float]]:
    """Tau of rolling AR1 and variance per series, with pandas rolling().apply per window."""
    span = pd.Timedelta(hours=share * (series.hours[-1] - series.hours[0]))
    index = pd.DatetimeIndex(pd.to_datetime(series.hours, unit="h"))
    first_end = series.hours[0] + span / pd.Timedelta(hours=1)
    full = series.hours >= first_end
    adm = series.admissible
    out = []
    for y in [resid, *surrogates]:
        pos = pd.Series(np.arange(len(y), dtype=float), index=index)

        def ar1(w: np.ndarray, y: np.ndarray = y) -> float:
            i = w.astype(int)
            ok = adm[i[:-1]]
            a, b = y[i[:-1]][ok], y[i[1:]][ok]
            return stats.pearsonr(a, b).statistic if len(a) >= 3 else np.nan

        rolling = pos.rolling(span)
        r_ar1 = rolling.apply(ar1, raw=True).to_numpy()[full]
        r_var = pd.Series(y, index=index).rolling(span).var().to_numpy()[full]
        keep = np.unique(np.round(np.linspace(0, len(r_ar1) - 1, TREND_POINTS)).astype(int))
        t = np.arange(len(keep))
        out.append((stats.kendalltau(t, r_ar1[keep]).statistic,
                    stats.kendalltau(t, r_var[keep]).statistic))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--prompts", type=int, default=600)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--sample", type=int, default=8,
                        help="surrogates per grid cell timed for the pandas baseline")
    args = parser.parse_args()
    data, settings = make_participant(args.prompts)
    m = settings.metrics
    series = prepare(data, settings)
    cells = len(m.windows) * len(m.bandwidths_days)

    def core() -> None:
        ser = prepare(data, settings)
        descriptives.describe(ser, data, settings)
        dynamics.carry_over(ser, settings)
        recovery.bounce_back(ser, data, settings)
        early_warnings(ser, settings, data.participant)
        questionnaires.questionnaire_family(data.questionnaires, settings)

    med_all, best_all = timed(lambda: metrics.compute(data, settings), args.repeat)
    med_core, best_core = timed(core, args.repeat)
    med_ew, best_ew = timed(lambda: early_warnings(series, settings, "bench"), args.repeat)

    # Baseline on a sample: two grid cells x `sample` surrogates, scaled per series-cell.
    t_base, n_series = 0.0, 0
    for share, bw in ((m.windows[0], m.bandwidths_days[0]), (m.windows[-1], m.bandwidths_days[-1])):
        resid = rl.detrend(series.hours, series.value, "gaussian", bw * 24.0)
        rng = participant_rng(m.seed, "bench", "baseline")
        half = args.sample // 2
        sur = np.vstack([ar1_surrogates(resid, half, rng),
                         phase_surrogates(resid, args.sample - half, rng)])
        t0 = time.process_time()
        taus = straightforward_cell(series, resid, sur, share)
        t_base += time.process_time() - t0
        n_series += len(taus)
    per_series_cell = t_base / n_series
    base_full = per_series_cell * cells * (m.surrogates + 1)

    fam = early_warnings(series, settings, "bench")
    main_cell = fam.tables["grid"].query("window == @m.window and bandwidth_days == "
                                         "@m.bandwidth_days").iloc[0]
    resid = rl.detrend(series.hours, series.value, "gaussian", m.bandwidth_days * 24.0)
    check = straightforward_cell(series, resid, np.zeros((0, series.n)), m.window)[0]
    agree = bool(np.isclose(check[0], main_cell["tau_inertia"]) and
                 np.isclose(check[1], main_cell["tau_variance"]))

    print(f"metrics benchmark: {series.n} prompts, {m.surrogates} surrogates, "
          f"{len(m.windows)} x {len(m.bandwidths_days)} grid, one core (CPU seconds)")
    rows = [
        ("compute(): all metric families", med_all, best_all),
        ("descriptives, dynamics, recovery, warnings, questionnaires", med_core, best_core),
        ("early warnings only", med_ew, best_ew),
        (f"pandas rolling().apply baseline (scaled from {n_series} series-cells)",
         base_full, base_full),
    ]
    width = max(len(r[0]) for r in rows)
    print(f"{'what':<{width}}  {'median s':>10}  {'best s':>10}")
    for name, med, best in rows:
        print(f"{name:<{width}}  {med:>10.3f}  {best:>10.3f}")
    print(f"{'speed-up of early warnings over the baseline':<{width}}  "
          f"{base_full / med_ew:>10.0f}x")
    print(f"{'baseline per series and grid cell (s)':<{width}}  {per_series_cell:>10.4f}")
    print(f"observed tau of the main setting agrees with the baseline: {'yes' if agree else 'NO'}")


if __name__ == "__main__":
    main()
