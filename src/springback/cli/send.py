"""The `send` command: released booklets as protected PDFs by e-mail, or as .eml files.

Registered by `springback.cli.core`; it parses, calls `springback.delivery.send` and prints. Nothing
it prints contains an e-mail address or a passphrase.
"""

from __future__ import annotations

import sys
from pathlib import Path

import click
from rich.table import Table

from springback.cli.core import PROJECT, _esc, err, out, print_receipt, reports_errors

FILE = click.Path(dir_okay=False, path_type=Path)
FOLDER = click.Path(file_okay=False, path_type=Path)


def register(main: click.Group) -> None:
    """Attach the command to the main group."""
    main.add_command(send)


@click.command()
@click.argument("project", type=PROJECT)
@click.option("--dry-run", is_flag=True,
              help="Write each message as an .eml file instead of sending it.")
@click.option("--eml-dir", type=FOLDER, metavar="DIR",
              help="Folder for the .eml files of a dry run (default: outbox/ in the project; "
              "never inside data/, out/ or archive/, as the files hold addresses).")
@click.option("--passphrases-out", type=FILE, metavar="FILE",
              help="CSV file to keep generated passphrases in (made if missing, reused on "
              "later runs), when study.toml names no delivery.passphrases_file. Keep it "
              "outside the project's data/, out/ and archive/.")
@click.option("--participant", "participants", multiple=True, metavar="ID",
              help="Send only this participant's booklets (repeatable).")
@click.option("--resend-unconfirmed", is_flag=True,
              help="Send again booklets whose earlier sending was cut off before the server "
              "answered (check first that they did not arrive).")
@reports_errors
def send(project: Path, dry_run: bool, eml_dir: Path | None, passphrases_out: Path | None,
         participants: tuple[str, ...], resend_unconfirmed: bool) -> None:
    """Send each released booklet, protected by its passphrase, to its owner (and therapist).

    Only PDFs in out/release/ that the review gate lets out are sent; every sending is recorded
    in the audit log, and a rerun never sends a booklet twice.
    """
    from springback.delivery.send import send as run_send

    report = run_send(project, dry_run=dry_run, eml_dir=eml_dir,
                      passphrases_out=passphrases_out, participants=list(participants) or None,
                      resend_unconfirmed=resend_unconfirmed,
                      progress=lambda o: err.print(f"  {_esc(o.participant)} {o.edition}: "
                                                   f"{o.state}"))
    table = Table(title=("Messages written (dry run)" if dry_run else "Sending") +
                  f", build {report.build}")
    for column in ("participant", "edition", "outcome", "detail"):
        table.add_column(column)
    for o in report.outcomes:
        table.add_row(o.participant, o.edition, o.state, _esc(o.detail))
    for pid, reason in report.refused:
        table.add_row(pid, "", "not sent", _esc(reason))
    out.print(table)
    if not dry_run:
        print_receipt(project)
    if report.new_passphrases and report.passphrases_file is not None:
        out.print(f"{len(report.new_passphrases)} new passphrase(s) written to "
                  f"{report.passphrases_file}: give each person theirs by another channel "
                  "(phone, in person), never by e-mail.")
    if dry_run and report.eml_dir is not None:
        out.print(f"The messages are in {report.eml_dir}; they hold addresses, so delete them "
                  "after checking. Nothing was sent or recorded.")
    if report.undelivered:
        err.print(f"{len(report.undelivered)} booklet(s) were not delivered; see the table.")
        sys.exit(2)
