"""Commands of the review gate and the audit archive: review, release, verify, forget.

Registered by `springback.cli.core`; each command parses, calls the library and prints.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click
from rich.table import Table

from springback.cli.core import PROJECT, _esc, err, out, print_receipt, reports_errors, show_table


def register(main: click.Group) -> None:
    """Attach these commands to the main group."""
    for command in (review, release, verify, forget):
        main.add_command(command)


@click.command()
@click.argument("project", type=PROJECT)
@click.argument("participant", required=False)
@click.option("--approve", "decision", flag_value="approve", help="Approve the held booklet.")
@click.option("--reject", "decision", flag_value="reject", help="Reject the held booklet.")
@click.option("--done", "decision", flag_value="done",
              help="Record the participant's open refer or hold actions as done.")
@click.option("--rule", default="", metavar="NAME", help="With --done: only this rule's action.")
@click.option("--version", "booklet_version", default="", metavar="N",
              help="With --approve or --reject: the booklet version you read (refused if a "
              "newer one was built).")
@click.option("--by", default="", metavar="NAME", help="Who decides (required to decide).")
@click.option("--note", default="", help="Why (kept beside the log; erased with the person).")
@click.option("--serve", is_flag=True, help="Start the local review page for reviewers.")
@click.option("--port", type=click.IntRange(0, 65535), default=0, show_default=False,
              help="With --serve: the port on 127.0.0.1 (default: a free one).")
@reports_errors
def review(project: Path, participant: str | None, decision: str | None, rule: str,
           booklet_version: str, by: str, note: str, serve: bool, port: int) -> None:
    """List held booklets and open actions, decide on one, or serve the review page."""
    from springback.review import actions, gate

    if serve:
        from springback.review.serve import serve_page

        serve_page(project, port, say=out.print)
        return
    if participant is None:
        if decision:
            raise click.UsageError("name the participant to approve, reject or mark done")
        _list_review(project, gate, actions)
        return
    if decision is None:
        raise click.UsageError("add --approve, --reject or --done (or leave out the participant "
                               "to list)")
    if decision == "done":
        entries = actions.close(project, participant, by, note, rule)
        for e in entries:
            out.print(f"{_esc(participant)}: action '{_esc(str(e['rule']))}' ({e['action']}) "
                      f"recorded as done by {_esc(str(e['by']))} at {e['time']} (audit log).")
        print_receipt(project)
        return
    entry = actions.decide_locked(project, participant, decision, by, note, booklet_version)
    word = "approved" if decision == "approve" else "rejected"
    out.print(f"{_esc(participant)}: booklet version {entry.get('version')} {word} by "
              f"{_esc(entry['by'])} at {entry['time']} (recorded in the audit log).")
    print_receipt(project)


def _list_review(project: Path, gate: Any, actions: Any) -> None:
    held = gate.list_held(project)
    if not held:
        out.print("No booklet of the latest build is held.")
    else:
        table = Table(title="Held booklets (latest build)")
        for column in ("participant", "version", "state", "reasons", "decided"):
            table.add_column(column)
        for h in held:
            decided = f"{h.decided_by}, {h.decided_at}" if h.decided_by else ""
            table.add_row(h.participant, h.version, h.state, _esc("\n".join(h.reasons)),
                          _esc(decided))
        show_table(out, table)
        waiting = sum(h.state == gate.HELD for h in held)
        out.print(f"{waiting} booklet(s) wait for review. Decide with `springback review "
                  f"{project} ID --approve --by NAME` (or --reject).")
    todo = actions.open_actions(project)
    if not todo:
        out.print("No open actions.")
        return
    table = Table(title="Open actions (latest build)")
    for column in ("participant", "action", "reason", "since", "booklet"):
        table.add_column(column)
    for a in todo:
        table.add_row(_esc(a.participant), a.words, _esc(a.reason), a.since, _esc(a.booklet))
    show_table(out, table)
    out.print(f"{len(todo)} open action(s). Record one as done with `springback review "
              f"{project} ID --done --by NAME --note TEXT`.")


@click.command()
@click.argument("project", type=PROJECT)
@click.option("--by", default="", metavar="NAME", help="Who releases (default: your login).")
@reports_errors
def release(project: Path, by: str) -> None:
    """Copy releasable booklets into out/release/ with a dispatch sheet."""
    from springback.review.gate import release as run_release

    report = run_release(project, by)
    out.print(f"Released {len(report.released)} booklet(s) of build {report.build} into "
              f"{report.folder} (see dispatch.csv).")
    for pid, reason in report.withheld:
        out.print(f"  not released: {_esc(pid)} ({_esc(reason)})")
    print_receipt(project)


@click.command()
@click.argument("project", type=PROJECT)
@click.option("--rebuild", is_flag=True,
              help="Also rebuild the last build from its archived inputs and compare bytes.")
@click.option("--head", default=None, metavar="HASH",
              help="A receipt's hash: fail unless the audit log still holds that entry.")
@reports_errors
def verify(project: Path, rebuild: bool, head: str | None) -> None:
    """Re-hash every archived file and the audit log; exit 1 on any mismatch."""
    from springback.archive.manifest import verify as run_verify

    def rebuild_fn(copy: Path) -> Path:
        from springback.build.pipeline import build

        return build(copy, jobs=1).out_dir

    problems = run_verify(project, rebuild=rebuild, rebuild_fn=rebuild_fn, head=head)
    for m in problems:
        err.print(f"[bold red]mismatch[/] {_esc(m.message())}")
    if problems:
        err.print(f"{len(problems)} mismatch(es): the archive does not match its records.")
        sys.exit(1)
    extra = " and the rebuild gave the same bytes" if rebuild else ""
    extra += f", and the log still extends receipt {_esc(head.strip())}" if head else ""
    out.print(f"The archive matches its manifests and the audit log{extra}.")


@click.command()
@click.argument("project", type=PROJECT)
@click.argument("participant")
@click.option("--by", required=True, metavar="NAME", help="Who asked for the erasure.")
@click.option("--yes", is_flag=True, help="Do not ask for confirmation.")
@reports_errors
def forget(project: Path, participant: str, by: str, yes: bool) -> None:
    """Erase a participant's data and booklets from every archived build and from out/."""
    from springback.archive.erasure import forget as run_forget

    if not yes:
        click.confirm(f"Erase every archived copy of {participant}'s data and booklets? This "
                      "cannot be undone", abort=True)
    report = run_forget(project, participant, by)
    out.print(f"Erased {_esc(participant)}: {report.files_removed} file(s) removed and "
              f"{report.files_rewritten} rewritten in {len(report.builds)} archived build(s) "
              "and out/; the audit log holds only hashes.")
    print_receipt(project)
    for rel in report.still_in_data:
        err.print(f"[yellow]warning[/] {_esc(rel)} still holds this participant; remove their "
                  "rows before the next build (springback never changes data/)")
