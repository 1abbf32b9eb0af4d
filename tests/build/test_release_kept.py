"""A build leaves out/release/ as `springback release` made it (release is its own step)."""

from __future__ import annotations

from pathlib import Path

from springback.build.pipeline import build
from springback.intake import load_study
from springback.review import gate


def _tree(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*"))
            if p.is_file()}


def test_build_keeps_released_copies(quick_example: Path) -> None:
    """Check a rebuild (also of one participant) keeps out/release/ byte for byte."""
    chosen = load_study(quick_example).participants()[:2]
    build(quick_example, participants=chosen, jobs=1)
    report = gate.release(quick_example, by="coordinator")
    released = quick_example / "out" / "release"
    before = _tree(released)
    assert "dispatch.csv" in before and report.released
    build(quick_example, participants=chosen[:1], jobs=1)
    assert _tree(released) == before
    build(quick_example, participants=chosen, jobs=1, force=True)
    assert _tree(released) == before
    assert (quick_example / "out" / "booklets").is_dir()
