"""Commands beyond the build: translation upkeep."""

from __future__ import annotations

import sys

import click

from springback.cli.core import reports_errors


def register(main: click.Group) -> None:
    """Attach these commands to the main group."""
    main.add_command(translations)


@click.command()
@click.option("--update", is_flag=True,
              help="Re-extract messages from the templates and code and update the catalogues.")
@click.option("--init", "init", metavar="LANG",
              help="Start a catalogue for a new language (e.g. fr), then translate it.")
@reports_errors
def translations(update: bool, init: str | None) -> None:
    """Report untranslated or fuzzy messages per language (exit 1 if any)."""
    from springback.i18n.catalogues import run_translations

    sys.exit(run_translations(update, init=init))
