"""Contact details stay out of the archive: the roster's copy without e-mail, phone or address.

Public functions:

    contact_columns(names: Iterable[str]) -> list[str]   # which column names hold contact data
    roster_columns(path: Path) -> list[str]              # a roster file's column names
    strip_contacts(path: Path) -> StrippedRoster         # the copy to archive, and what went
    contact_problems(project: Path, settings: StudySettings) -> list[Problem]   # for `check`

springback never uses contact columns (e-mail addresses come from the delivery's contacts file,
kept outside data/), so an archived roster loses them unless `archive.keep_contacts = true`.
A text roster (CSV, TSV) is copied cell for cell without those columns, in its own encoding
and delimiter; a roster in another format (XLSX, Parquet, SAV) with contact columns is archived
as its hash only, so the archive never holds what it cannot strip.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

from springback.errors import Problem, SpringbackError, warning
from springback.model import ROSTER_COLUMNS
from springback.settings import StudySettings

TEXT_SUFFIXES = (".csv", ".tsv", ".txt")
_PARTS = ("email", "mail", "phone", "mobile", "address", "street", "postcode", "postalcode",
          "zipcode", "whatsapp", "firstname", "lastname", "surname", "fullname", "givenname",
          "familyname", "birth")
_WORDS = {"tel", "gsm", "cell", "sms", "zip", "name", "city", "dob", "contact", "skype"}


def contact_columns(names: Iterable[str]) -> list[str]:
    """Column names that hold contact data (e-mail, phone, address, personal names)."""
    found = []
    for name in names:
        if str(name).strip().lower() in ROSTER_COLUMNS:
            continue
        lowered = str(name).lower()
        joined = re.sub(r"[^a-z0-9]", "", lowered)
        words = set(re.split(r"[^a-z0-9]+", lowered))
        if any(part in joined for part in _PARTS) or words & _WORDS:
            found.append(str(name))
    return found


@dataclass(frozen=True)
class StrippedRoster:
    """What to archive for a roster: `data` (None: archive only the hash) and what was left out."""

    data: bytes | None
    dropped: tuple[str, ...]


def _decode(raw: bytes) -> tuple[str, str]:
    for bom, encoding in ((b"\xef\xbb\xbf", "utf-8-sig"), (b"\xff\xfe", "utf-16"),
                          (b"\xfe\xff", "utf-16")):
        if raw.startswith(bom):
            return raw.decode(encoding), encoding
    try:
        return raw.decode("utf-8"), "utf-8"
    except UnicodeDecodeError:
        return raw.decode("latin-1"), "latin-1"


def _delimiter(header: str) -> str:
    counts = {d: len(next(csv.reader([header], delimiter=d), [])) for d in (",", ";", "\t", "|")}
    return max(counts, key=lambda d: (counts[d], d == ","))


def roster_columns(path: Path) -> list[str]:
    """The roster's column names (any format springback reads)."""
    if Path(path).suffix.lower() in TEXT_SUFFIXES:
        text, _ = _decode(Path(path).read_bytes())
        header = text.splitlines()[0] if text else ""
        return [c.strip() for c in next(csv.reader([header], delimiter=_delimiter(header)), [])]
    from springback.intake.readers import read_table

    return [str(c) for c in read_table(Path(path), Path(path).name).frame.columns]


def strip_contacts(path: Path) -> StrippedRoster:
    """The roster's archive copy without its contact columns (all bytes when it has none)."""
    raw = Path(path).read_bytes()
    if Path(path).suffix.lower() not in TEXT_SUFFIXES:
        dropped = tuple(contact_columns(roster_columns(path)))
        return StrippedRoster(None if dropped else raw, dropped)
    text, encoding = _decode(raw)
    header = text.splitlines()[0] if text else ""
    delimiter = _delimiter(header)
    rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter))
    if not rows:
        return StrippedRoster(raw, ())
    dropped = tuple(contact_columns(c.strip() for c in rows[0]))
    if not dropped:
        return StrippedRoster(raw, ())
    keep = [i for i, c in enumerate(rows[0]) if c.strip() not in dropped]
    out = io.StringIO(newline="")
    writer = csv.writer(out, delimiter=delimiter,
                        lineterminator="\r\n" if "\r\n" in text[:65536] else "\n")
    for row in rows:
        writer.writerow([row[i] for i in keep if i < len(row)])
    return StrippedRoster(out.getvalue().encode(encoding), dropped)


def contact_problems(project: Path, settings: StudySettings) -> list[Problem]:
    """A warning naming the roster's contact columns and what the archive does with them."""
    relative = Path(settings.data.participants)
    path = relative if relative.is_absolute() else Path(project) / relative
    try:
        found = contact_columns(roster_columns(path)) if path.is_file() else []
    except (OSError, ValueError, SpringbackError):
        return []  # the roster's own checks name what is wrong with the file
    if not found:
        return []
    names = ", ".join(f"'{c}'" for c in found)
    where = f"{relative.as_posix()}: columns {names}"
    if settings.archive.keep_contacts:
        return [warning(where, "these columns hold contact data, and archive.keep_contacts = "
                        "true keeps them in every archived copy of the roster",
                        fix="keep contact details in the delivery's contacts file instead, and "
                        "set archive.keep_contacts = false", code="contact-columns")]
    how = ("copied without them" if path.suffix.lower() in TEXT_SUFFIXES
           else "kept as its hash only (springback copies only text rosters without columns)")
    return [warning(where, "these columns hold contact data; springback does not use them, and "
                    f"the archived copy of the roster is {how}",
                    fix="move contact details to the delivery's contacts file (outside data/), "
                    "or set archive.keep_contacts = true if the study must archive them",
                    code="contact-columns")]
