"""A build's files on disk as they arrive: staging, reuse of the last build, and archiving.

The parent process never holds every participant's booklets at once: each outcome's files are
written into the build's staging folder (see `fsutil.staging_dir`) when the outcome arrives and
dropped from memory; an unchanged participant's files are copied from the last archived build
file by file. `archive_staged` then records the staged folder as an archived build.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from springback.files import csv_bytes

if TYPE_CHECKING:
    from springback.build.records import ParticipantOutcome
    from springback.model import Study

OUT_MARKER = ".springback-out"
"""A file springback writes into every output folder it makes; only such a folder is replaced."""

MARKER_TEXT = ("This folder was made by springback. Each build replaces it whole, so keep "
               "nothing else in it.\n")

STUDY_TABLES = ("metrics.csv", "findings.csv", "flags.csv", "shifts.csv", "quality.csv",
                "set_aside.csv")
"""The study-wide tables of out/, in the order `study_tables` makes them."""

# Entries of an output folder made before the marker existed; such a folder is still ours.
_OWN_ENTRIES = {"booklets", "index.html", "release", "preview", "actions.csv", "study",
                *STUDY_TABLES}


def check_out_dir(project: Path, out_dir: Path, archive_dir: Path) -> None:
    """Refuse an output folder whose replacement would delete files springback did not make."""
    from springback.errors import OutputFolderError

    project, out_dir = Path(project).resolve(), Path(out_dir).resolve()
    archive_dir = Path(archive_dir).resolve()
    fix = ("choose a new or empty folder for --out (or out_dir under [output] in study.toml), "
           "such as the default 'out' inside the project")
    if project.is_relative_to(out_dir):
        what = "is the project folder" if out_dir == project else "contains the project folder"
        raise OutputFolderError(f"output folder {out_dir} {what}; a build replaces its output "
                                f"folder whole, which would delete study.toml, data/ and the "
                                f"archive. Fix: {fix}")
    if out_dir.is_relative_to(archive_dir) or archive_dir.is_relative_to(out_dir):
        raise OutputFolderError(f"output folder {out_dir} overlaps the archive folder "
                                f"{archive_dir}; replacing it would damage the audit archive. "
                                f"Fix: {fix}")
    for name in ("data", "templates"):
        if out_dir.is_relative_to(project / name):
            raise OutputFolderError(f"output folder {out_dir} is inside the project's {name}/ "
                                    f"folder, which holds the study's inputs. Fix: {fix}")
    if not out_dir.exists():
        return
    if not out_dir.is_dir():
        raise OutputFolderError(f"output folder {out_dir} is a file, not a folder. Fix: {fix}")
    entries = {entry.name for entry in out_dir.iterdir()}
    visible = {name for name in entries if not name.startswith(".")}
    if not entries or OUT_MARKER in entries or (
            "index.html" in visible and visible <= _OWN_ENTRIES):
        return
    shown = ", ".join(sorted(entries)[:5]) + (", ..." if len(entries) > 5 else "")
    raise OutputFolderError(
        f"output folder {out_dir} is not empty and was not made by springback (it has no "
        f"{OUT_MARKER} file; it holds {shown}); a build replaces this folder whole, so these "
        f"files would be lost. Fix: {fix}, or move the files away first")


def stage_files(outcome: ParticipantOutcome, staging: Path) -> ParticipantOutcome:
    """Write the outcome's files into `staging` and return it without their bytes."""
    write_files(outcome.files, staging)
    stored = tuple(sorted({*outcome.stored, *outcome.files}))
    return dataclasses.replace(outcome, files={}, stored=stored)


def write_files(files: dict[str, bytes], staging: Path) -> None:
    """Write study-wide files (tables, overview) into `staging`."""
    for rel, data in sorted(files.items()):
        (staging / rel).parent.mkdir(parents=True, exist_ok=True)
        (staging / rel).write_bytes(data)


def archive_staged(project: Path, out_dir: Path, staging: Path, *, study: Study,
                   outcomes: list[ParticipantOutcome], started: datetime, ended: datetime,
                   templates: list[Path]) -> str:
    """Archive a fully staged build (the caller swaps `staging` into `out_dir` afterwards).

    Reused participants' files were staged from the archive by `History.reused`, so every outcome's
    files are in `staging` already (or in `o.files`, written here).
    """
    from springback.archive.manifest import record_build
    from springback.safety.rules import FLAG_RECORD_KEYS

    roster = study.roster.set_index("participant")
    settings = study.settings
    people: dict[str, dict[str, Any]] = {}
    for o in outcomes:
        kept = sorted({*o.stored, *o.files})
        if o.files:  # an outcome that did not pass through stage_files
            write_files(o.files, staging)
        row = roster.loc[o.participant]
        people[o.participant] = {
            "status": o.status, "reason": o.reason, "fingerprint": o.fingerprint,
            "version": o.version, "review_state": o.review_state,
            "flags": [f.to_row(FLAG_RECORD_KEYS) for f in o.flags],
            "period": {"first": o.period[0], "last": o.period[1]},
            "consent": str(row["consent"]), "feedback": bool(row["feedback"]),
            "files": sorted(kept),
        }
    params = {"metrics": settings.metrics.model_dump(mode="json"),
              "seed": settings.metrics.seed, "editions": list(settings.booklet.editions),
              "formats": list(settings.booklet.formats)}
    return record_build(project, staging, list(study.input_files), settings, templates,
                        people, params, started, ended)


def frame_bytes(df: pd.DataFrame) -> bytes:
    """A frame as the CSV bytes of a study table (UTF-8, LF, ISO times with their offset);
    text cells that would run as spreadsheet formulas are quoted (`files.spreadsheet_safe`)."""
    return csv_bytes(df, date_format="%Y-%m-%dT%H:%M:%S%z")


def study_tables(study: Study, outcomes: Iterable[ParticipantOutcome]) -> dict[str, bytes]:
    """The study-wide CSV tables: metrics, findings, flags, shifts, quality, set-aside rows."""
    from springback.findings import FINDINGS_CSV_COLUMNS
    from springback.metrics.results import METRICS_CSV_COLUMNS
    from springback.metrics.shifts import SHIFT_CSV_COLUMNS
    from springback.safety.rules import FLAG_CSV_COLUMNS, flags_rows

    outcomes = list(outcomes)
    metrics_rows = [r for o in outcomes for r in o.metrics_rows]
    flag_rows = flags_rows([f for o in outcomes for f in o.flags])
    shift_rows = [r for o in outcomes for r in o.shift_rows]
    finding_rows = [r for o in outcomes for r in o.finding_rows]
    tables = {
        "metrics.csv": pd.DataFrame(metrics_rows, columns=list(METRICS_CSV_COLUMNS)),
        "findings.csv": pd.DataFrame(finding_rows, columns=list(FINDINGS_CSV_COLUMNS)),
        "flags.csv": pd.DataFrame(flag_rows, columns=list(FLAG_CSV_COLUMNS)),
        "shifts.csv": pd.DataFrame(shift_rows, columns=list(SHIFT_CSV_COLUMNS)),
        "quality.csv": study.quality,
        "set_aside.csv": study.set_aside,
    }
    return {name: frame_bytes(df) for name, df in tables.items()}
