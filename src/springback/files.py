"""Safe file writing: atomic files and folders, content hashes, and the project's build lock.

Public functions (used by build.py, archive.py, review.py):

    project_dirs(project: Path) -> ProjectDirs                 # out/ and archive/ of a project
    sha256_bytes(data: bytes) -> str ; sha256_file(path: Path) -> str
    atomic_write_bytes(path: Path, data: bytes) -> None         # temp file + fsync + os.replace
    atomic_write_text(path: Path, text: str) -> None
    write_json(path: Path, obj: object) -> None                # sorted keys, atomic
    staging_dir(target: Path) -> ContextManager[Path]          # temp sibling, swapped in on success
    replace_dir(staging: Path, target: Path) -> None           # swap a finished folder into place
    clean_stale(parent: Path) -> list[Path]                    # remove leftovers of killed writes
    file_lock(path: Path, wait_seconds: float, what: str) -> ContextManager[None]
    BuildLock(project_or_archive: Path, wait_seconds: float = 0.0)  # one build at a time

A folder is written as a hidden sibling `.<name>.partial-<pid>` and renamed into place only when
complete, so a killed build leaves at most a hidden partial folder, never a half-written `out/`.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import os
import shutil
import socket
import time
import tomllib
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING

from springback.errors import BuildLocked

if TYPE_CHECKING:
    import pandas as pd

PARTIAL = ".partial-"
"""Marker in the name of a folder or file that is still being written."""
OLD = ".old-"
"""Marker in the name of a folder that is being replaced."""
LOCK_FILE = ".springback.lock"


@dataclass(frozen=True)
class ProjectDirs:
    """Where a project's working output and audit archive live."""

    root: Path
    out: Path
    archive: Path


def project_dirs(project: Path) -> ProjectDirs:
    """Find out/ and archive/ from `[output]` in study.toml without validating the rest."""
    root = Path(project).resolve()
    out, archive = Path("out"), Path("archive")
    with contextlib.suppress(OSError, tomllib.TOMLDecodeError, UnicodeDecodeError):
        raw = tomllib.loads((root / "study.toml").read_text(encoding="utf-8-sig"))
        section = raw.get("output", {})
        if isinstance(section, dict):
            out = Path(str(section.get("out_dir", out)))
            archive = Path(str(section.get("archive_dir", archive)))
    return ProjectDirs(root, root / out, root / archive)


def sha256_bytes(data: bytes) -> str:
    """Hex SHA-256 of bytes."""
    return hashlib.sha256(data).hexdigest()


def sha256_file(path: Path) -> str:
    """Hex SHA-256 of a file's content, read in blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _fsync_dir(folder: Path) -> None:
    # Make the rename itself durable; not possible on every platform, and not needed there.
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


PRIVATE_FILE = 0o600
"""Mode of files only the study team's account may read (archived inputs, the key store)."""
PRIVATE_FOLDER = 0o700


def make_private(path: Path) -> None:
    """Let only the owner read `path` (a file, or a folder and everything in it)."""
    path = Path(path)
    if path.is_dir():
        path.chmod(PRIVATE_FOLDER)
        for inner in path.rglob("*"):
            inner.chmod(PRIVATE_FOLDER if inner.is_dir() else PRIVATE_FILE)
    else:
        path.chmod(PRIVATE_FILE)


def atomic_write_bytes(path: Path, data: bytes, *, private: bool = False) -> None:
    """Write bytes to a temporary file beside `path`, flush it to disk, then rename over it.

    With `private` the file is created readable by its owner only (never briefly wider).
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}{PARTIAL}{os.getpid()}")
    try:
        flags = os.O_WRONLY | os.O_CREAT | os.O_TRUNC | getattr(os, "O_BINARY", 0)
        fd = os.open(tmp, flags, PRIVATE_FILE if private else 0o666)
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
    _fsync_dir(path.parent)


def atomic_write_text(path: Path, text: str) -> None:
    """Write UTF-8 text atomically (newlines kept as given)."""
    atomic_write_bytes(path, text.encode("utf-8"))


def json_bytes(obj: object) -> bytes:
    """Serialise to stable JSON: sorted keys, two-space indent, trailing newline."""
    text = json.dumps(obj, sort_keys=True, indent=2, ensure_ascii=False, default=str)
    return (text + "\n").encode("utf-8")


def write_json(path: Path, obj: object) -> None:
    """Write an object as stable JSON, atomically."""
    atomic_write_bytes(path, json_bytes(obj))


@contextlib.contextmanager
def staging_dir(target: Path) -> Iterator[Path]:
    """Yield an empty hidden sibling of `target`; on success it replaces `target`.

    On an exception the partial folder is removed and `target` is left as it was.
    """
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    staging = target.with_name(f".{target.name}{PARTIAL}{os.getpid()}")
    if staging.exists():
        shutil.rmtree(staging)
    staging.mkdir()
    try:
        yield staging
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    replace_dir(staging, target)


def replace_dir(staging: Path, target: Path) -> None:
    """Swap a finished folder into place: old target aside, new one renamed in, old removed."""
    staging, target = Path(staging), Path(target)
    _fsync_dir(staging)
    old = target.with_name(f".{target.name}{OLD}{os.getpid()}")
    if old.exists():
        shutil.rmtree(old)
    if target.exists():
        os.replace(target, old)
    os.replace(staging, target)
    _fsync_dir(target.parent)
    shutil.rmtree(old, ignore_errors=True)


def clean_stale(parent: Path) -> list[Path]:
    """Remove partial files and folders left behind by killed writes in `parent`.

    If a swap was interrupted after the old folder was moved aside and before the new one came
    in, the old folder is put back: a complete older output beats none.
    """
    parent = Path(parent)
    removed: list[Path] = []
    if not parent.is_dir():
        return removed
    for entry in sorted(parent.iterdir()):
        name = entry.name
        if not name.startswith("."):
            continue
        if OLD in name:
            original = parent / name[1:].split(OLD)[0]
            if not original.exists():
                os.replace(entry, original)
                continue
        elif PARTIAL not in name:
            continue
        if entry.is_dir() and not entry.is_symlink():
            shutil.rmtree(entry, ignore_errors=True)
        else:
            entry.unlink(missing_ok=True)
        removed.append(entry)
    return removed


def _try_lock(fd: int) -> bool:
    try:
        import fcntl
    except ImportError:  # Windows: lock the first byte instead
        import msvcrt

        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)  # type: ignore[attr-defined]
        except OSError:
            return False
        return True
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        return False
    return True


def _unlock(fd: int) -> None:
    try:
        import fcntl
    except ImportError:
        import msvcrt

        with contextlib.suppress(OSError):
            msvcrt.locking(fd, msvcrt.LK_UNLCK, 1)  # type: ignore[attr-defined]
        return
    fcntl.flock(fd, fcntl.LOCK_UN)


@contextlib.contextmanager
def file_lock(path: Path, wait_seconds: float = 0.0, what: str = "a build") -> Iterator[None]:
    """Hold an exclusive OS lock on `path`; wait up to `wait_seconds`, then raise BuildLocked.

    The operating system releases the lock when the holder dies, so a killed build never
    leaves a stale lock behind.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        deadline = time.monotonic() + max(wait_seconds, 0.0)
        while not _try_lock(fd):
            if time.monotonic() >= deadline:
                holder = os.pread(fd, 400, 0).decode("utf-8", "replace").strip()
                raise BuildLocked(
                    f"{what} of this project is already running ({holder or 'holder unknown'}); "
                    "wait for it to finish, then run the command again (the lock ends by itself "
                    "when that process ends, also if it was stopped)"
                )
            time.sleep(0.1)
        stamp = datetime.now(UTC).strftime("%Y-%m-%d %H:%M:%S UTC")
        note = f"process {os.getpid()} on {socket.gethostname()} since {stamp}"
        os.ftruncate(fd, 0)
        os.pwrite(fd, note.encode("utf-8"), 0)
        try:
            yield
        finally:
            os.ftruncate(fd, 0)
            _unlock(fd)
    finally:
        os.close(fd)


class BuildLock:
    """Only one build (or release, or erasure) of a project at a time.

    The lock file is `archive/.springback.lock`. Use as ``with BuildLock(project):``; raises
    `BuildLocked` with the holder's process id and start time when another one runs past the
    wait.
    """

    def __init__(self, project: Path, wait_seconds: float = 0.0) -> None:
        # Accept the project folder or its archive folder: both lock the same file.
        place = Path(project).resolve()
        if (place / "study.toml").is_file():
            place = project_dirs(place).archive
        self.path = place / LOCK_FILE
        self.wait_seconds = wait_seconds
        self._cm: contextlib.AbstractContextManager[None] | None = None

    def __enter__(self) -> BuildLock:
        self._cm = file_lock(self.path, self.wait_seconds, "another springback build")
        self._cm.__enter__()
        return self

    def __exit__(self, *exc: object) -> None:
        assert self._cm is not None
        self._cm.__exit__(*exc)  # type: ignore[arg-type]
        self._cm = None


# -- Study tables as CSV -------------------------------------------------------------------

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
"""A text cell starting with one of these is read as a formula by spreadsheet programs."""


def spreadsheet_safe(value: object) -> object:
    """A text cell that a spreadsheet would run as a formula, quoted with a leading apostrophe.

    The OWASP "CSV Injection" guidance: prefix such cells with a single quote; numbers (also
    negative ones written as text) are left as they are.
    """
    if not isinstance(value, str) or not value.startswith(FORMULA_STARTS):
        return value
    try:
        float(value)
    except ValueError:
        return "'" + value
    return value


def csv_bytes(df: pd.DataFrame, date_format: str | None = None) -> bytes:
    """A frame as CSV bytes (UTF-8, LF, no index); text cells that would run as spreadsheet
    formulas are quoted (`spreadsheet_safe`)."""
    import pandas as pd

    text = [c for c in df.columns
            if df[c].dtype == object or pd.api.types.is_string_dtype(df[c].dtype)]
    if text:
        df = df.assign(**{str(c): df[c].map(spreadsheet_safe) for c in text})
    buf = io.StringIO()
    df.to_csv(buf, index=False, lineterminator="\n", date_format=date_format)
    return buf.getvalue().encode("utf-8")
