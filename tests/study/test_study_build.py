"""out/study/ of a real build: written, archived, readable, and the same bytes when made again."""

from __future__ import annotations

import hashlib
import io
import json
from pathlib import Path

import pandas as pd
import pytest

from springback import intake, study

pytestmark = pytest.mark.slow


def _archived(project: Path) -> tuple[Path, dict[str, str]]:
    build = sorted(p for p in (project / "archive").iterdir()
                   if p.is_dir() and not p.name.startswith("."))[-1]
    manifest = json.loads((build / "manifest.json").read_text(encoding="utf-8"))
    return build, manifest["files"]


def test_the_build_writes_and_archives_every_study_file(built_example: Path) -> None:
    """Check out/study/ holds every study file and the manifest records each one's hash."""
    folder = built_example / "out" / study.STUDY_DIR
    assert sorted(p.name for p in folder.iterdir()) == sorted(study.STUDY_FILES)
    build, files = _archived(built_example)
    for name in study.STUDY_FILES:
        data = (folder / name).read_bytes()
        assert (build / "out" / study.STUDY_DIR / name).read_bytes() == data
        assert hashlib.sha256(data).hexdigest() in str(files[f"out/study/{name}"])


def test_the_codebook_covers_every_measure_of_metrics_csv(built_example: Path) -> None:
    """Check each measure and column the example's tables contain has a codebook row."""
    metrics = pd.read_csv(built_example / "out" / "metrics.csv")
    tables = study.results(built_example)
    book = set(tables["codebook"]["measure"])
    assert sorted(set(metrics["measure"]) - book) == []
    assert sorted(set(tables["participants"].columns) - {"participant"} - book) == []
    people = tables["participants"]
    assert people["participant"].is_unique
    assert set(people["participant"]) == set(metrics["participant"].astype(str))


def test_study_files_are_the_same_bytes_from_the_archived_tables(built_example: Path) -> None:
    """Check the study files made again from the archived tables equal the archived ones."""
    build, _ = _archived(built_example)
    tables = {name: (build / "out" / name).read_bytes()
              for name in ("metrics.csv", "findings.csv")}
    again = study.study_files(intake.load_study(built_example), tables)
    for rel, data in again.items():
        assert (build / "out" / rel).read_bytes() == data, rel
    frame = pd.read_parquet(io.BytesIO(again["study/participants.parquet"]))
    assert len(frame) == len(study.results(built_example)["participants"])
