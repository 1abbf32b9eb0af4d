"""The tamper-evident audit log `archive/audit.jsonl` and the participant key store.

Public functions:

    append(archive: Path, kind: str, fields: dict, now: datetime | None = None) -> dict
    read_entries(archive: Path) -> list[dict]          # parsed entries, in order
    check_chain(archive: Path) -> list[Mismatch]       # every break of the hash chain, named
    subject(archive: Path, participant: str, create: bool = False) -> str | None
    drop_subject(archive: Path, participant: str) -> str | None
    save_note(archive: Path, participant: str, note: str) -> str   # returns the note's SHA-256
    note_text(archive: Path, participant: str, sha: str) -> str
    known_subjects(archive: Path) -> dict[str, tuple[str, dict]]   # id -> (token, notes)
    receipt(archive: Path) -> str                      # 'entry N, head <16 hex>' of the log now
    check_head(archive: Path, head: str) -> list[Mismatch]   # does the log still extend it?
    check_macs(archive: Path) -> list[Mismatch]        # entries' HMACs (key in the environment)

Each line is one JSON object with `seq` (1, 2, ...), `time` (UTC), `kind` and `prev`, the
SHA-256 of the previous line's bytes; any edit, deletion or reordering breaks the chain.
`audit.head.json` holds the count, byte length and last line's hash, so removing the last
lines is caught too. Participants never appear in clear in the log: entries carry a `subject`,
an HMAC of the id under a random per-participant key kept in `subjects.json`. Erasure deletes
the key, after which old entries can no longer be linked to the person; free-text review notes
live beside the key for the same reason, and the log holds only their hash.

Anyone who can write archive/ can re-chain an edited log, so every append also writes a
receipt line (the entry's number and the first 16 hex digits of its hash, the log's head) to
`archive/receipts.txt`, and the command line prints it. A receipt kept elsewhere (e-mailed to
the ethics board, stored with the study's records) is an anchor: `springback verify --head
HASH` fails unless the log still holds that very entry, so a rewrite, rollback or truncation at
or before it shows. With SPRINGBACK_AUDIT_KEY set, each entry also carries `mac`, an HMAC-SHA256
of the entry under that key; without the key nobody can add or re-sign entries unnoticed.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import os
import re
import secrets
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from springback.errors import ArchiveError
from springback.files import atomic_write_bytes, file_lock, json_bytes, sha256_bytes

LOG = "audit.jsonl"
HEAD = "audit.head.json"
SUBJECTS = "subjects.json"
LOCK = ".audit.lock"
RECEIPTS = "receipts.txt"
GENESIS = "0" * 64
KEY_VARIABLE = "SPRINGBACK_AUDIT_KEY"
SHORT = 16
"""Hex digits of an entry's hash that a receipt shows."""
MIN_KEY = 16


@dataclass(frozen=True)
class Mismatch:
    """One thing `verify` found wrong: the file, what was expected and what was found."""

    file: str
    expected: str
    found: str
    what: str = ""

    def message(self) -> str:
        """Render as one line a user reads."""
        text = f"{self.file}: {self.what}" if self.what else self.file
        return f"{text} (expected {self.expected}, found {self.found})"


def utc_stamp(moment: datetime | None = None) -> str:
    """An ISO UTC time stamp with seconds, e.g. 2026-12-02T01:02:03Z."""
    moment = moment or datetime.now(UTC)
    return moment.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _line(entry: dict[str, Any]) -> bytes:
    return json.dumps(entry, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()


def _raw_lines(archive: Path) -> tuple[list[bytes], bytes]:
    """Complete lines of the log and any unfinished tail (a write cut off mid-line)."""
    path = archive / LOG
    if not path.exists():
        return [], b""
    data = path.read_bytes()
    body, _, tail = data.rpartition(b"\n")
    lines = body.split(b"\n") if body else []
    return lines, tail


def _head(archive: Path) -> dict[str, Any] | None:
    path = archive / HEAD
    if not path.exists():
        return None
    try:
        head = json.loads(path.read_text(encoding="utf-8"))
    except (ValueError, UnicodeDecodeError):
        return {"entries": -1, "bytes": -1, "last": "unreadable"}
    return head if isinstance(head, dict) else {"entries": -1, "bytes": -1, "last": "unreadable"}


def _write_head(archive: Path, lines: list[bytes]) -> None:
    size = sum(len(x) + 1 for x in lines)
    last = sha256_bytes(lines[-1]) if lines else GENESIS
    atomic_write_bytes(archive / HEAD, json_bytes({"entries": len(lines), "bytes": size,
                                                   "last": last}))


def audit_key() -> bytes | None:
    """The HMAC key from SPRINGBACK_AUDIT_KEY (None when unset); a short key is refused."""
    raw = os.environ.get(KEY_VARIABLE, "")
    if not raw:
        return None
    if len(raw) < MIN_KEY:
        raise ArchiveError(f"{KEY_VARIABLE} is set but holds only {len(raw)} characters; use a "
                           f"secret of at least {MIN_KEY} (for example the output of `python -c "
                           "'import secrets; print(secrets.token_hex(32))'`), or unset it")
    return raw.encode("utf-8")


def entry_mac(key: bytes, entry: dict[str, Any]) -> str:
    """The HMAC-SHA256 of an entry (without its own `mac` field) under the key."""
    body = {k: v for k, v in entry.items() if k != "mac"}
    return hmac.new(key, _line(body), hashlib.sha256).hexdigest()


def _write_receipt(archive: Path, entry: dict[str, Any], raw: bytes) -> None:
    line = (f"{entry['time']}  entry {entry['seq']}  {entry['kind']}  head "
            f"{sha256_bytes(raw)[:SHORT]}\n")
    fd = os.open(archive / RECEIPTS, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        os.write(fd, line.encode("utf-8"))
    finally:
        os.close(fd)


def receipt(archive: Path) -> str:
    """The log's head as a receipt: 'entry N, head <first 16 hex digits of its hash>'."""
    lines, _ = _raw_lines(Path(archive))
    if not lines:
        return "the audit log is empty"
    return f"entry {len(lines)}, head {sha256_bytes(lines[-1])[:SHORT]}"


def check_head(archive: Path, head: str) -> list[Mismatch]:
    """Whether the log still holds the entry a receipt names (the chain check does the rest)."""
    wanted = head.strip().lower().removeprefix("head").strip()
    if not re.fullmatch(r"[0-9a-f]{8,64}", wanted):
        raise ArchiveError(f"--head takes the hash a receipt shows (8 to 64 hex digits, such as "
                           f"'3f2a9c1b7d4e5f60'), found '{head}'")
    lines, _ = _raw_lines(Path(archive))
    for raw in lines:
        if sha256_bytes(raw).startswith(wanted):
            return []
    return [Mismatch(f"{Path(archive).name}/{LOG}", f"the entry with head {wanted}",
                     f"{len(lines)} entries, none with that head",
                     "the log no longer extends this receipt: it was rewritten, rolled back or "
                     "cut short at or before that entry")]


def check_macs(archive: Path) -> list[Mismatch]:
    """With SPRINGBACK_AUDIT_KEY set: every signed entry's HMAC, and no unsigned entry after one."""
    key = audit_key()
    if key is None:
        return []
    name = f"{Path(archive).name}/{LOG}"
    problems: list[Mismatch] = []
    signed = False
    lines, _ = _raw_lines(Path(archive))
    for i, raw in enumerate(lines, start=1):
        try:
            entry = json.loads(raw)
        except ValueError:
            continue  # the chain check names it
        if not isinstance(entry, dict):
            continue
        if "mac" not in entry:
            if signed:
                problems.append(Mismatch(f"{name} line {i}", "an entry signed with the key",
                                         "no signature", "an entry was added without the key"))
            continue
        signed = True
        if not hmac.compare_digest(str(entry["mac"]), entry_mac(key, entry)):
            problems.append(Mismatch(f"{name} line {i}", "a signature made with the key",
                                     "a signature that does not match",
                                     "the entry was changed or signed with another key"))
    if lines and not signed:
        problems.append(Mismatch(name, f"entries signed with {KEY_VARIABLE}", "none signed",
                                 "the key is set but no entry carries a signature (entries are "
                                 "signed only while the key is set)"))
    return problems


def _settle(archive: Path) -> list[bytes]:
    """Repair what an interrupted append leaves behind, or refuse on a damaged log."""
    lines, tail = _raw_lines(archive)
    head = _head(archive)
    if tail:
        # A line cut off before its newline was never acknowledged: drop it.
        with open(archive / LOG, "r+b") as fh:
            fh.truncate(sum(len(x) + 1 for x in lines))
    problems = check_chain(archive)
    if problems:
        raise ArchiveError(
            "the audit log is damaged (" + problems[0].message() + "); nothing was recorded. "
            "Run `springback verify` to see every problem"
        )
    if head is None or head.get("entries") != len(lines):
        _write_head(archive, lines)
    return lines


def append(archive: Path, kind: str, fields: dict[str, Any],
           now: datetime | None = None) -> dict[str, Any]:
    """Append one chained entry (under the log's own lock) and return it."""
    archive = Path(archive)
    archive.mkdir(parents=True, exist_ok=True)
    key = audit_key()
    with file_lock(archive / LOCK, wait_seconds=60.0, what="another audit-log write"):
        lines = _settle(archive)
        entry = dict(fields)
        entry.update(
            seq=len(lines) + 1,
            time=utc_stamp(now),
            kind=kind,
            prev=sha256_bytes(lines[-1]) if lines else GENESIS,
        )
        entry.pop("mac", None)
        if key is not None:
            entry["mac"] = entry_mac(key, entry)
        raw = _line(entry)
        fd = os.open(archive / LOG, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
        try:
            os.write(fd, raw + b"\n")
            os.fsync(fd)
        finally:
            os.close(fd)
        _write_head(archive, [*lines, raw])
        _write_receipt(archive, entry, raw)
    return entry


def read_entries(archive: Path) -> list[dict[str, Any]]:
    """Every complete entry of the log, in order (ArchiveError if a line is not JSON)."""
    lines, _ = _raw_lines(Path(archive))
    out = []
    for i, raw in enumerate(lines, start=1):
        try:
            out.append(json.loads(raw))
        except ValueError:
            raise ArchiveError(f"archive/{LOG} line {i} is not a log entry; run "
                               "`springback verify`") from None
    return out


def check_chain(archive: Path) -> list[Mismatch]:
    """Check every line's link to the one before and the head record; name each break."""
    archive = Path(archive)
    name = f"{archive.name}/{LOG}"
    lines, _tail = _raw_lines(archive)
    problems: list[Mismatch] = []
    prev = GENESIS
    for i, raw in enumerate(lines, start=1):
        where = f"{name} line {i}"
        try:
            entry = json.loads(raw)
        except ValueError:
            problems.append(Mismatch(where, "a JSON log entry", "unreadable text",
                                     "the line was edited"))
            prev = sha256_bytes(raw)
            continue
        if not isinstance(entry, dict):
            problems.append(Mismatch(where, "a JSON log entry", "something else",
                                     "the line was edited"))
            prev = sha256_bytes(raw)
            continue
        if entry.get("seq") != i:
            problems.append(Mismatch(where, f"entry number {i}", f"entry number {entry.get('seq')}",
                                     "a line was deleted, inserted or moved"))
        if entry.get("prev") != prev:
            problems.append(Mismatch(where, f"previous-entry hash {prev[:16]}",
                                     f"{str(entry.get('prev'))[:16]}",
                                     "the chain is broken: this line or the one before was "
                                     "edited, deleted or moved"))
        prev = sha256_bytes(raw)
    head = _head(archive)
    if head is None:
        if lines:
            problems.append(Mismatch(f"{archive.name}/{HEAD}", "the log's head record", "none",
                                     "the head record was deleted"))
        return problems
    n = head.get("entries")
    if n == len(lines) and head.get("last") == prev:
        return problems
    # One complete, well-chained entry past the head is an append cut off before the head
    # was updated; the next write acknowledges it.
    if (isinstance(n, int) and n == len(lines) - 1 and not problems
            and head.get("last") == (sha256_bytes(lines[-2]) if n else GENESIS)):
        return problems
    problems.append(Mismatch(f"{archive.name}/{HEAD}", f"{n} entries ending in "
                             f"{str(head.get('last'))[:16]}", f"{len(lines)} entries ending in "
                             f"{prev[:16]}", "lines were removed from or added to the log"))
    return problems


# -- participant keys ----------------------------------------------------------------------


def _subjects(archive: Path) -> dict[str, dict[str, Any]]:
    path = archive / SUBJECTS
    if not path.exists():
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (ValueError, UnicodeDecodeError):
        raise ArchiveError(f"archive/{SUBJECTS} is not readable JSON; restore it from a "
                           "backup") from None
    return data if isinstance(data, dict) else {}


def _token(key: str, participant: str) -> str:
    return hmac.new(bytes.fromhex(key), participant.encode("utf-8"), hashlib.sha256).hexdigest()


def subject(archive: Path, participant: str, create: bool = False) -> str | None:
    """The participant's pseudonymous token in the log (None if they have no key yet)."""
    archive = Path(archive)
    known = _subjects(archive)
    if participant not in known:
        if not create:
            return None
        with file_lock(archive / LOCK, wait_seconds=60.0, what="another audit-log write"):
            known = _subjects(archive)
            known.setdefault(participant, {"key": secrets.token_hex(32), "notes": {}})
            atomic_write_bytes(archive / SUBJECTS, json_bytes(known), private=True)
    return _token(known[participant]["key"], participant)


def drop_subject(archive: Path, participant: str) -> str | None:
    """Delete a participant's key and notes; return the token they had (None if none)."""
    archive = Path(archive)
    with file_lock(archive / LOCK, wait_seconds=60.0, what="another audit-log write"):
        known = _subjects(archive)
        entry = known.pop(participant, None)
        if entry is None:
            return None
        atomic_write_bytes(archive / SUBJECTS, json_bytes(known), private=True)
    return _token(entry["key"], participant)


def save_note(archive: Path, participant: str, note: str) -> str:
    """Keep a review note beside the participant's key; return its SHA-256 for the log."""
    archive = Path(archive)
    sha = sha256_bytes(note.encode("utf-8"))
    subject(archive, participant, create=True)
    with file_lock(archive / LOCK, wait_seconds=60.0, what="another audit-log write"):
        known = _subjects(archive)
        known[participant].setdefault("notes", {})[sha] = note
        atomic_write_bytes(archive / SUBJECTS, json_bytes(known), private=True)
    return sha


def known_subjects(archive: Path) -> dict[str, tuple[str, dict[str, str]]]:
    """Every participant of the key store, read once: id -> (log token, review notes by hash)."""
    return {pid: (_token(entry["key"], pid),
                  {str(sha): str(text) for sha, text in entry.get("notes", {}).items()})
            for pid, entry in _subjects(Path(archive)).items()}


def note_text(archive: Path, participant: str, sha: str) -> str:
    """A stored review note by its hash ('' if erased or never written)."""
    entry = _subjects(Path(archive)).get(participant, {})
    return str(entry.get("notes", {}).get(sha, ""))
