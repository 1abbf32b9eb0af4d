"""`check` for languages: catalogues, the study's own texts, and a study's template overrides.

A booklet must be wholly in its participant's language. Anything that would mix languages is
found here, before a build: a language without a complete catalogue, a label or referral text
missing in a language that participants read, or a study template whose text is not in the
catalogues.
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path
from typing import Any, cast

import pandas as pd
from jinja2.ext import babel_extract

from springback.errors import Problem, error
from springback.i18n.language import (
    LANGUAGES,
    SOURCE_LANGUAGE,
    catalogue_problems,
    language_name,
    translations,
)

JINJA_OPTIONS = {
    "extensions": "jinja2.ext.i18n",
    "trim_blocks": "false",
    "lstrip_blocks": "true",
    "newstyle_gettext": "true",
    "silent": "false",
}
"""How templates are read for messages; the same as `babel.cfg` and the booklet environment."""

KEYWORDS = ("_", "gettext", "ngettext", "pgettext", "npgettext")


def check_languages(settings: Any, roster: pd.DataFrame, project: Path) -> list[Problem]:
    """Every language problem of a study: catalogues, per-language texts, template overrides."""
    gets_booklet = (roster["consent"] == "yes") & roster["feedback"].astype(bool)
    used = sorted(set(zip(roster.loc[gets_booklet, "language"].astype(str),
                          roster.loc[gets_booklet, "region"].astype(str), strict=True)))
    problems = catalogue_problems(settings.study.languages)
    problems += settings_text_problems(settings, used)
    problems += template_problems(Path(project) / "templates", {lang for lang, _ in used})
    return problems


def settings_text_problems(settings: Any, used: Iterable[tuple[str, str]]) -> list[Problem]:
    """Check the study's own texts per booklet language: labels, referrals, answer checks.

    `used` holds the (language, region) pairs of the participants who get a booklet. A text
    given in some languages but not in one that is used would make a mixed booklet: error.
    """
    # Unknown languages are `catalogue_problems`' to report; one message per mistake.
    used = sorted({(lang, region) for lang, region in used if lang in LANGUAGES})
    languages = sorted({language for language, _ in used})
    where = "study.toml: "
    problems: list[Problem] = []
    tables = (("items", settings.items), ("composites", settings.composites),
              ("questionnaires", settings.questionnaires))
    for kind, table in tables:
        for name, spec in table.items():
            missing = [lang for lang in languages if not spec.label.get(lang)]
            if spec.label and missing:
                problems.append(_missing_text(
                    f"{where}{kind}.{name}.label", f"the label of '{name}'", missing,
                    sorted(spec.label), "label-missing"))
    checked = settings.study.answers_checked
    missing = [lang for lang in languages if not checked.get(lang)]
    if checked and missing:
        problems.append(_missing_text(f"{where}study.answers_checked",
                                      "who checks the answers", missing, sorted(checked),
                                      "answers-checked-missing"))
    for name, spec in settings.questionnaires.items():
        untranslated = [lang for lang in languages
                        if lang != SOURCE_LANGUAGE and lang not in spec.band_labels]
        if spec.bands and untranslated:
            problems.append(_missing_text(
                f"{where}questionnaires.{name}.band_labels", f"the band names of '{name}'",
                untranslated, [SOURCE_LANGUAGE, *sorted(spec.band_labels)],
                "band-labels-missing"))
    return problems


def _missing_text(where: str, what: str, missing: list[str], given: list[str],
                  code: str) -> Problem:
    names = ", ".join(f"{language_name(lang)} ({lang})" for lang in missing)
    return error(
        where,
        f"{what} has no text in {names}, so those booklets would mix languages",
        expected="a text for each language participants read",
        found="texts in " + ", ".join(given),
        fix="add " + ", ".join(f'{lang} = "..."' for lang in missing),
        code=code,
    )


def template_problems(folder: Path, languages: Iterable[str]) -> list[Problem]:
    """Find text in a study's own templates that a used language's catalogue cannot translate."""
    wanted = sorted({lang for lang in languages if lang in LANGUAGES} - {SOURCE_LANGUAGE})
    if not folder.is_dir() or not wanted:
        return []
    problems = []
    for path in sorted(folder.rglob("*.html")):
        relative = f"templates/{path.relative_to(folder).as_posix()}"
        try:
            with path.open("rb") as fh:
                found = list(babel_extract(fh, KEYWORDS, [], JINJA_OPTIONS))
        except Exception as exc:  # Jinja's syntax errors carry the line; report, don't crash
            problems.append(error(relative, f"the template cannot be read: {exc}",
                                  row=getattr(exc, "lineno", None), code="template-unreadable"))
            continue
        for lineno, _func, message, _comments in found:
            plural = isinstance(message, tuple)
            msgid = cast(str, message[0] if isinstance(message, tuple) else message)
            if not msgid:
                continue
            missing = [lang for lang in wanted if not _has(lang, msgid, plural)]
            if missing:
                names = ", ".join(f"{language_name(lang)} ({lang})" for lang in missing)
                problems.append(error(
                    relative,
                    f"this text has no translation in {names}, so those booklets would mix "
                    f"languages: '{' '.join(msgid.split())[:80]}'",
                    row=lineno,
                    fix="use the wording of the packaged template, whose text is translated, "
                    "or make booklets only in English while the override is in place",
                    code="template-untranslated",
                ))
    return problems


def _has(language: str, msgid: str, plural: bool) -> bool:
    catalogue = translations(language)._catalog  # type: ignore[attr-defined]
    return bool(catalogue.get((msgid, 0)) if plural else catalogue.get(msgid))
