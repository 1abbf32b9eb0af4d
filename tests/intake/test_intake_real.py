"""Check the intake on real data: an open EMA data set, and the example study."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pandas as pd
import pytest

from springback.intake import check_study, load_study, read_prompts
from tests.support.project import DATA, EXAMPLE

FRIED = DATA / "fried2022-ema" / "clean_ema.csv"
"""Vendored with its source, licence (CC BY 4.0) and attribution in SOURCE.md beside it."""

# The 14 items analysed in Fried, Papanikolaou & Epskamp (2022), "Mental health and social
# contact during the COVID-19 pandemic: An ecological momentary assessment study", Clinical
# Psychological Science 10(2), 340-354 (wordings from the data set's SOURCE.md).
ITEMS = {"relax": "Q1", "irritable": "Q2", "worry": "Q3", "nervous": "Q4", "future": "Q5",
         "anhedonia": "Q6", "tired": "Q7", "alone": "Q9", "social_offline": "Q11",
         "social_online": "Q12", "outdoors": "Q15", "c19_occupied": "Q16",
         "c19_worry": "Q17", "home": "Q18"}
# Device zones in the file, as UTC offsets in hours (fixed by the abbreviations' definitions).
OFFSETS = {"CET": 1, "CEST": 2, "EET": 2, "EEST": 3, "MSK": 3, "+03": 3}


def _need_fried() -> Path:
    assert FRIED.is_file(), f"the vendored open data file is missing: {FRIED}"
    return FRIED


def _fried_project(root: Path, on_bad_rows: str = "error") -> Path:
    """A study folder whose settings read the open data file where it lies (read-only)."""
    source = _need_fried()
    root.mkdir(parents=True)
    lines = [
        "[study]", 'title = "Student lockdown EMA"', 'timezone = "Europe/Amsterdam"',
        "prompts_per_day = 4", "[data]", f'momentary = "{source.as_posix()}"',
        'participants = "participants.csv"', 'missing_values = ["", "NA", "Expired"]',
        f'on_bad_rows = "{on_bad_rows}"', "[data.columns]", 'participant = "ID"',
        'timestamp = "Response"', 'scheduled = "Scheduled"', 'timezone = "Issued"',
    ]
    for key, column in ITEMS.items():
        lines += [f"[items.{key}]", "scale = [1, 5]", f'column = "{column}"']
    (root / "study.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    ids = sorted(pd.read_csv(source, usecols=["ID"])["ID"].unique())
    pd.DataFrame({"ID": ids, "consent": "yes"}).to_csv(root / "participants.csv", index=False)
    return root


def test_fried_missing_values_match_the_paper(tmp_path: Path) -> None:
    """Check the published count: 6,026 of 61,208 item values missing (14 items x 4,372)."""
    prompts = read_prompts(_fried_project(tmp_path / "study"))
    cells = prompts[list(ITEMS)]
    # Fried, Papanikolaou & Epskamp (2022), Results: "6,026 of the 61,208 data points
    # (9.9%) were missing".
    assert cells.size == 61_208
    assert int(cells.isna().sum().sum()) == 6_026
    assert prompts["participant"].nunique() == 79


def test_fried_repeated_prompts(tmp_path: Path) -> None:
    """Check the 25 repeated (ID, Scheduled) prompts: 24 resolved, 1 with clashing answers."""
    report = check_study(_fried_project(tmp_path / "study"))
    codes = [p.code for p in report.problems]
    # SOURCE.md of the data set: 25 pairs appear twice; in 21 one row is answered, in 3
    # neither is, in 1 both are (with different answers, so they clash).
    assert codes.count("duplicate-prompt") == 24
    assert codes.count("conflicting-rows") == 1
    assert len(report.errors) == 1
    clash = next(p for p in report.problems if p.code == "conflicting-rows")
    assert (clash.row, clash.found.split(", with")[0]) == (
        3155, "rows 3155 and 3156 for participant 'User #25369' at 2020-03-20 12:00:00")
    assert report.study is None


def test_fried_loads_when_bad_rows_are_set_aside(tmp_path: Path) -> None:
    """Check the full load: answers, schedule, set-aside rows and per-row device time zones."""
    before = hashlib.sha256(_need_fried().read_bytes()).hexdigest()
    study = load_study(_fried_project(tmp_path / "study", on_bad_rows="set aside"))
    assert hashlib.sha256(FRIED.read_bytes()).hexdigest() == before
    m = study.momentary
    # 3,948 answered rows (SOURCE.md), less the two rows of the one clashing prompt
    assert len(m) == 3_946
    # every distinct prompt is scheduled once: 4,372 rows less 25 repeats
    assert study.quality["scheduled"].sum() == 4_347
    assert study.quality["answered"].sum() == 3_946
    assert len(study.set_aside) == 26
    reasons = study.set_aside["reason"]
    assert reasons.str.startswith("the same prompt as row ").sum() == 24
    clash = study.set_aside[~reasons.str.startswith("the same prompt as row ")]
    assert list(clash["row"]) == [3155, 3156]
    # Device zones: compare every answer time with its own clock and abbreviation, read here
    # independently with plain pandas.
    raw = pd.read_csv(FRIED)
    raw["source_row"] = raw.index + 2
    zone = raw["Response"].str.rsplit(" ", n=1).str[1]
    clock = pd.to_datetime(raw["Response"].str.rsplit(" ", n=1).str[0])
    raw["utc"] = (clock - pd.to_timedelta(zone.map(OFFSETS), unit="h")).dt.tz_localize("UTC")
    both = m.merge(raw[["source_row", "utc"]], on="source_row")
    assert len(both) == len(m)
    assert (both["time"] == both["utc"]).all()
    assert zone.loc[m["source_row"] - 2].nunique() == 6
    assert str(m["local_time"].dt.tz) == "Europe/Amsterdam"
    assert m["study_day"].min() == pd.Timestamp("2020-03-16")
    assert m["study_day"].max() == pd.Timestamp("2020-03-29")


def test_example_project_loads_without_errors() -> None:
    """Check that the example study loads from CSV with no errors."""
    if not (EXAMPLE / "study.toml").is_file():
        pytest.skip(f"EXAMPLE ABSENT: {EXAMPLE} has no study.toml yet")
    files = sorted((EXAMPLE / "data").glob("*"))
    before = {f: hashlib.sha256(f.read_bytes()).hexdigest() for f in files}
    report = check_study(EXAMPLE)
    assert report.errors == (), [p.message() for p in report.errors]
    assert report.study is not None
    assert len(report.study.momentary) > 0
    assert {f: hashlib.sha256(f.read_bytes()).hexdigest() for f in files} == before


@pytest.mark.parametrize("fmt", ["xlsx", "parquet", "sav"])
def test_example_in_other_formats_loads_identically(example_copy: Path, fmt: str) -> None:
    """Check that the example's data written as XLSX, Parquet or SAV load to the CSV's frames."""
    import pyreadstat

    root = example_copy
    toml = (root / "study.toml").read_text(encoding="utf-8")
    for name in ("momentary", "participants"):
        frame = pd.read_csv(root / "data" / f"{name}.csv", dtype={"participant": str})
        target = root / "data" / f"{name}.{fmt}"
        if fmt == "xlsx":
            frame.to_excel(target, index=False)
        elif fmt == "parquet":
            frame.to_parquet(target, index=False)
        else:
            pyreadstat.write_sav(frame, str(target))
        (root / "data" / f"{name}.csv").unlink()
        assert f'"data/{name}.csv"' in toml
        toml = toml.replace(f'"data/{name}.csv"', f'"data/{name}.{fmt}"')
    (root / "study.toml").write_text(toml, encoding="utf-8")
    other, csv = load_study(root), load_study(EXAMPLE)
    for name in ("momentary", "roster", "events", "questionnaires", "quality", "set_aside"):
        pd.testing.assert_frame_equal(getattr(other, name).drop(columns="file", errors="ignore"),
                                      getattr(csv, name).drop(columns="file", errors="ignore"),
                                      obj=name)
