"""Keep the message catalogues in step with the sources: extract, update, compile and report.

The workflow of `springback translations --update` (and `make translations`):

1. extract every message from the code and templates listed in `babel.cfg` into
   `locale/messages.pot` (Babel's extractors; Jinja's for templates);
2. merge it into each language's `messages.po` (new messages appear untranslated, changed
   ones fuzzy with the previous text shown, removed ones dropped);
3. compile each `.po` into the `.mo` that booklets are rendered with.

Translators only edit the `.po` files. The report lists what is left to do per language.
"""

from __future__ import annotations

import copy
import datetime as dt
import io
import os
from collections.abc import Iterable
from pathlib import Path
from typing import Any, cast

from babel import Locale
from babel.messages.catalog import Catalog, Message
from babel.messages.extract import extract_from_file
from babel.messages.frontend import parse_mapping_cfg
from babel.messages.mofile import write_mo
from babel.messages.pofile import read_po, write_po
from babel.util import pathmatch

from springback import __version__
from springback.errors import SpringbackError
from springback.i18n.language import (
    LANGUAGES,
    LOCALE_DIR,
    SOURCE_LANGUAGE,
    catalogue_path,
    language_name,
    template_path,
    translations,
)

SOURCE_ROOT = Path(__file__).resolve().parents[3]
"""The source checkout (holds `babel.cfg` and `src/`)."""

MAPPING_FILE = "babel.cfg"
COMMENT_TAGS = ("Translators:",)
TRANSLATED = tuple(lang for lang in LANGUAGES if lang != SOURCE_LANGUAGE)

Report = dict[str, dict[str, list[str]]]

TEMPLATE_HEADER = """\
# Messages of springback's booklets, extracted from its code and templates.
# Do not edit: run `springback translations --update` to make it again.
# Copyright (C) YEAR springback contributors
# This file is distributed under the same license as the springback project."""

CATALOGUE_HEADER = """\
# {name} text of springback's booklets. Translators edit this file only.
# Write plain language (B1: short sentences, common words) and keep every %(name)s placeholder.
# Copyright (C) {year} springback contributors
# This file is distributed under the same license as the springback project."""


def _mapping(root: Path) -> tuple[list[tuple[str, str]], dict[str, dict[str, Any]]]:
    path = root / MAPPING_FILE
    if not path.is_file():
        raise SpringbackError(
            f"no {MAPPING_FILE} in {root}; messages can only be extracted in a source checkout "
            "of springback"
        )
    with path.open(encoding="utf-8") as fh:
        return parse_mapping_cfg(fh, filename=str(path))


def _files(root: Path, pattern: str) -> list[Path]:
    # Walk only the pattern's fixed leading folders; the checkout also holds a virtualenv.
    fixed = []
    for part in pattern.split("/"):
        if any(ch in part for ch in "*?["):
            break
        fixed.append(part)
    base = root.joinpath(*fixed)
    found = []
    for folder, dirs, names in os.walk(base):
        dirs[:] = sorted(d for d in dirs if not d.startswith((".", "_")))
        for name in names:
            path = Path(folder) / name
            if pathmatch(pattern, path.relative_to(root).as_posix()):
                found.append(path)
    return sorted(found)


def extract_template(root: Path = SOURCE_ROOT) -> Catalog:
    """Extract every translatable message from the sources into a new template catalogue."""
    method_map, options_map = _mapping(root)
    template = Catalog(
        project="springback",
        version=__version__,
        copyright_holder="springback contributors",
        msgid_bugs_address="the springback issue tracker",
        header_comment=TEMPLATE_HEADER,
        charset="utf-8",
        fuzzy=False,
        creation_date=_now(),
    )
    for pattern, method in method_map:
        for path in _files(root, pattern):
            relative = path.relative_to(root).as_posix()
            for lineno, message, comments, context in extract_from_file(
                method,
                path,
                comment_tags=COMMENT_TAGS,
                options=options_map.get(pattern, {}),
                strip_comment_tags=True,
            ):
                template.add(message, None, [(relative, lineno)],
                             auto_comments=comments, context=context)
    return template


def _now() -> dt.datetime:
    # Reproducible catalogues: honour SOURCE_DATE_EPOCH like the build does.
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.isdigit():
        return dt.datetime.fromtimestamp(int(epoch), dt.UTC)
    return dt.datetime.now(dt.UTC)


def _read(path: Path, locale: str | None = None) -> Catalog:
    with path.open("rb") as fh:
        return read_po(fh, locale=locale)


def _po_bytes(catalog: Catalog, **kw: Any) -> bytes:
    buffer = io.BytesIO()
    write_po(buffer, catalog, **kw)
    return buffer.getvalue()


def _without_dates(text: bytes) -> bytes:
    # The dates in the header change on every run; they alone are no reason to rewrite a file.
    return b"\n".join(
        line for line in text.splitlines()
        if not line.startswith((b'"POT-Creation-Date:', b'"PO-Revision-Date:'))
    )


def _write_if_changed(path: Path, data: bytes, changed: list[Path]) -> None:
    if path.exists() and _without_dates(path.read_bytes()) == _without_dates(data):
        return
    tmp = path.with_suffix(path.suffix + ".tmp")
    tmp.write_bytes(data)
    tmp.replace(path)
    changed.append(path)


def extract(root: Path = SOURCE_ROOT) -> list[Path]:
    """Re-extract `messages.pot`, update and compile every `.po`; return the changed files."""
    template = extract_template(root)
    changed: list[Path] = []
    _write_if_changed(template_path(), _po_bytes(template), changed)
    for language in TRANSLATED:
        po_path = catalogue_path(language)
        catalog = _read(po_path, language)
        catalog.update(template)
        # Old translations have already served as fuzzy suggestions for changed messages;
        # keeping them as obsolete entries would only clutter the translator's file.
        _write_if_changed(
            po_path, _po_bytes(catalog, include_previous=True, ignore_obsolete=True), changed
        )
        # Compile what is on disk, so a run that changed only header dates changes nothing.
        compiled = compile_catalogue(_read(po_path, language))
        _write_if_changed(catalogue_path(language, ".mo"), compiled, changed)
    if changed:
        translations.cache_clear()
    return changed


def compile_catalogue(catalog: Catalog) -> bytes:
    """Compile a catalogue to `.mo` bytes (fuzzy messages are left out, as gettext does)."""
    complete = copy.deepcopy(catalog)
    # Babel would compile an untranslated plural as empty strings, which gettext then shows
    # as blank text; leaving it out makes gettext fall back to the English source instead.
    for message in list(complete):
        if message.id and not _translated(message):
            complete.delete(message.id, message.context)
    buffer = io.BytesIO()
    write_mo(buffer, complete, use_fuzzy=False)
    return buffer.getvalue()


def init_catalogue(language: str) -> Path:
    """Start the `.po` file of a new language from the template; refuse to overwrite one."""
    try:
        locale = Locale.parse(language)
    except (ValueError, TypeError):
        raise SpringbackError(f"'{language}' is not a language code like 'fr' or 'pt_BR'") from None
    path = catalogue_path(language)
    if path.exists():
        raise SpringbackError(f"{path} exists already; edit it instead")
    catalog = _read(template_path(), language)
    catalog.locale = locale
    catalog.revision_date = _now()
    catalog.fuzzy = False
    catalog.last_translator = "springback contributors"
    catalog.language_team = f"{language_name(language)} (springback contributors)"
    catalog.header_comment = CATALOGUE_HEADER.format(
        name=language_name(language), year=catalog.revision_date.year
    )
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(_po_bytes(catalog))
    return path


def _key(message: Message) -> str:
    text = message.id[0] if isinstance(message.id, (list, tuple)) else message.id
    return f"{message.context}|{text}" if message.context else text


def _translated(message: Message) -> bool:
    strings = message.string if isinstance(message.string, (list, tuple)) else [message.string]
    return all(strings)


def _compiled_differs(language: str, catalog: Catalog) -> list[str]:
    """Messages whose compiled (`.mo`) translation is not the one in the `.po` file."""
    with catalogue_path(language, ".mo").open("rb") as fh:
        import gettext

        compiled = dict(gettext.GNUTranslations(fh)._catalog)  # type: ignore[attr-defined]
    expected: dict[Any, str] = {}
    for message in catalog:
        if not message.id or message.fuzzy or not _translated(message):
            continue
        key = f"{message.context}\x04" if message.context else ""
        if isinstance(message.id, (list, tuple)):
            for i, string in enumerate(cast(list[str], message.string)):
                expected[(key + message.id[0], i)] = string
        else:
            expected[key + message.id] = cast(str, message.string)
    compiled.pop("", None)  # the header
    keys = set(expected) | set(compiled)
    return sorted(str(k) for k in keys if expected.get(k) != compiled.get(k))


def translation_report(
    languages: Iterable[str] = TRANSLATED, fresh: bool = True, root: Path = SOURCE_ROOT
) -> Report:
    """Per language: untranslated, fuzzy, obsolete, format errors and stale compiled messages.

    With `fresh` (and a source checkout) messages are compared with a new extraction from the
    sources, so text added since the last `--update` counts as untranslated; otherwise with the
    committed `messages.pot`.
    """
    if fresh and (root / MAPPING_FILE).is_file():
        template = extract_template(root)
    else:
        template = _read(template_path())
    wanted = {_key(m): m for m in template if m.id}
    report: Report = {}
    for language in languages:
        catalog = _read(catalogue_path(language), language)
        have = {_key(m): m for m in catalog if m.id}
        untranslated = [k for k in wanted if k not in have or not _translated(have[k])]
        fuzzy = [k for k in wanted if k in have and have[k].fuzzy and _translated(have[k])]
        obsolete = sorted({_key(m) for m in catalog.obsolete.values()}
                          | {k for k in have if k not in wanted})
        errors = [f"{_key(m)}: {'; '.join(str(e) for e in errs)}" for m, errs in catalog.check()]
        report[language] = {
            "untranslated": untranslated,
            "fuzzy": fuzzy,
            "obsolete": obsolete,
            "errors": errors,
            "not_compiled": _compiled_differs(language, catalog),
        }
    return report


def report_ok(report: Report) -> bool:
    """Whether every language is complete: nothing untranslated, fuzzy, wrong or uncompiled."""
    return not any(
        entry[k] for entry in report.values()
        for k in ("untranslated", "fuzzy", "errors", "not_compiled")
    )


def format_report(report: Report) -> str:
    """The report as plain text for the terminal, one block per language."""
    labels = {
        "untranslated": "not translated",
        "fuzzy": "fuzzy (check and remove the 'fuzzy' flag)",
        "errors": "format errors (placeholders must match the English)",
        "not_compiled": "not compiled (run `springback translations --update`)",
        "obsolete": "obsolete (no longer in the sources; dropped by --update)",
    }
    lines = []
    for language, entry in report.items():
        counts = ", ".join(f"{len(entry[k])} {k.replace('_', ' ')}" for k in labels)
        lines.append(f"{language_name(language)} ({language}), "
                     f"{catalogue_path(language).relative_to(LOCALE_DIR.parent)}: {counts}")
        for key, label in labels.items():
            if entry[key]:
                lines.append(f"  {label}:")
                lines.extend(f"    {_one_line(text)}" for text in entry[key])
    return "\n".join(lines)


def _one_line(text: str, width: int = 100) -> str:
    flat = " ".join(text.split())
    return flat if len(flat) <= width else flat[: width - 1] + "…"


def run_translations(update: bool, init: str | None = None) -> int:
    """Update the catalogues if asked, print the report; 0 when complete, 1 when not."""
    if init:
        print(f"created {init_catalogue(init)}")
    if update:
        changed = extract()
        for path in changed:
            print(f"updated {path.relative_to(SOURCE_ROOT)}")
        if not changed:
            print("catalogues already up to date with the sources")
    report = translation_report()
    print(format_report(report))
    ok = report_ok(report)
    print("all catalogues complete" if ok else "some messages still need a translator")
    return 0 if ok else 1
