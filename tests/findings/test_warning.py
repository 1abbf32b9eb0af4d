"""The warning reading: Holm's adjustment, the lead-up of a shift, and certainty grades."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.multitest import multipletests

from springback.findings.records import Finding
from springback.findings.warning import holm, warning
from springback.metrics.leadup import SUFFIX, before
from springback.metrics.results import Estimate, Family


@pytest.mark.parametrize("ps", [[0.01, 0.04, 0.03], [0.5, 0.001, 0.2], [0.02, 0.02, 0.9],
                                [0.04], [0.3, 0.6, 0.01, 0.012]])
def test_holm_matches_statsmodels(ps: list[float]) -> None:
    """Check Holm-adjusted p-values against statsmodels' multipletests(method='holm')."""
    # Source: statsmodels.stats.multitest.multipletests (Holm 1979 step-down).
    expected = multipletests(ps, method="holm")[1]
    assert holm(ps) == pytest.approx(list(expected))


def _grid(agreeing: int, cells: int = 25, p_agree: float = 0.004) -> pd.DataFrame:
    """A sensitivity grid whose first `agreeing` cells have carry-over rising at p_agree and
    the rest at p = 0.3; variance flat (p = 0.6) everywhere."""
    rows = [{"window": 0.3 + 0.1 * (i % 5), "bandwidth_days": float(3 + i // 5),
             "tau_inertia": 0.5, "p_inertia": p_agree if i < agreeing else 0.3,
             "tau_variance": 0.05, "p_variance": 0.6} for i in range(cells)]
    return pd.DataFrame(rows)


def _family(taus: dict[str, float], ps: dict[str, float], robust: float = 0.8,
            suffix: str = "", grid: pd.DataFrame | None = None) -> Family:
    est = {}
    for k in taus:
        est[f"warning_tau_{k}{suffix}"] = Estimate(taus[k])
        est[f"warning_p_{k}{suffix}"] = Estimate(ps[k])
    est[f"warning_robustness_inertia{suffix}"] = Estimate(robust)
    est[f"warning_robustness_variance{suffix}"] = Estimate(robust)
    tables = {"grid": grid if grid is not None else _grid(round(25 * robust))}
    return Family(estimates=est, tables=tables, params={"leadup_days": 40})


COURSE = Finding("S1", "course", "no_clear_change", "no_clear_sign")
SHIFT = Finding("S1", "course", "abrupt_shift", "clear")


def test_one_unadjusted_p_below_alpha_among_three_is_not_rising() -> None:
    """Check p = 0.035 for one of three tests (Holm: 0.105) is not read as rising."""
    # Source: Holm 1979; the smallest of three p-values is multiplied by 3.
    fam = _family({"inertia": 0.36, "variance": 0.78, "crosscorr": 0.1},
                  {"inertia": 0.31, "variance": 0.035, "crosscorr": 0.6})
    f = warning("S1", {"warnings": fam}, COURSE, 0.05, None)
    assert f.reading == "not_rising"
    assert f.numbers["p_holm_variance"] == pytest.approx(0.105)


def test_clear_rise_is_rising_and_its_grade_follows_the_grid() -> None:
    """Check a rise significant after Holm is 'rising', 'clear' only when at least half of
    the grid's cells agree (13 of 25 do, 12 of 25 do not)."""
    taus, ps = {"inertia": 0.6, "variance": 0.2}, {"inertia": 0.004, "variance": 0.4}
    sure = warning("S1", {"warnings": _family(taus, ps, grid=_grid(13))}, COURSE, 0.05, None)
    weak = warning("S1", {"warnings": _family(taus, ps, grid=_grid(12))}, COURSE, 0.05, None)
    assert (sure.reading, sure.certainty) == ("rising", "clear")
    assert (weak.reading, weak.certainty) == ("rising", "some_signs")
    assert (sure.numbers["grid_rose_inertia"], sure.numbers["grid_cells"]) == (13, 25)


def test_a_grid_cell_agrees_only_after_holm_over_its_own_tests() -> None:
    """Check a cell's carry-over p of 0.03 next to a flat variance (Holm: 0.06) does not
    agree, while 0.02 (Holm: 0.04) does; per cell as statsmodels adjusts it."""
    # Source: statsmodels.stats.multitest.multipletests(method='holm') on each cell's
    # two p-values (Holm 1979).
    from springback.findings.warning import grid_agreement

    for p_cell, agrees in ((0.03, 0), (0.02, 25)):
        grid = _grid(25, p_agree=p_cell)
        adjusted = multipletests([p_cell, 0.6], method="holm")[1][0]
        assert (adjusted < 0.05) == bool(agrees)
        out = grid_agreement(grid, 0.05)
        assert (out["grid_rose_inertia"], out["grid_up_inertia"]) == (agrees, 25)
        assert out["grid_rose_variance"] == 0


def test_a_rise_of_the_item_correlation_alone_is_some_signs() -> None:
    """Check the item correlation, which the grid does not test, can at most give
    'some signs' (no cell can agree with it)."""
    fam = _family({"inertia": 0.1, "variance": 0.0, "crosscorr": 0.7},
                  {"inertia": 0.5, "variance": 0.7, "crosscorr": 0.001}, grid=_grid(25))
    f = warning("S1", {"warnings": fam}, COURSE, 0.05, None)
    assert (f.reading, f.certainty) == ("rising", "some_signs")


def test_a_falling_indicator_is_never_rising() -> None:
    """Check a negative tau is not a rise however small its p-value."""
    fam = _family({"inertia": -0.7}, {"inertia": 0.001})
    assert warning("S1", {"warnings": fam}, COURSE, 0.05, None).reading == "not_rising"


def test_with_an_abrupt_shift_the_lead_up_is_read_not_all_data() -> None:
    """Check a shift's warning reads the lead-up's measures (all data rising, lead-up flat)."""
    all_data = _family({"inertia": 0.8}, {"inertia": 0.001})
    leadup = _family({"inertia": 0.05}, {"inertia": 0.6}, suffix=SUFFIX)
    day = pd.Timestamp("2026-04-06")
    f = warning("S1", {"warnings": all_data, "warnings_leadup": leadup}, SHIFT, 0.05, day)
    assert (f.reading, f.numbers["data"], f.numbers["shift_date"]) == \
        ("not_rising", "lead-up", "2026-04-06")
    g = warning("S1", {"warnings": all_data, "warnings_leadup": leadup}, COURSE, 0.05, None)
    assert (g.reading, g.numbers["data"]) == ("rising", "all data")


def test_lead_up_too_short_has_no_reading_with_its_reason() -> None:
    """Check a lead-up whose measures are missing gives not_enough_data and their reason."""
    why = "the first large shift came after 9 study days; the lead-up needs at least 14"
    leadup = Family(estimates={f"warning_tau_inertia{SUFFIX}": Estimate.missing(why)})
    f = warning("S1", {"warnings": _family({"inertia": 0.8}, {"inertia": 0.001}),
                       "warnings_leadup": leadup}, SHIFT, 0.05, pd.Timestamp("2026-01-10"))
    assert (f.reading, f.reason) == ("not_enough_data", why)


def test_before_cuts_the_series_at_the_start_of_the_shift_day() -> None:
    """Check the lead-up keeps exactly the answers on study days before the shift's day."""
    from springback.metrics._series import prepare
    from tests.support.shifts_sim import participant, prompt_hours, settings

    rng = np.random.default_rng(1)
    hours = prompt_hours(30, 5, rng)
    series = prepare(participant(hours, rng.normal(40, 5, hours.size)), settings())
    day = pd.Timestamp(series.study_day[0]) + pd.Timedelta(days=12)
    part = before(series, day)
    # Counted independently: answers whose study day is earlier than `day`.
    assert part.n == int((series.study_day < np.datetime64(day)).sum())
    assert len(part.admissible) == part.n - 1
    assert (part.hours == series.hours[:part.n]).all()


def test_rising_indicators_with_no_shift_are_their_own_pattern() -> None:
    """Check the case an early warning is for: indicators rising, no shift yet, graded as the
    warning reading is."""
    from springback.findings import overall

    warn = warning("S1", {"warnings": _family({"inertia": 0.6}, {"inertia": 0.004})}, COURSE,
                   0.05, None)
    p = overall("S1", COURSE, warn)
    assert (p.reading, p.certainty) == ("rising_no_shift", warn.certainty)
    assert any(e["code"] == "inertia_rose" for e in p.evidence)
