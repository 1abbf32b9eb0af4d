"""Where the repository, the example study and the vendored open data are; copying the example."""

from __future__ import annotations

import shutil
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "example_project"
DATA = REPO / "tests" / "data"
"""Open datasets the tests use, each with its SOURCE.md (origin, licence, attribution)."""


def copy_example(target: Path) -> Path:
    """Copy the example study's inputs (not its outputs) into `target`."""
    target.mkdir(parents=True, exist_ok=True)
    shutil.copy2(EXAMPLE / "study.toml", target / "study.toml")
    shutil.copytree(EXAMPLE / "data", target / "data", dirs_exist_ok=True)
    if (EXAMPLE / "templates").is_dir():
        shutil.copytree(EXAMPLE / "templates", target / "templates", dirs_exist_ok=True)
    return target
