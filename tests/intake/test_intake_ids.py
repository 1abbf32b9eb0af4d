"""Check that participant ids which cannot safely name a folder are refused at intake."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.cli import main
from springback.intake import check_study
from springback.intake.roster import id_problem
from tests.support.intake_project import make_project

RULE = ("expected at most 64 letters, digits, '_', '-', '.', '#' or spaces, not starting with "
        "'.', '-' or a space and not ending with '.' or a space")
FIX = "Fix: give the participant a plain id such as P01, the same in every data file"
BAD = [
    ("../../../X", "a path separator ('/' or '\\')"),
    ("/abs", "a path separator ('/' or '\\')"),
    ("a\\b", "a path separator ('/' or '\\')"),
    ("..", "'..'"),
    ("a..b", "'..'"),
    ("x" * 65, "65 characters"),
    ("p\x1b[31m", "a control character"),
    (".hidden", "a leading '.'"),
    ("-rf", "a leading '-'"),
    ("p1.", "a trailing '.'"),
    ("CON", "a name Windows reserves for a device"),
    ("lpt1.txt", "a name Windows reserves for a device"),
    ("p:3*", "the character(s) '*' ':'"),
    ("p<3>", "the character(s) '<' '>'"),
]


def _roster(*ids: str) -> str:
    return "participant,language,consent\np1,en,yes\n" + "".join(
        f'"{pid}",en,yes\n' for pid in ids)


@pytest.mark.parametrize(("pid", "found"), BAD, ids=[f"bad{i}" for i in range(len(BAD))])
def test_unsafe_id_is_refused_with_its_row(tmp_path: Path, pid: str, found: str) -> None:
    """Check that check_study names the file, row and column of an unsafe id and the rule."""
    project = make_project(tmp_path / "study", files={"data/participants.csv": _roster(pid)})
    report = check_study(project)
    [problem] = [p for p in report.problems if p.code == "unsafe-participant"]
    shown = pid.encode("unicode_escape").decode() if not pid.isprintable() else pid
    shown = shown if len(shown) <= 40 else shown[:37] + "..."
    assert problem.message() == (
        f"data/participants.csv, row 3, column 'participant': participant id '{shown}' cannot "
        f"be used as a folder name; {RULE}, found {found}. {FIX}")
    assert not report.ok and report.study is None


def test_every_unsafe_id_is_reported_in_one_pass(tmp_path: Path) -> None:
    """Check that all unsafe ids and other roster mistakes come out together, rows in order."""
    roster = _roster(*(pid for pid, _ in BAD)) + "p2,en,maybe\n"
    project = make_project(tmp_path / "study", files={"data/participants.csv": roster})
    problems = check_study(project).problems
    unsafe = [p.row for p in problems if p.code == "unsafe-participant"]
    assert unsafe == list(range(3, 3 + len(BAD)))
    assert [p.row for p in problems if p.code == "bad-consent"] == [3 + len(BAD)]


def test_safe_ids_pass(tmp_path: Path) -> None:
    """Check that plain ids with '_', '-' and inner '.' are accepted."""
    for pid in ("P01", "p1.2", "site_A-07", "x" * 64, "console", "Müller", "User #25290"):
        assert id_problem(pid) is None, pid
    roster = "participant,language,consent\np1,en,yes\np2,en,yes\nsite_A-07.2,en,yes\n"
    project = make_project(tmp_path / "study", files={"data/participants.csv": roster})
    assert not [p for p in check_study(project).problems if p.is_error]


def test_check_command_reports_without_a_traceback(tmp_path: Path) -> None:
    """Check that `springback check` prints the problem and exits 1, no traceback."""
    project = make_project(tmp_path / "study", files={"data/participants.csv": _roster("../X")})
    result = CliRunner().invoke(main, ["check", str(project)])
    assert result.exit_code == 1
    assert "Traceback" not in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)
    assert "cannot be used as a folder name" in " ".join(result.output.split())
