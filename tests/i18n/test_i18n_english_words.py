"""No English word in a Dutch or German booklet, outside the study's own texts and citations.

A word list finds English that never went through a catalogue (text made from data or code)
and English a translator left standing: common English words that are not also words of the
language searched ('of' and 'was' are Dutch, 'was' and 'will' German). Every text a reader or a
screen reader meets counts (sentences, table cells, chart titles, captions, axis labels, text
alternatives). Left out: what the study wrote in study.toml (its title, team, referral texts,
labels), which it may write in any language, and passages marked as English (lang="en", the
reference list).
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path
from typing import Any

import pytest
from babel.messages.pofile import read_po

from springback.i18n.language import LANGUAGES, SOURCE_LANGUAGE, catalogue_path
from tests.i18n.test_i18n_booklets import _read

pytestmark = pytest.mark.xdist_group("example")

ENGLISH = frozenset({
    "a", "about", "after", "all", "an", "and", "any", "are", "as", "at", "be", "been", "before",
    "better", "between", "but", "by", "can", "could", "days", "did", "do", "does", "each",
    "every", "for", "found", "from", "has", "have", "high", "hours", "how", "if", "in", "into",
    "is", "it", "its", "less", "low", "many", "may", "more", "most", "much", "must", "no", "none",
    "not", "of", "on", "only", "or", "other", "our", "out", "over", "prompt", "prompts", "same",
    "should", "shifts", "some", "such", "than", "that", "the", "their", "then", "there", "these",
    "they", "this", "those", "times", "to", "under", "up", "values", "very", "was", "we", "were",
    "what", "when", "where", "which", "who", "why", "will", "with", "worse", "would", "you",
    "your"})
"""Common English words (function words and the booklets' own frequent words)."""

ALSO = {"nl": frozenset({"a", "an", "as", "do", "had", "in", "is", "most", "of", "over", "was",
                         "we"}),
        "de": frozenset({"a", "all", "also", "am", "an", "as", "do", "in", "man", "most", "so",
                         "was", "will"})}
"""Words of the list that are also words of Dutch or German, or their abbreviations ('do' for
donderdag and Donnerstag)."""


def english_words(text: str, language: str) -> list[str]:
    """The English-only words of a text in `language` (case-insensitive)."""
    words = ENGLISH - ALSO[language]
    return [w for w in re.findall(r"[A-Za-z]+", text) if w.lower() in words]


def _plain(text: str) -> str:
    return " ".join(text.replace("\u00a0", " ").split())


def study_texts(project: Path) -> list[str]:
    """Every text of the study's settings, longest first (so a part is cut after the whole)."""
    found: list[str] = []

    def walk(value: Any) -> None:
        if isinstance(value, str):
            found.append(_plain(value))
        elif isinstance(value, dict):
            for v in value.values():
                walk(v)
        elif isinstance(value, list):
            for v in value:
                walk(v)

    walk(tomllib.loads((project / "study.toml").read_text(encoding="utf-8")))
    return sorted({t for t in found if len(t) > 1}, key=len, reverse=True)


def leaks(parts: list[str], language: str, own: list[str]) -> list[str]:
    """Text nodes with English words once the study's own texts are cut out."""
    found = []
    for part in parts:
        text = _plain(part)
        for own_text in own:
            text = re.sub(rf"(?<!\w){re.escape(own_text)}(?!\w)", " ", text)
        if english_words(text, language):
            found.append(_plain(part))
    return found


@pytest.fixture(scope="module")
def booklets(built_example: Path) -> list[tuple[Path, Any]]:
    """(path, parsed text without parts marked as another language) of every HTML booklet."""
    return [(p, _read(p, marked_foreign=False))
            for p in sorted((built_example / "out" / "booklets").glob("*/*.html"))]


def test_no_english_words_in_dutch_and_german_booklets(built_example: Path,
                                                       booklets: list) -> None:
    """Check every Dutch and German booklet, both editions, for English words."""
    own = study_texts(built_example)
    found, read = [], set()
    for path, page in booklets:
        if page.lang == SOURCE_LANGUAGE:
            continue
        read.add((page.lang, path.stem))
        found += [f"{path.parent.name}/{path.stem} ({page.lang}): {text[:140]!r}"
                  for text in leaks(page.parts, page.lang, own)]
    assert read == {(lang, e) for lang in ("nl", "de") for e in ("participant", "therapist")}
    assert found == []


def test_the_search_finds_english_in_english_booklets(built_example: Path,
                                                      booklets: list) -> None:
    """Check the word list does find English: read as if Dutch or German, every English
    booklet shows many English text nodes (so an empty result above is not a dead search)."""
    own = study_texts(built_example)
    english = [page for _, page in booklets if page.lang == SOURCE_LANGUAGE]
    assert english
    for page in english:
        for language in ("nl", "de"):
            assert len(leaks(page.parts, language, own)) > 50


@pytest.mark.parametrize(
    ("text", "language", "words"),
    [("De stemming was beter dan gewoonlijk.", "nl", []),
     ("Dat is ongeveer vier op de vijf meldingen.", "nl", []),
     ("Die Stimmung war an Tagen mit mehr Belastung oft schlechter.", "de", []),
     ("Was hat sich verändert? Es wird so bleiben.", "de", []),
     ("De stemming of P05 was worse than usual.", "nl", ["worse", "than"]),
     ("Die Antworten were answered on 3 days.", "de", ["were", "on", "days"]),
     ("Kendalls Tau 0,49; the correlation", "de", ["the"])],
)
def test_english_words(text: str, language: str, words: list[str]) -> None:
    """Check the word search on sentences of each language and on English fragments."""
    assert english_words(text, language) == words


@pytest.mark.parametrize("language", [lang for lang in LANGUAGES if lang != SOURCE_LANGUAGE])
def test_no_english_words_in_the_catalogue(language: str) -> None:
    """Check no Dutch or German translation has English words (placeholders, markup and
    command-line options such as --by left out), so no booklet path can show one."""
    with catalogue_path(language).open("rb") as fh:
        catalogue = read_po(fh)
    found = []
    for message in catalogue:
        if not message.id:  # the header
            continue
        texts = message.string if isinstance(message.string, tuple) else (message.string,)
        for text in texts:
            plain = re.sub(r"%\(\w+\)[sd]|\{\w+\}|<[^>]+>|--\w+", " ", text or "")
            if english_words(plain, language):
                found.append(text)
    assert found == []
