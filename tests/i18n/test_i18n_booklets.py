"""The built example booklets: each fully in its participant's language, plain, and localised."""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest
from babel.dates import get_month_names
from babel.messages.pofile import read_po
from pypdf import PdfReader

from springback.i18n.language import (
    LANGUAGES,
    LOCALES,
    SOURCE_LANGUAGE,
    template_path,
    translations,
)
from springback.i18n.readability import FORMULAS, PLAIN_LEVEL, measure, text_of_html
from tests.support.html_text import AllText

pytestmark = pytest.mark.xdist_group("example")



def _foreign_months(language: str) -> set[str]:
    """English month names that are not also month names in `language` ('May' is a word)."""
    english = set(get_month_names("wide", locale="en_GB").values()) - {"May"}
    return english - set(get_month_names("wide", locale=LOCALES[language]).values())


def _read(path: Path, marked_foreign: bool = True) -> AllText:
    """Parse a booklet, with or without the parts marked as written in another language."""
    parser = AllText(marked_foreign)
    parser.feed(path.read_text(encoding="utf-8"))
    return parser


@pytest.fixture(scope="module")
def booklets(built_example: Path) -> list[tuple[str, str, Path]]:
    """(participant, language, path) of every HTML booklet of the built example."""
    roster = pd.read_csv(built_example / "data" / "participants.csv", dtype=str)
    language = dict(zip(roster["participant"], roster["language"], strict=True))
    found = []
    for path in sorted((built_example / "out" / "booklets").glob("*/*.html")):
        found.append((path.parent.name, language[path.parent.name], path))
    return found


def _english_fragments() -> list[tuple[str, str]]:
    """(message id, fragment) for every run of 2+ words of English source text.

    Ids are cut at placeholders and markup, since a booklet shows them filled in.
    """
    with template_path().open("rb") as fh:
        template = read_po(fh)
    fragments = []
    for message in template:
        if not message.id:
            continue
        ids = [message.id] if isinstance(message.id, str) else list(message.id)
        for msgid in ids:
            for piece in re.split(r"%\(\w+\)[sd]|\{\w+\}|%%|<[^>]+>", msgid):
                words = " ".join(piece.split()).strip(" ,.;:()")
                if len(words.split()) >= 2:
                    fragments.append((msgid, words))
    return fragments


def test_example_has_booklets_in_every_language(booklets: list) -> None:
    """Check that the example study has a built booklet in each language."""
    assert {lang for _, lang, _ in booklets} == set(LANGUAGES)


def test_html_and_pdf_carry_the_language(booklets: list) -> None:
    """Check that `lang` on the HTML and /Lang in the PDF catalogue name the booklet language."""
    for participant, language, path in booklets:
        assert _read(path).lang == language, path
        pdf = path.with_suffix(".pdf")
        if pdf.exists():
            assert str(PdfReader(pdf).trailer["/Root"]["/Lang"]) == language, (participant, pdf)


def test_no_untranslated_english_in_dutch_and_german_booklets(booklets: list) -> None:
    """Check that no English source text shows up in a Dutch or German booklet."""
    fragments = _english_fragments()
    leaks = []
    for _, language, path in booklets:
        if language == SOURCE_LANGUAGE:
            continue
        catalogue = translations(language)
        text = " ".join(" ".join(_read(path, marked_foreign=False).parts).split())
        for msgid, fragment in fragments:
            # Names and symbols kept in the translation are not leaks.
            if fragment in catalogue.gettext(msgid):
                continue
            if not re.search(rf"(?<!\w){re.escape(fragment)}(?!\w)", text):
                continue
            leaks.append(f"{path.parent.name}/{path.name}: {fragment!r}")
    assert leaks == []


# Common English words that are not words of Dutch or German (case-sensitive: German "Not").
# Used to find English text that never went through a catalogue (data-made sentences).
ENGLISH_ONLY = {"the", "and", "with", "after", "this", "that", "which", "would", "could",
                "should", "than", "there", "their", "towards", "into", "for", "has", "have",
                "were", "not", "from", "between", "more", "less", "times"}
REFERENCE = re.compile(r"\(\d{4}[a-z]?\)|et al\.")


def _english_sentences(parts: list[str]) -> list[str]:
    """Text nodes that read as English: 'the', or two other English-only words."""
    found = []
    for part in parts:
        text = " ".join(part.split())
        if not text or REFERENCE.search(text):  # citations stay in their language
            continue
        words = re.findall(r"[A-Za-z]+", text)
        hits = [w for w in words if w in ENGLISH_ONLY]
        if "the" in hits or len(set(hits)) >= 2:
            found.append(text)
    return found


def test_no_english_sentences_in_dutch_and_german_booklets(booklets: list) -> None:
    """Check that no sentence made outside the catalogues (e.g. from data) stays English."""
    leaks = []
    for _, language, path in booklets:
        if language != SOURCE_LANGUAGE:
            leaks += [f"{path.parent.name}/{path.name}: {text[:120]!r}"
                      for text in _english_sentences(_read(path, marked_foreign=False).parts)]
    assert leaks == []


@pytest.mark.parametrize("language", LANGUAGES)
def test_participant_edition_is_plain(booklets: list, language: str) -> None:
    """Check the reading ease of every participant edition against its language's plain level.

    English: Flesch Reading Ease (Flesch 1948) >= 60, the 'standard' band (Flesch 1949).
    Dutch: Flesch-Douma (Douma; constants as printed in the DBNL article) >= 60, 'normaal'.
    German: Amstad (Amstad 1978) >= 60, 'normal'. Bands: Flesch 1949, Douma (DBNL), Amstad 1978.
    """
    scored = 0
    for participant, lang, path in booklets:
        if lang != language or path.stem != "participant":
            continue
        result = measure(text_of_html(path.read_text(encoding="utf-8")), language)
        assert result is not None
        assert result.formula == FORMULAS[language].name
        assert result.score >= PLAIN_LEVEL[language], (participant, result)
        scored += 1
    assert scored > 0


def test_dates_and_numbers_follow_the_locale(booklets: list) -> None:
    """Check for local month names, decimal commas in nl/de text and no 12-hour clock.

    Parts marked as another language (lang="en" notes) keep that language's conventions.
    """
    wrong = []
    for _, language, path in booklets:
        text = " ".join(" ".join(_read(path, marked_foreign=False).parts).split())
        patterns = [r"\d\s?(AM|PM|a\.m\.|p\.m\.)"]
        if language != SOURCE_LANGUAGE:
            patterns += [rf"\b{m}\b" for m in sorted(_foreign_months(language))]
            # A decimal point between digits (not a version 0.1.0 nor a German date 03.03.26)
            patterns.append(r"(?<![\d.])\d+\.\d(?![\d.])")
        for pattern in patterns:
            for m in re.finditer(pattern, text):
                context = text[max(0, m.start() - 50): m.end() + 20]
                wrong.append(f"{path.parent.name}/{path.name}: {context!r}")
    assert wrong == []
