"""The course reading on simulated processes of each kind, and its evidence codes."""

from __future__ import annotations

import numpy as np
import pytest

from springback.findings.course import COURSES, course
from springback.metrics._series import prepare
from springback.metrics.results import Estimate, Family
from springback.metrics.shifts import shift_family
from tests.support.shifts_sim import participant, prompt_hours, settings


def _shifts(kind: str, seed: int = 0) -> Family:
    """Shift family of a simulated participant: 'step', 'ramp' or 'flat' daily course."""
    rng = np.random.default_rng(seed)
    hours = prompt_hours(60, 6, rng)
    day = hours / 24
    shape = {"step": 15.0 * (day >= 30), "ramp": 30.0 * day / 60, "flat": 0.0 * day,
             "episode": 15.0 * ((day >= 25) & (day < 35))}[kind]
    values = np.clip(np.round(40 + shape + rng.normal(0, 8, hours.size)), 0, 100)
    s = settings()
    return shift_family(prepare(participant(hours, values), s), s)


def _landscape(valleys: float, switches: float | None, bc: float = 0.4,
               dip_p: float = 0.5) -> Family:
    est = {"landscape_valleys": Estimate(valleys), "bimodality_coefficient": Estimate(bc),
           "dip_p": Estimate(dip_p)}
    est["switches"] = Estimate(switches) if switches is not None else Estimate.missing("one")
    return Family(estimates=est)


def _read(families: dict[str, Family]):
    return course("S1", families, 0.05, higher_is_worse=True)


def test_step_reads_as_abrupt_shift_for_the_worse() -> None:
    """Check a simulated step of 15 points (known truth; noise SD 8) reads as an abrupt shift."""
    f = _read({"shifts": _shifts("step"), "landscape": _landscape(1, None)})
    assert f.reading == "abrupt_shift"
    assert f.numbers["direction"] == "worse"
    assert f.numbers["size"] == pytest.approx(15.0, abs=4.0)
    assert any(e["code"] == "shift_worse" for e in f.evidence)


@pytest.mark.parametrize("seed", range(3))
def test_ramp_reads_as_gradual_change(seed: int) -> None:
    """Check a simulated steady drift of 30 points over 60 days reads as gradual change."""
    # Source: simulated linear drift (known truth) with prompt-level noise SD 8.
    f = _read({"shifts": _shifts("ramp", seed), "landscape": _landscape(1, None)})
    assert f.reading == "gradual_change"
    assert f.numbers["drift"] == pytest.approx(30.0, abs=8.0)
    assert f.numbers["direction"] == "worse"


def test_ramp_of_a_better_is_higher_scale_reads_as_getting_better() -> None:
    """Check the direction follows the scale's polarity (higher = better here)."""
    f = course("S1", {"shifts": _shifts("ramp"), "landscape": _landscape(1, None)}, 0.05,
               higher_is_worse=False)
    assert (f.reading, f.numbers["direction"]) == ("gradual_change", "better")


def test_two_valleys_with_switches_read_as_switching() -> None:
    """Check two robust valleys with repeated switching read as switching between states."""
    f = _read({"shifts": _shifts("flat"), "landscape": _landscape(2, 9, 0.7, 0.001)})
    assert f.reading == "switching"
    assert {"code": "switches", "n": 9.0} in [dict(e) for e in f.evidence]


@pytest.mark.parametrize("seed", range(3))
def test_stationary_noise_reads_as_no_clear_change(seed: int) -> None:
    """Check stationary noise reads as no clear change, graded 'no clear sign'."""
    f = _read({"shifts": _shifts("flat", seed), "landscape": _landscape(1, None)})
    assert (f.reading, f.certainty) == ("no_clear_change", "no_clear_sign")


def test_missing_shift_family_reads_as_not_enough_data_with_reason() -> None:
    """Check the course has no reading, with a plain reason, when there are no daily means."""
    f = _read({})
    assert (f.reading, f.certainty) == ("not_enough_data", "cannot_tell")
    assert "too few days" in f.reason


def test_staircase_of_steps_reads_as_gradual() -> None:
    """Check a drift that starts mid-study and levels off (a staircase for PELT) reads gradual."""
    # Source: simulated flat-ramp-flat course (known truth: gradual rise of 30 points from day
    # 20 to day 50), like a worsening that builds up over weeks.
    rng = np.random.default_rng(4)
    hours = prompt_hours(70, 6, rng)
    day = hours / 24
    shape = 30.0 * np.clip((day - 20) / 30, 0, 1)
    values = np.clip(np.round(40 + shape + rng.normal(0, 6, hours.size)), 0, 100)
    s = settings()
    f = _read({"shifts": shift_family(prepare(participant(hours, values), s), s),
               "landscape": _landscape(1, None)})
    assert f.reading == "gradual_change"


def test_every_reading_is_one_of_the_fixed_codes() -> None:
    """Check the readings of every simulated kind come from the documented code list."""
    for kind in ("step", "ramp", "flat"):
        assert _read({"shifts": _shifts(kind), "landscape": _landscape(1, None)}).reading \
            in COURSES


def test_an_excursion_that_comes_back_is_not_an_abrupt_shift() -> None:
    """Check a 12-day rise that returns to the usual level reads as no lasting shift."""
    # Source: simulated excursion (known truth: level 40, 60 from day 20 to day 31, then 40
    # again; noise SD 6), the kind of multi-day wander a slow process makes.
    rng = np.random.default_rng(5)
    hours = prompt_hours(60, 6, rng)
    day = hours / 24
    shape = 20.0 * ((day >= 20) & (day < 32))
    values = np.clip(np.round(40 + shape + rng.normal(0, 6, hours.size)), 0, 100)
    s = settings()
    f = _read({"shifts": shift_family(prepare(participant(hours, values), s), s),
               "landscape": _landscape(1, None)})
    assert f.reading != "abrupt_shift"
    assert f.numbers["large_shifts"] >= 1
    assert f.numbers["shift_contrast"] < 2 * 6.0  # all days after vs all before: diluted
    assert "shift_did_not_last" in [e["code"] for e in f.evidence]


def test_a_clean_large_step_is_a_clear_shift() -> None:
    """Check a step of 15 points (several swings, step model far better) is graded clear."""
    # Source: simulated step (known truth, as in the first test); Kass & Raftery 1995 grade.
    f = _read({"shifts": _shifts("step"), "landscape": _landscape(1, None)})
    assert (f.reading, f.certainty) == ("abrupt_shift", "clear")
    assert f.numbers["days_before_shift"] >= 7 and f.numbers["days_after_shift"] >= 7


@pytest.mark.parametrize("seed", range(3))
def test_an_excursion_that_comes_back_reads_as_a_passing_episode(seed: int) -> None:
    """Check a level 15 points higher from day 25 to day 34 that then comes back (known truth;
    noise SD 8) reads as a passing episode for the worse, dated to those days, and not as a
    lasting shift."""
    # Source: simulated step up and back down (known truth).
    f = _read({"shifts": _shifts("episode", seed), "landscape": _landscape(1, None)})
    assert f.reading == "passing_episode"
    assert f.numbers["direction"] == "worse"
    assert 8 <= f.numbers["episode_days"] <= 12  # 10 days, within two either way
    assert f.numbers["size"] == pytest.approx(15.0, abs=5.0)
    assert any(e["code"] == "episode_worse" for e in f.evidence)
    assert "passing_episode" in COURSES
