"""The review-and-release gate: holds, decisions, version binding, and what release copies."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.archive import audit
from springback.cli import main
from springback.errors import ReviewError
from springback.model import Flag
from springback.review import gate as review
from tests.support.tiny_projects import PEOPLE, fake_build, fp, make_project


def _released(project: Path) -> set[str]:
    folder = project / "out" / "release"
    return {p.name for p in folder.iterdir() if p.is_dir()} if folder.exists() else set()


def _dispatch(project: Path) -> list[dict[str, str]]:
    with open(project / "out" / "release" / "dispatch.csv", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_states(tmp_path: Path) -> None:
    """Check each review state: not needed, held, approved, rejected, bound to a fingerprint."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    hold = [Flag("P02", "hopeless", "hold", 7.0, "2026-03-04", "")]
    refer = [Flag("P01", "hopeless", "refer", 7.0, "2026-03-04", "")]
    assert review.review_state(project, "P01", fp("P01", 1), []) == "not needed"
    assert review.review_state(project, "P01", fp("P01", 1), refer) == "not needed"
    assert review.review_state(project, "P02", fp("P02", 1), hold) == "held"
    review.approve(project, "P02", "Dr. A. Reviewer", "talked it through")
    assert review.review_state(project, "P02", fp("P02", 1), hold) == "approved"
    assert review.review_state(project, "P02", fp("P02", 2), hold) == "held"
    review.reject(project, "P02", "Dr. B. Second")
    assert review.review_state(project, "P02", fp("P02", 1), hold) == "rejected"


def test_held_booklet_is_never_released_before_approval(tmp_path: Path) -> None:
    """Check that release leaves out a held booklet, also after a rebuild, until approved."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    report = review.release(project, by="coordinator")
    assert _released(project) == {"P01", "P03"}
    assert dict(report.withheld) == {"P02": "held for review"}
    fake_build(project, tmp_path / "s2", holds=("P02",), text="rebuilt")
    review.release(project)
    assert _released(project) == {"P01", "P03"}
    assert not any("P02" in p.as_posix() for p in (project / "out" / "release").rglob("*"))
    review.approve(project, "P02", "Dr. A. Reviewer")
    review.release(project)
    assert _released(project) == {"P01", "P02", "P03"}
    rows = {r["participant"]: r for r in _dispatch(project)}
    assert rows["P02"]["approved_by"] == "Dr. A. Reviewer"
    assert rows["P01"]["approved_by"] == ""
    assert rows["P02"]["files"] == "participant.html;participant.pdf"
    released = project / "out" / "release" / "P02" / "participant.html"
    assert released.read_text(encoding="utf-8") == "<p>rebuilt for P02</p>\n"


def test_changed_data_after_approval_withdraws_it(tmp_path: Path) -> None:
    """Check that a new fingerprint (changed data) after approval needs a new approval."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    review.approve(project, "P02", "Dr. A. Reviewer")
    review.release(project)
    assert "P02" in _released(project)
    fps = {p: fp(p) for p in PEOPLE} | {"P02": fp("P02", 2)}
    fake_build(project, tmp_path / "s2", fps, holds=("P02",), text="changed")
    review.release(project)
    assert "P02" not in _released(project)
    assert [h.state for h in review.list_held(project)] == ["held"]


def test_rejected_withdrawn_and_no_feedback_are_never_released(tmp_path: Path) -> None:
    """Check that rejection, withdrawn consent and no-feedback each keep a booklet back."""
    project = make_project(tmp_path / "study")
    extra = {"P01": {"consent": "withdrawn"}, "P03": {"feedback": False}}
    fake_build(project, tmp_path / "s1", holds=("P02",), extra=extra)
    review.reject(project, "P02", "Dr. A. Reviewer", "wait for the next appointment")
    report = review.release(project)
    assert report.released == ()
    assert dict(report.withheld) == {"P01": "consent withdrawn",
                                     "P02": "rejected by Dr. A. Reviewer",
                                     "P03": "no feedback wanted"}
    assert _dispatch(project) == []


def test_refusals(tmp_path: Path) -> None:
    """Check that decisions are refused with no build, no hold, an unknown id or no name."""
    project = make_project(tmp_path / "study")
    with pytest.raises(ReviewError, match="nothing has been built"):
        review.approve(project, "P02", "Dr. A")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    with pytest.raises(ReviewError, match="is not held"):
        review.approve(project, "P01", "Dr. A")
    with pytest.raises(ReviewError, match="not in the latest build"):
        review.approve(project, "P99", "Dr. A")
    with pytest.raises(ReviewError, match="--by"):
        review.approve(project, "P02", " ")


def test_decisions_are_logged_without_ids(tmp_path: Path) -> None:
    """Check that every decision and release is in the log with who and when, never the id."""
    project = make_project(tmp_path / "study")
    build = fake_build(project, tmp_path / "s1", holds=("P02",))
    review.approve(project, "P02", "Dr. A. Reviewer", "P02 is doing fine")
    review.release(project, by="coordinator")
    entries = audit.read_entries(project / "archive")
    kinds = [e["kind"] for e in entries]
    assert kinds == ["build", "review", "release"]
    decision = entries[1]
    assert decision["by"] == "Dr. A. Reviewer" and decision["build"] == build
    assert decision["time"].endswith("Z") and decision["fingerprint"] == fp("P02", 1)
    assert entries[2]["by"] == "coordinator" and len(entries[2]["released"]) == 3
    log_text = (project / "archive" / "audit.jsonl").read_text(encoding="utf-8")
    assert "P02" not in log_text and "doing fine" not in log_text
    held = review.list_held(project)
    assert held[0].note == "P02 is doing fine" and held[0].decided_by == "Dr. A. Reviewer"


def test_release_refuses_changed_archive_copy(tmp_path: Path) -> None:
    """Check that release copies only hash-checked archived booklets."""
    project = make_project(tmp_path / "study")
    build = fake_build(project, tmp_path / "s1")
    path = project / "archive" / build / "out" / "booklets" / "P03" / "participant.html"
    path.write_text("<p>tampered</p>", encoding="utf-8")
    with pytest.raises(Exception, match="missing or changed"):
        review.release(project)
    assert not (project / "out" / "release").exists()


def test_command_line(tmp_path: Path) -> None:
    """Check the review, release and verify commands end to end on a recorded build."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    runner = CliRunner()
    listed = runner.invoke(main, ["review", str(project)])
    assert listed.exit_code == 0, listed.output
    assert "P02" in listed.output and "hopeless" in listed.output
    refused = runner.invoke(main, ["review", str(project), "P01", "--approve", "--by", "Dr. A"])
    assert refused.exit_code == 1 and "is not held" in refused.output
    done = runner.invoke(main, ["review", str(project), "P02", "--approve", "--by", "Dr. A"])
    assert done.exit_code == 0 and "approved by Dr. A" in done.output
    released = runner.invoke(main, ["release", str(project), "--by", "coordinator"])
    assert released.exit_code == 0 and "Released 3 booklet(s)" in released.output
    checked = runner.invoke(main, ["verify", str(project)])
    assert checked.exit_code == 0, checked.output
    (project / "archive" / "audit.jsonl").write_text("", encoding="utf-8")
    failed = runner.invoke(main, ["verify", str(project)])
    assert failed.exit_code == 1 and "mismatch" in failed.output
