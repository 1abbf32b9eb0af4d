"""Which pattern the data resemble: simulated processes of each kind, and the wording rules."""

from __future__ import annotations

import numpy as np
import pytest

from springback.metrics._series import prepare
from springback.metrics.pattern import (
    GRADUAL,
    NONE,
    PATTERNS,
    SHIFT_NO_SLOWING,
    SHIFT_SLOWING,
    SWITCHING,
    pattern_family,
)
from springback.metrics.results import Estimate, Family
from springback.metrics.shifts import shift_family
from tests.support.shifts_sim import participant, prompt_hours, settings


def _shifts(kind: str, seed: int = 0) -> Family:
    """Shift family of a simulated participant: 'step', 'ramp' or 'flat' daily course."""
    rng = np.random.default_rng(seed)
    hours = prompt_hours(60, 6, rng)
    day = hours / 24
    course = {"step": 15.0 * (day >= 30), "ramp": 30.0 * day / 60, "flat": 0.0 * day}[kind]
    values = np.clip(np.round(40 + course + rng.normal(0, 8, hours.size)), 0, 100)
    s = settings()
    return shift_family(prepare(participant(hours, values), s), s)


def _landscape(valleys: float, switches: float | None, bc: float = 0.4,
               dip_p: float = 0.5) -> Family:
    est = {"landscape_valleys": Estimate(valleys), "bimodality_coefficient": Estimate(bc),
           "dip_p": Estimate(dip_p)}
    est["switches"] = Estimate(switches) if switches is not None else Estimate.missing("one")
    return Family(estimates=est)


def _warnings(tau: float, p: float) -> Family:
    return Family(estimates={"warning_tau_inertia": Estimate(tau), "warning_p_inertia": Estimate(p),
                             "warning_tau_variance": Estimate(0.1),
                             "warning_p_variance": Estimate(0.4)})


def test_step_with_slowing_resembles_abrupt_shift_after_slowing() -> None:
    """Check a simulated step plus a significant rise in inertia reads as shift after slowing."""
    # Source: simulated step of 15 points (known truth); warning values set by hand.
    fam = pattern_family({"shifts": _shifts("step"), "landscape": _landscape(1, None),
                          "warnings": _warnings(0.6, 0.01)}, settings())
    assert fam.params["resembles"] == SHIFT_SLOWING
    assert any("carry-over (inertia) rose" in e for e in fam.params["evidence"])


def test_step_without_slowing_says_so() -> None:
    """Check the same step without an early-warning rise reads as a shift without slowing."""
    fam = pattern_family({"shifts": _shifts("step"), "landscape": _landscape(1, None),
                          "warnings": _warnings(0.1, 0.4)}, settings())
    assert fam.params["resembles"] == SHIFT_NO_SLOWING
    assert fam.params["what_would_change"]


@pytest.mark.parametrize("seed", range(3))
def test_ramp_resembles_gradual_change(seed: int) -> None:
    """Check a simulated steady drift of 30 points over 60 days reads as gradual change."""
    # Source: simulated linear drift (known truth) with prompt-level noise SD 8.
    fam = pattern_family({"shifts": _shifts("ramp", seed), "landscape": _landscape(1, None)},
                         settings())
    assert fam.params["resembles"] == GRADUAL
    assert fam.params["drift"] == pytest.approx(30.0, abs=8.0)
    assert any("towards feeling worse" in e for e in fam.params["evidence"])


def test_two_valleys_with_switches_resemble_switching() -> None:
    """Check two robust valleys with repeated switching read as switching between states."""
    fam = pattern_family({"shifts": _shifts("flat"), "landscape": _landscape(2, 9, 0.7, 0.001)},
                         settings())
    assert fam.params["resembles"] == SWITCHING
    assert any("9 times" in e for e in fam.params["evidence"])


@pytest.mark.parametrize("seed", range(3))
def test_stationary_noise_resembles_no_clear_change(seed: int) -> None:
    """Check stationary noise reads as no clear change."""
    fam = pattern_family({"shifts": _shifts("flat", seed), "landscape": _landscape(1, None)},
                         settings())
    assert fam.params["resembles"] == NONE


def test_missing_shift_family_reads_as_no_clear_change_with_reason() -> None:
    """Check the summary degrades to 'no clear change' with a plain reason when data are short."""
    fam = pattern_family({}, settings())
    assert fam.params["resembles"] == NONE
    assert "too few days" in fam.params["evidence"][0]


def test_wording_is_resemblance_never_diagnosis() -> None:
    """Check every pattern name is one of the fixed set and the caveat rules out a diagnosis."""
    fam = pattern_family({"shifts": _shifts("step"), "landscape": _landscape(1, None)},
                         settings())
    assert fam.params["resembles"] in PATTERNS
    assert "not a diagnosis" in fam.params["caveat"]
    texts = [t for v in fam.params["evidence_by_pattern"].values() for t in v]
    assert texts and not any("diagnos" in t or "you have" in t for t in texts)
    assert set(fam.params["evidence_by_pattern"]) == set(PATTERNS)


def test_staircase_of_steps_reads_as_gradual() -> None:
    """Check a drift that starts mid-study and levels off (a staircase for PELT) reads gradual."""
    # Source: simulated flat-ramp-flat course (known truth: gradual rise of 30 points from day
    # 20 to day 50), like a worsening that builds up over weeks.
    rng = np.random.default_rng(4)
    hours = prompt_hours(70, 6, rng)
    day = hours / 24
    course = 30.0 * np.clip((day - 20) / 30, 0, 1)
    values = np.clip(np.round(40 + course + rng.normal(0, 6, hours.size)), 0, 100)
    s = settings()
    fam = pattern_family({"shifts": shift_family(prepare(participant(hours, values), s), s),
                          "landscape": _landscape(1, None)}, s)
    assert fam.params["resembles"] == GRADUAL


def test_codes_carry_numbers_for_translation() -> None:
    """Check every evidence item has a code with an English phrase and the same English text."""
    from springback.metrics.pattern import PHRASES

    fam = pattern_family({"shifts": _shifts("step"), "landscape": _landscape(1, None),
                          "warnings": _warnings(0.6, 0.01)}, settings())
    codes = fam.params["evidence_codes"]
    assert set(codes) == set(PATTERNS)
    for pattern, items in codes.items():
        assert [PHRASES[i["code"]].format(**i) for i in items] == \
            fam.params["evidence_by_pattern"][pattern]
    shift = next(i for i in codes[SHIFT_SLOWING] if i["code"] == "shift_worse")
    assert isinstance(shift["size"], float) and len(shift["date"]) == 10
    assert [PHRASES[c] for c in fam.params["what_would_change_codes"]] == \
        fam.params["what_would_change"]
