"""Receipts anchor the audit log: rewrite, rollback, truncation and forged entries are caught."""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.archive import audit
from springback.archive.manifest import verify
from springback.cli import main
from springback.review import gate as review
from tests.support.tiny_projects import fake_build, make_project

KEY = "a-long-enough-secret-for-the-test"
RECEIPT = re.compile(r"Receipt: audit log entry (\d+), head ([0-9a-f]{16})")


def _words(text: str) -> str:
    return " ".join(text.split())


def _project(tmp_path: Path) -> Path:
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    return project


def _rechain(archive: Path, entries: list[dict]) -> None:
    """Write entries as a well-chained log with a matching head record (what a forger does)."""
    lines: list[bytes] = []
    for i, entry in enumerate(entries, start=1):
        entry = {**entry, "seq": i,
                 "prev": audit.sha256_bytes(lines[-1]) if lines else audit.GENESIS}
        lines.append(audit._line(entry))
    (archive / audit.LOG).write_bytes(b"".join(x + b"\n" for x in lines))
    audit._write_head(archive, lines)


def _problems(project: Path, head: str | None = None) -> str:
    return " | ".join(m.message() for m in verify(project, head=head))


def test_every_decision_prints_a_receipt_kept_in_a_file(tmp_path: Path) -> None:
    """Check review, release and forget print the head; receipts.txt holds one line per entry."""
    project = _project(tmp_path)
    runner = CliRunner()
    done = runner.invoke(main, ["review", str(project), "P02", "--approve", "--by", "Dr. A"])
    assert done.exit_code == 0, done.output
    found = RECEIPT.search(_words(done.output))
    assert found is not None and found[1] == "2"
    assert f"springback verify {project} --head HASH" in _words(done.output)
    released = runner.invoke(main, ["release", str(project), "--by", "coordinator"])
    assert RECEIPT.search(_words(released.output))[1] == "3"  # type: ignore[index]
    forgot = runner.invoke(main, ["forget", str(project), "P03", "--by", "Dr. A", "--yes"])
    assert forgot.exit_code == 0, forgot.output
    last = RECEIPT.search(_words(forgot.output))
    assert last is not None and last[1] == "4"
    lines = (project / "archive" / audit.RECEIPTS).read_text(encoding="utf-8").splitlines()
    assert [line.split()[3] for line in lines] == ["build", "review", "release", "erase"]
    assert lines[-1].endswith(f"head {last[2]}")
    checked = runner.invoke(main, ["verify", str(project), "--head", found[2]])
    assert checked.exit_code == 0, checked.output
    assert f"still extends receipt {found[2]}" in _words(checked.output)


def test_rewritten_and_rechained_log_fails_the_receipt(tmp_path: Path) -> None:
    """Check an edited, re-chained log with a fixed head file fails `verify --head`."""
    project = _project(tmp_path)
    archive = project / "archive"
    review.approve(project, "P02", "Dr. A")
    head = audit.receipt(archive).split()[-1]
    entries = audit.read_entries(archive)
    entries[0]["participants"] = 2
    _rechain(archive, entries)
    assert "receipts.txt line 1" in _problems(project)  # the file in archive/ also notices
    (archive / audit.RECEIPTS).unlink()  # a careful forger removes it too ...
    assert _problems(project) == ""
    result = CliRunner().invoke(main, ["verify", str(project), "--head", head])
    assert result.exit_code == 1  # ... but a receipt kept elsewhere still catches it
    text = _words(result.output)
    assert "Traceback" not in text
    assert (f"the log no longer extends this receipt: it was rewritten, rolled back or cut "
            f"short at or before that entry (expected the entry with head {head}") in text


@pytest.mark.parametrize("keep", [1, 0])
def test_rollback_and_truncation_fail_the_receipt(tmp_path: Path, keep: int) -> None:
    """Check dropping the last entries (head file fixed) fails for the receipt of a lost one."""
    project = _project(tmp_path)
    archive = project / "archive"
    review.approve(project, "P02", "Dr. A")
    first = audit.receipt(archive).split()[-1]
    review.release(project, by="coordinator")
    head = audit.receipt(archive).split()[-1]
    entries = audit.read_entries(archive)[:keep]
    _rechain(archive, entries)
    (archive / audit.RECEIPTS).unlink()
    problems = _problems(project, head)
    assert "the log no longer extends this receipt" in problems
    assert ("the log no longer extends" in _problems(project, first)) == (keep < 2)


def test_receipt_of_an_older_entry_still_holds(tmp_path: Path) -> None:
    """Check that a log which grew after a receipt still extends it."""
    project = _project(tmp_path)
    head = audit.receipt(project / "archive").split()[-1]
    review.approve(project, "P02", "Dr. A")
    review.release(project)
    assert _problems(project, head) == ""
    assert _problems(project, head[:8]) == ""


def test_head_that_is_not_a_hash_is_refused(tmp_path: Path) -> None:
    """Check a mistyped --head gets a message saying what it takes."""
    project = _project(tmp_path)
    result = CliRunner().invoke(main, ["verify", str(project), "--head", "entry 2"])
    assert result.exit_code == 1
    assert "--head takes the hash a receipt shows (8 to 64 hex digits" in _words(result.output)


def test_key_signs_entries_and_catches_forged_ones(tmp_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    """Check SPRINGBACK_AUDIT_KEY signs each entry; a forged re-chained entry is named."""
    monkeypatch.setenv(audit.KEY_VARIABLE, KEY)
    project = _project(tmp_path)
    archive = project / "archive"
    review.approve(project, "P02", "Dr. A")
    entries = audit.read_entries(archive)
    assert all(len(e["mac"]) == 64 for e in entries)
    assert _problems(project) == ""
    forged = {"kind": "erase", "time": entries[-1]["time"], "subject": "0" * 64, "by": "x",
              "manifests": {}}
    _rechain(archive, [*entries, forged])
    assert "line 3: an entry was added without the key" in _problems(project)
    entries[1]["by"] = "Dr. B"  # edited, re-chained, signature kept
    _rechain(archive, entries)
    assert "line 2: the entry was changed or signed with another key" in _problems(project)
    result = CliRunner().invoke(main, ["release", str(project)])
    assert result.exit_code == 1 and "the audit log is damaged" in _words(result.output)
    monkeypatch.setenv(audit.KEY_VARIABLE, "short")
    result = CliRunner().invoke(main, ["verify", str(project)])
    assert "SPRINGBACK_AUDIT_KEY is set but holds only 5 characters" in _words(result.output)


def test_verify_covers_subjects(tmp_path: Path) -> None:
    """Check a deleted key, an edited note and readable permissions of subjects.json fail."""
    project = _project(tmp_path)
    archive = project / "archive"
    review.approve(project, "P02", "Dr. A", "talked it through")
    assert _problems(project) == ""
    path = archive / audit.SUBJECTS
    known = json.loads(path.read_text(encoding="utf-8"))
    known["P02"]["notes"] = {k: "something else" for k in known["P02"]["notes"]}
    path.write_text(json.dumps(known), encoding="utf-8")
    os.chmod(path, 0o600)
    assert "a review note was changed" in _problems(project)
    del known["P02"]
    path.write_text(json.dumps(known), encoding="utf-8")
    assert ("subjects.json: a participant's key was deleted or replaced other than by "
            "`springback forget` (expected the key of the participant in log entry 2"
            in _problems(project))
    os.chmod(path, 0o644)
    assert "readable by others; run `chmod 600` on it (expected mode 0600" in _problems(project)


def test_forget_keeps_verify_clean(tmp_path: Path) -> None:
    """Check an erasure (key dropped, erase entry logged) is not reported."""
    project = _project(tmp_path)
    review.approve(project, "P02", "Dr. A", "note")
    review.release(project)
    from springback.archive.erasure import forget

    forget(project, "P02", "Dr. A")
    assert _problems(project) == ""


def test_unknown_entries_under_archive_are_refused(tmp_path: Path) -> None:
    """Check hidden folders, stray files and links in archive/ fail verify, each named."""
    project = _project(tmp_path)
    archive = project / "archive"
    (archive / ".hidden").mkdir()
    (archive / ".hidden" / "copy.csv").write_text("x\n", encoding="utf-8")
    (archive / "notes.txt").write_text("x\n", encoding="utf-8")
    os.symlink(project / "data", archive / "data-link")
    (archive / ".0002-20260306T120000Z.partial-99").mkdir()
    result = CliRunner().invoke(main, ["verify", str(project)])
    assert result.exit_code == 1
    text = _words(result.output)
    assert ".hidden: springback did not make this; move it out of archive/ (expected only " \
           "springback's own files and recorded builds, found an unknown folder)" in text
    assert "notes.txt: springback did not make this" in text and "an unknown file" in text
    assert "data-link: springback makes no links in archive/" in text
    assert ".0002-20260306T120000Z.partial-99: a build or write was stopped here" in text


def test_short_key_is_refused_before_any_work(tmp_path: Path,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    """Check `check` (and so `build`, before it starts) names a key too short to sign with."""
    project = make_project(tmp_path / "study")
    monkeypatch.setenv(audit.KEY_VARIABLE, "short")
    result = CliRunner().invoke(main, ["check", str(project)])
    assert result.exit_code == 1
    assert ("environment: SPRINGBACK_AUDIT_KEY: is set but holds only 5 characters. Fix: use a "
            "secret of at least 16") in _words(result.output)
