"""Withdrawal and erasure: remove one participant from every archived build and from out/.

Public function:

    forget(project: Path, participant: str, by: str) -> ErasureReport

What happens, build by build (each build folder is rewritten in a hidden copy and swapped in):

- files whose path names the participant (their booklet folder) are deleted;
- CSV files with a participant column lose that participant's rows (archived inputs and the
  study tables alike); a CSV still mentioning the id elsewhere is deleted;
- other text files (HTML, JSON) mentioning the id are deleted; binary files that cannot be
  searched (spreadsheets, SPSS files, PDFs) are deleted unless they belong to another
  participant; a deleted input keeps its hash in the manifest;
- the manifest drops the participant's entry, records the erasure under a hashed subject, and
  is rewritten; the 'erase' log entry holds only hashes: the subject token and each rewritten
  manifest's SHA-256, so `verify` accepts the new manifests;
- the participant's log key and review notes are deleted, so earlier log entries can no longer
  be linked to them.

The project's own data/ files are never modified: the report lists those that still hold the
participant, to be removed by the study team before the next build.
"""

from __future__ import annotations

import csv
import html
import io
import re
import shutil
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from springback.archive.audit import append, drop_subject, read_entries, subject, utc_stamp
from springback.archive.manifest_page import manifest_html
from springback.archive.verify import (
    MANIFEST,
    MANIFEST_HTML,
    expected_manifests,
    read_json,
    walk,
)
from springback.errors import ReviewError
from springback.files import (
    BuildLock,
    atomic_write_bytes,
    atomic_write_text,
    clean_stale,
    project_dirs,
    replace_dir,
    sha256_file,
    write_json,
)

ERASED = "[erased]"


@dataclass(frozen=True)
class ErasureReport:
    """What `forget` changed; `still_in_data` lists project files the team must clean."""

    subject: str
    builds: tuple[str, ...]
    files_removed: int
    files_rewritten: int
    still_in_data: tuple[str, ...]


# Characters an id may hold. A match must not touch one of them on either side, so P1 is not
# found inside P10, S1-b or P1.2; a '.' counts only when an id character follows it, so "P1."
# at the end of a sentence still names P1.
_ID_CHAR = r"[A-Za-z0-9_\-]"


def mentions(participant: str) -> re.Pattern[str]:
    """A pattern finding the id as a whole token, raw or HTML-escaped (P1 not inside P10)."""
    forms = sorted({participant, html.escape(participant, quote=True),
                    html.escape(participant, quote=False)}, key=len, reverse=True)
    body = "|".join(re.escape(form) for form in forms)
    return re.compile(rf"(?<!{_ID_CHAR})(?<!{_ID_CHAR}\.)(?:{body})(?!{_ID_CHAR}|\.{_ID_CHAR})")


def _filter_csv(text: str, participant: str, id_columns: set[str]) -> str | None:
    """The CSV without the participant's rows, or None when it has no participant column."""
    first = text.split("\n", 1)[0]
    delimiter = max(",;\t", key=first.count)
    newline = "\r\n" if "\r\n" in text else "\n"
    rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter))
    if not rows:
        return None
    header = rows[0]
    columns = [i for i, name in enumerate(header) if name.strip().lstrip("\ufeff") in id_columns]
    if not columns:
        return None
    kept = [header] + [r for r in rows[1:] if not any(
        i < len(r) and r[i].strip() == participant for i in columns)]
    buf = io.StringIO()
    csv.writer(buf, delimiter=delimiter, lineterminator=newline).writerows(kept)
    return buf.getvalue()


def _scrub_file(path: Path, rel: str, participant: str, others: list[re.Pattern[str]],
                id_columns: set[str]) -> str:
    """Clean one file in place; return 'removed', 'rewritten' or 'kept'."""
    pattern = mentions(participant)
    if pattern.search(rel):
        path.unlink()
        return "removed"
    data = path.read_bytes()
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        if any(p.search(rel) for p in others):
            return "kept"  # another participant's booklet holds only their own data
        path.unlink()
        return "removed"
    if rel.lower().endswith((".csv", ".tsv")):
        filtered = _filter_csv(text, participant, id_columns)
        if filtered is not None and not pattern.search(filtered):
            if filtered == text:
                return "kept"
            # An archived input stays private when it is rewritten.
            atomic_write_bytes(path, filtered.encode("utf-8"), private=rel.startswith("inputs/"))
            return "rewritten"
    if pattern.search(text):
        path.unlink()
        return "removed"
    return "kept"


def _scrub_json(value: Any, participant: str, pattern: re.Pattern[str]) -> Any:
    """Remove the id from keys, list items and strings anywhere in a JSON value."""
    if isinstance(value, dict):
        return {k: _scrub_json(v, participant, pattern) for k, v in value.items()
                if not pattern.search(str(k))}
    if isinstance(value, list):
        return [_scrub_json(v, participant, pattern) for v in value if v != participant]
    if isinstance(value, str):
        return pattern.sub(ERASED, value)
    return value


def _scrub_build(folder: Path, participant: str, token: str) -> tuple[int, int] | None:
    """Rewrite one build folder without the participant; None when there was nothing to do."""
    manifest = read_json(folder / MANIFEST)
    pattern = mentions(participant)
    files: dict[str, str] = dict(manifest.get("files", {}))
    people = manifest.get("participants", {})
    others = [mentions(p) for p in people if p != participant]
    columns = {"participant", str(manifest.get("settings", {}).get("normalised", {})
                                  .get("data", {}).get("columns", {}).get("participant",
                                                                          "participant"))}
    staging = folder.with_name(f".{folder.name}.partial-erase")
    if staging.exists():
        shutil.rmtree(staging)
    shutil.copytree(folder, staging)
    removed = rewritten = 0
    for rel in sorted(files):
        if rel == MANIFEST_HTML or not (staging / rel).is_file():
            continue
        outcome = _scrub_file(staging / rel, rel, participant, others, columns)
        if outcome == "removed":
            del files[rel]
            removed += 1
        elif outcome == "rewritten":
            files[rel] = sha256_file(staging / rel)
            rewritten += 1
    _drop_named_dirs(staging, pattern)
    mentioned = pattern.search(str(manifest))
    if not (removed or rewritten or participant in people or mentioned):
        shutil.rmtree(staging)
        return None
    for rec in manifest.get("inputs", {}).values():
        if rec.get("archived") and rec["archived"] not in files:
            rec["archived"], rec["erased"] = None, True
    people.pop(participant, None)
    manifest = _scrub_json(manifest, participant, pattern)
    manifest.setdefault("erasures", []).append(
        {"subject": token, "time": utc_stamp(), "files_removed": removed,
         "files_rewritten": rewritten})
    manifest.pop("files", None)
    atomic_write_text(staging / MANIFEST_HTML, manifest_html(manifest))
    files[MANIFEST_HTML] = sha256_file(staging / MANIFEST_HTML)
    manifest["files"] = dict(sorted(files.items()))
    write_json(staging / MANIFEST, manifest)
    replace_dir(staging, folder)
    return removed, rewritten


def _scrub_tree(root: Path, participant: str, others: list[str]) -> tuple[int, int]:
    if not root.is_dir():
        return 0, 0
    removed = rewritten = 0
    patterns = [mentions(p) for p in others if p != participant]
    for path in list(walk(root)):
        rel = path.relative_to(root).as_posix()
        if any(part.startswith(".") for part in Path(rel).parts):
            continue
        outcome = _scrub_file(path, rel, participant, patterns, {"participant"})
        removed += outcome == "removed"
        rewritten += outcome == "rewritten"
    _drop_named_dirs(root, mentions(participant))
    return removed, rewritten


def _drop_named_dirs(root: Path, pattern: re.Pattern[str]) -> None:
    """Remove folders whose path names the participant (their files are already gone)."""
    for folder in sorted((p for p in root.rglob("*") if p.is_dir()), reverse=True):
        if pattern.search(folder.relative_to(root).as_posix()):
            shutil.rmtree(folder, ignore_errors=True)


def forget(project: Path, participant: str, by: str) -> ErasureReport:
    """Erase one participant from every archived build and from out/; log it with hashes only."""
    if not by.strip():
        raise ReviewError("say who asked for the erasure: pass --by with a name")
    if not participant.strip():
        raise ReviewError("name the participant to forget")
    dirs = project_dirs(project)
    archive = dirs.archive
    with BuildLock(project):
        clean_stale(archive)
        token = subject(archive, participant, create=True)
        assert token is not None
        entries = read_entries(archive) if (archive / "audit.jsonl").exists() else []
        vouched = expected_manifests(entries)
        manifests: dict[str, str] = {}
        everyone: set[str] = set()
        removed = rewritten = 0
        for build_id in vouched:
            folder = archive / build_id
            everyone |= set(read_json(folder / MANIFEST).get("participants", {}))
            done = _scrub_build(folder, participant, token)
            if done is not None:
                removed, rewritten = removed + done[0], rewritten + done[1]
            current = sha256_file(folder / MANIFEST) if (folder / MANIFEST).is_file() else ""
            if current and current != vouched[build_id] and any(
                    e.get("subject") == token
                    for e in read_json(folder / MANIFEST).get("erasures", [])):
                manifests[build_id] = current  # also finishes an interrupted earlier run
        out_removed, out_rewritten = _scrub_tree(dirs.out, participant, sorted(everyone))
        if manifests or out_removed or out_rewritten:
            append(archive, "erase", {"subject": token, "by": by.strip(),
                                      "manifests": manifests,
                                      "files_removed": removed + out_removed,
                                      "files_rewritten": rewritten + out_rewritten})
        drop_subject(archive, participant)
    pattern = mentions(participant)
    data_files = list(walk(dirs.root / "data")) if (dirs.root / "data").is_dir() else []
    still = []
    for path in data_files:
        try:
            if pattern.search(path.read_bytes().decode("utf-8", "ignore")):
                still.append(path.relative_to(dirs.root).as_posix())
        except OSError:
            continue
    return ErasureReport(token, tuple(manifests), removed + out_removed,
                         rewritten + out_rewritten, tuple(still))
