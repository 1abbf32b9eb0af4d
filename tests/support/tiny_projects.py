"""Helpers (no tests) shared by the safety, review and archive tests: tiny projects and builds."""

from __future__ import annotations

import hashlib
import tomllib
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pandas as pd

from springback.archive.manifest import record_build
from springback.settings import from_mapping

STUDY_TOML = """
[study]
title = "Tiny test study"
timezone = "Europe/Amsterdam"

[data]
events = "data/none.csv"
questionnaires = "data/none.csv"

[items.sad]
scale = [1, 7]

[items.cheerful]
scale = [1, 7]
reverse = true

[items.hopeless]
scale = [1, 7]

[composites.low_mood]
items = ["sad", "cheerful"]
higher_is = "worse"

[questionnaires.mood_q]
range = [0, 27]
bands = [[0, "low"], [10, "high"]]

[[safety.rules]]
name = "hopeless"
item = "hopeless"
at_least = 6
action = "hold"

[archive]
keep_inputs = "{keep}"
"""

PEOPLE = ("P01", "P02", "P03")


def fp(pid: str, n: int = 1) -> str:
    """A fingerprint-like hex string for a participant's n-th booklet version."""
    return hashlib.sha256(f"{pid}-{n}".encode()).hexdigest()


def make_project(root: Path, keep: str = "copy", ids: tuple[str, ...] = PEOPLE) -> Path:
    """Write a small project folder: study.toml, a momentary file and a roster."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(STUDY_TOML.replace("{keep}", keep), encoding="utf-8")
    data = root / "data"
    data.mkdir(exist_ok=True)
    rows = ["participant,timestamp,sad,cheerful,hopeless"]
    for pid in ids:
        for day in range(1, 6):
            rows.append(f"{pid},2026-03-{day:02d} 10:00,{day % 7 + 1},4,2")
    (data / "momentary.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    roster = ["participant,language,consent,feedback,therapist,region"]
    roster += [f"{pid},en,yes,yes,yes,default" for pid in ids]
    (data / "participants.csv").write_text("\n".join(roster) + "\n", encoding="utf-8")
    return root


def settings_of(project: Path) -> Any:
    """The project's validated settings."""
    raw = tomllib.loads((project / "study.toml").read_text(encoding="utf-8"))
    settings, _ = from_mapping(raw)
    return settings


def hold_flag(pid: str) -> dict[str, Any]:
    """A flag record as the build stores it (a hold)."""
    return {"participant": pid, "rule": "hopeless", "action": "hold", "value": 7.0,
            "when": "2026-03-04", "detail": "1 rating of 'hopeless' at 6 or more"}


def fake_build(project: Path, staging: Path, fingerprints: dict[str, str] | None = None,
               holds: tuple[str, ...] = (), extra: dict[str, dict[str, Any]] | None = None,
               text: str = "booklet", ids: tuple[str, ...] = PEOPLE) -> str:
    """Write a staging out/ like a build's and record it; return the build id."""
    fingerprints = fingerprints or {p: fp(p) for p in ids}
    staging.mkdir(parents=True, exist_ok=True)
    people: dict[str, dict[str, Any]] = {}
    for pid in ids:
        folder = staging / "booklets" / pid
        folder.mkdir(parents=True, exist_ok=True)
        (folder / "participant.html").write_text(f"<p>{text} for {pid}</p>\n", encoding="utf-8")
        (folder / "participant.pdf").write_bytes(b"%PDF-1.7\n\x00\xff" + pid.encode() * 3)
        people[pid] = {
            "fingerprint": fingerprints[pid], "version": 1, "status": "built",
            "flags": [hold_flag(pid)] if pid in holds else [],
            "review_state": "held" if pid in holds else "not needed",
            "period": {"first": "2026-03-01", "last": "2026-03-05"},
            "consent": "yes", "feedback": True,
            "files": [f"booklets/{pid}/participant.html", f"booklets/{pid}/participant.pdf"],
        }
        people[pid].update((extra or {}).get(pid, {}))
    metrics = pd.DataFrame({"participant": list(ids), "measure": "mean", "value": 3.5})
    metrics.to_csv(staging / "metrics.csv", index=False, lineterminator="\n")
    (staging / "index.html").write_text(
        "<ul>" + "".join(f"<li>{p}</li>" for p in ids) + "</ul>\n", encoding="utf-8")
    when = datetime(2026, 3, 6, 12, 0, tzinfo=UTC)
    return record_build(
        project, staging, [project / "data" / "momentary.csv",
                           project / "data" / "participants.csv"],
        settings_of(project), [], people, {"seed": 1}, when, when)
