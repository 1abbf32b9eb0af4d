"""Open actions: every refer and hold flag and held booklet until recorded done; reviewers."""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner

from springback.archive import audit
from springback.cli import main
from springback.errors import ReviewError
from springback.review import actions, gate
from tests.support.tiny_projects import fake_build, make_project


def silence(when: str = "2026-02-06") -> dict[str, Any]:
    """A 'stopped answering' refer flag as the build stores it."""
    return {"participant": "P03", "rule": "stopped answering", "action": "refer",
            "value": 107.0, "when": when,
            "detail": f"no answers for 107.0 days before the end of the data period (rule: 7 "
                      f"days); the last answer was on {when}"}


def no_booklet(when: str = "2026-02-06") -> dict[str, dict[str, Any]]:
    """P03 as a participant with too little data for a booklet and a refer flag."""
    return {"P03": {"status": "not enough data", "files": [], "flags": [silence(when)],
                    "reason": "23 answered prompts; a booklet needs at least 30"}}


def test_refer_flag_without_booklet_is_an_open_action(tmp_path: Path) -> None:
    """Check that a refer flag of a participant without a booklet is listed with its reason."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",), extra=no_booklet())
    found = {(a.participant, a.kind): a for a in actions.open_actions(project)}
    assert set(found) == {("P02", "review"), ("P03", "refer")}
    refer = found[("P03", "refer")]
    assert refer.since == "2026-02-06"
    assert refer.reason.startswith("stopped answering: no answers for 107.0 days")
    assert refer.booklet == "none: 23 answered prompts; a booklet needs at least 30"
    assert found[("P02", "review")].booklet == "version 1 (held)"
    rows = list(csv.DictReader(io.StringIO(actions.actions_csv(list(found.values())).decode())))
    assert set(rows[0]) >= {"participant", "action", "reason", "since", "booklet"}


def test_done_closes_the_action_across_builds_until_new_data(tmp_path: Path) -> None:
    """Check --done writes an audit entry, the action stays closed while its data stay, and a
    new hit of the rule opens it again with its own date."""
    project = make_project(tmp_path / "study")
    first = fake_build(project, tmp_path / "s1", extra=no_booklet())
    runner = CliRunner()
    done = runner.invoke(main, ["review", str(project), "P03", "--done", "--by", "C. Oordinator",
                                "--note", "phoned; doing fine"])
    assert done.exit_code == 0, done.output
    assert "recorded as done by C. Oordinator" in done.output
    entry = audit.read_entries(project / "archive")[-1]
    assert entry["kind"] == "action" and entry["by"] == "C. Oordinator"
    assert entry["rule"] == "stopped answering" and entry["build"] == first
    assert "P03" not in (project / "archive" / "audit.jsonl").read_text(encoding="utf-8")
    assert audit.note_text(project / "archive", "P03", entry["note_sha256"]) == "phoned; doing fine"
    assert actions.open_actions(project) == []
    fake_build(project, tmp_path / "s2", extra=no_booklet())
    assert actions.open_actions(project) == []
    fake_build(project, tmp_path / "s3", extra=no_booklet("2026-03-01"))
    reopened = actions.open_actions(project)
    assert [(a.participant, a.since) for a in reopened] == [("P03", "2026-03-01")]
    again = runner.invoke(main, ["review", str(project), "P01", "--done", "--by", "C"])
    assert again.exit_code == 1 and "no open action" in again.output


def test_since_is_the_first_build_of_the_run(tmp_path: Path) -> None:
    """Check an action raised two builds ago keeps the build it first appeared in."""
    project = make_project(tmp_path / "study")
    first = fake_build(project, tmp_path / "s1", extra=no_booklet())
    fake_build(project, tmp_path / "s2", extra=no_booklet())
    (action,) = actions.open_actions(project)
    assert action.first_build == first


def test_a_decision_closes_the_review_action(tmp_path: Path) -> None:
    """Check approving a held booklet removes its action; --done on it points to approval."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    with pytest.raises(ReviewError, match="approve"):
        actions.close(project, "P02", "Dr. A")
    actions.decide(project, "P02", "approve", "Dr. A", "fine", version="1")
    assert actions.open_actions(project) == []


def test_stale_version_is_refused_with_both_versions(tmp_path: Path) -> None:
    """Check a decision on a version that is no longer the latest names both versions."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",), extra={"P02": {"version": 2}})
    with pytest.raises(ReviewError, match=r"version 1 .* holds version 2"):
        actions.decide(project, "P02", "approve", "Dr. A", version="1")
    assert gate.list_held(project)[0].state == "held"
    runner = CliRunner()
    stale = runner.invoke(main, ["review", str(project), "P02", "--approve", "--version", "1",
                                 "--by", "Dr. A"])
    assert stale.exit_code == 1 and "holds version 2" in stale.output


REVIEWERS = """
[[review.reviewers]]
name = "Dr. A. Reviewer"
role = "clinical psychologist"

[[review.reviewers]]
name = "B. Nurse"
"""


def test_only_listed_reviewers_decide(tmp_path: Path) -> None:
    """Check that with a reviewers list an unknown name is refused with the allowed names."""
    project = make_project(tmp_path / "study")
    with open(project / "study.toml", "a", encoding="utf-8") as fh:
        fh.write(REVIEWERS)
    fake_build(project, tmp_path / "s1", holds=("P02",), extra=no_booklet())
    with pytest.raises(ReviewError) as info:
        actions.decide(project, "P02", "approve", "Mallory")
    assert "Dr. A. Reviewer (clinical psychologist), B. Nurse" in str(info.value)
    with pytest.raises(ReviewError, match=r"B\. Nurse"):
        actions.close(project, "P03", "Mallory")
    runner = CliRunner()
    refused = runner.invoke(main, ["review", str(project), "P02", "--approve", "--by", "Eve"])
    assert refused.exit_code == 1 and "not a reviewer" in refused.output
    assert "Traceback" not in refused.output
    actions.decide(project, "P02", "approve", "Dr. A. Reviewer")
    actions.close(project, "P03", "B. Nurse")
    assert actions.open_actions(project) == []


def test_listing_shows_open_actions(tmp_path: Path) -> None:
    """Check `review PROJECT` lists held booklets and open actions with the way to close one."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",), extra=no_booklet())
    listed = CliRunner().invoke(main, ["review", str(project)])
    assert listed.exit_code == 0, listed.output
    assert "Open actions" in listed.output and "stopped answering" in listed.output
    assert "--done --by NAME" in listed.output


def test_init_template_shows_the_reviewers_list() -> None:
    """Check `init` writes the reviewers table as a commented example that parses when used."""
    import tomllib

    from springback.settings import from_mapping
    from springback.settings.scaffold import commented_settings

    text = commented_settings()
    assert "# [[review.reviewers]]\n# name = " in text
    used = text.replace("# [[review.reviewers]]", "[[review.reviewers]]").replace(
        '# name = "Dr. A. Example"', 'name = "Dr. A. Example"')
    settings, _ = from_mapping(tomllib.loads(used))
    assert [r.name for r in settings.review.reviewers] == ["Dr. A. Example"]


def test_a_silence_applies_its_days_after_the_last_answer(tmp_path: Path) -> None:
    """Check a silence rule of 7 days first applied 7 days after the last answer."""
    project = make_project(tmp_path / "study")
    with open(project / "study.toml", "a", encoding="utf-8") as fh:
        fh.write('\n[[safety.rules]]\nname = "stopped answering"\nsilence_days = 7\n'
                 'action = "refer"\n')
    fake_build(project, tmp_path / "s1", extra=no_booklet())
    (action,) = actions.open_actions(project)
    assert action.since == "2026-02-13" and action.when == "2026-02-06"
