"""Early-warning windows stay within a measurement period: none spans the gap between two."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from springback.intake import load_study
from springback.metrics import _rolling as rl
from springback.metrics._series import prepare
from springback.metrics.early_warning import early_warnings
from springback.model import ParticipantData
from tests.support.metrics_sim import participant, prompt_hours, settings_for, simulate_ou

LEVEL_JUMP = 2.0
"""Level difference between the periods, in stationary SDs of the simulated process."""


def _with_periods(data: ParticipantData, period: np.ndarray) -> ParticipantData:
    return dataclasses.replace(data, momentary=data.momentary.assign(
        period=np.asarray(period, dtype=np.int64)))


def _back_to_back(seed: int, jump: float = LEVEL_JUMP) -> tuple[ParticipantData, ParticipantData]:
    """A stationary OU person (rate 0.3 an hour, SD 1) answering for 60 days: 40 days of
    period 1, then period 2 from the next day on, its level `jump` higher. Returned as one
    period (no period column) and as the two periods."""
    rng = np.random.default_rng(3000 + seed)
    hours = prompt_hours(60, 5, rng)
    second = hours >= 40 * 24
    x = simulate_ou(hours, 0.3, 1.0, 3.0, rng) + np.where(second, jump, 0.0)
    one = participant(hours, x, rng=rng)
    return one, _with_periods(one, np.where(second, 2, 1))


def test_period_windows_are_each_period_s_own_windows():
    """The windows of two back-to-back periods are those of each period alone, shifted."""
    rng = np.random.default_rng(5)
    hours = prompt_hours(30, 5, rng)
    period = np.where(hours >= 18 * 24, 2, 1)
    starts, ends = rl.period_windows(hours, period, 0.4)
    assert (period[starts] == period[ends]).all()
    k = int(np.argmax(period == 2))
    s1, e1 = rl.time_windows(hours[:k], 0.4)
    s2, e2 = rl.time_windows(hours[k:], 0.4)
    assert starts.tolist() == s1.tolist() + (s2 + k).tolist()
    assert ends.tolist() == e1.tolist() + (e2 + k).tolist()
    # One period: exactly the whole series' windows.
    one = rl.period_windows(hours, np.ones(len(hours), dtype=np.int64), 0.4)
    assert [a.tolist() for a in one] == [a.tolist() for a in rl.time_windows(hours, 0.4)]


def test_no_window_holds_answers_of_both_periods():
    """Each rolling window holds answers of one period only, detrended within that period:
    its count and variance match a direct computation with pandas and numpy.polyfit."""
    _, two = _back_to_back(0)
    settings = settings_for(windows=[0.5], bandwidths_days=[7.0], window=0.5, surrogates=19,
                            detrend="linear")
    series = prepare(two, settings)
    rolling = early_warnings(series, settings, "p1").tables["rolling"]
    frame = pd.DataFrame({"h": series.hours, "p": series.periods, "x": series.value})
    # Reference: each period's least-squares line (numpy.polyfit), removed within the period.
    frame["r"] = frame["x"] - frame.groupby("p", group_keys=False)[["h", "x"]].apply(
        lambda g: pd.Series(np.polyval(np.polyfit(g["h"], g["x"], 1), g["h"]), index=g.index))
    span = 0.5 * frame.groupby("p")["h"].agg(lambda h: h.max() - h.min())
    ends = np.searchsorted(series.local_time, rolling["local_time"])
    seen = set()
    for end, n, var in zip(ends, rolling["n"], rolling["variance"], strict=True):
        p, t = frame.at[end, "p"], frame.at[end, "h"]
        inside = frame[(frame["p"] == p) & (frame["h"] > t - span[p]) & (frame["h"] <= t)]
        assert n == len(inside)
        assert var == pytest.approx(inside["r"].var(ddof=1), rel=1e-9)
        assert set(frame["p"].iloc[end - n + 1:end + 1]) == {p}
        seen.add(p)
    assert seen == {1, 2}


@pytest.mark.slow
def test_a_level_jump_between_periods_does_not_make_variance_rise():
    """20 simulated stationary people with a 2-SD level jump between two back-to-back periods.

    Taken as one period, the windows after the jump mix both levels, so the rolling variance
    rises (mean Kendall tau 0.48 at these seeds): the check below can fail. Taken as two
    periods, no window mixes them and the process is stationary (known parameters): tau is
    near zero and the surrogate test rejects at about its nominal rate.
    """
    settings = settings_for(windows=[0.5], bandwidths_days=[7.0], surrogates=199)
    taus, ps, mixed = [], [], []
    for seed in range(20):
        one, two = _back_to_back(seed)
        est = early_warnings(prepare(two, settings), settings, f"j{seed}").estimates
        taus.append(est["warning_tau_variance"].value)
        ps.append(est["warning_p_variance"].value)
        mixed.append(early_warnings(prepare(one, settings), settings,
                                    f"j{seed}").estimates["warning_tau_variance"].value)
    assert np.mean(mixed) > 0.3
    assert abs(np.mean(taus)) < 0.15
    assert np.mean(np.array(ps) < 0.05) <= 0.10


def test_without_a_jump_two_periods_read_like_the_periods_alone():
    """Two periods with the same level: the tested windows are those of each period alone,
    and the rolling table lists period 1's windows before period 2's."""
    _, two = _back_to_back(1, jump=0.0)
    settings = settings_for(windows=[0.5], bandwidths_days=[7.0], window=0.5, surrogates=19)
    series = prepare(two, settings)
    rolling = early_warnings(series, settings, "p1").tables["rolling"]
    period_of_row = series.periods[np.searchsorted(series.local_time, rolling["local_time"])]
    assert (np.diff(period_of_row) >= 0).all() and set(period_of_row) == {1, 2}
    assert rolling["local_time"].is_monotonic_increasing


@pytest.fixture(scope="module")
def bringmann(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    from tests.intake.test_intake_bringmann import _project

    return load_study(_project(tmp_path_factory.mktemp("bringmann") / "study"))


def test_bringmann_windows_never_span_the_gap(bringmann) -> None:  # type: ignore[no-untyped-def]
    """Open data with two six-day periods ten weeks apart (Bringmann et al. 2013, PLoS ONE
    8:e60188): every rolling window lies inside one period and holds the answers counted
    directly from the answers' times (half of the window's own period)."""
    settings = bringmann.settings
    both = 0
    for person in bringmann.roster["participant"]:
        series = prepare(bringmann.slice(person), settings)
        if len(set(series.periods)) < 2:
            continue
        fam = early_warnings(series, settings, str(person))
        rolling = fam.tables["rolling"]
        frame = pd.DataFrame({"h": series.hours, "p": series.periods})
        span = settings.metrics.window * frame.groupby("p")["h"].agg(
            lambda h: h.max() - h.min())
        ends = np.searchsorted(series.local_time, rolling["local_time"])
        for end, n in zip(ends, rolling["n"], strict=True):
            p, t = frame.at[end, "p"], frame.at[end, "h"]
            assert n == int(((frame["p"] == p) & (frame["h"] > t - span[p])
                             & (frame["h"] <= t)).sum())
            assert set(frame["p"].iloc[end - n + 1:end + 1]) == {p}
        if len(set(frame["p"].iloc[ends])) == 2:
            both += 1
            # Taken as one period, every window (half of the whole ten weeks) would end in
            # period 2: period 1's answers would enter no window at all.
            whole = rl.time_windows(series.hours, settings.metrics.window)
            assert set(series.periods[whole[1]]) == {2}
    # Four of the five answered in both periods; half of a six-day period holds 20 answers
    # (min_window_prompts) in both periods for one of them (10720: 48 and 45 answers).
    assert both >= 1
