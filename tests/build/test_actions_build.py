"""A build's out/actions.csv and overview: every refer flag reaches the list, also when no
booklet could be made."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

from springback.build import jobs
from springback.build.pipeline import build

pytestmark = [pytest.mark.xdist_group("example"), pytest.mark.slow]


def _actions(project: Path) -> dict[str, dict[str, str]]:
    with open(project / "out" / "actions.csv", encoding="utf-8") as fh:
        return {r["participant"]: r for r in csv.DictReader(fh)}


def test_refer_flags_reach_the_list_without_a_booklet(quick_example: Path,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    """Check P09 (too little data) and P12 (rendering failed) both have their refer action."""

    def broken(*_args: object, **_kwargs: object) -> dict[str, bytes]:
        raise RuntimeError("the PDF engine is missing")

    monkeypatch.setattr(jobs, "render_booklets", broken)
    report = build(quick_example, participants=["P09", "P12"], jobs=1)
    status = {o.participant: o.status for o in report.outcomes}
    assert status == {"P09": "not enough data", "P12": "failed"}
    rows = _actions(quick_example)
    assert set(rows) == {"P09", "P12"}
    assert rows["P09"]["reason"].startswith("stopped answering: no answers for 107.0 days")
    assert rows["P09"]["since"] == "2026-02-13"  # 7 days after the last answer
    assert rows["P12"]["since"] == "2026-05-21"
    assert rows["P09"]["booklet"].startswith("none: 23 answered prompts")
    page = (quick_example / "out" / "index.html").read_text(encoding="utf-8")
    todo = page[page.index('id="todo"'):page.index('id="with-booklet"')]
    assert "P09" in todo and "P12" in todo and "contact the participant" in todo
    without = page[page.index('id="without-booklet"'):]
    assert "P09" in without and "Answered prompts per week" in without
