"""The example study's known truth (example_project/truth.csv) read back by the shift families
and the course reading."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from springback.findings.course import course
from springback.intake import load_study
from springback.metrics._series import prepare
from springback.metrics.landscape import landscape_family
from springback.metrics.shifts import shift_family

EXAMPLE = Path(__file__).resolve().parents[2] / "example_project"
EXPECTED = {
    "stable": {"no_clear_change"}, "event recovery": {"no_clear_change"},
    "two states": {"switching"}, "gradual worsening": {"gradual_change"},
    "gradual improvement": {"gradual_change"}, "slowing then shift": {"abrupt_shift"},
}


@pytest.fixture(scope="module")
def study():
    return load_study(EXAMPLE)


@pytest.fixture(scope="module")
def truth() -> pd.DataFrame:
    return pd.read_csv(EXAMPLE / "truth.csv")


def test_patterns_match_the_simulated_truth(study, truth) -> None:
    """Check each example participant's pattern matches the process it was simulated from."""
    # Source: example_project/generate.py simulates each participant from the process named in
    # truth.csv (known truth); participants with too few answers are skipped.
    checked = 0
    for row in truth.itertuples():
        if row.dynamics not in EXPECTED or row.last_day < 30 or row.consent != "yes":
            continue  # a withdrawn participant's answers are not read at all
        data = study.slice(row.participant)
        series = prepare(data, study.settings)
        fams = {"shifts": shift_family(series, study.settings),
                "landscape": landscape_family(series, data, study.settings)}
        got = course(row.participant, fams, study.settings.metrics.alpha,
                     study.settings.higher_is_worse(study.settings.about)).reading
        assert got in EXPECTED[row.dynamics], (row.participant, row.dynamics, got)
        if row.dynamics == "two states":
            est = fams["landscape"].estimates
            assert est["landscape_valleys"].value == 2
            assert est["residence_hours_low"].ok and est["residence_hours_high"].ok
            low, high = (fams["landscape"].params[k] for k in ("low_valley", "high_valley"))
            assert low == pytest.approx(row.well_low, abs=0.5)
            assert high == pytest.approx(row.well_high, abs=0.5)
        checked += 1
    assert checked >= 7


def test_shift_found_within_three_days_of_its_true_day(study, truth) -> None:
    """Check the simulated shift (truth.csv shift_day, days since the study start) is found."""
    first_day = study.momentary["study_day"].min()
    for row in truth.loc[truth["shift_day"].notna()].itertuples():
        series = prepare(study.slice(row.participant), study.settings)
        cps = shift_family(series, study.settings).tables["change_points"]
        big = cps.loc[cps["exceeds_swings"]]
        days = [(d - first_day).days for d in big["study_day"]]
        assert any(abs(d - row.shift_day) <= 3 for d in days), (row.participant, days)
        worse = big.loc[[abs(d - row.shift_day) <= 3 for d in days], "direction"]
        assert (worse == ("worse" if row.shift_size > 0 else "better")).all()
