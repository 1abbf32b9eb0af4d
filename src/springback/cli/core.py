"""The main command group and its first commands (init, check, build), and the helpers every
command shares: the consoles, error printing, exit codes."""

from __future__ import annotations

import functools
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import click
from rich.console import Console
from rich.table import Table

from springback import __version__
from springback.errors import Problem, ProblemsFound, SpringbackError

F = TypeVar("F", bound=Callable[..., Any])

out = Console(highlight=False, soft_wrap=True, emoji=False)
err = Console(stderr=True, highlight=False, soft_wrap=True, emoji=False)

PROJECT = click.Path(exists=True, file_okay=False, path_type=Path)


def print_problems(problems: list[Problem], console: Console = err) -> None:
    """Print every problem, errors first, then one closing line."""
    errors = [p for p in problems if p.is_error]
    warnings = [p for p in problems if not p.is_error]
    for p in errors:
        console.print(f"[bold red]error[/]   {_esc(p.message())}")
    for p in warnings:
        console.print(f"[yellow]warning[/] {_esc(p.message())}")
    console.print(f"{len(errors)} error(s), {len(warnings)} warning(s).")


def show_table(console: Console, table: Table) -> None:
    """Print a table whole: cells wrap on a terminal, and a file or pipe gets its full width.

    Off a terminal rich assumes 80 columns and cuts cells with an ellipsis, so ids and reasons
    would be lost in a log.
    """
    for column in table.columns:
        column.overflow = "fold"
    if console.is_terminal:
        console.print(table)
        return
    natural = console.measure(table, options=console.options.update_width(10_000)).maximum
    usual = console.width
    console.width = max(usual, natural)  # print() alone never goes wider than the console
    try:
        console.print(table)
    finally:
        console.width = usual


def _esc(text: str) -> str:
    from rich.markup import escape

    return escape(text)


def reports_errors(fn: F) -> F:
    """Turn springback's errors into a readable message and an exit code, never a traceback."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except ProblemsFound as exc:
            print_problems(exc.problems)
            sys.exit(exc.exit_code)
        except SpringbackError as exc:
            err.print(f"[bold red]error[/]   {_esc(str(exc))}")
            sys.exit(exc.exit_code)
        except KeyboardInterrupt:
            err.print("interrupted; nothing half-written was left as if complete.")
            sys.exit(130)

    return wrapper  # type: ignore[return-value]


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(__version__, prog_name="springback")
def main() -> None:
    """Turn an intensive longitudinal mood study into personal feedback booklets.

    A project folder holds study.toml and data/; start one with `springback init FOLDER`.
    """


@main.command()
@click.argument("folder", type=click.Path(file_okay=False, path_type=Path))
@reports_errors
def init(folder: Path) -> None:
    """Create a new study folder with a commented study.toml and data templates."""
    from springback.settings.scaffold import init_project

    written = init_project(folder)
    for path in written:
        out.print(f"created {path}")
    out.print(f"Next: describe your items in {folder / 'study.toml'}, put your exports in "
              f"{folder / 'data'}, then run `springback check {folder}`.")


@main.command()
@click.argument("project", type=PROJECT)
@click.option("--strict", is_flag=True, help="Treat warnings as errors.")
@reports_errors
def check(project: Path, strict: bool) -> None:
    """Validate settings and data, list every problem at once, and summarise data quality."""
    from springback.build.preflight import preflight
    from springback.intake import quality_table

    report = preflight(project, strict=strict)
    problems = list(report.problems)
    if report.study is not None:
        show_table(out, quality_table(report.study))
    print_problems(problems, out)
    failing = any(p.is_error for p in problems) or (strict and problems)
    if failing:
        sys.exit(1)
    out.print("The study is ready to build.")


def _progress_printer(quiet: bool) -> Any:
    from springback.build.progress import BuildProgress

    return BuildProgress(quiet=quiet, console=err)


@main.command()
@click.argument("project", type=PROJECT)
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Output folder (default: out/ inside the project).")
@click.option("--participant", "participants", multiple=True, metavar="ID",
              help="Build only this participant (repeatable).")
@click.option("--jobs", "-j", type=click.IntRange(min=1),
              help="Parallel processes (default: all cores).")
@click.option("--force", is_flag=True, help="Rebuild everyone, also unchanged participants.")
@click.option("--backend", type=click.Choice(["local", "dask"]), default="local",
              show_default=True, help="Where per-participant work runs.")
@click.option("--scheduler", metavar="ADDRESS",
              help="Dask scheduler address (with --backend dask).")
@click.option("-q", "--quiet", is_flag=True, help="No progress bar.")
@reports_errors
def build(project: Path, out_dir: Path | None, participants: tuple[str, ...], jobs: int | None,
          force: bool, backend: str, scheduler: str | None, quiet: bool) -> None:
    """Build every participant's booklets, the study tables and the overview."""
    from contextlib import nullcontext

    from springback.build.ahead import workers_ahead

    # Started before the pipeline's imports, so the workers warm up meanwhile.
    workers = workers_ahead(project, jobs=jobs, backend=backend, force=force,
                            participants=list(participants) or None)
    with workers or nullcontext(), _progress_printer(quiet) as progress:
        from springback.build.pipeline import build as run_build

        report = run_build(project, out=out_dir, participants=list(participants) or None,
                           jobs=jobs, force=force, backend=backend, scheduler=scheduler,
                           progress=progress.update, workers=workers)
    if report.warnings:
        print_problems(list(report.warnings), err)
    show_table(out, summary_table(report))
    out.print(f"Booklets are in {report.out_dir / 'booklets'}; the overview is "
              f"{report.out_dir / 'index.html'} (archived as build {report.build_id}).")
    print_receipt(project)
    if report.failed:
        err.print(f"{len(report.failed)} participant(s) failed (reasons above); the others were "
                  "built. Build again after fixing: unchanged participants are not redone.")
        sys.exit(2)


def print_receipt(project: Path) -> None:
    """Print the audit log's head as a receipt (each one is also in archive/receipts.txt)."""
    from springback.archive.audit import RECEIPTS, receipt
    from springback.files import project_dirs

    archive = project_dirs(project).archive
    if not (archive / "audit.jsonl").is_file():
        return
    out.print(f"Receipt: audit log {receipt(archive)}. Keep it outside the project (each receipt "
              f"is also added to archive/{RECEIPTS}); `springback verify {project} --head HASH` "
              "proves the log still holds it.")


def summary_table(report: Any) -> Table:
    """The end-of-build summary: participants per outcome, and every failure with its reason."""
    from springback.build.records import OUTCOME_LABELS

    table = Table(title="Build summary")
    table.add_column("outcome")
    table.add_column("participants", justify="right")
    table.add_column("reason")
    for key, n in report.counts().items():
        table.add_row(OUTCOME_LABELS.get(key, key), str(n), "")
    # Every participant without a booklet for a reason of their data, and every failure,
    # with the reason (the overview says the same).
    for o in report.outcomes:
        if o.status in ("not enough data", "failed") and o.reason:
            table.add_row(f"  {o.status}: {_esc(o.participant)}", "", _esc(o.reason))
    return table
