"""`springback preview`: marked booklets in out/preview/<id>/, with no trace in the archive,
out/booklets/, review or release."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.archive.manifest import latest_manifest
from springback.build.pipeline import build
from springback.build.preview import mark_html
from springback.cli import main
from springback.files import sha256_file
from springback.review import gate

pytestmark = [pytest.mark.xdist_group("example"), pytest.mark.slow]


def _snapshot(project: Path) -> dict[str, str]:
    """Hashes of every file of the archive and of out/ except the previews."""
    out = {}
    for folder in ("archive", "out"):
        for path in sorted((project / folder).rglob("*")):
            rel = path.relative_to(project).as_posix()
            if path.is_file() and not rel.startswith("out/preview/"):
                out[rel] = sha256_file(path)
    return out


def test_preview_is_marked_and_leaves_no_trace(quick_example: Path) -> None:
    """Check the preview is marked on every edition and changes nothing else."""
    build(quick_example, participants=["P08"], jobs=1)
    before = _snapshot(quick_example)
    held = gate.list_held(quick_example)
    manifest = latest_manifest(quick_example)
    result = CliRunner().invoke(main, ["preview", str(quick_example), "P08"])
    assert result.exit_code == 0, result.output
    folder = quick_example / "out" / "preview" / "P08"
    assert sorted(p.name for p in folder.iterdir()) == [
        "participant.html", "participant.pdf", "therapist.html", "therapist.pdf"]
    for name in ("participant.html", "therapist.html"):
        html = (folder / name).read_text(encoding="utf-8")
        # P08 reads German: the mark is in the booklet's language (the catalogue's words).
        assert 'class="preview-mark"' in html and "nicht für die teilnehmende Person" in html
    assert (folder / "participant.pdf").read_bytes().startswith(b"%PDF")
    assert _snapshot(quick_example) == before
    assert gate.list_held(quick_example) == held
    assert latest_manifest(quick_example) == manifest
    report = gate.release(quick_example, by="coordinator")
    released = [p for p in report.folder.rglob("*.html")]
    assert not any("preview-mark" in p.read_text(encoding="utf-8") for p in released)
    assert not any("preview" in p.relative_to(report.folder).as_posix()
                   for p in report.folder.rglob("*"))


def test_preview_of_a_participant_without_a_booklet_says_why(quick_example: Path) -> None:
    """Check a participant with too little data gets no preview and the reason."""
    result = CliRunner().invoke(main, ["preview", str(quick_example), "P09"])
    assert result.exit_code == 2
    assert "no preview (not enough data" in result.output
    unknown = CliRunner().invoke(main, ["preview", str(quick_example), "P99"])
    assert unknown.exit_code != 0 and "not in the roster" in unknown.output
    assert "Traceback" not in unknown.output


def test_mark_escapes_and_sits_first_in_the_body() -> None:
    """Check the mark is escaped text right after <body> and the margin word has no quote."""
    html = mark_html('<html><head></head><body class="x"><p>hi</p></body></html>',
                     "<b>Preview</b>", 'PRE"VIEW')
    assert '<body class="x"><p class="preview-mark" role="note">&lt;b&gt;Preview' in html
    assert 'content: "PREVIEW"' in html
