"""Fingerprints: a digest of everything a participant's booklet depends on, so an unchanged
participant is copied from the last build instead of built again."""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import pandas as pd

from springback import __version__
from springback.model import ParticipantData
from springback.settings import StudySettings, normalised


def frame_digest(df: pd.DataFrame) -> bytes:
    """A digest of a frame's columns, types and values (for a participant's fingerprint).

    pandas' row hashes (`hash_pandas_object`, 64 bits a row) under SHA-256, with the column
    names and types: about 12 times faster than hashing the frame's CSV text, which at 2000
    participants made fingerprinting the longest part of a rebuild. A pandas release that
    hashed differently would only rebuild every booklet once.
    """
    h = hashlib.sha256()
    h.update(json.dumps([[str(c), str(t)] for c, t in df.dtypes.items()]).encode("utf-8"))
    h.update(pd.util.hash_pandas_object(df, index=False).to_numpy().tobytes())
    return h.digest()


BOOKLET_NEUTRAL_SETTINGS = ("delivery", "archive", "output", "review")
"""Settings sections that cannot change a booklet's content: editing them keeps its version."""


def settings_hash(settings: StudySettings) -> str:
    """SHA-256 of the settings a booklet depends on (normalised, key-sorted)."""
    plain = normalised(settings)
    for key in BOOKLET_NEUTRAL_SETTINGS:
        plain.pop(key, None)
    text = json.dumps(plain, sort_keys=True, ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def templates_hash(files: Iterable[Path]) -> str:
    h = hashlib.sha256()
    for f in sorted(files, key=lambda p: (p.name, str(p))):
        h.update(f.name.encode() + b"\0" + f.read_bytes() + b"\0")
    return h.hexdigest()


def fingerprint(
    data: ParticipantData, settings_digest: str, templates_digest: str, period_end: Any = None
) -> str:
    """SHA-256 over one participant's data slice, the settings, the templates, the tool and
    the study's end (silence rules look back from it)."""
    h = hashlib.sha256()
    for part in (data.momentary, data.events, data.questionnaires):
        h.update(frame_digest(part))
    roster = f"{data.participant}|{data.language}|{data.region}|{data.consent}|"
    roster += f"{data.feedback}|{data.therapist}"
    for text in (roster, settings_digest, templates_digest, __version__, str(period_end)):
        h.update(text.encode("utf-8") + b"\0")
    return h.hexdigest()


def catalogue_files() -> list[Path]:
    """The compiled message catalogues: a changed translation changes the booklets too."""
    from springback.i18n.language import LOCALE_DIR

    return sorted(Path(LOCALE_DIR).rglob("*.mo"))


def template_files(project: Path) -> list[Path]:
    """Every template file that can be used: packaged ones and the project's overrides."""
    from springback.render.env import template_search_path

    files: list[Path] = []
    for folder in template_search_path(project / "templates"):
        files += [p for p in sorted(folder.rglob("*")) if p.is_file()]
    return files
