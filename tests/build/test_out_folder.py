"""A wrong output folder is refused before anything is replaced; springback marks its own."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.build.output import OUT_MARKER, check_out_dir
from springback.build.pipeline import build
from springback.cli import main
from springback.errors import OutputFolderError


def _tree(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*"))
            if p.is_file()}


@pytest.fixture
def project(tmp_path: Path) -> Path:
    root = tmp_path / "study"
    for rel in ("study.toml", "data/momentary.csv", "archive/audit.jsonl", "templates/x.html"):
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        (root / rel).write_text("kept\n", encoding="utf-8")
    return root


@pytest.mark.parametrize(("out", "words"), [
    (".", "is the project folder"),
    ("..", "contains the project folder"),
    ("archive", "overlaps the archive folder"),
    ("archive/out", "overlaps the archive folder"),
    ("data", "is inside the project's data/ folder"),
    ("templates/out", "is inside the project's templates/ folder"),
])
def test_folders_that_hold_the_project_are_refused(project: Path, out: str, words: str) -> None:
    """Check the project, its parent, the archive and the input folders are never outputs."""
    target = (project / out).resolve()
    with pytest.raises(OutputFolderError) as caught:
        check_out_dir(project, target, project / "archive")
    message = str(caught.value)
    assert message.startswith(f"output folder {target} {words}") and "Fix: choose a new" in message


def test_a_foreign_folder_is_refused_and_ours_accepted(project: Path, tmp_path: Path) -> None:
    """Check a non-empty folder without the marker is refused; new, empty and marked pass."""
    other = tmp_path / "other"
    other.mkdir()
    check_out_dir(project, other, project / "archive")  # empty
    check_out_dir(project, tmp_path / "new", project / "archive")  # not there yet
    (other / "thesis.docx").write_text("years of work\n", encoding="utf-8")
    with pytest.raises(OutputFolderError, match=(
            f"output folder {other} is not empty and was not made by springback "
            rf"\(it has no {OUT_MARKER} file; it holds thesis.docx\).*Fix: choose a new")):
        check_out_dir(project, other, project / "archive")
    (other / OUT_MARKER).write_text("", encoding="utf-8")
    check_out_dir(project, other, project / "archive")
    legacy = tmp_path / "legacy"
    (legacy / "booklets").mkdir(parents=True)
    (legacy / "index.html").write_text("<p>overview</p>\n", encoding="utf-8")
    check_out_dir(project, legacy, project / "archive")  # made before the marker existed


@pytest.mark.slow
def test_build_refuses_before_touching_anything(quick_example: Path, tmp_path: Path) -> None:
    """Check build --out . / a foreign folder leaves every file; a real build leaves a marker."""
    before = _tree(quick_example)
    with pytest.raises(OutputFolderError, match="is the project folder"):
        build(quick_example, out=Path("."), participants=["P01"], jobs=1)
    foreign = tmp_path / "other"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("mine\n", encoding="utf-8")
    result = CliRunner().invoke(main, ["build", str(quick_example), "--out", str(foreign),
                                       "-q", "--participant", "P01", "-j", "1"])
    assert result.exit_code == 1 and "Traceback" not in result.output
    assert "was not made by springback" in " ".join(result.output.split())
    assert _tree(quick_example) == before
    assert _tree(foreign) == {"notes.txt": b"mine\n"}
    report = build(quick_example, participants=["P01"], jobs=1)
    assert (report.out_dir / OUT_MARKER).is_file()
    again = build(quick_example, participants=["P01"], jobs=1)  # our own folder is replaced
    assert (again.out_dir / OUT_MARKER).is_file() and (again.out_dir / "index.html").is_file()


def test_check_names_an_out_dir_that_would_replace_the_project(quick_example: Path) -> None:
    """Check `springback check` reports out_dir = "." under [output] as an error."""
    toml = quick_example / "study.toml"
    text = toml.read_text(encoding="utf-8")
    assert "[output]" not in text
    toml.write_text(text + '\n[output]\nout_dir = "."\n', encoding="utf-8")
    result = CliRunner().invoke(main, ["check", str(quick_example)])
    assert result.exit_code == 1 and "Traceback" not in result.output
    words = " ".join(result.output.split())
    assert "study.toml: output.out_dir" in words and "is the project folder" in words
