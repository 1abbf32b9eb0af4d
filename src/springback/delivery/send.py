"""Sending released booklets by e-mail, as protected PDFs, through the study's own SMTP server.

Public functions:

    plan(project: Path) -> DeliveryPlan                        # what the gate lets out, and why not
    send(project: Path, *, dry_run=False, eml_dir=None, passphrases_out=None,
         resend_unconfirmed=False, participants=None, context=None, environ=os.environ,
         progress=None) -> SendReport

The contacts file and the passphrases are handled in `delivery_private`, messages, PDF
protection and the SMTP conversation in `delivery_mail`.

Only PDFs that `review.release` copied into out/release/ are sent, and only when the latest
build's manifest, the review decisions and the current roster still allow it; HTML copies are
never sent (they cannot be protected). Addresses come from a contacts file kept outside data/,
out/ and archive/, and are never written to any file there: the audit log's `send` entries name
the participant by their log token and the booklet by its hashes.

Sending at most once. Before a message goes to the server a `send` entry with state 'attempt'
is appended; after the server's answer, one with state 'sent' or 'refused' and the reply (or
'unknown' when the connection broke while the message was on its way). A rerun skips every
booklet with a 'sent' entry and sends again those refused. If the process dies between the two
entries, or the state is 'unknown', the server may or may not have accepted the message, so
the booklet is 'unconfirmed': it is not sent again until a person has checked (the server's
log, or asked the recipient) and reruns with `resend_unconfirmed`. We chose a possibly missing
message, which the team notices in the report, over a possibly doubled one.
"""

from __future__ import annotations

import csv
import getpass
import io
import os
import ssl
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from email.utils import parseaddr
from pathlib import Path
from typing import Any, cast

from springback.archive.audit import append, read_entries, subject
from springback.archive.manifest import trusted_manifest
from springback.delivery import mail
from springback.delivery.contacts import (
    EMAIL,
    check_private_place,
    passphrases,
    read_contacts,
    write_private,
)
from springback.errors import DeliveryError
from springback.files import BuildLock, project_dirs, sha256_bytes
from springback.model import EDITIONS
from springback.review.gate import current_roster, release_gate, roster_gate
from springback.settings import StudySettings, load_settings

NOT_DONE = ("refused by server", "unconfirmed", "no address", "no passphrase", "not attempted")
"""Outcome states that leave a releasable booklet undelivered."""


@dataclass(frozen=True)
class Planned:
    """One released booklet the gate lets out: which file, for whom, in which language."""

    participant: str
    edition: str
    language: str
    version: str
    path: Path
    booklet_sha256: str


@dataclass(frozen=True)
class DeliveryPlan:
    """What may be sent from the latest build, and every participant who may not, with why."""

    build: str
    messages: tuple[Planned, ...]
    refused: tuple[tuple[str, str], ...]


@dataclass(frozen=True)
class Outcome:
    """What happened to one booklet in this run."""

    participant: str
    edition: str
    state: str
    """'sent', 'written' (dry run), 'already sent', or one of NOT_DONE."""
    detail: str = ""


@dataclass(frozen=True)
class SendReport:
    """Everything one run did; `undelivered` lists what still needs attention."""

    build: str
    dry_run: bool
    outcomes: tuple[Outcome, ...]
    refused: tuple[tuple[str, str], ...]
    new_passphrases: tuple[str, ...]
    passphrases_file: Path | None
    eml_dir: Path | None

    @property
    def undelivered(self) -> list[Outcome]:
        return [o for o in self.outcomes if o.state in NOT_DONE]


# -- the gate ----------------------------------------------------------------------------------


def _why_not(project: Path, pid: str, rec: dict[str, Any], now: dict[str, Any] | None) -> str:
    """'' when the participant's booklet may leave, else the reason in plain words.

    The roster as it is now can only take consent or feedback back; the rest is the release
    gate's own judgement on the archived record.
    """
    return roster_gate(now) or release_gate(project_dirs(project).archive, pid, rec)[0]


def _dispatch(release: Path) -> dict[str, dict[str, str]]:
    sheet = release / "dispatch.csv"
    if not sheet.is_file():
        raise DeliveryError("nothing has been released yet: out/release/dispatch.csv is missing; "
                            "run `springback release` first")
    rows = csv.DictReader(io.StringIO(sheet.read_text(encoding="utf-8"), newline=""))
    return {r["participant"]: r for r in rows if r.get("participant")}


def plan(project: Path) -> DeliveryPlan:
    """Check every released booklet against the latest build, the review log and the roster."""
    dirs = project_dirs(project)
    settings, _ = load_settings(dirs.root)
    manifest = trusted_manifest(dirs.root)
    if manifest is None:
        raise DeliveryError("nothing has been built yet; run `springback build` first")
    release = dirs.out / "release"
    sheet = _dispatch(release)
    roster = current_roster(dirs.root, settings)
    hashes: dict[str, str] = manifest.get("files", {})
    messages: list[Planned] = []
    refused: list[tuple[str, str]] = []
    for pid, rec in sorted(manifest.get("participants", {}).items()):
        reason = _why_not(dirs.root, pid, rec, roster.get(pid))
        if not reason and pid not in sheet:
            reason = "not released; run `springback release`"
        if reason:
            refused.append((pid, reason))
            continue
        if str(sheet[pid].get("version", "")) != str(rec.get("version", "")):
            refused.append((pid, f"out/release/ holds version {sheet[pid].get('version')}, the "
                                 f"latest build version {rec.get('version')}; run `springback "
                                 "release` again"))
            continue
        files = [f for f in rec["files"] if f.endswith(".pdf") and Path(f).stem in EDITIONS]
        if not files:
            refused.append((pid, "no PDF booklet (add 'pdf' to booklet.formats)"))
        for rel in files:
            edition = Path(rel).stem
            if edition == "therapist" and not roster[pid]["therapist"]:
                refused.append((pid, "therapist copy: the roster does not say the participant "
                                     "agreed"))
                continue
            found = [release / pid / n for n in (Path(rel).name, rel.replace("/", "_"))
                     if (release / pid / n).is_file()]
            digest = sha256_bytes(found[0].read_bytes()) if found else ""
            if not found or digest != hashes.get(f"out/{rel}"):
                refused.append((pid, f"{edition} edition: the copy in out/release/ is missing "
                                     "or differs from the archived booklet; run `springback "
                                     "release` again"))
                continue
            messages.append(Planned(pid, edition, str(roster[pid]["language"]),
                                    str(rec.get("version", "")), found[0], digest))
    return DeliveryPlan(str(manifest["build"]), tuple(messages), tuple(refused))


# -- sending -----------------------------------------------------------------------------------


def _history(archive: Path) -> dict[tuple[str, str, str], str]:
    """(token, edition, booklet hash) -> 'sent', 'refused' or 'attempt' (outcome not known)."""
    out: dict[tuple[str, str, str], str] = {}
    if not (archive / "audit.jsonl").exists():
        return out
    for e in read_entries(archive):
        if e.get("kind") != "send":
            continue
        key = (str(e.get("subject")), str(e.get("edition")), str(e.get("booklet_sha256")))
        if out.get(key) != "sent":
            out[key] = str(e.get("state"))
    # 'unknown' (connection lost mid-message) is as uncertain as a missing answer.
    return {k: ("attempt" if v == "unknown" else v) for k, v in out.items()}


def _operator() -> str:
    """The login name of whoever runs the sending (for the log)."""
    try:
        return getpass.getuser()
    except (OSError, KeyError):  # no user name in this environment (some containers)
        return "unknown"


def _filename(item: Planned) -> str:
    if item.edition == "participant":
        return f"booklet-v{item.version}.pdf"
    return f"booklet-{item.participant}-therapist-edition-v{item.version}.pdf"


def send(project: Path, *, dry_run: bool = False, eml_dir: Path | None = None,
         passphrases_out: Path | None = None, resend_unconfirmed: bool = False,
         participants: list[str] | None = None, context: ssl.SSLContext | None = None,
         environ: Mapping[str, str] = os.environ,
         progress: Callable[[Outcome], None] | None = None) -> SendReport:
    """Send (or, with `dry_run`, write as .eml files) every releasable booklet once."""
    dirs = project_dirs(project)
    settings, _ = load_settings(dirs.root)
    if not EMAIL.fullmatch(parseaddr(settings.delivery.sender)[1]):
        raise DeliveryError("study.toml: delivery.sender must be the study's own address, "
                            "like 'Mood study <moodstudy@your-institution.example>'")
    mail.check_texts(settings)
    if dry_run:
        eml_dir = check_private_place(dirs.root, settings, eml_dir or Path("outbox"),
                                      "the folder for .eml files")
    with BuildLock(dirs.root):
        the_plan = plan(dirs.root)
        wanted = set(participants or [])
        unknown = wanted - {m.participant for m in the_plan.messages} - {
            p for p, _ in the_plan.refused}
        if unknown:
            raise DeliveryError(f"participant '{sorted(unknown)[0]}' is not in the latest build")
        items = [m for m in the_plan.messages if not wanted or m.participant in wanted]
        refused = tuple(r for r in the_plan.refused if not wanted or r[0] in wanted)
        contacts = read_contacts(dirs.root, settings)
        history = _history(dirs.archive)
        outcomes: list[Outcome] = []
        todo: list[tuple[Planned, str, str]] = []
        for item in items:
            contact = contacts.get(item.participant)
            to = (contact.email if item.edition == "participant" else contact.therapist_email) \
                if contact else ""
            token = subject(dirs.archive, item.participant, create=not dry_run) or ""
            before = history.get((token, item.edition, item.booklet_sha256))
            if before == "sent":
                outcomes.append(Outcome(item.participant, item.edition, "already sent"))
            elif before == "attempt" and not resend_unconfirmed:
                outcomes.append(Outcome(item.participant, item.edition, "unconfirmed",
                                        "an earlier run stopped before the server's answer was "
                                        "recorded; check, then rerun with --resend-unconfirmed"))
            elif not to:
                outcomes.append(Outcome(item.participant, item.edition, "no address",
                                        f"no {'therapist_' * (item.edition == 'therapist')}"
                                        "email in the contacts file"))
            else:
                todo.append((item, to, token))
        phrases, new, written = passphrases(
            dirs.root, settings, [i.participant for i, _, _ in todo], passphrases_out,
        ) if todo else ({}, (), None)
        run = _Run(dirs.root, settings, dry_run, eml_dir, context, environ, progress)
        outcomes += run.go(todo, phrases)
    order = {(m.participant, m.edition): i for i, m in enumerate(items)}
    outcomes.sort(key=lambda o: order[(o.participant, o.edition)])
    return SendReport(the_plan.build, dry_run, tuple(outcomes), refused, new, written,
                      eml_dir if dry_run else None)


@dataclass
class _Run:
    """One pass over the messages to send: compose, then write or hand to the server."""

    root: Path
    settings: StudySettings
    dry_run: bool
    eml_dir: Path | None
    context: ssl.SSLContext | None
    environ: Mapping[str, str]
    progress: Callable[[Outcome], None] | None

    def _record(self, item: Planned, token: str, fields: dict[str, Any]) -> None:
        append(project_dirs(self.root).archive, "send", {
            "subject": token, "edition": item.edition, "recipient": item.edition,
            "version": item.version, "booklet_sha256": item.booklet_sha256,
            "by": _operator(), **fields})

    def go(self, todo: list[tuple[Planned, str, str]], phrases: dict[str, str]) -> list[Outcome]:
        outcomes: list[Outcome] = []
        smtp = None
        if todo and not self.dry_run:
            smtp = mail.connect(mail.smtp_config(self.settings, self.root, self.environ,
                                                 self.context))
        try:
            for item, to, token in todo:
                if smtp is None and not self.dry_run:
                    outcome = Outcome(item.participant, item.edition, "not attempted",
                                      "the connection to the server was lost")
                else:
                    outcome, lost = self._one(smtp, item, to, token, phrases)
                    if lost:
                        mail.disconnect(cast(Any, smtp))  # `lost` means it was open
                        smtp = None
                outcomes.append(outcome)
                if self.progress is not None:
                    self.progress(outcome)
        finally:
            if smtp is not None:
                mail.disconnect(smtp)
        return outcomes

    def _one(self, smtp: Any, item: Planned, to: str, token: str,
             phrases: dict[str, str]) -> tuple[Outcome, bool]:
        phrase = phrases.get(item.participant, "")
        if not phrase:
            return Outcome(item.participant, item.edition, "no passphrase",
                           "no passphrase for this participant in the passphrases file"), False
        pdf = item.path.read_bytes()
        if sha256_bytes(pdf) != item.booklet_sha256:
            raise DeliveryError(f"{item.path} changed while sending; nothing more was sent. "
                                "Run `springback release` again")
        protected = mail.protect_pdf(pdf, phrase)
        msg = mail.compose(self.settings, to=to, language=item.language, edition=item.edition,
                           participant=item.participant, version=item.version,
                           attachment=protected, filename=_filename(item))
        raw = msg.as_bytes()
        if self.dry_run:
            assert self.eml_dir is not None
            name = f"{item.participant}-{item.edition}.eml"
            write_private(self.eml_dir / name, raw)
            return Outcome(item.participant, item.edition, "written", name), False
        facts = {"attachment_sha256": sha256_bytes(protected), "message_id": msg["Message-ID"]}
        self._record(item, token, {"state": "attempt", **facts})
        result = mail.transmit(smtp, parseaddr(self.settings.delivery.sender)[1], to, raw)
        self._record(item, token, {"state": result.state, "response": result.response, **facts})
        if result.state == "unknown":
            return Outcome(item.participant, item.edition, "unconfirmed", result.response), True
        state = "sent" if result.state == "sent" else "refused by server"
        return Outcome(item.participant, item.edition, state, result.response), \
            not result.connected
