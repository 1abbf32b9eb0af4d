"""End to end: build part of the example, release, and send through a real local SMTP server.

The example's P01 (therapist copy agreed) and P02 (no therapist copy) are releasable; P08 is
held by the severe-score rule, P10 withdrew and P11 wants no feedback.
"""

from __future__ import annotations

import csv
import email
import email.policy
import io
import json
import shutil
from collections import Counter
from collections.abc import Iterator
from pathlib import Path

import pikepdf
import pytest
from click.testing import CliRunner

from springback.archive.audit import read_entries, subject
from springback.archive.manifest import verify
from springback.cli import main
from springback.delivery import send as delivery
from springback.errors import DeliveryError
from springback.files import sha256_file
from tests.support.delivery_server import PASSWORD, USER, Server, smtp_server
from tests.support.project import copy_example

pytestmark = pytest.mark.xdist_group("example")

PEOPLE = ["P01", "P02", "P08", "P10", "P11"]
ADDRESS = {pid: f"{pid.lower()}@example.net" for pid in PEOPLE}
THERAPIST = {"P01": "dr.p01@example.net", "P02": "dr.p02@example.net"}
ENV = {"SPRINGBACK_SMTP_PASSWORD": PASSWORD}


@pytest.fixture(scope="module")
def released(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The example built for five people (fewer surrogates, for speed) and released once."""
    from springback.build.pipeline import build
    from springback.review.gate import release

    project = copy_example(tmp_path_factory.mktemp("delivery") / "study")
    toml = project / "study.toml"
    toml.write_text(toml.read_text(encoding="utf-8").replace("surrogates = 1000\n",
                                                             "surrogates = 99\n"),
                    encoding="utf-8")
    report = build(project, participants=PEOPLE, jobs=1)
    assert not report.failed
    release(project, by="test lead")
    return project


@pytest.fixture
def server(tmp_path: Path) -> Iterator[Server]:
    folder = tmp_path / "server"
    folder.mkdir()
    with smtp_server(folder, "starttls") as srv:
        yield srv


@pytest.fixture
def project(released: Path, tmp_path: Path, server: Server) -> Path:
    """A fresh copy of the released project, set up to send to the test server."""
    copy = tmp_path / "study"
    shutil.copytree(released, copy)
    private = tmp_path / "private"
    private.mkdir()
    with (private / "contacts.csv").open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(["participant", "email", "therapist_email"])
        for pid in PEOPLE:
            writer.writerow([pid, ADDRESS[pid], THERAPIST.get(pid, "")])
    with (copy / "study.toml").open("a", encoding="utf-8") as fh:
        fh.write(f'\n[delivery]\nsmtp_host = "{server.host}"\nsmtp_port = {server.port}\n'
                 f'security = "starttls"\nuser = "{USER}"\n'
                 'sender = "Tidewater team <moodstudy@example.org>"\n'
                 'contacts_file = "../private/contacts.csv"\n'
                 f'ca_file = "{server.ca_file}"\n'
                 'subject = { nl = "Uw boekje van {study}" }\n')
    return copy


def run(project: Path, **kw: object) -> delivery.SendReport:
    kw.setdefault("passphrases_out", project.parent / "private" / "passphrases.csv")
    return delivery.send(project, environ=ENV, **kw)  # type: ignore[arg-type]


def phrases(project: Path) -> dict[str, str]:
    text = (project.parent / "private" / "passphrases.csv").read_text(encoding="utf-8")
    return {r["participant"]: r["passphrase"] for r in csv.DictReader(io.StringIO(text))}


def pages(pdf: bytes, password: str = "") -> list[bytes]:
    with pikepdf.open(io.BytesIO(pdf), password=password) as doc:
        return [b"".join(c.read_bytes() for c in ([p.Contents] if isinstance(
            p.Contents, pikepdf.Stream) else list(p.Contents))) for p in doc.pages]


def arrivals(srv: Server) -> Counter[tuple[str, str]]:
    """(recipient, attachment name) -> how many times it arrived."""
    out: Counter[tuple[str, str]] = Counter()
    for r in srv.recorder.received:
        for name, _ in r.attachments():
            for to in r.rcpt_tos:
                out[(to, name)] += 1
    return out


EXPECTED = {("p01@example.net", "booklet-v1.pdf"): 1,
            ("dr.p01@example.net", "booklet-P01-therapist-edition-v1.pdf"): 1,
            ("p02@example.net", "booklet-v1.pdf"): 1}


def sends(project: Path) -> list[dict]:
    return [e for e in read_entries(project / "archive") if e.get("kind") == "send"]


def test_each_released_booklet_reaches_only_its_owner(project: Path, server: Server) -> None:
    """Check recipients, attachments (decrypted = the released booklet), texts and the log."""
    report = run(project)
    assert [(o.participant, o.edition, o.state) for o in report.outcomes] == [
        ("P01", "participant", "sent"), ("P01", "therapist", "sent"),
        ("P02", "participant", "sent")]
    assert dict(report.refused) == {"P08": "held for review", "P10": "consent withdrawn",
                                    "P11": "no feedback wanted"}
    assert arrivals(server) == EXPECTED
    keys = phrases(project)
    release = project / "out" / "release"
    by_to = {r.rcpt_tos[0]: r for r in server.recorder.received}
    for to, pid, edition in [("p01@example.net", "P01", "participant"),
                             ("dr.p01@example.net", "P01", "therapist"),
                             ("p02@example.net", "P02", "participant")]:
        msg = by_to[to].message
        assert msg["To"] == to and msg["From"] == "Tidewater team <moodstudy@example.org>"
        [(_, attached)] = by_to[to].attachments()
        with pytest.raises(pikepdf.PasswordError):
            pikepdf.open(io.BytesIO(attached))
        original = (release / pid / f"{edition}.pdf").read_bytes()
        assert pages(attached, keys[pid]) == pages(original)
        assert keys[pid] not in msg.as_string()
    # P02's roster language is Dutch: the study's Dutch subject; P01 falls back to our English.
    assert by_to["p02@example.net"].message["Subject"] == "Uw boekje van Tidewater Mood Diary"
    assert by_to["p01@example.net"].message["Subject"] == \
        "Your personal booklet from Tidewater Mood Diary"
    manifest_files = json.loads(next((project / "archive").glob("0001-*/manifest.json"))
                                .read_text(encoding="utf-8"))["files"]
    log = sends(project)
    assert [e["state"] for e in log] == ["attempt", "sent"] * 3
    token = subject(project / "archive", "P01")
    first = log[1]
    assert first["subject"] == token and "P01" not in json.dumps(log)
    assert first["booklet_sha256"] == manifest_files["out/booklets/P01/participant.pdf"]
    assert first["response"] == "250 2.0.0 Ok: queued as Q0001"
    assert first["time"].endswith("Z") and len(first["attachment_sha256"]) == 64
    assert verify(project) == []  # the send entries keep the log's hash chain intact


def test_a_rerun_sends_nothing_again(project: Path, server: Server) -> None:
    """Check that a second run finds every booklet already sent."""
    run(project)
    again = run(project)
    assert {o.state for o in again.outcomes} == {"already sent"}
    assert arrivals(server) == EXPECTED


def test_interruption_after_half_then_rerun_sends_each_once(project: Path,
                                                             server: Server) -> None:
    """Check that stopping after two messages and running again sends every message once."""
    seen: list[str] = []

    def stop_after_two(outcome: delivery.Outcome) -> None:
        seen.append(outcome.state)
        if len(seen) == 2:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run(project, progress=stop_after_two)
    assert len(server.recorder.received) == 2
    rerun = run(project)
    assert [o.state for o in rerun.outcomes] == ["already sent", "already sent", "sent"]
    assert arrivals(server) == EXPECTED


def test_crash_between_acceptance_and_record_is_not_sent_again(
        project: Path, server: Server, monkeypatch: pytest.MonkeyPatch) -> None:
    """Check the conservative choice: an unrecorded acceptance waits for a person's decision."""
    real = delivery.append

    def dies_after_first_acceptance(archive: Path, kind: str, fields: dict) -> dict:
        if fields.get("state") == "sent":
            raise KeyboardInterrupt  # the process dies before it can record the answer
        return real(archive, kind, fields)

    monkeypatch.setattr(delivery, "append", dies_after_first_acceptance)
    with pytest.raises(KeyboardInterrupt):
        run(project)
    monkeypatch.setattr(delivery, "append", real)
    assert len(server.recorder.received) == 1
    rerun = run(project)
    assert [(o.participant, o.edition, o.state) for o in rerun.outcomes] == [
        ("P01", "participant", "unconfirmed"), ("P01", "therapist", "sent"),
        ("P02", "participant", "sent")]
    assert rerun.undelivered == [rerun.outcomes[0]]
    assert arrivals(server) == EXPECTED
    decided = run(project, resend_unconfirmed=True, participants=["P01"])
    assert [o.state for o in decided.outcomes] == ["sent", "already sent"]
    assert arrivals(server)[("p01@example.net", "booklet-v1.pdf")] == 2


def test_server_refusal_midway_is_retried_once(project: Path, server: Server) -> None:
    """Check that messages the server refused (421) are sent by the next run, and only they."""
    server.recorder.refuse_after = 1
    first = run(project)
    assert [o.state for o in first.outcomes] == ["sent", "refused by server",
                                                 "refused by server"]
    assert first.outcomes[1].detail == "421 4.3.2 service shutting down"
    server.recorder.refuse_after = None
    second = run(project)
    assert [o.state for o in second.outcomes] == ["already sent", "sent", "sent"]
    assert arrivals(server) == EXPECTED


def test_connection_lost_during_a_message_stops_the_run_safely(project: Path,
                                                               server: Server) -> None:
    """Check that a drop mid-message leaves it unconfirmed and the rest for the next run."""
    server.recorder.drop_in_data = True
    first = run(project)
    assert [o.state for o in first.outcomes] == ["unconfirmed", "not attempted",
                                                 "not attempted"]
    assert [e["state"] for e in sends(project)] == ["attempt", "unknown"]
    server.recorder.drop_in_data = False
    second = run(project)
    assert [o.state for o in second.outcomes] == ["unconfirmed", "sent", "sent"]
    assert arrivals(server) == {k: v for k, v in EXPECTED.items()
                                if k[0] != "p01@example.net"}


def test_held_booklet_goes_only_after_approval(project: Path, server: Server) -> None:
    """Check that P08 is refused while held and sent once approved and released."""
    from springback.review.gate import approve, release

    run(project, participants=["P08"])
    assert server.recorder.received == []
    approve(project, "P08", by="Dr. Reviewer (fictional)")
    release(project, by="test lead")
    report = run(project, participants=["P08"])
    # P08 agreed to a therapist copy, but the contacts file names no therapist for them.
    assert [(o.edition, o.state) for o in report.outcomes] == [
        ("participant", "sent"), ("therapist", "no address")]
    assert arrivals(server) == {("p08@example.net", "booklet-v1.pdf"): 1}


def test_withdrawal_after_release_stops_sending(project: Path, server: Server) -> None:
    """Check that the current roster is obeyed even when out/release/ still holds the booklet."""
    roster = project / "data" / "participants.csv"
    roster.write_text(roster.read_text(encoding="utf-8").replace(
        "P02,nl,yes,yes,no,south", "P02,nl,withdrawn,yes,no,south"), encoding="utf-8")
    report = run(project)
    assert dict(report.refused)["P02"] == "consent withdrawn"
    assert ("p02@example.net", "booklet-v1.pdf") not in arrivals(server)


def test_therapist_copy_needs_the_roster_to_say_yes_now(project: Path, server: Server) -> None:
    """Check that a therapist copy is refused once the roster no longer says the person agreed."""
    roster = project / "data" / "participants.csv"
    roster.write_text(roster.read_text(encoding="utf-8").replace(
        "P01,en,yes,yes,yes,north", "P01,en,yes,yes,no,north"), encoding="utf-8")
    report = run(project)
    assert ("P01", "therapist copy: the roster does not say the participant agreed") \
        in report.refused
    assert [(o.participant, o.edition) for o in report.outcomes] == [
        ("P01", "participant"), ("P02", "participant")]
    assert not [to for to, _ in arrivals(server) if to.startswith("dr.")]


def test_a_changed_release_copy_is_refused(project: Path, server: Server) -> None:
    """Check that a file in out/release/ that differs from the archive is not sent."""
    target = project / "out" / "release" / "P02" / "participant.pdf"
    target.write_bytes(target.read_bytes() + b"\n% changed\n")
    report = run(project)
    assert dict(report.refused)["P02"].startswith("participant edition: the copy in "
                                                  "out/release/ is missing or differs")
    assert ("p02@example.net", "booklet-v1.pdf") not in arrivals(server)


def test_wrong_password_is_a_clear_error_on_the_command_line(project: Path,
                                                             server: Server) -> None:
    """Check the exit code and message of `send` with a wrong password: no traceback."""
    result = CliRunner().invoke(main, [
        "send", str(project), "--passphrases-out", str(project.parent / "private" / "p.csv")],
        env={"SPRINGBACK_SMTP_PASSWORD": "guess"})
    assert result.exit_code == 1
    assert "refused the user name or password (535 5.7.8 Authentication credentials " \
        "invalid)" in " ".join(result.output.split())
    assert "Traceback" not in result.output
    assert server.recorder.received == [] and sends(project) == []


def test_dry_run_writes_messages_outside_out_and_sends_nothing(project: Path,
                                                               server: Server) -> None:
    """Check .eml files in <project>/outbox/, nothing sent or logged, out/ refused for them."""
    with pytest.raises(DeliveryError, match="lies inside out/"):
        run(project, dry_run=True, eml_dir=project / "out" / "outbox")
    with pytest.raises(DeliveryError, match="participant 'P99' is not in the latest build"):
        run(project, dry_run=True, participants=["P99"])
    report = run(project, dry_run=True)
    assert report.eml_dir == project / "outbox"
    assert sorted(p.name for p in (project / "outbox").iterdir()) == [
        "P01-participant.eml", "P01-therapist.eml", "P02-participant.eml"]
    msg = email.message_from_bytes((project / "outbox" / "P01-therapist.eml").read_bytes(),
                                   policy=email.policy.default)
    assert msg["To"] == "dr.p01@example.net"
    [part] = list(msg.iter_attachments())  # type: ignore[attr-defined]
    original = (project / "out" / "release" / "P01" / "therapist.pdf").read_bytes()
    assert pages(part.get_content(), phrases(project)["P01"]) == pages(original)
    assert server.recorder.received == [] and sends(project) == []


def test_command_line_send_reports_and_no_address_lands_in_out_or_archive(
        project: Path, server: Server) -> None:
    """Check the command's table, and scan every file under out/ and archive/ for addresses."""
    private = project.parent / "private"
    runner = CliRunner()
    dry = runner.invoke(main, ["send", str(project), "--dry-run", "--passphrases-out",
                               str(private / "p.csv")], env=ENV)
    assert dry.exit_code == 0, dry.output
    sent = runner.invoke(main, ["send", str(project), "--passphrases-out",
                                str(private / "p.csv")], env=ENV)
    assert sent.exit_code == 0, sent.output
    assert "held for review" in sent.output and "@" not in sent.output
    assert arrivals(server) == EXPECTED
    secrets = [a.encode() for a in [*ADDRESS.values(), *THERAPIST.values()]]
    secrets += [p.encode() for p in phrases_file(private / "p.csv").values()]
    for folder in ("out", "archive"):
        for path in (project / folder).rglob("*"):
            if path.is_file():
                data = path.read_bytes()
                assert not [s for s in secrets if s in data], path
    assert sha256_file(private / "p.csv")  # the passphrases stay in the private folder


def phrases_file(path: Path) -> dict[str, str]:
    text = path.read_text(encoding="utf-8")
    return {r["participant"]: r["passphrase"] for r in csv.DictReader(io.StringIO(text))}
