"""The `preview` command: a few participants' booklets for a look, marked, never archived."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from springback.cli.core import PROJECT, _esc, err, out, reports_errors


def register(main: click.Group) -> None:
    """Attach this command to the main group."""
    main.add_command(preview)


@click.command()
@click.argument("project", type=PROJECT)
@click.argument("participants", nargs=-1, required=True, metavar="ID [ID...]")
@reports_errors
def preview(project: Path, participants: tuple[str, ...]) -> None:
    """Render these participants' booklets into out/preview/<id>/, marked as previews.

    Nothing is archived and out/booklets/, review and release are left as they are.
    """
    from springback.build.preview import preview as run_preview

    results = run_preview(project, list(participants))
    for r in results:
        if r.files:
            out.print(f"{_esc(r.participant)}: preview in {_esc(str(r.folder))} "
                      f"({', '.join(r.files)})")
        else:
            err.print(f"{_esc(r.participant)}: no preview ({_esc(r.status)}: {_esc(r.reason)})")
    out.print("Previews are marked as such and are not archived, reviewed or released; the "
              "next build removes them.")
    if any(not r.files for r in results):
        sys.exit(2)
