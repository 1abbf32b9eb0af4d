"""Checking the audit archive: re-hash every archived file, follow the log, optionally rebuild.

Public functions (`archive.verify` is the entry point most callers want):

    verify_archive(archive: Path, rebuild_fn: Callable[[Path], Path | None] | None = None,
                   head: str | None = None) -> list[Mismatch]
    folder_mismatches(folder: Path, manifest: dict) -> list[Mismatch]
    expected_manifests(entries: list[dict]) -> dict[str, str]     # build id -> manifest SHA-256
    read_json(path: Path) -> dict                                  # {} when unreadable
"""

from __future__ import annotations

import json
import os
import re
import shutil
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from springback.archive.audit import (
    HEAD,
    LOCK,
    LOG,
    RECEIPTS,
    SHORT,
    SUBJECTS,
    Mismatch,
    _raw_lines,
    _token,
    check_chain,
    check_head,
    check_macs,
    read_entries,
)
from springback.errors import ArchiveError
from springback.files import LOCK_FILE, OLD, PARTIAL, project_dirs, sha256_bytes, sha256_file

MANIFEST = "manifest.json"
MANIFEST_HTML = "manifest.html"
OWN_FILES = {LOG, HEAD, SUBJECTS, LOCK, RECEIPTS, LOCK_FILE}
"""The files springback keeps at the top of archive/ besides the recorded build folders."""


def walk(folder: Path) -> Iterator[Path]:
    """Every file under a folder, in sorted order (stable manifests)."""
    for path in sorted(Path(folder).rglob("*")):
        if path.is_file():
            yield path


def read_json(path: Path) -> dict[str, Any]:
    """A JSON object from a file, or {} when missing or unreadable."""
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def build_folders(archive: Path) -> list[Path]:
    """Visible sub-folders of the archive (each should be one recorded build)."""
    if not archive.is_dir():
        return []
    return sorted(p for p in archive.iterdir() if p.is_dir() and not p.name.startswith("."))


def expected_manifests(entries: list[dict[str, Any]]) -> dict[str, str]:
    """Build id -> the manifest hash the log vouches for (erasures supersede the build's)."""
    expected: dict[str, str] = {}
    for e in entries:
        if e.get("kind") == "build" and "build" in e:
            expected[str(e["build"])] = str(e.get("manifest_sha256"))
        elif e.get("kind") == "erase":
            for build_id, sha in dict(e.get("manifests", {})).items():
                expected[str(build_id)] = str(sha)
    return expected


def folder_mismatches(folder: Path, manifest: dict[str, Any]) -> list[Mismatch]:
    """Compare every file of one build folder with its manifest, both ways."""
    out: list[Mismatch] = []
    listed = manifest.get("files")
    if not isinstance(listed, dict):
        return [Mismatch(f"{folder.name}/{MANIFEST}", "a list of archived files", "none",
                         "the manifest is damaged")]
    for rel, expected in sorted(listed.items()):
        path = folder / rel
        name = f"{folder.name}/{rel}"
        if not path.is_file():
            out.append(Mismatch(name, str(expected), "missing", "an archived file is missing"))
            continue
        found = sha256_file(path)
        if found != expected:
            out.append(Mismatch(name, str(expected), found, "an archived file was changed"))
    for path in walk(folder):
        rel = path.relative_to(folder).as_posix()
        if rel != MANIFEST and rel not in listed:
            out.append(Mismatch(f"{folder.name}/{rel}", "no such file", sha256_file(path),
                                "a file was added to the archived build"))
    return out


def stray_entries(archive: Path, expected: dict[str, str]) -> list[Mismatch]:
    """Anything at the top of archive/ that is neither springback's own file nor a build."""
    out: list[Mismatch] = []
    for entry in sorted(archive.iterdir()):
        name = entry.name
        if entry.is_symlink():
            out.append(Mismatch(name, "no links", "a link", "springback makes no links in "
                                "archive/; move it out of archive/"))
        elif name in OWN_FILES and entry.is_file():
            continue
        elif entry.is_dir() and (name in expected or not name.startswith(".")):
            continue  # a recorded build, or a visible folder named below as unrecorded
        elif PARTIAL in name or OLD in name:
            out.append(Mismatch(name, "no unfinished writes", "one left by a stopped write",
                                "a build or write was stopped here; the next build removes "
                                "it, or delete it yourself"))
        else:
            kind = "folder" if entry.is_dir() else "file"
            out.append(Mismatch(name, "only springback's own files and recorded builds",
                                f"an unknown {kind}", "springback did not make this; move it "
                                "out of archive/"))
    return out


def receipt_mismatches(archive: Path) -> list[Mismatch]:
    """Each line of archive/receipts.txt must name an entry the log still holds, unchanged."""
    path = archive / RECEIPTS
    if not path.is_file():
        return []
    hashes = [sha256_bytes(raw) for raw in _raw_lines(archive)[0]]
    out: list[Mismatch] = []
    name = f"{archive.name}/{RECEIPTS}"
    for n, text in enumerate(path.read_text(encoding="utf-8", errors="replace").splitlines(), 1):
        found = re.search(rf"entry (\d+)\s+\S+\s+head ([0-9a-f]{{{SHORT}}})", text)
        if found is None:
            out.append(Mismatch(f"{name} line {n}", "a receipt", "other text",
                                "the receipts file was edited"))
            continue
        seq, head = int(found[1]), found[2]
        if seq > len(hashes) or not hashes[seq - 1].startswith(head):
            out.append(Mismatch(f"{name} line {n}", f"entry {seq} with head {head}",
                                "no such entry" if seq > len(hashes) else
                                f"head {hashes[seq - 1][:SHORT]}",
                                "the log no longer holds the entry this receipt names: it was "
                                "rewritten, rolled back or cut short"))
    return out


def subject_mismatches(archive: Path, entries: list[dict[str, Any]]) -> list[Mismatch]:
    """subjects.json: private, readable, notes unchanged, a key for every token the log uses."""
    path = archive / SUBJECTS
    name = f"{archive.name}/{SUBJECTS}"
    out: list[Mismatch] = []
    known: Any = {}
    if path.exists():
        if os.name == "posix" and path.stat().st_mode & 0o077:
            out.append(Mismatch(name, "mode 0600 (only you)", oct(path.stat().st_mode & 0o777),
                                "the participants' keys and review notes are readable by others; "
                                "run `chmod 600` on it"))
        try:
            known = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            known = None
        if not isinstance(known, dict):
            return [*out, Mismatch(name, "the participants' keys", "unreadable text",
                                   "the key file was damaged; restore it from a backup")]
    tokens: dict[str, dict[str, Any]] = {}
    for pid, rec in known.items():
        key = rec.get("key") if isinstance(rec, dict) else None
        if not isinstance(key, str) or not re.fullmatch(r"[0-9a-f]{64}", key):
            out.append(Mismatch(name, "a 64-digit key per participant", "a damaged entry",
                                "a participant's key was edited"))
            continue
        notes = rec.get("notes", {})
        for sha, text in notes.items() if isinstance(notes, dict) else ():
            if sha256_bytes(str(text).encode("utf-8")) != sha:
                out.append(Mismatch(name, f"the review note with hash {sha[:SHORT]}",
                                    "other text", "a review note was changed"))
        tokens[_token(key, str(pid))] = notes if isinstance(notes, dict) else {}
    erased = {e.get("subject") for e in entries if e.get("kind") == "erase"}
    missing: set[str] = set()
    for i, e in enumerate(entries, start=1):
        refs = [e["subject"]] if isinstance(e.get("subject"), str) else []
        refs += [t for t in e.get("released", []) if isinstance(t, str)]
        for token in refs:
            if token in erased or token in missing:
                continue
            if token not in tokens:
                missing.add(token)
                out.append(Mismatch(name, f"the key of the participant in log entry {i}", "none",
                                    "a participant's key was deleted or replaced other than by "
                                    "`springback forget`"))
            elif e.get("note_sha256") and e["note_sha256"] not in tokens[token]:
                out.append(Mismatch(name, f"the review note of log entry {i}", "none",
                                    "a review note was deleted other than by `springback "
                                    "forget`"))
    return out


def verify_archive(archive: Path, rebuild_fn: Callable[[Path], Path | None] | None = None,
                   head: str | None = None) -> list[Mismatch]:
    """Check the log chain, every recorded build's files, and (with rebuild_fn) the last build.

    With `head` (a receipt's hash) the log must still hold that entry; SPRINGBACK_AUDIT_KEY,
    when set, checks every entry's signature.
    """
    archive = Path(archive)
    if not archive.is_dir():
        return [Mismatch(archive.name, "an archive folder", "none", "nothing has been built")]
    problems = check_chain(archive)
    if head is not None:
        problems += check_head(archive, head)
    problems += check_macs(archive)
    problems += receipt_mismatches(archive)
    try:
        entries = read_entries(archive)
    except ArchiveError:
        entries = []
    problems += subject_mismatches(archive, entries)
    expected = expected_manifests(entries)
    problems += stray_entries(archive, expected)
    for build_id, sha in expected.items():
        folder = archive / build_id
        manifest = folder / MANIFEST
        if not manifest.is_file():
            problems.append(Mismatch(f"{build_id}/{MANIFEST}", sha, "missing",
                                     "a recorded build's manifest is missing"))
            continue
        found = sha256_file(manifest)
        if found != sha:
            problems.append(Mismatch(f"{build_id}/{MANIFEST}", sha, found,
                                     "the manifest differs from the one the audit log records"))
        problems += folder_mismatches(folder, read_json(manifest))
    for folder in build_folders(archive):
        if folder.name not in expected:
            problems.append(Mismatch(folder.name, "a build recorded in the audit log",
                                     "an unrecorded folder", "not recorded in the audit log"))
    if rebuild_fn is not None and expected:
        problems += rebuild_mismatches(archive / list(expected)[-1], rebuild_fn)
    return problems


def rebuild_mismatches(folder: Path,
                       rebuild_fn: Callable[[Path], Path | None]) -> list[Mismatch]:
    """Rebuild one archived build from its archived inputs and compare outputs byte for byte.

    `rebuild_fn(project)` builds the project folder it is given and returns its output folder
    (None: the project's configured out/). The build time is pinned through SOURCE_DATE_EPOCH.
    """
    manifest = read_json(folder / MANIFEST)
    inputs = manifest.get("inputs", {})
    lost = [rel for rel, rec in inputs.items() if not rec.get("archived")]
    if lost:
        return [Mismatch(f"{folder.name}/inputs/{lost[0]}", "an archived copy",
                         "only its hash (archive.keep_inputs = 'hash', or erased)",
                         "cannot rebuild without the input files")]
    depth = max((rel.count("../") for rel in inputs), default=0)
    out: list[Mismatch] = []
    saved = os.environ.get("SOURCE_DATE_EPOCH")
    with tempfile.TemporaryDirectory(prefix="springback-rebuild-") as tmp:
        root = Path(tmp).joinpath(*(["up"] * depth), "project")
        for rel, rec in inputs.items():
            target = (root / rel).resolve()
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(folder / rec["archived"], target)
        os.environ["SOURCE_DATE_EPOCH"] = str(manifest.get("built_at_epoch", ""))
        try:
            produced = Path(rebuild_fn(root) or project_dirs(root).out)
        finally:
            if saved is None:
                os.environ.pop("SOURCE_DATE_EPOCH", None)
            else:
                os.environ["SOURCE_DATE_EPOCH"] = saved
        wanted = {rel[4:]: sha for rel, sha in manifest.get("files", {}).items()
                  if rel.startswith("out/")}
        for rel, sha in sorted(wanted.items()):
            path = produced / rel
            found = sha256_file(path) if path.is_file() else "missing"
            if found != sha:
                out.append(Mismatch(f"{folder.name}/out/{rel}", sha, found,
                                    "the rebuild gave different bytes"))
        if not manifest.get("erasures"):
            for path in walk(produced):
                rel = path.relative_to(produced).as_posix()
                if rel not in wanted and rel != ".springback-out":  # the build's own marker
                    out.append(Mismatch(f"{folder.name}/out/{rel}", "no such file",
                                        sha256_file(path), "the rebuild made an extra file"))
    return out
