"""The study stage: the cohort's results for the research team, in out/study/.

`study_files(study, tables)` makes every file of out/study/ from the study and the build's
study tables (out/metrics.csv, out/findings.csv as bytes), so the cohort's numbers are those
of the booklets; `compute` is the pure function behind it; `results(project)` reads the same
tables back as pandas frames, from out/ or from the latest archived build.

Files (STUDY_FILES): results.html (the page), participants.parquet and participants.csv (one
row per participant, one column per measure and reading), codebook.csv (the columns' meaning,
from springback.study.codebook), distributions.csv, compliance_weeks.csv, readings.csv,
group_estimates.csv, warning_table.csv and warning_accuracy.csv.
"""

from __future__ import annotations

import io
from collections.abc import Iterable, Mapping
from pathlib import Path

import pandas as pd

from springback.files import csv_bytes, spreadsheet_safe
from springback.model import Study
from springback.settings import StudySettings
from springback.study import group
from springback.study import tables as t
from springback.study.codebook import codebook
from springback.study.page import page

__all__ = ["STUDY_DIR", "STUDY_FILES", "TABLES", "compute", "results", "study_files"]

STUDY_DIR = "study"
"""The folder of out/ that holds the study's files."""
TABLES = ("participants", "codebook", "distributions", "compliance_weeks", "readings",
          "group_estimates", "warning_table", "warning_accuracy")
"""The study's tables, each written as <name>.csv (and returned by `results`)."""
STUDY_FILES = ("results.html", "participants.parquet", *(f"{name}.csv" for name in TABLES))
"""Every file of out/study/."""
DIGITS = 10
"""Significant digits of the computed tables' numbers (participants.csv keeps metrics.csv's)."""


def compute(metrics: pd.DataFrame, findings: pd.DataFrame, schedule: pd.DataFrame,
            pairs: pd.DataFrame, settings: StudySettings) -> dict[str, pd.DataFrame]:
    """Every study table from the long metrics and findings tables, the prompt schedule and
    the participants' within-day pairs (`group.within_day_pairs`)."""
    keys = list(settings.questionnaires)
    people = t.participants(metrics, findings, keys)
    counts = group.warning_counts(findings)
    return {
        "participants": people,
        "codebook": codebook(keys, t.reading_columns(people)),
        "distributions": t.distributions(people),
        "compliance_weeks": t.compliance_weeks(schedule, people["participant"]),
        "readings": t.readings(findings),
        "group_estimates": group.group_estimates(people, pairs),
        "warning_table": counts,
        "warning_accuracy": group.warning_accuracy(counts, settings.metrics.alpha),
    }


def _read(data: bytes) -> pd.DataFrame:
    frame = pd.read_csv(io.BytesIO(data), dtype={"participant": str}, keep_default_na=False,
                        na_values=[""])
    for col in ("measure", "topic", "reading", "certainty", "detail", "reason", "note"):
        if col in frame:
            frame[col] = frame[col].fillna("").astype(str)
    return frame


def study_files(study: Study, tables: Mapping[str, bytes]) -> dict[str, bytes]:
    """The files of out/study/ (paths relative to out/) for a build's study tables."""
    metrics, findings = _read(tables["metrics.csv"]), _read(tables["findings.csv"])
    # An id a spreadsheet would run as a formula is quoted in metrics.csv ("'=P1").
    known = set(study.participants())
    people = sorted({p if p in known else p[1:] for p in metrics["participant"].astype(str)
                     if p in known or p[1:] in known})
    pairs = group.within_day_pairs(study, people)
    pairs["participant"] = pairs["participant"].map(spreadsheet_safe)
    frames = compute(metrics, findings, study.schedule, pairs, study.settings)
    return files(frames, study.settings.study.title, study.settings.metrics.alpha)


def _rounded(frame: pd.DataFrame) -> pd.DataFrame:
    floats = [c for c in frame.columns if pd.api.types.is_float_dtype(frame[c].dtype)]
    return frame.assign(**{str(c): frame[c].map(
        lambda v: float(f"{v:.{DIGITS}g}")) for c in floats}) if floats else frame


def files(frames: Mapping[str, pd.DataFrame], title: str, alpha: float) -> dict[str, bytes]:
    """The study's tables as files: CSVs, the participants' Parquet file and the page."""
    out: dict[str, bytes] = {}
    for name in TABLES:
        frame = frames[name] if name == "participants" else _rounded(frames[name])
        out[f"{STUDY_DIR}/{name}.csv"] = csv_bytes(frame)
    buf = io.BytesIO()
    frames["participants"].to_parquet(buf, index=False, engine="pyarrow", compression="zstd")
    out[f"{STUDY_DIR}/participants.parquet"] = buf.getvalue()
    out[f"{STUDY_DIR}/results.html"] = page(title, frames, alpha).encode("utf-8")
    return dict(sorted(out.items()))


def _folders(project: Path) -> Iterable[Path]:
    """out/study/, then the archived builds' out/study/ from the latest back."""
    from springback.files import project_dirs

    dirs = project_dirs(project)
    yield dirs.out / STUDY_DIR
    if dirs.archive.is_dir():
        for build in sorted((p for p in dirs.archive.iterdir() if p.is_dir()
                             and not p.name.startswith(".")), reverse=True):
            yield build / "out" / STUDY_DIR


def results(project: Path | str) -> dict[str, pd.DataFrame]:
    """The study's tables as pandas frames (name -> frame, in TABLES order), read from
    out/study/ or, without one, from the latest archived build that has them."""
    for folder in _folders(Path(project)):
        if all((folder / f"{name}.csv").is_file() for name in TABLES):
            return {name: pd.read_csv(folder / f"{name}.csv", dtype={"participant": str})
                    for name in TABLES}
    raise FileNotFoundError(f"no study tables under {Path(project)}: build the project first "
                            "(springback build)")
