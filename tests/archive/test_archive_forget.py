"""Erasure: `forget` removes a participant everywhere, and the archive still verifies."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.archive import audit
from springback.archive import manifest as archive
from springback.archive.erasure import forget, mentions
from springback.cli import main
from springback.errors import ReviewError
from springback.review import gate as review
from tests.support.tiny_projects import fake_build, make_project


def _files_mentioning(root: Path, pid: str) -> list[str]:
    pattern = mentions(pid)
    hits = []
    for path in root.rglob("*"):
        rel = path.relative_to(root).as_posix()
        in_bytes = path.is_file() and pid.encode() in path.read_bytes()
        if pattern.search(rel) or in_bytes:
            hits.append(rel)
    return hits


@pytest.fixture
def two_builds(tmp_path: Path) -> Path:
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    fake_build(project, tmp_path / "s2", holds=("P02",), text="second")
    shutil.copytree(tmp_path / "s2", project / "out")
    review.approve(project, "P02", "Dr. A. Reviewer", "P02 agreed to a call")
    review.release(project)
    return project


def test_forget_removes_every_trace_and_verify_passes(two_builds: Path) -> None:
    """Check that after forget no file under archive/ or out/ holds the id, and verify passes."""
    project = two_builds
    assert _files_mentioning(project / "archive", "P02")
    report = forget(project, "P02", by="data steward")
    assert archive.verify(project) == []
    assert _files_mentioning(project / "archive", "P02") == []
    assert _files_mentioning(project / "out", "P02") == []
    assert len(report.builds) == 2 and report.files_removed > 0 and report.files_rewritten > 0
    assert report.still_in_data == ("data/momentary.csv", "data/participants.csv")


def test_forget_keeps_everyone_else(two_builds: Path) -> None:
    """Check that the other participants' booklets, rows and release survive untouched."""
    project = two_builds
    build = archive.builds(project)[-1]
    folder = project / "archive" / build
    before = (folder / "out" / "booklets" / "P01" / "participant.pdf").read_bytes()
    forget(project, "P02", by="data steward")
    assert (folder / "out" / "booklets" / "P01" / "participant.pdf").read_bytes() == before
    rows = (folder / "out" / "metrics.csv").read_text(encoding="utf-8").splitlines()
    assert rows == ["participant,measure,value", "P01,mean,3.5", "P03,mean,3.5"]
    copy = (folder / "inputs" / "data" / "momentary.csv").read_text(encoding="utf-8")
    assert copy.count("\n") == 11 and "P01," in copy and "P03," in copy
    dispatch = (project / "out" / "release" / "dispatch.csv").read_text(encoding="utf-8")
    assert "P01" in dispatch and "P03" in dispatch
    assert (project / "out" / "booklets" / "P03" / "participant.html").is_file()


def test_manifest_records_the_erasure_with_hashes_only(two_builds: Path) -> None:
    """Check that the manifest says what was erased under a hashed subject, and the log too."""
    project = two_builds
    report = forget(project, "P02", by="data steward")
    for build in archive.builds(project):
        manifest = json.loads((project / "archive" / build / "manifest.json").read_text(
            encoding="utf-8"))
        assert "P02" not in manifest["participants"]
        [erasure] = manifest["erasures"]
        assert erasure["subject"] == report.subject and len(report.subject) == 64
        assert manifest["inputs"]["data/momentary.csv"]["sha256"]  # the original's hash stays
    last = audit.read_entries(project / "archive")[-1]
    assert last["kind"] == "erase" and last["by"] == "data steward"
    assert set(last["manifests"]) == set(archive.builds(project))
    # The key is gone, so the erased subject can no longer be linked to the id.
    assert audit.subject(project / "archive", "P02") is None


def test_tampering_after_forget_is_still_caught(two_builds: Path) -> None:
    """Check that verify still names a changed file after an erasure."""
    project = two_builds
    forget(project, "P02", by="data steward")
    build = archive.builds(project)[0]
    path = project / "archive" / build / "out" / "metrics.csv"
    path.write_text(path.read_text(encoding="utf-8") + "P09,mean,1\n", encoding="utf-8")
    assert [m.file for m in archive.verify(project)] == [f"{build}/out/metrics.csv"]


def test_forget_is_idempotent_and_needs_a_name(two_builds: Path) -> None:
    """Check that a second forget changes nothing and that a name is required."""
    project = two_builds
    with pytest.raises(ReviewError, match="--by"):
        forget(project, "P02", by="")
    forget(project, "P02", by="data steward")
    entries = len(audit.read_entries(project / "archive"))
    again = forget(project, "P02", by="data steward")
    assert again.files_removed == 0 and again.builds == ()
    assert len(audit.read_entries(project / "archive")) == entries
    assert archive.verify(project) == []


def test_hash_only_archive(tmp_path: Path) -> None:
    """Check forget on an archive that keeps only input hashes."""
    project = make_project(tmp_path / "study", keep="hash")
    fake_build(project, tmp_path / "s1")
    forget(project, "P03", by="data steward")
    assert archive.verify(project) == []
    assert _files_mentioning(project / "archive", "P03") == []


def test_id_is_matched_as_a_whole_token() -> None:
    """Check that P1 is not found inside P10 or AP1, but is found next to punctuation."""
    pattern = mentions("P1")
    assert pattern.search("booklets/P1/x.html") and pattern.search("P1,3.5")
    assert not pattern.search("P10,3.5") and not pattern.search("AP1")


def test_command_line(two_builds: Path) -> None:
    """Check the forget command: confirmation, the summary and the data/ reminder."""
    runner = CliRunner()
    aborted = runner.invoke(main, ["forget", str(two_builds), "P02", "--by", "steward"],
                            input="n\n")
    assert aborted.exit_code == 1
    assert _files_mentioning(two_builds / "archive", "P02")
    done = runner.invoke(main, ["forget", str(two_builds), "P02", "--by", "steward", "--yes"])
    assert done.exit_code == 0, done.output
    assert "Erased P02" in done.output and "data/momentary.csv still holds" in done.output


PREFIXED = ("P1", "P10", "P1-b", "P1.2")


def _snapshot(root: Path, pid: str) -> dict[str, bytes]:
    """Every file under root that sits in a folder named after pid, with its bytes."""
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in root.rglob("*")
            if p.is_file() and pid in p.relative_to(root).parts}


def _records(project: Path, pid: str) -> list[dict]:
    """The participant's manifest record in every archived build."""
    return [json.loads((project / "archive" / b / "manifest.json").read_text(encoding="utf-8"))
            ["participants"].get(pid) for b in archive.builds(project)]


def _rows(path: Path, pid: str) -> list[str]:
    if not path.is_file():
        return []
    return [line for line in path.read_text(encoding="utf-8").splitlines()
            if line.split(",", 1)[0] == pid]


def test_forget_matches_the_id_exactly(tmp_path: Path) -> None:
    """Check that forgetting P1 leaves P10, P1-b and P1.2 byte-identical everywhere."""
    project = make_project(tmp_path / "study", ids=PREFIXED)
    fake_build(project, tmp_path / "s1", ids=PREFIXED)
    fake_build(project, tmp_path / "s2", ids=PREFIXED, text="second")
    shutil.copytree(tmp_path / "s2", project / "out")
    others = PREFIXED[1:]
    folders = [project / "archive" / b for b in archive.builds(project)] + [project / "out"]
    tables = [f / "out" / "metrics.csv" for f in folders[:-1]] + [project / "out" / "metrics.csv"]
    inputs = [f / "inputs" / "data" / "momentary.csv" for f in folders[:-1]]
    before = {pid: ([_snapshot(f, pid) for f in folders], _records(project, pid),
                    [_rows(t, pid) for t in tables + inputs]) for pid in others}
    assert all(files and all(files) for files, _, _ in before.values())

    forget(project, "P1", by="data steward")

    for pid in others:
        after = ([_snapshot(f, pid) for f in folders], _records(project, pid),
                 [_rows(t, pid) for t in tables + inputs])
        assert after == before[pid], pid
        assert all(rows for rows in after[2]), pid
    assert all(record is None for record in _records(project, "P1"))
    assert not any(_snapshot(f, "P1") for f in folders)
    assert all(_rows(t, "P1") == [] for t in tables + inputs)
    assert archive.verify(project) == []


def test_forget_matches_the_escaped_form_too() -> None:
    """Check that an id with HTML specials is also found in its escaped form."""
    pattern = mentions("O'Neil&Co")
    assert pattern.search("<li>O&#x27;Neil&amp;Co</li>") and pattern.search("O'Neil&Co,1")
    assert not mentions("S1").search("S1-b,3.5") and not mentions("P1").search("P1.2,3")
    assert mentions("P1").search("booklet for P1.")
