"""Incremental builds: unchanged participants are reused, changed ones are rebuilt."""

from __future__ import annotations

from pathlib import Path

import pytest

from springback.build.pipeline import build

pytestmark = [pytest.mark.xdist_group("example"), pytest.mark.slow]

CHOSEN = ["P01", "P03", "P09"]


def _bump_first_rating(project: Path, participant: str) -> None:
    path = project / "data" / "momentary.csv"
    lines = path.read_text(encoding="utf-8").splitlines()
    header = lines[0].split(",")
    col = header.index("down")
    for i, line in enumerate(lines[1:], start=1):
        cells = line.split(",")
        if cells[0] == participant and cells[col]:
            value = int(float(cells[col]))
            cells[col] = str(value + 1 if value < 7 else value - 1)
            lines[i] = ",".join(cells)
            break
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def test_rebuild_reuses_only_unchanged_participants(
    quick_example: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Check a second build reuses everyone, and a data change rebuilds only that person."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    first = build(quick_example, participants=CHOSEN, jobs=1)
    assert not any(o.reused for o in first.outcomes)
    # Files were written to disk as each participant finished; the report holds no bytes.
    assert not any(o.files for o in first.outcomes)
    built = [o for o in first.outcomes if o.status == "built"]
    assert built
    for o in built:
        assert o.stored and all((first.out_dir / rel).is_file() for rel in o.stored)
    before = {p: p.read_bytes() for p in sorted(first.out_dir.rglob("*")) if p.is_file()}

    second = build(quick_example, participants=CHOSEN, jobs=1)
    assert all(o.reused for o in second.outcomes)
    after = {p: p.read_bytes() for p in sorted(second.out_dir.rglob("*")) if p.is_file()}
    assert before == after  # byte-identical, the overview and tables included

    _bump_first_rating(quick_example, "P03")
    third = build(quick_example, participants=CHOSEN, jobs=1)
    reused = {o.participant: o.reused for o in third.outcomes}
    assert reused == {"P01": True, "P03": False, "P09": True}
    p03 = next(o for o in third.outcomes if o.participant == "P03")
    assert p03.version == 2  # new data make a new booklet version

    forced = build(quick_example, participants=CHOSEN, jobs=1, force=True)
    assert not any(o.reused for o in forced.outcomes)
