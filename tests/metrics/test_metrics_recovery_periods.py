"""Recovery episodes stay within a measurement period: they never span the gap between two."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from springback.intake import load_study
from springback.metrics._series import prepare
from springback.metrics.recovery import bounce_back, period_bounds, rolling_baseline
from springback.model import ParticipantData
from tests.support.metrics_sim import participant, settings_for
from tests.support.recovery_sim import upset_people

SLOTS = np.array([9, 12, 15, 18, 21.0])


def _with_periods(data: ParticipantData, period: np.ndarray) -> ParticipantData:
    return dataclasses.replace(data, momentary=data.momentary.assign(
        period=np.asarray(period, dtype=np.int64)))


def _steady(days: int) -> tuple[np.ndarray, np.ndarray]:
    hours = np.concatenate([d * 24 + SLOTS for d in range(days)])
    return hours, np.tile([3.0, 3.2, 3.0, 3.2, 3.0], days)


def test_an_episode_ends_censored_at_the_last_answer_of_its_period():
    """A dip at 12:00 whose period ends before the 15:00 answer is not seen to recover."""
    hours, x = _steady(14)
    dip = int(np.flatnonzero(hours == 10 * 24 + 12)[0])
    x[dip] = 5.0  # back within the band at 15:00, the first answer of period 2
    data = participant(hours, x)
    settings = settings_for(dip_k=2, recovery_band_sd=1.5)
    one = bounce_back(prepare(data, settings), data, settings).tables["episodes"]
    assert one["hours_to_baseline"].tolist() == [pytest.approx(3.0)]  # one period: back at 15
    two = _with_periods(data, np.where(np.arange(len(hours)) <= dip, 1, 2))
    fam = bounce_back(prepare(two, settings), two, settings)
    ep = fam.tables["episodes"]
    assert ep["censored"].tolist() == [True]
    assert ep["censored_by"].tolist() == ["period end"]
    assert ep["hours_to_baseline"].isna().all()
    # The pooled fit follows it only to the period's last answer (its first and only one).
    assert fam.tables["followed"]["hours"].tolist() == [0.0]


def test_the_baseline_is_taken_within_the_answer_s_period():
    """The rolling baseline counts only the earlier answers of the same period."""
    hours, x = _steady(14)
    x = x + np.random.default_rng(3).normal(0, 0.3, len(x))
    period = np.where(hours < 7 * 24, 1, 2)
    data = _with_periods(participant(hours, x), period)
    series = prepare(data, settings_for())
    mean, _, n = rolling_baseline(series, 7.0)
    first, last = period_bounds(series)
    for i in range(series.n):
        # Direct count: same period, within the 7 days before, strictly earlier.
        prev = (period == period[i]) & (hours >= hours[i] - 168) & (hours < hours[i])
        assert n[i] == prev.sum()
        if prev.sum():
            assert mean[i] == pytest.approx(x[prev].mean())
        assert period[first[i]] == period[last[i]] == period[i]
    assert n[np.flatnonzero(period == 2)[0]] == 0


def _episode_keys(table: pd.DataFrame) -> list[tuple]:
    return [(pd.Timestamp(s), t, round(d, 9), None if pd.isna(h) else round(h, 9), c)
            for s, t, d, h, c in zip(table["start"], table["trigger"], table["depth"],
                                     table["hours_to_baseline"], table["censored"],
                                     strict=True)]


def _split(data: ParticipantData) -> list[ParticipantData]:
    m = data.momentary
    out = []
    for p in sorted(set(m["period"])):
        rows = m[m["period"] == p]
        ev = data.events[(data.events["time"] >= rows["time"].min()) &
                         (data.events["time"] <= rows["time"].max())]
        out.append(dataclasses.replace(data, momentary=rows.reset_index(drop=True),
                                       events=ev.reset_index(drop=True)))
    return out


def test_two_adjacent_periods_give_the_episodes_of_each_period_alone():
    """Simulated upsets in two back-to-back periods with a level jump between them: the
    episodes equal those of each period analysed alone, and the pooled half-life still
    brackets the known return."""
    # Known truth: OU half-life 4 h with event kicks decaying at the process rate
    # (springback.simulate.shock_impulses, exact OU transitions; Gillespie 1996, "Exact
    # numerical simulation of the Ornstein-Uhlenbeck process and its integral", Phys Rev E
    # 54:2084); period 2 (days 30-59) is 2.5 worse, a difference between periods, not an upset.
    settings = settings_for()
    covered = 0
    people = upset_people(4.0, 3, 11, days=60, first=9.5, last=13.5, noise_sd=0.2)
    for data in people:
        hours = (pd.DatetimeIndex(data.momentary["local_time"]) -
                 pd.Timestamp("2026-03-02", tz="Europe/Amsterdam")) / pd.Timedelta(hours=1)
        period = np.where(np.asarray(hours) < 30 * 24, 1, 2)
        m = data.momentary.copy()
        for col in ("sad", "down", "low_mood"):
            m[col] = m[col] + 2.5 * (period == 2)
        m["cheerful"] = m["cheerful"] - 2.5 * (period == 2)
        two = dataclasses.replace(data, momentary=m.assign(period=period))
        fam = bounce_back(prepare(two, settings), two, settings)
        alone = [bounce_back(prepare(p, settings), p, settings) for p in _split(two)]
        want = [k for f in alone for k in _episode_keys(f.tables["episodes"])]
        assert _episode_keys(fam.tables["episodes"]) == want
        # No followed answer of an episode lies in another period than its first.
        series = prepare(two, settings)
        _, last = period_bounds(series)
        followed = fam.tables["followed"]
        for ep, idx in zip(fam.tables["episodes"]["episode"],
                           [int(np.searchsorted(series.local_time, s))
                            for s in fam.tables["episodes"]["start"]], strict=True):
            span = followed.loc[followed["episode"] == ep, "hours"].max()
            assert series.hours[idx] + span <= series.hours[last[idx]] + 1e-9
        half = fam.estimates["recovery_half_life_hours"]
        covered += bool(half.ok and half.lower < 4.0 < half.upper)
    assert covered >= 2



@pytest.fixture(scope="module")
def bringmann(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    from tests.intake.test_intake_bringmann import _project

    return load_study(_project(tmp_path_factory.mktemp("bringmann") / "study"))


def test_bringmann_episodes_stay_within_their_period(bringmann) -> None:  # type: ignore[no-untyped-def]
    """Open data with two periods (Bringmann et al. 2013, PLoS ONE 8:e60188): every episode,
    and every answer followed for the pooled fit, lies in the period the episode began in."""
    settings = bringmann.settings
    seen = 0
    for person in bringmann.roster["participant"]:
        data = bringmann.slice(person)
        series = prepare(data, settings)
        fam = bounce_back(series, data, settings)
        episodes, followed = fam.tables["episodes"], fam.tables["followed"]
        period = series.periods
        for ep, start in zip(episodes["episode"], episodes["start"], strict=True):
            i = int(np.searchsorted(series.local_time, start))
            hours = series.hours[i] + followed.loc[followed["episode"] == ep, "hours"]
            at = np.searchsorted(series.hours, hours.to_numpy() - 1e-9)
            assert set(period[at]) == {period[i]}
            seen += 1
    assert seen > 0
