"""A partial build (`build --participant X`) keeps everyone else for review and release."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from springback.archive.manifest import latest_manifest
from springback.build.pipeline import build
from tests.support.tiny_projects import make_project

REFERRAL = """
[[referral]]
region = "default"
language = "en"
questions = "Ask the study team."
feeling_worse = "See your family doctor."
self_harm = "Call your family doctor today."
emergency = "Call the emergency number."
"""


def _others(path: Path) -> pd.DataFrame:
    """A study table's rows of the participants the partial build leaves out."""
    frame = pd.read_csv(path, dtype={"participant": str})
    return frame[frame["participant"].isin(["P01", "P03"])].reset_index(drop=True)


def test_partial_build_carries_the_others(tmp_path: Path) -> None:
    """Check the others keep their records (fingerprint, version, flags) and their files."""
    project = make_project(tmp_path / "study")
    with open(project / "study.toml", "a", encoding="utf-8") as fh:
        fh.write(REFERRAL)
    build(project, jobs=1)
    before = latest_manifest(project)
    assert before is not None
    tables = {name: _others(project / "out" / name)
              for name in ("metrics.csv", "findings.csv", "flags.csv")}
    build(project, participants=["P02"], jobs=1, force=True)
    after = latest_manifest(project)
    assert after is not None and after["build"] != before["build"]
    assert sorted(after["participants"]) == ["P01", "P02", "P03"]
    for pid in ("P01", "P03"):
        old, new = before["participants"][pid], after["participants"][pid]
        for key in ("fingerprint", "version", "flags", "status", "files"):
            assert new[key] == old[key], (pid, key)
    for name, rows in tables.items():  # the others' rows as they were
        pd.testing.assert_frame_equal(_others(project / "out" / name), rows, check_dtype=False)
    assert (project / "out" / "actions.csv").is_file()
    page = (project / "out" / "index.html").read_text(encoding="utf-8")
    assert all(pid in page for pid in ("P01", "P02", "P03"))
