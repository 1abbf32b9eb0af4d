"""Open actions: every refer and hold flag and every held booklet, until someone records it done.

Public functions:

    open_actions(project: Path, people: dict | None = None) -> list[Action]
        # people: this build's records (id -> manifest-shaped record); default: the latest build
    close(project: Path, participant: str, by: str, note: str = "", rule: str = "")
        -> list[dict]                                   # the audit-log entries written
    actions_csv(actions: list[Action]) -> bytes         # out/actions.csv
    check_reviewer(project: Path, by: str) -> str       # the name, or ReviewError
    decide(project: Path, participant: str, decision: str, by: str, note: str = "",
           version: str = "", fingerprint: str = "") -> dict   # approve / reject, checked

An action is one rule that fired for one participant: 'refer' (contact the participant),
'hold' without a booklet (follow up; there is nothing to approve) and 'review' (a held booklet
waits for a decision). A 'refer' or 'hold' action stays open across builds until an `action`
entry in the audit log records it done for the same triggering data (the flag's `when`); a
later hit of the same rule (new data) opens it again. A 'review' action closes with the
approval or rejection of that booklet version (`review.gate`). `since` is the date the rule
first applied in the current run of builds: the date of its data (for a silence rule of N
days, N days after the last answer), or the build's date when the flag has none.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from springback.archive.audit import append, read_entries, save_note, subject
from springback.archive.verify import expected_manifests, read_json
from springback.errors import ArchiveError, ReviewError
from springback.files import BuildLock, project_dirs
from springback.model import Flag

ACTION_COLUMNS = ("participant", "action", "reason", "since", "booklet", "rule")
"""Columns of out/actions.csv. The build that first saw an action is known only once the build
is archived, so it is not a column: a rebuild with nothing changed writes the same bytes."""
"""Columns of out/actions.csv, in order."""

ACTION_WORDS = {
    "review": "review the held booklet (approve or reject)",
    "refer": "contact the participant (a refer rule fired)",
    "hold": "follow up (a hold rule fired; no booklet was made to review)",
}
"""What the coordinator does for each kind of action."""


@dataclass(frozen=True)
class Action:
    """One open action for one participant."""

    participant: str
    kind: str
    """'review', 'refer' or 'hold' (see ACTION_WORDS)."""
    rule: str
    reason: str
    since: str
    booklet: str
    """'version N (held)', 'version N' or 'none: <why>'."""
    first_build: str = ""
    when: str = ""
    fingerprint: str = ""
    version: str = ""

    @property
    def words(self) -> str:
        """What to do, in words."""
        return ACTION_WORDS.get(self.kind, self.kind)

    def row(self) -> dict[str, str]:
        """The action as a row of out/actions.csv."""
        return {"participant": self.participant, "action": self.words, "reason": self.reason,
                "since": self.since, "booklet": self.booklet, "rule": self.rule}


def _booklet(rec: dict[str, Any], held: bool) -> str:
    if rec.get("files") and rec.get("status", "built") in ("built", "unchanged"):
        return f"version {rec.get('version', '')}" + (" (held)" if held else "")
    why = rec.get("reason") or rec.get("status") or "no booklet"
    return f"none: {why}"


def silence_rules(settings: Any) -> dict[str, int]:
    """Rule name -> silence_days of each silence rule, from settings or their manifest form."""
    if isinstance(settings, dict):
        rules = settings.get("safety", {}).get("rules", [])
        return {str(r["name"]): int(r["silence_days"]) for r in rules
                if isinstance(r, dict) and r.get("silence_days") is not None}
    return {r.name: int(r.silence_days) for r in settings.safety.rules
            if r.silence_days is not None}


def _applied(rule: str, when: str, silence: dict[str, int]) -> str:
    """The date a rule first applied: a silence rule N days after the last answer, any other
    rule on the date of its data."""
    if rule in silence and when:
        try:
            return (dt.date.fromisoformat(when) + dt.timedelta(days=silence[rule])).isoformat()
        except ValueError:
            return when
    return when


def _candidates(pid: str, rec: dict[str, Any],
                silence: dict[str, int] | None = None) -> list[dict[str, str]]:
    """The actions one record asks for, before the log says which are done."""
    silence = silence or {}
    flags = [Flag.from_row(f, pid) for f in rec.get("flags", []) if isinstance(f, dict)]
    holds = [f for f in flags if f.action == "hold"]
    has_booklet = bool(rec.get("files")) and rec.get("status", "built") in ("built", "unchanged")
    out: list[dict[str, str]] = []
    if holds and has_booklet:
        first = holds[0]
        out.append({"kind": "review", "rule": first.rule, "when": first.when,
                    "reason": "; ".join(f"{f.rule}: {f.detail}" for f in holds),
                    "booklet": _booklet(rec, True)})
    for f in flags:
        kind = f.action
        if kind == "hold" and has_booklet:
            continue
        if kind not in ("refer", "hold"):
            continue
        out.append({"kind": kind, "rule": f.rule, "when": f.when,
                    "reason": f"{f.rule}: {f.detail}",
                    "booklet": _booklet(rec, bool(holds))})
    for c in out:
        c["since"] = _applied(c["rule"], c["when"], silence)
    return out


def _date(build_entry: dict[str, Any]) -> str:
    return str(build_entry.get("time", ""))[:10]


@dataclass
class _Episode:
    since: str
    first_build: str
    when: str
    closed: bool = False


def _tokens(archive: Path, pids: list[str]) -> dict[str, str]:
    """Log token -> participant id, for participants who have a key."""
    out = {}
    for pid in pids:
        token = subject(archive, pid)
        if token is not None:
            out[token] = pid
    return out


def _replay(archive: Path, entries: list[dict[str, Any]], tokens: dict[str, str],
            current: dict[str, dict[str, Any]] | None, now: str,
            silence: dict[str, int]) -> dict[tuple[str, str, str], _Episode]:
    """Walk the log in order: builds open or end episodes, `action` entries close them."""
    episodes: dict[tuple[str, str, str], _Episode] = {}
    manifests = expected_manifests(entries)

    def step(people: dict[str, Any], build: str, day: str, rules: dict[str, int]) -> None:
        seen = set()
        for pid, rec in people.items():
            for c in _candidates(pid, rec, rules):
                key = (pid, c["kind"], c["rule"])
                seen.add(key)
                ep = episodes.get(key)
                if ep is None or (ep.closed and ep.when != c["when"]):
                    episodes[key] = _Episode(c["since"] or day, build, c["when"])
                elif not ep.closed:
                    ep.when = c["when"]
        for key in [k for k in episodes if k not in seen]:
            del episodes[key]

    for e in entries:
        kind = e.get("kind")
        if kind == "build" and e.get("build") in manifests:
            build = str(e["build"])
            manifest = read_json(archive / build / "manifest.json")
            rules = silence_rules(manifest.get("settings", {}).get("normalised", {}))
            step(manifest.get("participants", {}), build, _date(e), rules)
        elif kind == "action":
            pid = tokens.get(str(e.get("subject", "")))
            ep = episodes.get((pid or "", str(e.get("action")), str(e.get("rule"))))
            if ep is not None and ep.when == str(e.get("when", "")):
                ep.closed = True
    if current is not None:
        step(current, "this build", now, silence)
    return episodes


def latest_build(project: Path) -> dict[str, Any]:
    """The latest build's manifest, read as the review gate reads it (ReviewError if none)."""
    from springback.review import gate

    return gate._current(project)


def open_actions(project: Path, people: dict[str, dict[str, Any]] | None = None,
                 today: str = "", silence: dict[str, int] | None = None) -> list[Action]:
    """Every action still open: of this build's records (`people`, with this build's
    `silence_rules`), else of the latest build."""
    from springback.review.gate import HELD, manifest_flags, review_state

    archive = project_dirs(project).archive
    try:
        entries = read_entries(archive) if (archive / "audit.jsonl").exists() else []
    except ArchiveError:
        entries = []
    manifest: dict[str, Any] = {}
    if people is None:
        manifest = latest_build(project)
        records: dict[str, dict[str, Any]] = manifest.get("participants", {})
    else:
        records = people
    tokens = _tokens(archive, sorted(records))
    episodes = _replay(archive, entries, tokens, people, today, silence or {})
    out: list[Action] = []
    for pid, rec in sorted(records.items()):
        for c in _candidates(pid, rec):
            ep = episodes.get((pid, c["kind"], c["rule"]))
            if ep is None or ep.closed:
                continue
            fp = str(rec.get("fingerprint", ""))
            if c["kind"] == "review" and review_state(
                    project, pid, fp, manifest_flags(pid, rec)) != HELD:
                continue
            out.append(Action(pid, c["kind"], c["rule"], c["reason"], ep.since, c["booklet"],
                              ep.first_build, c["when"], fp, str(rec.get("version", ""))))
    return out


def actions_csv(actions: list[Action]) -> bytes:
    """out/actions.csv: one row per open action (text cells a spreadsheet would run quoted)."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=ACTION_COLUMNS, lineterminator="\n")
    writer.writeheader()
    for a in actions:
        writer.writerow({k: _safe(v) for k, v in a.row().items()})
    return buf.getvalue().encode("utf-8")


def _safe(value: str) -> str:
    if value.startswith(("=", "+", "-", "@", "\t", "\r")):
        try:
            float(value)
        except ValueError:
            return "'" + value
    return value


def reviewers(project: Path) -> list[tuple[str, str]]:
    """(name, role) of every reviewer listed in study.toml ([[review.reviewers]]); [] if none."""
    from springback.settings import load_settings

    settings, _ = load_settings(project_dirs(project).root)
    return [(r.name.strip(), r.role) for r in settings.review.reviewers]


def check_reviewer(project: Path, by: str) -> str:
    """The decider's name, when study.toml lists no reviewers or lists this one."""
    name = by.strip()
    if not name:
        raise ReviewError("say who decides: pass --by with the reviewer's name")
    allowed = reviewers(project)
    if allowed and name not in {n for n, _ in allowed}:
        names = ", ".join(f"{n} ({r})" if r else n for n, r in allowed)
        raise ReviewError(f"'{name}' is not a reviewer of this study; study.toml "
                          f"([[review.reviewers]]) allows: {names}. Decide under one of these "
                          "names, or add the person to the list")
    return name


def close(project: Path, participant: str, by: str, note: str = "",
          rule: str = "") -> list[dict[str, Any]]:
    """Record the participant's open refer and hold actions (or only `rule`'s) as done."""
    name = check_reviewer(project, by)
    actions = [a for a in open_actions(project) if a.participant == participant]
    todo = [a for a in actions if a.kind != "review" and (not rule or a.rule == rule)]
    if not todo:
        if any(a.kind == "review" for a in actions):
            raise ReviewError(f"the open action of '{participant}' is a held booklet; approve "
                              "or reject it (`springback review PROJECT ID --approve --by NAME`)")
        shown = ", ".join(sorted({a.rule for a in actions if a.kind != "review"}))
        extra = f" for rule '{rule}' (open rules: {shown})" if rule and shown else ""
        raise ReviewError(f"'{participant}' has no open action{extra} in the latest build; "
                          "list them with `springback review PROJECT`")
    archive = project_dirs(project).archive
    build = str(latest_build(project).get("build", ""))
    token = subject(archive, participant, create=True)
    entries = []
    for a in todo:
        fields: dict[str, Any] = {"subject": token, "action": a.kind, "rule": a.rule,
                                  "when": a.when, "build": build, "by": name}
        if note:
            fields["note_sha256"] = save_note(archive, participant, note)
        entries.append(append(archive, "action", fields))
    return entries


def decide(project: Path, participant: str, decision: str, by: str, note: str = "",
           version: str = "", fingerprint: str = "") -> dict[str, Any]:
    """Approve or reject a held booklet as `review.gate` does, after two checks: the decider
    is a listed reviewer (when study.toml lists any), and the version decided on (when given)
    is the one in the latest build."""
    from springback.review import gate

    if decision not in ("approve", "reject"):
        raise ReviewError(f"a decision is 'approve' or 'reject', not '{decision}'")
    name = check_reviewer(project, by)
    manifest = latest_build(project)
    rec = manifest.get("participants", {}).get(participant)
    if rec is not None and (version or fingerprint):
        latest_version, latest_fp = str(rec.get("version", "")), str(rec.get("fingerprint", ""))
        if (version and version != latest_version) or (fingerprint and fingerprint != latest_fp):
            shown = version or "an earlier one"
            raise ReviewError(
                f"the decision was on version {shown} of the booklet of '{participant}', but "
                f"the latest build ({manifest.get('build')}) holds version {latest_version}; "
                "nothing was recorded. Open the latest version and decide on that one")
    act = gate.approve if decision == "approve" else gate.reject
    return act(project, participant, name, note)


def decide_locked(project: Path, participant: str, decision: str, by: str, note: str = "",
                  version: str = "", fingerprint: str = "") -> dict[str, Any]:
    """`decide` while no build runs, so the version checked is the version recorded."""
    with BuildLock(project, wait_seconds=10.0):
        return decide(project, participant, decision, by, note, version, fingerprint)
