"""The gate trusts only what the audit log vouches for, and the roster as it is now."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.cli import main
from springback.delivery.send import plan
from springback.errors import ArchiveError
from springback.files import sha256_file
from springback.review import gate as review
from tests.support.tiny_projects import fake_build, make_project

IDS = ("P01", "P02", "P08")


def _words(text: str) -> str:
    return " ".join(text.split())


def _manifest(project: Path, build: str) -> tuple[Path, dict]:
    path = project / "archive" / build / "manifest.json"
    return path, json.loads(path.read_text(encoding="utf-8"))


def _rewrite(path: Path, manifest: dict) -> None:
    path.write_text(json.dumps(manifest, indent=2, sort_keys=True) + "\n", encoding="utf-8")


def test_deleted_hold_flag_is_refused(tmp_path: Path) -> None:
    """Check that deleting P08's hold flag in the manifest lets nothing out, with a clear why."""
    project = make_project(tmp_path / "study", ids=IDS)
    build = fake_build(project, tmp_path / "s1", holds=("P08",), ids=IDS)
    path, manifest = _manifest(project, build)
    manifest["participants"]["P08"]["flags"] = []
    manifest["participants"]["P08"]["review_state"] = "not needed"
    _rewrite(path, manifest)
    with pytest.raises(ArchiveError, match="not the manifest the audit log recorded"):
        review.release(project)
    assert not (project / "out" / "release").exists()
    result = CliRunner().invoke(main, ["release", str(project)])
    assert result.exit_code == 1
    text = _words(result.output)
    assert "Traceback" not in text
    assert (f"archive/{build}/manifest.json is not the manifest the audit log recorded for "
            f"build {build}") in text
    assert "nothing was let out" in text and "springback verify" in text
    with pytest.raises(ArchiveError, match="not the manifest the audit log recorded"):
        plan(project)  # send (also --dry-run) plans from the same trusted manifest


def test_approved_booklet_edited_with_its_manifest_hash_is_refused(tmp_path: Path) -> None:
    """Check that an approved booklet edited together with its hash in the manifest is refused."""
    project = make_project(tmp_path / "study", ids=IDS)
    build = fake_build(project, tmp_path / "s1", holds=("P08",), ids=IDS)
    review.approve(project, "P08", "Dr. A. Reviewer")
    booklet = project / "archive" / build / "out" / "booklets" / "P08" / "participant.html"
    booklet.write_text("<p>something else entirely</p>\n", encoding="utf-8")
    path, manifest = _manifest(project, build)
    manifest["files"]["out/booklets/P08/participant.html"] = sha256_file(booklet)
    _rewrite(path, manifest)
    result = CliRunner().invoke(main, ["release", str(project)])
    assert result.exit_code == 1
    assert "not the manifest the audit log recorded" in _words(result.output)
    assert not (project / "out" / "release").exists()


def test_damaged_log_lets_nothing_out(tmp_path: Path) -> None:
    """Check that a broken hash chain refuses release instead of trusting any manifest."""
    project = make_project(tmp_path / "study", ids=IDS)
    fake_build(project, tmp_path / "s1", ids=IDS)
    log = project / "archive" / "audit.jsonl"
    log.write_text(log.read_text(encoding="utf-8").replace('"participants":3',
                                                           '"participants":4'), encoding="utf-8")
    with pytest.raises(ArchiveError, match="the audit log is damaged"):
        review.release(project)


def test_withdrawn_after_the_build_is_not_released(tmp_path: Path) -> None:
    """Check that release reads the roster as it is now: withdrawn or no feedback stay back."""
    project = make_project(tmp_path / "study", ids=IDS)
    fake_build(project, tmp_path / "s1", ids=IDS)
    roster = project / "data" / "participants.csv"
    text = roster.read_text(encoding="utf-8")
    text = text.replace("P02,en,yes,yes", "P02,en,withdrawn,yes")
    text = text.replace("P08,en,yes,yes", "P08,en,yes,no")
    roster.write_text(text, encoding="utf-8")
    report = review.release(project)
    assert report.released == ("P01",)
    assert dict(report.withheld) == {"P02": "consent withdrawn", "P08": "no feedback wanted"}
    assert not (project / "out" / "release" / "P02").exists()
    result = CliRunner().invoke(main, ["release", str(project)])
    assert result.exit_code == 0
    assert "not released: P02 (consent withdrawn)" in _words(result.output)


def test_person_dropped_from_roster_is_not_released(tmp_path: Path) -> None:
    """Check that a participant no longer in the roster is withheld with that reason."""
    project = make_project(tmp_path / "study", ids=IDS)
    fake_build(project, tmp_path / "s1", ids=IDS)
    roster = project / "data" / "participants.csv"
    lines = roster.read_text(encoding="utf-8").splitlines()
    roster.write_text("\n".join(x for x in lines if not x.startswith("P08")) + "\n",
                      encoding="utf-8")
    report = review.release(project)
    assert dict(report.withheld) == {"P08": "no longer in the roster"}
