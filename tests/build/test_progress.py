"""Build progress: plain lines off a terminal, silence with -q, a bar on a terminal; a failing
participant is reported at the end while the others are built, and the exit code says so."""

from __future__ import annotations

import io
import json
from pathlib import Path

import pytest
from click.testing import CliRunner
from rich.console import Console

from springback.build.progress import BuildProgress, clock

# A build of three: one unchanged, one built after 'computing' and 'rendering', one failed.
UPDATES = [
    ("", "start:3", 0.0),
    ("P01", "unchanged", 0.0),
    ("P02", "queued", 0.0),
    ("P02", "computing", 2.0),
    ("P02", "rendering", 6.0),
    ("P02", "done", 10.0),
    ("P03", "computing", 11.0),
    ("P03", "failed", 20.0),
    ("", "writing the overview, tables and archive", 21.0),
]


class FakeClock:
    """A monotonic clock the test moves by hand."""

    def __init__(self) -> None:
        self.t = 0.0

    def __call__(self) -> float:
        return self.t


def _play(progress: BuildProgress, clock_: FakeClock) -> None:
    with progress:
        for who, stage, at in UPDATES:
            clock_.t = at
            progress.update(who, stage)


def _console(terminal: bool) -> tuple[Console, io.StringIO]:
    buf = io.StringIO()
    return Console(file=buf, force_terminal=terminal, width=200, color_system=None), buf


def test_plain_text_prints_one_line_per_finished_participant() -> None:
    """Check off a terminal each finished participant gets a line with count, time and ETA."""
    console, buf = _console(terminal=False)
    fake = FakeClock()
    _play(BuildProgress(console=console, now=fake), fake)
    assert buf.getvalue().splitlines() == [
        "[1/3] P01 unchanged, 0:00 elapsed",
        # one participant needed work in 10 s and one is left: about 10 s more
        "[2/3] P02 done, 0:10 elapsed, about 0:10 left",
        "[3/3] P03 failed, 0:20 elapsed",
        "writing the overview, tables and archive",
    ]


def test_quiet_prints_nothing_but_still_counts() -> None:
    """Check -q prints nothing at all while the counts still follow the build."""
    console, buf = _console(terminal=False)
    fake = FakeClock()
    progress = BuildProgress(quiet=True, console=console, now=fake)
    _play(progress, fake)
    assert buf.getvalue() == ""
    assert (progress.total, progress.finished, progress.worked) == (3, 3, 2)


def test_quiet_on_a_terminal_shows_no_bar() -> None:
    """Check -q also silences the bar on a terminal."""
    console, buf = _console(terminal=True)
    fake = FakeClock()
    _play(BuildProgress(quiet=True, console=console, now=fake), fake)
    assert buf.getvalue() == ""


def test_terminal_bar_follows_participants_and_stages() -> None:
    """Check on a terminal the bar's total, completed count and stage text follow updates."""
    console, _ = _console(terminal=True)
    fake = FakeClock()
    progress = BuildProgress(console=console, now=fake)
    with progress:
        for who, stage, at in UPDATES[:5]:
            fake.t = at
            progress.update(who, stage)
        assert progress._bar is not None
        task = progress._bar.tasks[0]
        assert (task.total, task.completed) == (3, 1)
        assert task.fields["stage"] == "P02: rendering"


def test_clock_format() -> None:
    """Check elapsed times read as m:ss, and h:mm:ss past an hour."""
    assert [clock(s) for s in (0, 59.6, 61, 3600 + 62)] == ["0:00", "1:00", "1:01", "1:01:02"]


@pytest.mark.slow
@pytest.mark.xdist_group("example")
def test_one_failing_participant_is_reported_and_the_others_built(
    example_copy: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Check a rendering error for one participant fails only them, with the reason, exit 2."""
    import springback.build.jobs as build_module
    from springback.cli import main

    real = build_module.render_booklets

    def render_or_fail(job, *args, **kwargs):  # type: ignore[no-untyped-def]
        if job.data.participant == "P01":
            raise RuntimeError("broken template")
        return real(job, *args, **kwargs)

    monkeypatch.setattr(build_module, "render_booklets", render_or_fail)
    result = CliRunner().invoke(
        main, ["build", str(example_copy), "--participant", "P01", "--participant", "P03",
               "--participant", "P10", "-j", "1", "-q"],
    )
    assert result.exit_code == 2, result.output
    text = " ".join(result.output.split())
    assert "failed: P01" in text and "RuntimeError: broken template" in text
    assert "1 participant(s) failed" in text
    booklets = example_copy / "out" / "booklets"
    assert (booklets / "P03" / "participant.pdf").is_file()
    assert not (booklets / "P01").exists()
    archive = example_copy / "archive"
    manifest = json.loads(next(archive.glob("*/manifest.json")).read_text(encoding="utf-8"))
    people = manifest["participants"]
    assert (people["P01"]["status"], people["P03"]["status"]) == ("failed", "built")
    assert people["P10"]["status"] == "withdrawn"
    assert "booklets/P03/participant.pdf" in people["P03"]["files"]
