"""A rebuild reuses only what the audit log vouches for: edits in the archive are not carried."""

from __future__ import annotations

import json
from pathlib import Path

from springback.build.pipeline import build
from springback.files import sha256_file
from springback.intake import load_study


def test_edited_archive_is_not_reused(quick_example: Path) -> None:
    """Check a taken-out flag or a changed booklet in the archive is rebuilt, not carried on."""
    chosen = load_study(quick_example).participants()[:2]
    first = build(quick_example, participants=chosen, jobs=1)
    folder = quick_example / "archive" / first.build_id
    pid = chosen[0]
    booklet = next(p for p in (folder / "out" / "booklets" / pid).iterdir()
                   if p.suffix == ".html")
    original = booklet.read_bytes()
    path = folder / "manifest.json"
    manifest = json.loads(path.read_text(encoding="utf-8"))
    flags = manifest["participants"][pid]["flags"]
    manifest["participants"][pid]["flags"] = [{**f, "action": "refer"} for f in flags] + [
        {"participant": pid, "rule": "planted", "action": "refer", "value": 1.0,
         "when": "2026-01-01", "detail": "not made by the build"}]
    path.write_text(json.dumps(manifest), encoding="utf-8")
    second = build(quick_example, participants=chosen, jobs=1)
    assert not any(o.reused for o in second.outcomes)
    again = json.loads((quick_example / "archive" / second.build_id / "manifest.json")
                       .read_text(encoding="utf-8"))
    assert again["participants"][pid]["flags"] == flags
    booklet = quick_example / "archive" / second.build_id / booklet.relative_to(folder)
    booklet.write_bytes(original.replace(b"</main>", b"<p>added later</p></main>"))
    third = build(quick_example, participants=chosen, jobs=1)
    assert not any(o.reused for o in third.outcomes)
    rel = booklet.relative_to(booklet.parents[2]).as_posix()
    rebuilt = quick_example / "out" / rel
    assert b"added later" not in rebuilt.read_bytes()
    archived = quick_example / "archive" / third.build_id / "out" / rel
    assert sha256_file(archived) == sha256_file(rebuilt)
