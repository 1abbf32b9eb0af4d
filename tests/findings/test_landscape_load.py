"""The landscape's resting place against the last weeks, and mood against daily load.

Sources: simulated Ornstein-Uhlenbeck people with known levels (tests/support/calibration_sim,
the exact OU transition of springback.simulate) and scipy.stats.spearmanr for the load
correlation (Spearman 1904).
"""

from __future__ import annotations

import functools
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from springback.findings import topics
from springback.findings.records import Finding
from springback.metrics._series import prepare
from springback.metrics.descriptives import describe
from springback.metrics.results import Estimate, Family
from tests.support import calibration_sim as cs
from tests.support import metrics_sim

pytestmark = pytest.mark.xdist_group("calibration")


def _moved(t: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """OU resting at 3.2 for six weeks, then its level climbs to 4.8 over the last two weeks
    (3 SDs): the last weeks lie far from where the mood rested."""
    day = (t - t[:, :1]) / 24.0
    level = 3.2 + 1.6 * np.clip((day - 42.0) / 6.0, 0.0, 1.0)
    return np.asarray(cs._ou(t, rng, mean=level))


@functools.cache
def _landscapes(kind: str, n: int = 30) -> tuple[Finding, ...]:
    """The landscape findings of n simulated people of one kind (seeded)."""
    settings = cs.calibration_settings(surrogates=19)
    rng = np.random.default_rng(2301 if kind == "moved" else 2302)
    t = cs.prompt_hours(n, rng)
    values = _moved(t, rng) if kind == "moved" else cs.stationary(t, rng)
    out = []
    for i in range(n):
        person = metrics_sim.participant(t[i], values[i], pid=f"{kind}-{i:02d}", rng=rng)
        results = cs.reading_families(person, settings)
        results.families["descriptives"] = describe(prepare(person, settings), person, settings)
        out.append(topics.landscape(results))
    return tuple(out)


def test_a_level_that_moved_away_is_not_told_as_its_resting_place() -> None:
    """Check people whose last two weeks climbed 3 SDs above where they rested are never read
    as staying around one level: with one valley the reading is moved_away, with the last
    weeks' mean near the simulated 4.8."""
    found = _landscapes("moved")
    assert not any(f.reading == "one_level" for f in found)
    moved = [f for f in found if f.reading == "moved_away"]
    assert len(moved) >= len(found) // 2
    for f in moved:
        assert f.numbers["last_mean"] > f.numbers["typical_high"]
        assert abs(f.numbers["valley"] - 3.2) < 0.5
        assert 4.2 < f.numbers["last_mean"] < 5.2


def test_a_stationary_person_rests_where_the_last_weeks_are() -> None:
    """Check stationary people (level 3.5 throughout) read one_level, never moved_away."""
    found = _landscapes("stationary")
    assert sum(f.reading == "moved_away" for f in found) == 0
    assert sum(f.reading == "one_level" for f in found) >= 0.9 * len(found)


def _load_results(load: np.ndarray, mood: np.ndarray) -> SimpleNamespace:
    days = pd.date_range("2026-03-02", periods=len(load), freq="D")
    fam = Family(estimates={"landscape_valleys": Estimate(1.0)},
                 tables={"load": pd.DataFrame({"study_day": days, "load": load, "mood": mood})})
    return SimpleNamespace(participant="L1", families={"landscape": fam})


@pytest.mark.parametrize("slope, worse, reading", [
    (0.5, True, "worse_with_load"), (-0.5, True, "better_with_load"),
    (0.5, False, "better_with_load"), (0.0, True, "about_the_same")])
def test_mood_and_load_reading_follows_spearman(slope: float, worse: bool, reading: str) -> None:
    """Check the load reading's rho and p are scipy's spearmanr and its direction follows the
    scale's polarity (higher = worse or better); no slope reads about_the_same."""
    # Source: scipy.stats.spearmanr on the same simulated days (known slope).
    rng = np.random.default_rng(13)
    load = rng.integers(0, 4, 60).astype(float)
    mood = 3.5 + slope * load + rng.normal(0, 0.4, 60)
    f = topics.load(_load_results(load, mood), worse, 0.05)  # type: ignore[arg-type]
    expected = stats.spearmanr(load, mood)
    assert f.numbers["rho"] == pytest.approx(expected.statistic)
    if slope == 0.0:
        assert abs(expected.statistic) < topics.LOAD_RHO  # this seed's draw
        assert (f.reading, f.certainty) == (reading, "no_clear_sign")
        return
    assert (f.reading, f.certainty) == (reading, "clear")
    assert f.numbers["p"] == pytest.approx(expected.pvalue)
