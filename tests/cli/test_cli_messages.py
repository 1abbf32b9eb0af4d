"""What a user reads on the command line: plain text off a terminal, whole tables, clear lines."""

from __future__ import annotations

import io
from pathlib import Path

from click.testing import CliRunner
from rich.console import Console
from rich.table import Table

from springback.build.records import BuildReport, ParticipantOutcome, summary_key
from springback.cli import main
from springback.cli.core import show_table, summary_table
from springback.intake import check_study
from tests.support.intake_project import MOMENTARY, make_project

LONG_ID = "User #25369 of the lockdown wave, second cohort"


def _clashes(root: Path) -> Path:
    """Two prompts of two participants, each given twice with different answers."""
    rows = MOMENTARY + "p1,2024-03-04 13:00,5,4\np2,2024-03-04 10:00,7,1\n"
    return make_project(root, files={"data/momentary.csv": rows})


def test_each_clash_line_names_its_own_participant_and_rows(tmp_path: Path) -> None:
    """Check two clashing prompts give two lines, each with its own participant and rows."""
    report = check_study(_clashes(tmp_path / "study"))
    clashes = [p.message() for p in report.problems if p.code == "conflicting-rows"]
    assert len(clashes) == 2
    assert "rows 3 and 5 for participant 'p1' at 2024-03-04 13:00" in clashes[0]
    assert "rows 4 and 6 for participant 'p2' at 2024-03-04 10:00" in clashes[1]


def test_no_terminal_codes_off_a_terminal(tmp_path: Path) -> None:
    """Check `check` prints no escape sequence into a pipe, with or without NO_COLOR."""
    project = _clashes(tmp_path / "study")
    for env in ({}, {"NO_COLOR": "1"}):
        result = CliRunner().invoke(main, ["check", str(project)], env=env)
        assert result.exit_code == 1
        assert "\x1b" not in result.output
        assert "error   data/momentary.csv, row 3: one prompt has several rows" in result.output


def test_tables_keep_whole_ids_in_a_file() -> None:
    """Check a table printed to a file is never cut to 80 columns with an ellipsis."""
    table = Table("participant", "reason")
    table.add_row(LONG_ID, "a reason that is long enough to push the table past eighty columns")
    sink = io.StringIO()
    show_table(Console(file=sink, width=80), table)
    text = sink.getvalue()
    assert LONG_ID in text
    assert "…" not in text
    assert "a reason that is long enough to push the table past eighty columns" in text


def _outcome(pid: str, status: str, reason: str = "", reused: bool = False) -> ParticipantOutcome:
    return ParticipantOutcome(participant=pid, status=status, reason=reason, reused=reused)


def test_a_reused_participant_without_enough_data_is_counted_as_such() -> None:
    """Check a rebuild says 'not enough data' (as the overview does), not 'unchanged'."""
    short = _outcome("P09", "not enough data", "12 answered prompts; a booklet needs at least 30",
                     reused=True)
    assert summary_key(short) == "not enough data"
    assert summary_key(_outcome("P01", "built", reused=True)) == "unchanged"
    report = BuildReport(Path("out"), "0002", (short, _outcome("P01", "built", reused=True)))
    assert report.counts() == {"unchanged": 1, "not enough data": 1}
    sink = io.StringIO()
    show_table(Console(file=sink, width=80), summary_table(report))
    assert "not enough data: P09" in sink.getvalue()
    assert "12 answered prompts; a booklet needs at least 30" in sink.getvalue()
