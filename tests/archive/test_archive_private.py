"""Archived inputs and the key store are private to the study team's account (0600 / 0700).

The modes are the POSIX owner-only permissions (IEEE Std 1003.1, sys/stat.h: S_IRUSR|S_IWUSR
for files, plus S_IXUSR for folders).
"""

from __future__ import annotations

import stat
import sys
from pathlib import Path

import pytest

from springback.archive.audit import SUBJECTS, subject
from springback.archive.erasure import forget
from tests.support.tiny_projects import fake_build, make_project

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="POSIX permissions")


def _mode(path: Path) -> int:
    return stat.S_IMODE(path.stat().st_mode)


def test_archived_inputs_are_owner_only(tmp_path: Path) -> None:
    """Check every archived input file is 0600 and every folder under inputs/ 0700."""
    project = make_project(tmp_path / "study")
    build_id = fake_build(project, tmp_path / "staging")
    inputs = project / "archive" / build_id / "inputs"
    files = [p for p in inputs.rglob("*") if p.is_file()]
    assert files, "the tiny project keeps copies of its inputs"
    assert {_mode(p) for p in files} == {0o600}
    assert {_mode(p) for p in [inputs, *inputs.rglob("*")] if p.is_dir()} == {0o700}


def test_key_store_is_owner_only(tmp_path: Path) -> None:
    """Check subjects.json (ids, keys, review notes) is 0600 from its first write."""
    archive = tmp_path / "archive"
    archive.mkdir()
    subject(archive, "P01", create=True)
    assert _mode(archive / SUBJECTS) == 0o600


def test_inputs_rewritten_by_forget_stay_private(tmp_path: Path) -> None:
    """Check an archived input that forget rewrites keeps mode 0600."""
    project = make_project(tmp_path / "study")
    build_id = fake_build(project, tmp_path / "staging")
    forget(project, "P01", by="Data manager")
    inputs = project / "archive" / build_id / "inputs"
    files = [p for p in inputs.rglob("*") if p.is_file()]
    assert files and {_mode(p) for p in files} == {0o600}
