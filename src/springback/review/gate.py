"""The review-and-release gate: held booklets wait for a named reviewer; release copies the rest.

Public functions:

    review_state(project: Path, participant: str, fingerprint: str, flags: list[Flag])
        -> 'not needed' | 'held' | 'approved' | 'rejected'
    review_decisions(archive: Path) -> dict[(participant, fingerprint), Decision]  # one read
    decided_state(flags, decision: str) -> str       # the state from a decision already read
    manifest_flags(participant: str, record: dict) -> list[Flag]   # a manifest record's flags
    list_held(project: Path) -> list[HeldBooklet]    # latest build's booklets with a hold
    approve(project: Path, participant: str, by: str, note: str = "") -> dict   # the log entry
    reject(project: Path, participant: str, by: str, note: str = "") -> dict
    release(project: Path, by: str = "") -> ReleaseReport  # rewrites out/release/ atomically
    current_roster(project: Path, settings=None) -> dict[str, dict]  # the roster as it is now

Decisions live only in the audit log (`review` entries), keyed by the participant's log token
and the booklet fingerprint, so a booklet whose data, settings, templates or tool version
changed after approval is held again. Release copies from the archived copy of the latest build
(hash-checked), never from the working out/ folder, and reads only a manifest whose hash the
audit log recorded for that build; withdrawn participants (in the manifest or in the roster as
it is now), those who want no feedback, and held or rejected booklets are never copied.
"""

from __future__ import annotations

import csv
import getpass
import io
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from springback.archive.audit import append, known_subjects, read_entries, save_note, subject
from springback.archive.manifest import trusted_manifest
from springback.errors import ArchiveError, DataError, Problem, ReviewError
from springback.files import BuildLock, atomic_write_bytes, project_dirs, sha256_file, staging_dir
from springback.model import Flag

NOT_NEEDED, HELD, APPROVED, REJECTED = "not needed", "held", "approved", "rejected"
DISPATCH_COLUMNS = ("participant", "files", "version", "approved_by")


@dataclass(frozen=True)
class Decision:
    """The latest review decision for one booklet version."""

    state: str
    by: str = ""
    time: str = ""
    note: str = ""


@dataclass(frozen=True)
class HeldBooklet:
    """A booklet of the latest build that a hold rule stopped, with its reasons and state."""

    participant: str
    build: str
    version: str
    fingerprint: str
    state: str
    reasons: tuple[str, ...]
    decided_by: str = ""
    decided_at: str = ""
    note: str = ""


@dataclass(frozen=True)
class ReleaseReport:
    """What `release` copied and what it left out (participant -> reason)."""

    build: str
    folder: Path
    released: tuple[str, ...]
    withheld: tuple[tuple[str, str], ...]


def manifest_flags(participant: str, record: dict[str, Any]) -> list[Flag]:
    """The flags of a manifest's participant record (rows of `Flag.to_row`)."""
    return [Flag.from_row(row, participant) for row in record.get("flags", [])]


def _has_hold(flags: Iterable[Flag]) -> bool:
    return any(f.action == "hold" for f in flags)


def review_decisions(archive: Path) -> dict[tuple[str, str], Decision]:
    """The latest decision on every reviewed booklet version, by (participant, fingerprint),
    from one read of the key store and of the log; a damaged log approves nothing."""
    known = known_subjects(archive)
    if not known:
        return {}
    try:
        entries = read_entries(archive)
    except ArchiveError:
        return {}
    by_token = {token: pid for pid, (token, _notes) in known.items()}
    found: dict[tuple[str, str], Decision] = {}
    for e in entries:
        pid = by_token.get(str(e.get("subject"))) if e.get("kind") == "review" else None
        if pid is None:
            continue
        state = APPROVED if e.get("decision") == "approve" else REJECTED
        note = known[pid][1].get(str(e.get("note_sha256", "")), "")
        found[(pid, str(e.get("fingerprint")))] = Decision(
            state, str(e.get("by", "")), str(e.get("time", "")), note)
    return found


def _decision(archive: Path, participant: str, fingerprint: str) -> Decision:
    return review_decisions(archive).get((participant, fingerprint), Decision(HELD))


def decided_state(flags: Iterable[Flag], decision: str) -> str:
    """The booklet's review state from its flags and the decision on its version
    ('held' when undecided): 'not needed' without a hold flag."""
    return decision if _has_hold(flags) else NOT_NEEDED


def review_state(project: Path, participant: str, fingerprint: str,
                 flags: Iterable[Flag]) -> str:
    """The booklet's review state: decided by the latest decision for exactly this version."""
    if not _has_hold(flags):
        return NOT_NEEDED
    return _decision(project_dirs(project).archive, participant, fingerprint).state


def _current(project: Path) -> dict[str, Any]:
    manifest = trusted_manifest(project)
    if manifest is None:
        raise ReviewError("nothing has been built yet; run `springback build` first")
    return manifest


def _reasons(flags: list[Flag]) -> tuple[str, ...]:
    return tuple(f"{f.rule}: {f.detail}" for f in flags if f.action == "hold")


def list_held(project: Path) -> list[HeldBooklet]:
    """Every booklet of the latest build that a hold rule stopped, with its current state."""
    manifest = _current(project)
    decisions = review_decisions(project_dirs(project).archive)
    out = []
    for pid, rec in sorted(manifest.get("participants", {}).items()):
        flags = manifest_flags(pid, rec)
        if not _has_hold(flags) or not rec.get("files"):
            continue
        fp = str(rec.get("fingerprint", ""))
        d = decisions.get((pid, fp), Decision(HELD))
        out.append(HeldBooklet(pid, str(manifest["build"]), str(rec.get("version", "")), fp,
                               d.state, _reasons(flags), d.by, d.time, d.note))
    return out


def _decide(project: Path, participant: str, by: str, note: str, decision: str) -> dict[str, Any]:
    if not by.strip():
        raise ReviewError("say who decides: pass --by with the reviewer's name")
    manifest = _current(project)
    build = str(manifest["build"])
    rec = manifest.get("participants", {}).get(participant)
    if rec is None:
        raise ReviewError(f"participant '{participant}' is not in the latest build ({build}); "
                          "check the id, or build first")
    if not _has_hold(manifest_flags(participant, rec)):
        raise ReviewError(f"the booklet of '{participant}' in build {build} is not held (no "
                          "hold rule matched); there is nothing to review")
    if not rec.get("files"):
        raise ReviewError(f"no booklet was made for '{participant}' in build {build} "
                          f"({rec.get('status', 'no files')}); there is nothing to review")
    archive = project_dirs(project).archive
    token = subject(archive, participant, create=True)
    fields = {"decision": decision, "subject": token, "fingerprint": rec.get("fingerprint", ""),
              "version": rec.get("version", ""), "build": build, "by": by.strip()}
    if note:
        fields["note_sha256"] = save_note(archive, participant, note)
    return append(archive, "review", fields)


def approve(project: Path, participant: str, by: str, note: str = "") -> dict[str, Any]:
    """Approve the held booklet of the latest build for release; return the log entry."""
    return _decide(project, participant, by, note, "approve")


def reject(project: Path, participant: str, by: str, note: str = "") -> dict[str, Any]:
    """Reject the held booklet of the latest build (it stays unreleased); return the log entry."""
    return _decide(project, participant, by, note, "reject")


def release_gate(archive: Path, pid: str, rec: dict[str, Any]) -> tuple[str, str]:
    """('', approver) when a manifest record's booklet may be released, else (reason, '')."""
    if rec.get("consent") != "yes":
        return ("consent withdrawn", "")
    if rec.get("feedback") is not True:
        return ("no feedback wanted", "")
    if rec.get("status", "built") not in ("built", "unchanged") or not rec.get("files"):
        return (f"no booklet ({rec.get('status', 'no files')})", "")
    if not _has_hold(manifest_flags(pid, rec)):
        return ("", "")
    d = _decision(archive, pid, str(rec.get("fingerprint", "")))
    if d.state == APPROVED:
        return ("", d.by)
    if d.state == REJECTED:
        return (f"rejected by {d.by}", "")
    return ("held for review", "")


def current_roster(project: Path, settings: Any = None) -> dict[str, dict[str, Any]]:
    """The roster file as it is now: id -> its row (consent, feedback, therapist, language)."""
    from springback.intake.readers import read_table
    from springback.intake.roster import read_roster
    from springback.settings import load_settings

    root = project_dirs(project).root
    settings = settings if settings is not None else load_settings(root)[0]
    path = Path(settings.data.participants).expanduser()
    table = read_table((path if path.is_absolute() else root / path).resolve(),
                       settings.data.participants.as_posix())
    problems: list[Problem] = []
    frame = read_roster(table, settings, problems)
    if frame is None or any(p.is_error for p in problems):
        raise DataError(problems)
    return {str(r["participant"]): {str(k): v for k, v in r.items()}
            for r in frame.to_dict("records")}


def roster_gate(row: dict[str, Any] | None) -> str:
    """'' when the roster as it is now still lets a booklet out, else the reason."""
    if row is None:
        return "no longer in the roster"
    if row.get("consent") != "yes":
        return "consent withdrawn"
    if not row.get("feedback"):
        return "no feedback wanted"
    return ""


def _names(files: list[str]) -> dict[str, str]:
    """Archived output path -> name inside release/<participant>/ (base names when unique)."""
    bases = [Path(f).name for f in files]
    unique = len(set(bases)) == len(bases)
    return {f: (Path(f).name if unique else f.replace("/", "_")) for f in files}


def release(project: Path, by: str = "") -> ReleaseReport:
    """Copy releasable booklets of the latest build into out/release/ with a dispatch sheet."""
    dirs = project_dirs(project)
    by = by.strip() or getpass.getuser()
    with BuildLock(project):
        manifest = _current(project)
        roster = current_roster(dirs.root)
        build = str(manifest["build"])
        source = dirs.archive / build / "out"
        hashes = manifest.get("files", {})
        released: list[str] = []
        withheld: list[tuple[str, str]] = []
        rows: list[dict[str, str]] = []
        with staging_dir(dirs.out / "release") as staging:
            for pid, rec in sorted(manifest.get("participants", {}).items()):
                reason, approver = release_gate(dirs.archive, pid, rec)
                reason = roster_gate(roster.get(pid)) or reason
                if reason:
                    withheld.append((pid, reason))
                    continue
                names = _names(list(rec["files"]))
                for rel, name in names.items():
                    path = source / rel
                    if not path.is_file() or sha256_file(path) != hashes.get(f"out/{rel}"):
                        raise ArchiveError(f"the archived copy of {rel} in build {build} is "
                                           "missing or changed; nothing was released. Run "
                                           "`springback verify`")
                    atomic_write_bytes(staging / pid / name, path.read_bytes())
                rows.append({"participant": pid, "files": ";".join(sorted(names.values())),
                             "version": str(rec.get("version", "")), "approved_by": approver})
                released.append(pid)
            buf = io.StringIO()
            writer = csv.DictWriter(buf, fieldnames=DISPATCH_COLUMNS, lineterminator="\n")
            writer.writeheader()
            writer.writerows(rows)
            atomic_write_bytes(staging / "dispatch.csv", buf.getvalue().encode("utf-8"))
        tokens = sorted(str(subject(dirs.archive, p, create=True)) for p in released)
        append(dirs.archive, "release", {"build": build, "by": by, "released": tokens,
                                         "withheld": len(withheld)})
    return ReleaseReport(build, dirs.out / "release", tuple(released), tuple(withheld))
