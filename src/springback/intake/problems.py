"""Collect problems and set-aside rows in one pass, honouring the study's `on_bad_rows` choice."""

from __future__ import annotations

import heapq
from array import array
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from springback.errors import Problem, Severity
from springback.model import SET_ASIDE_COLUMNS

LISTED_PER_KIND = 20
"""Bad rows listed one by one per file, column and kind; the rest are summed up in one line
(every row still goes to the set-aside list)."""

SET_ASIDE_FIX = 'correct the value, or set on_bad_rows = "set aside" under [data]'


class Sink:
    """Where intake puts every problem and every row it cannot use.

    A large file is checked a few participants at a time, so problems of one kind can arrive
    in several calls; they are listed and summed up as if the file had been checked at once.
    """

    def __init__(self, on_bad_rows: str = "error") -> None:
        self.set_aside_bad = on_bad_rows == "set aside"
        self._items: list[Problem | _Kind | Slot] = []
        self._aside = _AsideLog()
        self._kinds: dict[tuple[str, str | None, str], _Kind] = {}

    @property
    def problems(self) -> list[Problem]:
        """Every problem so far, in the order found."""
        out: list[Problem] = []
        for item in self._items:
            if isinstance(item, Problem):
                out.append(item)
            elif isinstance(item, _Kind):
                out += item.problems()
            else:
                out += item.problems
        return out

    def add(self, problems: Problem | Sequence[Problem]) -> None:
        """Record problems as they are."""
        self._items += [problems] if isinstance(problems, Problem) else list(problems)

    def slot(self) -> Slot:
        """A place in the list for problems only known later (counts over a whole file)."""
        slot = Slot([])
        self._items.append(slot)
        return slot

    def take(self, other: Sink) -> None:
        """Move another sink's problems (after this one's) and set-aside rows into this one."""
        self._items += other._items
        self._aside.extend(other._aside)
        other._items, other._aside = [], _AsideLog()

    def aside(self, where: str, rows: Sequence[int] | np.ndarray,
              participants: Sequence[str] | np.ndarray,
              reason: str, column: str = "") -> None:
        """List rows that are not used, with the reason (no problem is raised for them)."""
        self._aside.add(where, rows, participants, reason, column)

    def bad_rows(self, where: str, rows: Sequence[int] | np.ndarray,
                 participants: Sequence[str] | np.ndarray, found: Sequence[str], *, what: str,
                 column: str | None, expected: str = "", fix: str = SET_ASIDE_FIX,
                 code: str) -> None:
        """Report malformed rows: errors, or warnings plus set-aside rows when the study says so.

        The first `LISTED_PER_KIND` rows of a kind (file, column, problem) in file order are
        listed one by one and one line sums up the rest, however the rows were split between
        calls; the kind keeps the place in the list where it was first found.
        """
        rows = [int(r) for r in rows]
        if not rows:
            return
        severity = Severity.WARNING if self.set_aside_bad else Severity.ERROR
        key = (where, column, code)
        if self.set_aside_bad:
            fix = "the row is set aside and listed in the quality report"
        if key not in self._kinds:
            self._kinds[key] = _Kind(Problem(severity, where, what, expected=expected, fix=fix,
                                             column=column, code=code))
            self._items.append(self._kinds[key])
        self._kinds[key].add(rows, found)
        self.aside(where, rows, participants, what, column or "")

    @property
    def has_errors(self) -> bool:
        return any(p.is_error for p in self.problems)

    def set_aside_frame(self) -> pd.DataFrame:
        """Every set-aside row, one line per row and reason, in file and row order."""
        frame = self._aside.frame()
        frame = frame.drop_duplicates(["file", "row", "reason"])
        return frame.sort_values(["file", "row"], kind="stable").reset_index(drop=True)


class _AsideLog:
    """Set-aside rows as numbers: each text (file, column, participant, reason) is stored once.

    A large study sets aside hundreds of thousands of rows (repeats, empty prompts); a tuple
    of five objects per row took over 100 bytes each, these take 24.
    """

    def __init__(self) -> None:
        self._codes: dict[str, int] = {}
        self._texts: list[str] = []
        self._rows = array("q")
        self._columns = {name: array("i") for name in ("file", "column", "participant",
                                                        "reason")}

    def _code(self, text: str) -> int:
        code = self._codes.get(text)
        if code is None:
            code = self._codes[text] = len(self._texts)
            self._texts.append(text)
        return code

    def add(self, where: str, rows: Sequence[int] | np.ndarray,
            participants: Sequence[str] | np.ndarray, reason: str, column: str) -> None:
        n = len(rows)
        if len(participants) != n:
            raise ValueError("one participant per set-aside row")
        self._rows.extend(int(r) for r in rows)
        for name, text in (("file", where), ("column", column), ("reason", reason)):
            self._columns[name].extend([self._code(text)] * n)
        self._columns["participant"].extend(self._code(str(p)) for p in participants)

    def extend(self, other: _AsideLog) -> None:
        recode = [self._code(text) for text in other._texts]
        self._rows.extend(other._rows)
        for name, codes in other._columns.items():
            self._columns[name].extend(recode[c] for c in codes)

    def frame(self) -> pd.DataFrame:
        texts = np.asarray(self._texts, dtype=object)

        def column(name: str) -> pd.Series:
            codes = np.frombuffer(self._columns[name], dtype=np.int32) if self._rows else \
                np.empty(0, dtype=np.int32)
            return pd.Series(texts[codes] if len(texts) else np.empty(0, dtype=object),
                             dtype="str")

        rows = np.frombuffer(self._rows, dtype=np.int64) if self._rows else \
            np.empty(0, dtype=np.int64)
        return pd.DataFrame({"file": column("file"), "row": pd.Series(rows.copy()),
                             "column": column("column"), "participant": column("participant"),
                             "reason": column("reason")})[list(SET_ASIDE_COLUMNS)]


@dataclass
class _Kind:
    """Bad rows of one kind: the first ones in file order, and how many there are in all."""

    like: Problem
    first: list[tuple[int, str]] = field(default_factory=list)
    count: int = 0

    def add(self, rows: list[int], found: Sequence[str]) -> None:
        self.count += len(rows)
        # Only the rows that can still be among the first are kept (in file order).
        self.first = heapq.nsmallest(LISTED_PER_KIND, [*self.first, *zip(rows, found,
                                                                            strict=True)],
                                     key=lambda pair: pair[0])

    def problems(self) -> list[Problem]:
        out = [replace(self.like, found=f, row=r) for r, f in self.first]
        more = self.count - len(self.first)
        if more:
            out.append(replace(self.like, what=f"{more} more row{'s' if more > 1 else ''} "
                               f"with this problem: {self.like.what}", expected=""))
        return out


@dataclass
class Slot:
    """Problems that belong at an earlier place in the list than when they are known."""

    problems: list[Problem]

    def add(self, problems: Problem | Sequence[Problem]) -> None:
        self.problems += [problems] if isinstance(problems, Problem) else list(problems)


def rows_list(rows: Sequence[int], limit: int = 6) -> str:
    """'rows 3, 4 and 9' style text (shortened after `limit`)."""
    rows = [int(r) for r in rows]
    if len(rows) == 1:
        return f"row {rows[0]}"
    if len(rows) > limit:
        return f"rows {', '.join(str(r) for r in rows[:limit])} and {len(rows) - limit} more"
    head, last = ", ".join(str(r) for r in rows[:-1]), rows[-1]
    return f"rows {head} and {last}"


def column_name(name: str, limit: int = 40) -> str:
    """A column name as messages quote it: long names (a header without separators) cut."""
    return f"'{name}'" if len(name) <= limit else f"'{name[:limit - 3]}...' ({len(name):,} " \
        "characters)"

