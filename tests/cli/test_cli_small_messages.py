"""Small messages: user text is never markup or emoji, odd files are named for what they are."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.cli import main
from springback.errors import DataError, SettingsError
from springback.files import BuildLock
from springback.intake.readers import read_table
from springback.settings import load_settings
from tests.support.tiny_projects import fake_build, make_project


def _words(text: str) -> str:
    return " ".join(text.split())


def test_emoji_codes_in_user_text_stay_text(tmp_path: Path) -> None:
    """Check ':x:' in a study's own text prints as typed, not as an emoji."""
    project = make_project(tmp_path / "study")
    toml = project / "study.toml"
    toml.write_text(toml.read_text(encoding="utf-8").replace(
        'timezone = "Europe/Amsterdam"', 'timezone = "Mars/:x: [bold]Base[/bold]"'),
        encoding="utf-8")
    result = CliRunner().invoke(main, ["check", str(project)])
    assert result.exit_code != 0
    assert ":x:" in result.output and "\u274c" not in result.output
    assert "[bold]Base[/bold]" in result.output


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes")
def test_named_pipe_is_not_called_missing(tmp_path: Path) -> None:
    """Check a FIFO in place of a data file or study.toml is named as such, never read."""
    fifo = tmp_path / "momentary.csv"
    os.mkfifo(fifo)
    with pytest.raises(DataError) as caught:
        read_table(fifo, "data/momentary.csv")
    [problem] = caught.value.problems
    assert problem.message() == (
        "data/momentary.csv: this is not a regular file (it is a folder, a named pipe or a "
        "device); expected the exported data file itself. Fix: point the path under [data] in "
        "study.toml to the exported file")
    os.mkfifo(tmp_path / "study.toml")
    with pytest.raises(SettingsError) as caught_settings:
        load_settings(tmp_path)
    assert caught_settings.value.problems[0].code == "not-a-file"


@pytest.mark.parametrize("codec", ["utf-16-le", "utf-16-be"])
def test_utf16_without_mark_is_named(tmp_path: Path, codec: str) -> None:
    """Check UTF-16 text with no byte-order mark gets its own message, not 'NUL bytes'."""
    path = tmp_path / "momentary.csv"
    path.write_bytes("participant,timestamp,sad\nP01,2026-03-01 10:00,3\n".encode(codec))
    with pytest.raises(DataError) as caught:
        read_table(path, "data/momentary.csv")
    [problem] = caught.value.problems
    assert problem.code == "utf-16-no-bom"
    assert problem.message() == (
        "data/momentary.csv: the file looks like UTF-16 text without a byte-order mark (every "
        "second byte is NUL), which cannot be read safely; expected UTF-8 text, or UTF-16 that "
        "starts with its byte-order mark. Fix: save it again as 'CSV UTF-8' (Excel: File > "
        "Save As > CSV UTF-8)")
    path.write_bytes(b"\xff\xfe" + "participant\nP01\n".encode("utf-16-le"))
    assert list(read_table(path, "data/momentary.csv").frame["participant"]) == ["P01"]


def test_binary_file_still_says_nul_bytes(tmp_path: Path) -> None:
    """Check a file with scattered NUL bytes keeps the plain 'not text' message."""
    path = tmp_path / "momentary.csv"
    path.write_bytes(b"participant,timestamp\nP01,\x00\x01\x02 2026\n" * 20)
    with pytest.raises(DataError) as caught:
        read_table(path, "data/momentary.csv")
    assert caught.value.problems[0].what == "the file is not text (it holds NUL bytes)"


def test_lock_message_names_no_missing_option(tmp_path: Path) -> None:
    """Check the 'already running' message says what to do with options that exist."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1")
    with BuildLock(project):
        result = CliRunner().invoke(main, ["release", str(project)])
    assert result.exit_code == 1
    text = _words(result.output)
    assert "another springback build of this project is already running (process" in text
    assert "wait for it to finish, then run the command again" in text
    assert "longer wait" not in text and "Traceback" not in text
