"""Private files of sending: the contacts file and the passphrases, kept away from outputs.

Public functions:

    check_private_place(project, settings, path, what) -> Path   # refuses data/, out/, archive/
    read_contacts(project: Path, settings) -> dict[str, Contact]
    read_passphrases(path: Path, where: str) -> dict[str, str]
    passphrases(project, settings, participants, out_file: Path | None)
        -> tuple[dict[str, str], tuple[str, ...], Path | None]   # + ids given a new one, file

Addresses and passphrases are read into memory and never written into the project's data/,
out/ or archive/ folders; a file named for them inside one of those is refused, because
inputs are copied into the archive and outputs are handed out. Generated passphrases are
written only to the file the team names, readable by its owner alone.
"""

from __future__ import annotations

import csv
import io
import os
import re
from dataclasses import dataclass
from pathlib import Path

from springback.delivery import mail
from springback.errors import DataError, DeliveryError, Problem, error
from springback.files import project_dirs
from springback.settings import StudySettings

EMAIL = re.compile(r"^[A-Za-z0-9.!#$%&'*+/=?^_`{|}~-]+@[A-Za-z0-9-]+(\.[A-Za-z0-9-]+)+$")
"""A plain ASCII address (no display name); international addresses are not supported."""


@dataclass(frozen=True)
class Contact:
    """Where one participant's booklet, and a therapist copy, may go."""

    participant: str
    email: str
    therapist_email: str = ""



def full_path(project: Path, path: Path) -> Path:
    path = Path(path).expanduser()
    return (path if path.is_absolute() else Path(project) / path).resolve()


def _guarded(project: Path, settings: StudySettings) -> list[tuple[Path, str]]:
    """Folders whose files end up in outputs or the archive (or travel with the data)."""
    dirs = project_dirs(project)
    places = [(dirs.out, "out/"), (dirs.archive, "archive/"), (dirs.root / "data", "data/")]
    for path in (settings.data.momentary, settings.data.participants, settings.data.events,
                 settings.data.questionnaires):
        parent = full_path(project, path).parent if path is not None else dirs.root
        if parent != dirs.root:
            places.append((parent, "the data folder"))
    return places


def check_private_place(project: Path, settings: StudySettings, path: Path, what: str) -> Path:
    """Refuse a path for private files (addresses, passphrases) inside data/, out/ or archive/."""
    full = full_path(project, path)
    for folder, name in _guarded(project, settings):
        if full == folder or full.is_relative_to(folder.resolve()):
            raise DeliveryError(f"{what} ({full}) lies inside {name}; files there are copied "
                                "into outputs or the audit archive. Keep it in a folder of its "
                                "own outside data/, out/ and archive/")
    return full


def _read_csv(path: Path, where: str, columns: tuple[str, ...]) -> list[tuple[int, dict]]:
    if not path.is_file():
        raise DeliveryError(f"{where}: the file {path} does not exist")
    text = path.read_text(encoding="utf-8-sig")
    first = text.split("\n", 1)[0]
    delimiter = max(",;\t", key=first.count)
    reader = csv.DictReader(io.StringIO(text, newline=""), delimiter=delimiter)
    header = [h.strip() for h in reader.fieldnames or []]
    missing = [c for c in columns if c not in header]
    if missing:
        raise DataError([error(where, f"column '{missing[0]}' is missing",
                               expected="columns " + ", ".join(columns),
                               found="columns " + ", ".join(header) if header else "no header",
                               fix="add a header row naming the columns", code="missing-column")])
    reader.fieldnames = header
    return [(i, {k: (v or "").strip() for k, v in row.items() if k})
            for i, row in enumerate(reader, start=2)]


def read_contacts(project: Path, settings: StudySettings) -> dict[str, Contact]:
    """Read participant,email[,therapist_email] from the contacts file kept outside the data."""
    if settings.delivery.contacts_file is None:
        raise DeliveryError("study.toml: delivery.contacts_file is not set; name a CSV file with "
                            "the columns participant,email[,therapist_email], kept outside "
                            "data/, out/ and archive/")
    path = check_private_place(project, settings, settings.delivery.contacts_file,
                               "the contacts file")
    where = f"contacts file {path.name}"
    problems: list[Problem] = []
    out: dict[str, Contact] = {}
    for row, cells in _read_csv(path, where, ("participant", "email")):
        pid = cells.get("participant", "")
        if not pid:
            problems.append(error(where, "the participant id is missing", row=row,
                                  column="participant", code="missing-participant"))
            continue
        if pid in out:
            problems.append(error(where, f"participant '{pid}' is listed more than once",
                                  row=row, column="participant", fix="keep one row per person",
                                  code="duplicate-participant"))
            continue
        for column in ("email", "therapist_email"):
            value = cells.get(column, "")
            if value and not EMAIL.fullmatch(value):
                # The cell is not echoed: messages may end up in logs.
                problems.append(error(where, "this is not a plain e-mail address", row=row,
                                      column=column, expected="one address like name@domain.org",
                                      code="bad-address"))
        out[pid] = Contact(pid, cells.get("email", ""), cells.get("therapist_email", ""))
    if problems:
        raise DataError(problems)
    return out


def read_passphrases(path: Path, where: str) -> dict[str, str]:
    """Read participant,passphrase; every passphrase must be able to protect a PDF."""
    problems: list[Problem] = []
    out: dict[str, str] = {}
    for row, cells in _read_csv(path, where, ("participant", "passphrase")):
        pid, phrase = cells.get("participant", ""), cells.get("passphrase", "")
        why = "the participant id is missing" if not pid else (
            f"participant '{pid}' is listed more than once" if pid in out else
            mail.check_passphrase(phrase) and f"the passphrase cannot be used: "
            f"{mail.check_passphrase(phrase)}")
        if why:
            problems.append(error(where, why, row=row, code="bad-passphrase"))
            continue
        out[pid] = phrase
    if problems:
        raise DataError(problems)
    return out


def write_private(path: Path, data: bytes) -> None:
    """Write a file only its owner can read (passphrases, messages with addresses), atomically."""
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.partial-{os.getpid()}")
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)


def passphrases(project: Path, settings: StudySettings, participants: list[str],
                out_file: Path | None) -> tuple[dict[str, str], tuple[str, ...], Path | None]:
    """The team's passphrases, or generated ones kept in `out_file` (reused on later runs)."""
    team_file = settings.delivery.passphrases_file
    if team_file is not None:
        if out_file is not None:
            raise DeliveryError("study.toml names the team's passphrases file "
                                "(delivery.passphrases_file); leave out --passphrases-out")
        path = check_private_place(project, settings, team_file, "the passphrases file")
        return read_passphrases(path, f"passphrases file {path.name}"), (), None
    if out_file is None:
        raise DeliveryError("protected PDFs need passphrases: set delivery.passphrases_file to "
                            "the team's CSV file (participant,passphrase), or pass "
                            "--passphrases-out FILE to have new ones made and written there")
    path = check_private_place(project, settings, out_file, "the passphrases file")
    known = read_passphrases(path, f"passphrases file {path.name}") if path.exists() else {}
    new = tuple(p for p in sorted(set(participants)) if p not in known)
    if new:
        known.update({p: mail.new_passphrase() for p in new})
        buf = io.StringIO()
        writer = csv.writer(buf, lineterminator="\n")
        writer.writerow(("participant", "passphrase"))
        writer.writerows(sorted(known.items()))
        write_private(path, buf.getvalue().encode("utf-8"))
    return known, new, path
