"""Mood landscape: KDE potential, robust valleys, bimodality, dip test, two-state residence."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from springback.metrics._series import prepare
from springback.metrics.landscape import (
    bimodality_coefficient,
    dip_test,
    kde_density,
    landscape,
    landscape_family,
    local_minima,
    potential_of,
    silverman_factor,
)
from tests.support.shifts_sim import (
    double_well,
    latent_residence,
    participant,
    prompt_hours,
    settings,
    single_well,
)

S_SAMPLE = np.concatenate([np.linspace(-1.5, -0.5, 11), np.linspace(0.5, 1.5, 11)])
GRID = np.round(np.linspace(-3, 3, 601), 2)


def test_kde_equals_scipy_gaussian_kde() -> None:
    """Check the KDE without bounds equals scipy.stats.gaussian_kde with the same factor."""
    # Source: scipy.stats.gaussian_kde (kernel covariance = factor^2 x sample variance, ddof 1).
    rng = np.random.default_rng(0)
    x = np.round(rng.normal(3, 1, 200) * 3) / 3
    for factor in (0.2, 0.5, silverman_factor(x.size)):
        ref = stats.gaussian_kde(x, bw_method=factor)(GRID)
        np.testing.assert_allclose(kde_density(x, GRID, factor), ref, rtol=1e-10, atol=1e-14)


def test_reflected_density_integrates_to_one_on_the_scale() -> None:
    """Check reflection at the bounds keeps the whole probability mass inside the scale."""
    # Source: Silverman 1986, "Density Estimation", section 2.10 (reflection); common practice.
    rng = np.random.default_rng(1)
    x = np.clip(rng.exponential(1.0, 300), 0, 6)
    grid = np.linspace(0, 6, 2001)
    dens = kde_density(x, grid, 0.4, (0.0, 6.0))
    assert np.trapezoid(dens, grid) == pytest.approx(1.0, abs=1e-3)


def test_potential_minima_of_methods_sample() -> None:
    """Check U = -ln p of the two-cluster sample s has minima at -1, +1 and a maximum at 0."""
    # Source: [computed with scipy 1.17]: gaussian_kde(s, bw_method=0.3) -> minima
    # {-1.00, +1.00}, maximum at 0.00; Scott's factor 0.538909 -> minima {-0.98, +0.98}.
    u = potential_of(kde_density(S_SAMPLE, GRID, 0.3))
    assert GRID[local_minima(u)].tolist() == [-1.0, 1.0]
    inner = (GRID > -1) & (GRID < 1)
    assert GRID[inner][np.argmax(u[inner])] == 0.0
    scott = S_SAMPLE.size ** (-1 / 5)
    assert scott == pytest.approx(0.538909, abs=1e-6)
    u = potential_of(kde_density(S_SAMPLE, GRID, scott))
    assert GRID[local_minima(u)].tolist() == [-0.98, 0.98]


def test_potential_of_analytic_mixture() -> None:
    """Check U values and minima of the analytic two-normal mixture (Livina et al. 2010)."""
    # Source: [computed with scipy 1.17, sigma = 1, U = -(sigma^2/2) ln p]: U(+-1) =
    # 0.459302, U(0) = 1.112896, minima {-1, 1}.
    p = 0.5 * stats.norm.pdf(GRID, -1, 0.5) + 0.5 * stats.norm.pdf(GRID, 1, 0.5)
    u = potential_of(p, sigma=1.0)
    assert u[GRID == 1.0][0] == pytest.approx(0.459302, abs=1e-6)
    assert u[GRID == 0.0][0] == pytest.approx(1.112896, abs=1e-6)
    assert GRID[local_minima(u)].tolist() == [-1.0, 1.0]
    # The booklet's default scale (sigma^2/2 = 1) is -ln p itself.
    np.testing.assert_allclose(potential_of(p), -np.log(p))


@pytest.mark.parametrize(
    ("sample", "bc", "dip", "dip_p"),
    [
        # Source: [computed with scipy 1.17 and diptest 0.12].
        ([1, 1, 1, 2, 2, 8, 8, 9, 9, 9], 0.529892, 0.214286, 6.1e-6),
        (list(range(1, 11)), 0.318544, 0.05, 1.0),
        ([1, 4, 5, 5, 5, 5, 5, 5, 6, 9], 0.127218, 0.05, 1.0),
        (S_SAMPLE.tolist(), 0.588433, 0.125, 0.0034),
    ],
)
def test_bimodality_coefficient_and_dip(sample: list[float], bc: float, dip: float,
                                        dip_p: float) -> None:
    """Check BC (Pfister et al. 2013) and Hartigan's dip (allow_zero=False) on computed values."""
    assert bimodality_coefficient(np.array(sample, float)) == pytest.approx(bc, abs=1e-6)
    d, p = dip_test(np.array(sample, float))
    assert d == pytest.approx(dip, abs=1e-6)
    assert p == pytest.approx(dip_p, rel=0.05, abs=1e-4)


def test_bimodality_coefficient_of_uniform_population() -> None:
    """Check BC approaches 5/9 for a large uniform sample."""
    # Source: Pfister et al. 2013, Front Psychol 4:700: population BC of a continuous uniform
    # = 5/9 = 0.555556.
    x = np.random.default_rng(2).uniform(0, 1, 200_000)
    assert bimodality_coefficient(x) == pytest.approx(5 / 9, abs=0.005)


def _double_well_run(seed: int, days: int = 60, per_day: int = 16, first: float = 0.0,
                     last: float = 24.0):
    rng = np.random.default_rng(seed)
    hours = prompt_hours(days, per_day, rng, first, last)
    latent, grid, path = double_well(hours, rng, sigma=0.6, unit_hours=8.0)
    values = np.clip(np.round(50 + 20 * latent + rng.normal(0, 3, latent.size)), 0, 100)
    s = settings(metrics={"surrogates": 99})
    data = participant(hours, values)
    return landscape_family(prepare(data, s), data, s), grid, path


def test_double_well_gives_two_valleys_and_residence_times() -> None:
    """Check a double-well Langevin process gives two valleys and residence times within 25%
    of those measured on the latent path (in most seeded runs)."""
    # Source: simulated process with known truth: dx = (x - x^3)dt + 0.6 dW, wells at -1 and +1,
    # barrier at 0, so the true cores are x <= -0.5 and x >= +0.5; the truth is measured on the
    # fine latent path by an independent loop (tests/_shifts_sim.latent_residence). Short visits
    # that fall between prompts cannot be seen, so single runs can be off; we require 7 of 10
    # runs to find two valleys and 3 in 4 of those to be within 25% for both states.
    two, close, ratios = 0, 0, []
    for seed in range(10):
        fam, grid, path = _double_well_run(seed)
        est = fam.estimates
        if est["landscape_valleys"].value != 2:
            continue
        two += 1
        truth = latent_residence(grid, path, -0.5, 0.5)
        r = [est[f"residence_hours_{k}"].value / truth[k] for k in ("low", "high")]
        ratios += r
        close += all(abs(x - 1) <= 0.25 for x in r)
        low = est["residence_hours_low"]
        assert low.lower is None or low.lower <= low.value <= (low.upper or math.inf)
        assert fam.params["low_core"] < fam.params["barrier"] < fam.params["high_core"]
    assert two >= 7
    assert close >= 0.75 * two
    assert np.median(ratios) == pytest.approx(1.0, abs=0.1)


def test_double_well_with_daytime_prompts_finds_two_valleys() -> None:
    """Check two valleys in at least 8 of 10 seeded double-well runs with daytime prompts."""
    # Source: simulated double well as above, 8 prompts a day between 08:00 and 22:00 for 90 days.
    hits = sum(
        _double_well_run(seed, days=90, per_day=8, first=8.0, last=22.0)[0]
        .estimates["landscape_valleys"].value == 2
        for seed in range(10)
    )
    assert hits >= 8


def test_single_well_gives_one_valley_in_most_runs() -> None:
    """Check a single-well (Ornstein-Uhlenbeck) process gives one valley in >= 90% of runs."""
    # Source: simulated OU process (one stable state) observed on a 0-100 slider and on a 1-7
    # Likert item, where a too narrow kernel would make a peak of every answer option.
    ones = 0
    runs = 0
    for seed in range(20):
        rng = np.random.default_rng(100 + seed)
        hours = prompt_hours(40, 8, rng)
        ou = single_well(hours, rng, 0.8)
        slider = np.clip(np.round(50 + 15 * ou + rng.normal(0, 3, hours.size)), 0, 100)
        likert = np.clip(np.round(3 + 1.2 * ou), 1, 7)
        ones += len(landscape(slider, (0, 100)).valleys) == 1
        ones += len(landscape(likert, (1, 7)).valleys) == 1
        runs += 2
    assert ones >= 0.9 * runs


def test_one_valley_leaves_residence_empty_with_reason() -> None:
    """Check residence times are missing with a reason when there are not two states."""
    rng = np.random.default_rng(5)
    hours = prompt_hours(30, 8, rng)
    values = np.clip(np.round(50 + 15 * single_well(hours, rng)), 0, 100)
    s = settings()
    data = participant(hours, values)
    fam = landscape_family(prepare(data, s), data, s)
    assert fam.estimates["landscape_valleys"].value == 1
    for name in ("residence_hours_low", "residence_hours_high", "switches", "flicker_tau"):
        est = fam.estimates[name]
        assert est.value is None and "two valleys" in est.note
    assert set(fam.tables["potential"].columns) == {"x", "density", "potential"}
    assert set(fam.tables["states"]["state"]) == {""}


def test_too_few_prompts_gives_missing() -> None:
    """Check fewer than the minimum answers gives every landscape estimate missing."""
    rng = np.random.default_rng(0)
    hours = prompt_hours(3, 8, rng)
    s = settings()
    data = participant(hours, rng.uniform(0, 100, hours.size))
    fam = landscape_family(prepare(data, s), data, s)
    assert all(e.value is None and "at least 40 answers" in e.note
               for e in fam.estimates.values())


@pytest.mark.parametrize("load", ["stress", "events"])
def test_daily_load_table(load: str) -> None:
    """Check the load table holds the item's daily mean or the upsetting events per day."""
    import pandas as pd

    rng = np.random.default_rng(3)
    hours = prompt_hours(10, 6, rng)
    stress = rng.integers(0, 10, hours.size).astype(float)
    t = pd.to_datetime(["2026-03-04 10:00", "2026-03-04 15:00", "2026-03-06 12:00",
                        "2026-03-07 02:00"]).tz_localize("UTC")
    events = pd.DataFrame({"participant": "p1", "time": t, "local_time": t, "kind": "conflict",
                           "intensity": 3.0, "upsetting": [True, True, False, True]})
    s = settings(events={"daily_load": load})
    data = participant(hours, rng.uniform(0, 100, hours.size), stress=stress, events=events)
    series = prepare(data, s)
    table = landscape_family(series, data, s).tables["load"]
    assert list(table.columns) == ["study_day", "load", "mood"]
    assert len(table) == 10
    if load == "stress":
        day0 = data.momentary["study_day"] == table["study_day"].iloc[0]
        assert table["load"].iloc[0] == pytest.approx(stress[day0.to_numpy()].mean())
    else:
        # 02:00 on 7 March counts for 6 March (day starts at 04:00); the non-upsetting one not.
        per_day = dict(zip(table["study_day"].dt.day, table["load"], strict=True))
        assert per_day[4] == 2 and per_day[6] == 1 and per_day[7] == 0 and per_day[5] == 0


def test_dip_p_is_not_fooled_by_rating_scale_ties() -> None:
    """Check unimodal 1-7 ratings do not get a small dip p-value from ties alone."""
    # Source: simulated single-well process rounded to a 7-point item; Hartigan & Hartigan 1985
    # assume a continuous distribution, so raw ties alone give p near 0 (checked below).
    s = settings(scale=(1, 7))
    small = 0
    for seed in range(10):
        rng = np.random.default_rng(seed)
        hours = prompt_hours(40, 8, rng)
        likert = np.clip(np.round(4 + 1.2 * single_well(hours, rng)), 1, 7)
        data = participant(hours, likert)
        small += landscape_family(prepare(data, s), data, s).estimates["dip_p"].value < 0.05
    assert small <= 1
    assert dip_test(likert)[1] < 0.05


def test_rounding_cell_of_a_composite() -> None:
    """Check a mean of m integer ratings has lattice spacing 1/m (per prompt)."""
    from springback.metrics.landscape import rounding_cell

    items = np.array([[1, 2, 3], [1, np.nan, 3], [2, 2, 5], [4, 4, np.nan]], float)
    np.testing.assert_allclose(rounding_cell(items, 0.1), [1 / 3, 1 / 2, 1 / 3, 1 / 2])
    np.testing.assert_allclose(rounding_cell(np.array([[3.0], [5.0]]), 0.1), [2.0, 2.0])
