"""The audit log: hash chain, head record, tamper detection, interrupted appends."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from springback.archive import audit
from springback.errors import ArchiveError


def _log(tmp_path: Path, n: int = 5) -> Path:
    archive = tmp_path / "archive"
    for i in range(n):
        audit.append(archive, "review", {"n": i, "by": "Dr. Test"})
    return archive


def test_clean_chain_passes(tmp_path: Path) -> None:
    """Check that an untouched log verifies and entries are numbered and linked."""
    archive = _log(tmp_path)
    assert audit.check_chain(archive) == []
    entries = audit.read_entries(archive)
    assert [e["seq"] for e in entries] == [1, 2, 3, 4, 5]
    assert entries[0]["prev"] == audit.GENESIS
    lines = (archive / audit.LOG).read_bytes().split(b"\n")
    assert entries[1]["prev"] == audit.sha256_bytes(lines[0])


def _lines(archive: Path) -> list[bytes]:
    return (archive / audit.LOG).read_bytes().rstrip(b"\n").split(b"\n")


def _write(archive: Path, lines: list[bytes]) -> None:
    (archive / audit.LOG).write_bytes(b"\n".join(lines) + b"\n")


@pytest.mark.parametrize("line", [0, 2, 4])
def test_edited_line_is_named(tmp_path: Path, line: int) -> None:
    """Check that changing one value in any line breaks the chain at that line or the next."""
    archive = _log(tmp_path)
    lines = _lines(archive)
    entry = json.loads(lines[line])
    entry["by"] = "Someone else"
    lines[line] = json.dumps(entry, sort_keys=True, separators=(",", ":")).encode()
    _write(archive, lines)
    problems = audit.check_chain(archive)
    assert problems
    named = {p.file for p in problems}
    expected = f"archive/audit.jsonl line {line + 2}" if line < 4 else "archive/audit.head.json"
    assert expected in named


def test_deleted_line_is_named(tmp_path: Path) -> None:
    """Check that deleting a middle line is reported as a deletion at the following line."""
    archive = _log(tmp_path)
    lines = _lines(archive)
    _write(archive, lines[:2] + lines[3:])
    problems = audit.check_chain(archive)
    assert any(p.file == "archive/audit.jsonl line 3" and "deleted" in p.what for p in problems)


def test_deleted_last_line_is_caught_by_head(tmp_path: Path) -> None:
    """Check that removing the newest entry is caught through the head record."""
    archive = _log(tmp_path)
    _write(archive, _lines(archive)[:-1])
    problems = audit.check_chain(archive)
    assert [p.file for p in problems] == ["archive/audit.head.json"]
    assert "removed" in problems[0].what


def test_reordered_lines_are_named(tmp_path: Path) -> None:
    """Check that swapping two lines breaks the chain and the numbering."""
    archive = _log(tmp_path)
    lines = _lines(archive)
    lines[1], lines[2] = lines[2], lines[1]
    _write(archive, lines)
    problems = audit.check_chain(archive)
    assert any("moved" in p.what for p in problems)
    named = {p.file for p in problems}
    assert {"archive/audit.jsonl line 2", "archive/audit.jsonl line 3"} <= named


def test_damaged_log_refuses_new_entries(tmp_path: Path) -> None:
    """Check that nothing is appended to a broken chain (the damage stays visible)."""
    archive = _log(tmp_path)
    lines = _lines(archive)
    _write(archive, lines[:1] + lines[2:])
    with pytest.raises(ArchiveError, match="audit log is damaged"):
        audit.append(archive, "review", {"n": 99})


def test_interrupted_append_is_settled(tmp_path: Path) -> None:
    """Check that a half-written last line is dropped and an unacknowledged entry accepted."""
    archive = _log(tmp_path, 3)
    with open(archive / audit.LOG, "ab") as fh:
        fh.write(b'{"kind":"rev')  # killed mid-write
    assert audit.check_chain(archive) == []
    audit.append(archive, "review", {"n": 3})
    assert [e["seq"] for e in audit.read_entries(archive)] == [1, 2, 3, 4]
    # An entry written but not yet acknowledged in the head record is complete and chained.
    head = (archive / audit.HEAD).read_bytes()
    audit.append(archive, "review", {"n": 4})
    (archive / audit.HEAD).write_bytes(head)
    assert audit.check_chain(archive) == []
    audit.append(archive, "review", {"n": 5})
    assert audit.check_chain(archive) == []
    assert len(audit.read_entries(archive)) == 6


def test_subjects_hide_ids_and_can_be_dropped(tmp_path: Path) -> None:
    """Check that log tokens are stable per person, not the id, and unlinkable after a drop."""
    archive = tmp_path / "archive"
    token = audit.subject(archive, "P07", create=True)
    assert token == audit.subject(archive, "P07")
    assert token is not None and "P07" not in token
    assert audit.subject(archive, "P08") is None
    sha = audit.save_note(archive, "P07", "spoke with P07 by phone")
    assert audit.note_text(archive, "P07", sha) == "spoke with P07 by phone"
    assert audit.drop_subject(archive, "P07") == token
    assert "P07" not in (archive / audit.SUBJECTS).read_text(encoding="utf-8")
    assert audit.subject(archive, "P07", create=True) != token


@pytest.mark.parametrize("name", [audit.LOG, audit.HEAD])
def test_deleted_log_or_head_is_caught(tmp_path: Path, name: str) -> None:
    """Check that removing the whole log, or its head record, is reported."""
    archive = _log(tmp_path, 2)
    (archive / name).unlink()
    problems = audit.check_chain(archive)
    assert [p.file for p in problems] == ["archive/audit.head.json"]
