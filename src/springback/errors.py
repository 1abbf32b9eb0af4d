"""The small exception hierarchy and the one shape every user-facing problem takes.

Only the command line turns these into messages and exit codes; library code raises them.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from enum import StrEnum


class Severity(StrEnum):
    """How bad a problem is: errors stop a build, warnings are listed and the build goes on."""

    ERROR = "error"
    WARNING = "warning"


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a study's input, told as where / what / expected / found / fix.

    `where` is a file path relative to the project folder (``data/momentary.csv``) or a
    settings key (``study.toml: items.sad.scale``); `row` is the 1-based line number in the
    file as a spreadsheet shows it (header = row 1), `column` the column header.
    """

    severity: Severity
    where: str
    what: str
    expected: str = ""
    found: str = ""
    fix: str = ""
    row: int | None = None
    column: str | None = None
    code: str = ""
    """A stable short identifier (``value-out-of-scale``) for tests and for filtering."""

    @property
    def is_error(self) -> bool:
        return self.severity is Severity.ERROR

    def location(self) -> str:
        parts = [self.where]
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column is not None:
            parts.append(f"column '{self.column}'")
        return ", ".join(parts)

    def message(self) -> str:
        """Render as the text a user reads: location, what, expected/found, how to fix."""
        text = f"{self.location()}: {self.what}"
        if self.expected:
            text += f"; expected {self.expected}"
        if self.found:
            text += f", found {self.found}"
        if self.fix:
            text += f". Fix: {self.fix}"
        return text


def error(where: str, what: str, **kw: object) -> Problem:
    """Make an error-level problem."""
    return Problem(Severity.ERROR, where, what, **kw)  # type: ignore[arg-type]


def warning(where: str, what: str, **kw: object) -> Problem:
    """Make a warning-level problem."""
    return Problem(Severity.WARNING, where, what, **kw)  # type: ignore[arg-type]


class SpringbackError(Exception):
    """Base class for every error the command line reports without a traceback."""

    exit_code = 1


class ProblemsFound(SpringbackError):
    """The input has one or more errors; carries all problems found in one pass."""

    def __init__(self, problems: Iterable[Problem]):
        self.problems = list(problems)
        n = sum(p.is_error for p in self.problems)
        super().__init__(f"{n} error(s) in the study's input")


class SettingsError(ProblemsFound):
    """`study.toml` cannot be used as it is."""


class DataError(ProblemsFound):
    """A data file cannot be used as it is."""


class BuildLocked(SpringbackError):
    """Another build of the same project is running."""


class ReviewError(SpringbackError):
    """A review or release request cannot be carried out."""


class ArchiveError(SpringbackError):
    """The audit archive is inconsistent or cannot be written."""


class OutputFolderError(SpringbackError):
    """The output folder cannot be replaced without losing files springback did not make."""


class DeliveryError(SpringbackError):
    """Booklets could not be sent."""
