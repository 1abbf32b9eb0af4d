"""Safety rules on the example study, against the flags its generator planted (truth.csv)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from springback import intake
from springback.metrics._series import description, prepare
from springback.metrics.results import ParticipantResults
from springback.metrics.shifts import shift_family
from springback.safety.rules import Flag, evaluate, study_end

EXAMPLE = Path(__file__).resolve().parents[2] / "example_project"


@pytest.fixture(scope="module")
def flags() -> dict[str, list[Flag]]:
    """Every participant's flags, with the shifts family computed as the build does."""
    study = intake.load_study(EXAMPLE)
    end = study_end(study)
    out = {}
    for pid in study.participants():
        data = study.slice(pid)
        series = prepare(data, study.settings)
        family = shift_family(series, study.settings)
        results = ParticipantResults(pid, study.about, {"shifts": family}, enough_data=True,
                                     series=description(series))
        out[pid] = evaluate(data, results, study.settings, period_end=end)
    return out


def test_planted_flags_are_found(flags: dict[str, list[Flag]]) -> None:
    """Check the generator's planted cases: phq9 hold, shift refer, and two silences."""
    truth = pd.read_csv(EXAMPLE / "truth.csv", dtype=str).set_index("participant")
    rules = {pid: {(f.rule, f.action) for f in fl} for pid, fl in flags.items()}
    assert ("severe depression score", "hold") in rules["P08"]
    assert ("step to worse mood", "refer") in rules["P05"]
    assert ("stopped answering", "refer") in rules["P09"]
    assert ("stopped answering", "refer") in rules["P12"]
    # The shift is dated near the planted shift day (days counted from the first study day).
    [shift] = [f for f in flags["P05"] if f.rule == "step to worse mood"]
    planted = pd.Timestamp("2026-02-02") + pd.Timedelta(days=int(truth.loc["P05", "shift_day"]))
    assert abs((pd.Timestamp(shift.when) - planted).days) <= 3
    assert shift.value is not None and shift.value > 0


def test_no_flags_where_none_were_planted(flags: dict[str, list[Flag]]) -> None:
    """Check that stable participants and the withdrawn one raise no flag."""
    for pid in ("P01", "P02", "P03", "P04", "P10", "P11"):
        assert flags[pid] == [], pid


def test_silence_needs_the_study_end(flags: dict[str, list[Flag]]) -> None:
    """Check the silence flag's value: days from the last answer to the study's last prompt."""
    [p12] = [f for f in flags["P12"] if f.rule == "stopped answering"]
    assert p12.value is not None and p12.value >= 7
    assert p12.when < "2026-05-24"
