"""Build progress: a rich bar on a terminal, plain lines otherwise, nothing with --quiet.

The build calls `update(participant, stage)`: ('', 'start:N') once with the number of
participants, (id, 'queued' | 'computing' | 'rendering') while one is under way (workers in
other processes cannot report mid-job, so there only 'queued' is heard), (id, 'done' |
'failed' | 'unchanged') when one is finished, and ('', text) for study-wide steps.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from types import TracebackType

from rich.console import Console
from rich.markup import escape
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    TaskID,
    TextColumn,
    TimeElapsedColumn,
    TimeRemainingColumn,
)

FINISHED = ("done", "failed", "unchanged")
"""Stages that end a participant's part of the build."""


def clock(seconds: float) -> str:
    """Seconds as m:ss (or h:mm:ss past an hour)."""
    whole = max(0, round(seconds))
    hours, rest = divmod(whole, 3600)
    minutes, secs = divmod(rest, 60)
    return f"{hours}:{minutes:02d}:{secs:02d}" if hours else f"{minutes}:{secs:02d}"


class BuildProgress:
    """Receives `update(participant, stage)` calls from the build and shows them."""

    def __init__(self, *, quiet: bool = False, console: Console | None = None,
                 now: Callable[[], float] = time.monotonic) -> None:
        self.quiet = quiet
        self.console = console or Console(stderr=True, emoji=False)
        self.now = now
        self.total: int | None = None
        self.finished = 0
        self.worked = 0
        """Participants finished by computing and rendering (what the time estimate uses)."""
        self.started = now()
        self._bar: Progress | None = None
        self._task: TaskID | None = None

    def __enter__(self) -> BuildProgress:
        if not self.quiet and self.console.is_terminal:
            self._bar = Progress(
                TextColumn("[bold]participants"),
                BarColumn(),
                MofNCompleteColumn(),
                TimeElapsedColumn(),
                TextColumn("ETA"),
                TimeRemainingColumn(),
                TextColumn("{task.fields[stage]}"),
                console=self.console,
                transient=True,
            )
            self._bar.__enter__()
            self._task = self._bar.add_task("participants", total=None, stage="loading")
        return self

    def __exit__(
        self, et: type[BaseException] | None, ev: BaseException | None, tb: TracebackType | None
    ) -> None:
        if self._bar is not None:
            self._bar.__exit__(et, ev, tb)

    def eta(self) -> float | None:
        """Seconds left, from the pace of the participants that needed work (None if unknown)."""
        if not self.total or not self.worked:
            return None
        elapsed = self.now() - self.started
        return elapsed / self.worked * (self.total - self.finished)

    def update(self, participant: str, stage: str) -> None:
        """Record that `participant` reached `stage` (see the module docstring)."""
        if participant == "" and stage.startswith("start:"):
            self.total = int(stage.split(":", 1)[1])
            self.started = self.now()
            if self._bar is not None and self._task is not None:
                self._bar.update(self._task, total=self.total, stage="")
            return
        if stage in FINISHED:
            self.finished += 1
            self.worked += stage != "unchanged"
        if self.quiet:
            return
        if self._bar is not None and self._task is not None:
            text = f"{participant}: {stage}" if participant else stage
            self._bar.update(self._task, completed=self.finished, stage=escape(text))
        elif participant == "":
            self.console.print(escape(stage))
        elif stage in FINISHED:
            self.console.print(escape(self._line(participant, stage)))

    def _line(self, participant: str, stage: str) -> str:
        count = f"{self.finished}/{self.total}" if self.total else str(self.finished)
        line = f"[{count}] {participant} {stage}, {clock(self.now() - self.started)} elapsed"
        left = self.eta()
        if left is not None and self.total and self.finished < self.total:
            line += f", about {clock(left)} left"
        return line
