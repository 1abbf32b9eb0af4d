"""Collect problems and set-aside rows in one pass, honouring the study's `on_bad_rows` choice."""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence

import numpy as np
import pandas as pd

from springback.errors import Problem, Severity
from springback.model import SET_ASIDE_COLUMNS

LISTED_PER_KIND = 20
"""Bad rows listed one by one per file, column and kind; the rest are summed up in one line
(every row still goes to the set-aside list)."""

SET_ASIDE_FIX = 'correct the value, or set on_bad_rows = "set aside" under [data]'


class Sink:
    """Where intake puts every problem and every row it cannot use."""

    def __init__(self, on_bad_rows: str = "error") -> None:
        self.set_aside_bad = on_bad_rows == "set aside"
        self.problems: list[Problem] = []
        self._aside: list[tuple[str, int, str, str, str]] = []
        self._listed: Counter[tuple[str, str | None, str]] = Counter()

    def add(self, problems: Problem | Sequence[Problem]) -> None:
        """Record problems as they are."""
        self.problems += [problems] if isinstance(problems, Problem) else list(problems)

    def aside(self, where: str, rows: Sequence[int], participants: Sequence[str],
              reason: str, column: str = "") -> None:
        """List rows that are not used, with the reason (no problem is raised for them)."""
        self._aside += [(where, int(r), column, str(p), reason)
                        for r, p in zip(rows, participants, strict=True)]

    def bad_rows(self, where: str, rows: Sequence[int] | np.ndarray,
                 participants: Sequence[str], found: Sequence[str], *, what: str,
                 column: str | None, expected: str = "", fix: str = SET_ASIDE_FIX,
                 code: str) -> None:
        """Report malformed rows: errors, or warnings plus set-aside rows when the study says so."""
        rows = [int(r) for r in rows]
        if not rows:
            return
        severity = Severity.WARNING if self.set_aside_bad else Severity.ERROR
        key = (where, column, code)
        room = max(0, LISTED_PER_KIND - self._listed[key])
        if self.set_aside_bad:
            fix = "the row is set aside and listed in the quality report"
        for r, f in zip(rows[:room], found[:room], strict=True):
            self.problems.append(Problem(severity, where, what, expected=expected, found=f,
                                         fix=fix, row=r, column=column, code=code))
        if len(rows) > room:
            more = len(rows) - room
            self.problems.append(Problem(
                severity, where, f"{more} more row{'s' if more > 1 else ''} with this problem: "
                f"{what}", fix=fix, column=column, code=code))
        self._listed[key] += len(rows)
        self.aside(where, rows, participants, what, column or "")

    @property
    def has_errors(self) -> bool:
        return any(p.is_error for p in self.problems)

    def set_aside_frame(self) -> pd.DataFrame:
        """Every set-aside row, one line per row and reason, in file and row order."""
        frame = pd.DataFrame(self._aside, columns=list(SET_ASIDE_COLUMNS))
        frame["row"] = frame["row"].astype("int64")
        frame = frame.drop_duplicates(["file", "row", "reason"])
        return frame.sort_values(["file", "row"], kind="stable").reset_index(drop=True)


def rows_list(rows: Sequence[int], limit: int = 6) -> str:
    """'rows 3, 4 and 9' style text (shortened after `limit`)."""
    rows = [int(r) for r in rows]
    if len(rows) == 1:
        return f"row {rows[0]}"
    if len(rows) > limit:
        return f"rows {', '.join(str(r) for r in rows[:limit])} and {len(rows) - limit} more"
    head, last = ", ".join(str(r) for r in rows[:-1]), rows[-1]
    return f"rows {head} and {last}"
