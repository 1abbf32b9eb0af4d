"""The build's history snapshot: read once, handed to the jobs as values; a job reads no file."""

from __future__ import annotations

import builtins
import dataclasses
import io
from pathlib import Path
from typing import Any

import pytest

from springback.archive import manifest as archive
from springback.archive.audit import SUBJECTS
from springback.build.history import History
from springback.build.jobs import _run_job
from springback.build.records import Job
from springback.errors import ArchiveError
from springback.model import Flag
from springback.review import gate
from tests.support.tiny_projects import PEOPLE, fake_build, fp, hold_flag, make_project


def test_snapshot_holds_versions_decisions_and_the_last_build(tmp_path: Path) -> None:
    """Check the snapshot's versions, decisions and last build against what was archived."""
    project = make_project(tmp_path / "study")
    empty = History.read(project)
    assert (empty.last, dict(empty.versions), dict(empty.decisions)) == (None, {}, {})
    assert empty.version("P01", fp("P01")) == 1 and empty.decision("P01", fp("P01")) == "held"

    fake_build(project, tmp_path / "s1", holds=("P02",))
    gate.approve(project, "P02", by="Dr. Vos", note="read it through")
    fps = {p: fp(p) for p in PEOPLE} | {"P01": fp("P01", 2)}
    second = fake_build(project, tmp_path / "s2", fps, holds=("P02", "P03"),
                        extra={"P01": {"version": 2}})
    history = History.read(project)

    assert {p: dict(v) for p, v in history.versions.items()} == {
        "P01": {fp("P01"): 1, fp("P01", 2): 2}, "P02": {fp("P02"): 1}, "P03": {fp("P03"): 1}}
    for pid in PEOPLE:  # the same numbers as one participant's own look-up
        for n in (1, 2, 3):
            assert history.version(pid, fp(pid, n)) == archive.booklet_version(
                project, pid, fp(pid, n))
    assert dict(history.decisions) == {("P02", fp("P02")): "approved"}
    assert history.decision("P03", fp("P03")) == "held"
    assert history.review_state("P02", fp("P02"), [Flag.from_row(hold_flag("P02"))]) == "approved"
    assert history.review_state("P03", fp("P03"), [Flag.from_row(hold_flag("P03"))]) == "held"
    assert history.review_state("P01", fp("P01", 2), []) == "not needed"
    assert [h.state for h in gate.list_held(project)] == ["approved", "held"]

    assert history.last is not None and history.last.folder.name == second
    assert sorted(history.last.people) == list(PEOPLE)
    assert history.last.people["P01"]["fingerprint"] == fp("P01", 2)
    assert history.last.rows["metrics.csv"]["P03"] == [
        {"participant": "P03", "measure": "mean", "value": "3.5"}]
    assert History.read(project, with_last=False).last is None

    with pytest.raises(dataclasses.FrozenInstanceError):
        history.unreadable = "changed"  # type: ignore[misc]
    with pytest.raises(TypeError):
        history.versions["P09"] = {}  # type: ignore[index]


def test_reused_outcome_comes_from_the_last_build(tmp_path: Path) -> None:
    """Check a reused outcome takes the archived files and rows, and only when it may."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    history = History.read(project)
    staging = tmp_path / "staging"
    again = history.reused("P01", staging, fingerprint=fp("P01"), version=1)
    assert again is not None and again.reused and again.version == 1
    assert again.stored == ("booklets/P01/participant.html", "booklets/P01/participant.pdf")
    assert (staging / "booklets/P01/participant.html").read_text(encoding="utf-8") == (
        "<p>booklet for P01</p>\n")
    assert again.metrics_rows == [{"participant": "P01", "measure": "mean", "value": "3.5"}]
    assert again.editions == ("participant",)
    assert history.reused("P01", staging, fingerprint=fp("P01", 2), version=2) is None
    carried = history.reused("P02", staging)  # left out of a partial build: as it was
    assert carried is not None and carried.review_state == "held"
    assert carried.fingerprint == fp("P02")
    assert history.reused("P09", staging) is None


def test_a_damaged_key_store_fails_only_a_booklet_that_needs_a_decision(
        tmp_path: Path) -> None:
    """Check an unreadable key store is reported where a hold flag needs a decision."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    gate.approve(project, "P02", by="Dr. Vos")
    (project / "archive" / SUBJECTS).write_text("{not json", encoding="utf-8")
    history = History.read(project)
    assert "subjects.json" in history.unreadable
    assert history.review_state("P01", fp("P01"), []) == "not needed"
    with pytest.raises(ArchiveError, match=r"subjects\.json"):
        history.review_state("P02", fp("P02"), [Flag.from_row(hold_flag("P02"))])


class FileRead(AssertionError):
    """A file was opened where none may be."""


@pytest.mark.slow
def test_a_job_reads_no_file(example_copy: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Check a participant's job (metrics, flags, findings, review state) opens no file,
    with a history in the archive it could have read, and that its decision is the job's."""
    from springback import intake

    study = intake.load_study(example_copy)
    archive_dir = example_copy / "archive"
    archive_dir.mkdir()
    for name in (SUBJECTS, "audit.jsonl", "audit.head.json"):
        (archive_dir / name).write_text("{}\n", encoding="utf-8")
    data = dataclasses.replace(study.slice("P08"), feedback=False)  # no booklet to lay out
    job = Job(example_copy, data, study.settings, "f" * 64, 3, archive.build_time(now=True),
              None, "approved")
    first = _run_job(job)  # imports and caches warmed while reading is still allowed
    assert first.status == "no feedback" and first.review_state == "approved"

    def refuse(*args: Any, **kwargs: Any) -> Any:
        raise FileRead(f"a file was opened: {args[:1]}")

    monkeypatch.setattr(builtins, "open", refuse)
    monkeypatch.setattr(io, "open", refuse)
    for name in ("open", "read_text", "read_bytes"):
        monkeypatch.setattr(Path, name, refuse)
    outcome = _run_job(job)
    monkeypatch.undo()
    assert (outcome.status, outcome.review_state, outcome.version) == (
        "no feedback", "approved", 3)
    assert any(f.action == "hold" for f in outcome.flags)
    assert outcome.metrics_rows == first.metrics_rows
