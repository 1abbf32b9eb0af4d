"""Archived builds: manifest contents, verify, tamper detection, atomic writes and the lock."""

from __future__ import annotations

import json
import multiprocessing
import os
import time
from datetime import UTC, datetime
from pathlib import Path

import pytest

from springback.archive import audit
from springback.archive import manifest as archive
from springback.errors import BuildLocked
from springback.files import (
    BuildLock,
    clean_stale,
    sha256_file,
    staging_dir,
)
from tests.support.tiny_projects import PEOPLE, fake_build, fp, make_project, settings_of


@pytest.fixture
def built(tmp_path: Path) -> tuple[Path, str]:
    project = make_project(tmp_path / "study")
    return project, fake_build(project, tmp_path / "stage")


def test_manifest_records_provenance(built: tuple[Path, str]) -> None:
    """Check that the manifest holds hashes of inputs, settings and outputs, and versions."""
    project, build_id = built
    folder = project / "archive" / build_id
    manifest = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    data = project / "data" / "momentary.csv"
    assert manifest["inputs"]["data/momentary.csv"]["sha256"] == sha256_file(data)
    assert manifest["inputs"]["study.toml"]["archived"] == "inputs/study.toml"
    assert (folder / "inputs" / "data" / "momentary.csv").read_bytes() == data.read_bytes()
    assert len(manifest["settings"]["sha256"]) == 64
    assert manifest["files"]["out/metrics.csv"] == sha256_file(folder / "out" / "metrics.csv")
    assert manifest["dependencies"]["pandas"]
    assert manifest["python"] and manifest["platform"]
    assert manifest["participants"]["P01"]["period"] == {"first": "2026-03-01",
                                                         "last": "2026-03-05"}
    assert manifest["started"] == "2026-03-06T12:00:00Z"
    html = (folder / "manifest.html").read_text(encoding="utf-8")
    assert build_id in html and "data/momentary.csv" in html
    log = audit.read_entries(project / "archive")
    assert log[-1]["kind"] == "build" and log[-1]["build"] == build_id
    assert log[-1]["manifest_sha256"] == sha256_file(folder / "manifest.json")
    assert archive.verify(project) == []


def test_flipping_any_archived_byte_fails_verify(built: tuple[Path, str]) -> None:
    """Check that one flipped byte in every single archived file is found and named."""
    project, build_id = built
    folder = project / "archive" / build_id
    files = sorted(p for p in folder.rglob("*") if p.is_file())
    assert len(files) >= 10
    for path in files:
        original = path.read_bytes()
        changed = bytearray(original)
        changed[len(changed) // 2] ^= 0x01
        path.write_bytes(bytes(changed))
        problems = archive.verify(project)
        rel = f"{build_id}/{path.relative_to(folder).as_posix()}"
        assert rel in {m.file for m in problems}, rel
        path.write_bytes(original)
    assert archive.verify(project) == []


def test_added_and_deleted_files_fail_verify(built: tuple[Path, str]) -> None:
    """Check that an extra file, a missing file and an unrecorded build folder are named."""
    project, build_id = built
    folder = project / "archive" / build_id
    (folder / "out" / "extra.txt").write_text("x", encoding="utf-8")
    (folder / "out" / "booklets" / "P02" / "participant.pdf").unlink()
    (project / "archive" / "9999-20260101T000000Z").mkdir()
    found = {(m.file, m.what) for m in archive.verify(project)}
    assert (f"{build_id}/out/extra.txt", "a file was added to the archived build") in found
    assert (f"{build_id}/out/booklets/P02/participant.pdf",
            "an archived file is missing") in found
    assert ("9999-20260101T000000Z", "not recorded in the audit log") in found


@pytest.mark.parametrize("damage", ["delete", "reorder"])
def test_log_damage_fails_verify(tmp_path: Path, damage: str) -> None:
    """Check that deleting or reordering log lines makes verify fail with the line named."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1")
    fake_build(project, tmp_path / "s2", text="second")
    log = project / "archive" / "audit.jsonl"
    lines = log.read_bytes().rstrip(b"\n").split(b"\n")
    lines = lines[1:] if damage == "delete" else [lines[1], lines[0]]
    log.write_bytes(b"\n".join(lines) + b"\n")
    problems = archive.verify(project)
    assert any(m.file == "archive/audit.jsonl line 1" for m in problems)


def test_hash_only_inputs(tmp_path: Path) -> None:
    """Check that keep_inputs = 'hash' archives hashes but no copies, and verify still passes."""
    project = make_project(tmp_path / "study", keep="hash")
    build_id = fake_build(project, tmp_path / "stage")
    folder = project / "archive" / build_id
    manifest = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    assert not (folder / "inputs").exists()
    rec = manifest["inputs"]["data/participants.csv"]
    assert rec["archived"] is None
    assert rec["sha256"] == sha256_file(project / "data" / "participants.csv")
    assert archive.verify(project) == []


def test_source_date_epoch(monkeypatch: pytest.MonkeyPatch) -> None:
    """Check that SOURCE_DATE_EPOCH fixes the build time, and `now` ignores it."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    assert archive.build_time() == datetime(2026, 1, 1, tzinfo=UTC)
    assert archive.build_time(now=True).year >= 2026
    assert archive.build_time(now=True) != datetime(2026, 1, 1, tzinfo=UTC)
    monkeypatch.delenv("SOURCE_DATE_EPOCH")
    assert archive.build_time().microsecond == 0


def test_booklet_versions(tmp_path: Path) -> None:
    """Check that a booklet's version rises only when its fingerprint changes."""
    project = make_project(tmp_path / "study")
    assert archive.booklet_version(project, "P01", fp("P01", 1)) == 1
    fake_build(project, tmp_path / "s1")
    assert archive.booklet_version(project, "P01", fp("P01", 1)) == 1
    assert archive.booklet_version(project, "P01", fp("P01", 2)) == 2
    fps = {p: fp(p) for p in PEOPLE} | {"P01": fp("P01", 2)}
    fake_build(project, tmp_path / "s2", fps, extra={"P01": {"version": 2}})
    assert archive.booklet_version(project, "P01", fp("P01", 2)) == 2
    assert archive.booklet_version(project, "P01", fp("P01", 3)) == 3


def test_retention_warnings(built: tuple[Path, str]) -> None:
    """Check that builds older than the retention period are listed as warnings."""
    project, build_id = built
    settings = settings_of(project)
    assert archive.expired_builds(project, settings) == []
    later = datetime.now(UTC).replace(year=datetime.now(UTC).year + 11)
    problems = archive.expired_builds(project, settings, now=later)
    assert [p.code for p in problems] == ["retention-expired"]
    assert build_id in problems[0].where and not problems[0].is_error


def test_staging_folder_is_atomic(tmp_path: Path) -> None:
    """Check that a failed write leaves the old folder and no partial one behind."""
    target = tmp_path / "out"
    with staging_dir(target) as stage:
        (stage / "a.txt").write_text("one", encoding="utf-8")
    assert (target / "a.txt").read_text(encoding="utf-8") == "one"
    with pytest.raises(RuntimeError), staging_dir(target) as stage:
        (stage / "a.txt").write_text("two", encoding="utf-8")
        raise RuntimeError("killed")
    assert (target / "a.txt").read_text(encoding="utf-8") == "one"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_interrupted_swap_is_repaired(tmp_path: Path) -> None:
    """Check that clean_stale puts a moved-aside folder back and removes partial ones."""
    (tmp_path / ".out.old-123").mkdir()
    (tmp_path / ".out.old-123" / "a.txt").write_text("old", encoding="utf-8")
    (tmp_path / ".out.partial-123").mkdir()
    clean_stale(tmp_path)
    assert (tmp_path / "out" / "a.txt").read_text(encoding="utf-8") == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_unlogged_complete_build_is_recovered(tmp_path: Path) -> None:
    """Check that a build killed between the folder rename and the log entry is logged next time."""
    project = make_project(tmp_path / "study")
    first = fake_build(project, tmp_path / "s1")
    log, head = project / "archive" / "audit.jsonl", project / "archive" / "audit.head.json"
    receipts = project / "archive" / "receipts.txt"
    saved_log, saved_head = log.read_bytes(), head.read_bytes()
    saved_receipts = receipts.read_bytes()
    second = fake_build(project, tmp_path / "s2", text="second")
    log.write_bytes(saved_log)  # as if killed before the 'build' entry was written
    head.write_bytes(saved_head)
    receipts.write_bytes(saved_receipts)
    assert any(m.what == "not recorded in the audit log" for m in archive.verify(project))
    third = fake_build(project, tmp_path / "s3", text="third")
    assert archive.builds(project) == [first, second, third]
    assert archive.verify(project) == []


def _hold_lock(project: str, ready: multiprocessing.synchronize.Event) -> None:
    with BuildLock(Path(project)):
        ready.set()
        time.sleep(1.5)


def test_second_build_refuses_with_clear_message(tmp_path: Path) -> None:
    """Check that a second build refuses while one runs, naming the holder, and waits if asked."""
    project = make_project(tmp_path / "study")
    ctx = multiprocessing.get_context("spawn")
    ready = ctx.Event()
    proc = ctx.Process(target=_hold_lock, args=(str(project), ready))
    proc.start()
    try:
        assert ready.wait(30)
        with pytest.raises(BuildLocked, match=rf"already running \(process {proc.pid} on"), \
                BuildLock(project):
            pass
        with BuildLock(project / "archive", wait_seconds=30):
            pass  # the same lock file, reached through the archive folder
    finally:
        proc.join(30)
    assert proc.exitcode == 0


def test_killed_lock_holder_frees_the_lock(tmp_path: Path) -> None:
    """Check that a SIGKILLed holder leaves no stale lock."""
    project = make_project(tmp_path / "study")
    ctx = multiprocessing.get_context("spawn")
    ready = ctx.Event()
    proc = ctx.Process(target=_hold_lock, args=(str(project), ready))
    proc.start()
    assert ready.wait(30)
    os.kill(proc.pid, 9)
    proc.join(30)
    with BuildLock(project):
        pass
