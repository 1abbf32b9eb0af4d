"""Build progress: a rich bar on a terminal, plain lines otherwise, nothing with --quiet."""

from __future__ import annotations

import time
from types import TracebackType

from rich.console import Console
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    TextColumn,
    TimeElapsedColumn,
    TimeRemainingColumn,
)


class BuildProgress:
    """Receives `update(participant, stage)` calls from the build and shows them."""

    def __init__(self, *, quiet: bool = False, console: Console | None = None) -> None:
        self.quiet = quiet
        self.console = console or Console(stderr=True)
        self.total: int | None = None
        self.done = 0
        self.started = time.monotonic()
        self._bar: Progress | None = None
        self._task: int | None = None

    def __enter__(self) -> BuildProgress:
        if not self.quiet and self.console.is_terminal:
            self._bar = Progress(
                TextColumn("[bold]{task.description}"),
                BarColumn(),
                MofNCompleteColumn(),
                TextColumn("{task.fields[stage]}"),
                TimeElapsedColumn(),
                TextColumn("ETA"),
                TimeRemainingColumn(),
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

    def update(self, participant: str, stage: str) -> None:
        """Record that `participant` reached `stage` ('start:N' sets the total)."""
        if participant == "" and stage.startswith("start:"):
            self.total = int(stage.split(":", 1)[1])
            if self._bar is not None and self._task is not None:
                self._bar.update(self._task, total=self.total, stage="computing")
            return
        if stage == "done":
            self.done += 1
        if self.quiet:
            return
        if self._bar is not None and self._task is not None:
            self._bar.update(self._task, completed=self.done, stage=f"{participant}: {stage}")
        elif stage in ("done", "stage"):
            total = f"/{self.total}" if self.total else ""
            elapsed = time.monotonic() - self.started
            self.console.print(f"[{self.done}{total}] {participant} {stage} ({elapsed:.0f} s)")
        elif participant == "" and stage:
            self.console.print(stage)
