"""Previews: a few participants' booklets in out/preview/<id>/, marked as previews.

A preview is rendered exactly as a build would (`build.jobs.run_job`), then every page gets a
visible mark (a box at the top of the first page, and "preview" in the page margin of every
printed page). Nothing is archived, no audit-log entry or participant key is written, and
out/booklets/, the tables, the overview and the latest build stay as they are, so review,
release and delivery never see a preview.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from springback.build.records import Job, ParticipantOutcome

PREVIEW = "preview"
"""The folder inside out/ that holds previews, one folder per participant."""

_BODY = re.compile(r"<body[^>]*>", re.IGNORECASE)


@dataclass(frozen=True)
class PreviewResult:
    """What `preview` made for one participant: its folder and files, or why there are none."""

    participant: str
    folder: Path
    files: tuple[str, ...]
    status: str
    reason: str = ""


def mark_html(html: str, words: str, margin_word: str) -> str:
    """The page with a visible preview mark: a box first in the body and a word in the margin
    of every printed page."""
    from html import escape

    css_word = re.sub(r"[\"\\\n\r]", "", margin_word)
    style = (
        "<style>.preview-mark { border: 3px dashed #9b1c1c; color: #7a1515; background: #fff; "
        "font-weight: bold; padding: 0.5rem 1rem; margin: 0 0 1rem; } "
        f"@page {{ @bottom-left {{ content: \"{css_word}\"; color: #7a1515; "
        "font-weight: bold; font-size: 9pt; } }</style>")
    box = f'<p class="preview-mark" role="note">{escape(words)}</p>'
    html = html.replace("</head>", style + "</head>", 1)
    found = _BODY.search(html)
    if found is None:
        return box + html
    return html[:found.end()] + box + html[found.end():]


def _words(language: str, built: str) -> tuple[str, str]:
    from springback.i18n.language import translations

    tr = translations(language)
    words = tr.gettext("Preview made on %(day)s: not for the participant. It is not archived, "
                       "reviewed or released.") % {"day": built}
    return words, tr.gettext("PREVIEW")


def preview(project: Path, participants: list[str],
            progress: Callable[[str, str], None] | None = None) -> list[PreviewResult]:
    """Render these participants' booklets into out/preview/<id>/ (each folder replaced whole)."""
    from springback import intake
    from springback.archive.manifest import build_time
    from springback.build.fingerprints import (
        catalogue_files,
        fingerprint,
        settings_hash,
        template_files,
        templates_hash,
    )
    from springback.build.history import History
    from springback.build.jobs import run_job
    from springback.build.output import MARKER_TEXT, OUT_MARKER, check_out_dir
    from springback.build.pipeline import _select
    from springback.build.preflight import require_buildable
    from springback.files import BuildLock, staging_dir
    from springback.render import html_to_pdf
    from springback.safety.rules import study_end

    project = Path(project).resolve()
    study = intake.load_study(project)
    require_buildable(project, study)
    settings = study.settings
    chosen = _select(study, participants)
    out_dir = (project / settings.output.out_dir).resolve()
    check_out_dir(project, out_dir, project / settings.output.archive_dir)
    html_only = settings.model_copy(update={"booklet": settings.booklet.model_copy(
        update={"formats": ["html"]})})
    tmpl = template_files(project)
    s_hash, t_hash = settings_hash(settings), templates_hash(tmpl + catalogue_files())
    end = study_end(study)
    started = build_time(now=True)
    say = progress or (lambda _p, _s: None)
    results = []
    with BuildLock(project):
        history = History.read(project, with_last=False)
        if not out_dir.exists():
            out_dir.mkdir(parents=True)
            (out_dir / OUT_MARKER).write_text(MARKER_TEXT, encoding="utf-8")
        for pid in chosen:
            say(pid, "rendering")
            data = study.slice(pid)
            fp = fingerprint(data, s_hash, t_hash, end)
            job = Job(project, data, html_only, fp, history.version(pid, fp), started, end,
                      history.decision(pid, fp), history.unreadable)
            outcome: ParticipantOutcome = run_job(job)
            folder = out_dir / PREVIEW / pid
            if outcome.status != "built":
                results.append(PreviewResult(pid, folder, (), outcome.status, outcome.reason))
                continue
            words, margin = _words(data.language, started.date().isoformat())
            files: dict[str, bytes] = {}
            for rel, content in outcome.files.items():
                name = Path(rel).name
                html = mark_html(content.decode("utf-8"), words, margin)
                if "html" in settings.booklet.formats:
                    files[name] = html.encode("utf-8")
                if "pdf" in settings.booklet.formats:
                    files[Path(name).with_suffix(".pdf").name] = html_to_pdf(html, project)
            with staging_dir(folder) as staging:
                for name, content in files.items():
                    (staging / name).write_bytes(content)
            results.append(PreviewResult(pid, folder, tuple(sorted(files)), "built"))
    return results
