"""The therapist edition speaks to the clinician about the participant, never to the participant.

Every text a reader or a screen reader meets in a built therapist edition (sentences, headings,
table cells, chart titles, captions, axis labels and text alternatives) is searched for the
second person of its language. Texts the study wrote for the participant and that the booklet
quotes as such (inside <q> or <blockquote>) are left out.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from tests.support.html_text import AllText

pytestmark = pytest.mark.xdist_group("example")

SECOND_PERSON = {
    "en": re.compile(r"\b(you|your)\b", re.IGNORECASE),
    "nl": re.compile(r"\b(je|jouw|jij)\b", re.IGNORECASE),
    "de": re.compile(r"\b(du|dein\w*|dich|dir)\b", re.IGNORECASE),
}
"""Forms that address the reader as the participant: English 'you', 'your'; the informal
Dutch 'je', 'jouw', 'jij' and German 'du', 'dein...', 'dich', 'dir' the participant editions
use."""

QUOTED = {"q", "blockquote"}
def addressed_to_participant(html: str) -> list[str]:
    """The texts of a booklet that address the reader in the second person."""
    parser = AllText(skipped=QUOTED)
    parser.feed(html)
    pattern = SECOND_PERSON[parser.lang]
    texts = (" ".join(part.split()) for part in parser.parts)
    return [text for text in texts if pattern.search(text)]


@pytest.fixture(scope="module")
def therapist_editions(built_example: Path) -> list[Path]:
    """Every therapist edition (HTML) of the built example."""
    return sorted((built_example / "out" / "booklets").glob("*/therapist.html"))


def test_example_has_therapist_editions_in_every_language(therapist_editions: list) -> None:
    """Check that the check below reads therapist editions in English, Dutch and German."""
    languages = {_lang(p) for p in therapist_editions}
    assert languages == set(SECOND_PERSON)


def test_therapist_edition_never_addresses_the_participant(therapist_editions: list) -> None:
    """Check that no therapist edition says 'you' or 'your' (je/jouw, du/dein) to its reader."""
    found = [f"{p.parent.name} ({_lang(p)}): {text[:140]!r}"
             for p in therapist_editions
             for text in addressed_to_participant(p.read_text(encoding="utf-8"))]
    assert found == []


def test_participant_edition_is_addressed_to_the_participant(built_example: Path) -> None:
    """Check that the search finds the second person where it belongs: in the participant
    editions, in each language (so an empty result above is not a search that never hits)."""
    hits: dict[str, int] = {}
    for path in sorted((built_example / "out" / "booklets").glob("*/participant.html")):
        hits[_lang(path)] = hits.get(_lang(path), 0) + len(
            addressed_to_participant(path.read_text(encoding="utf-8")))
    assert set(hits) == set(SECOND_PERSON)
    assert all(n > 0 for n in hits.values()), hits


@pytest.mark.parametrize(
    ("html", "found"),
    [('<html lang="en"><p>Your mood rose.</p></html>', ["Your mood rose."]),
     ('<html lang="en"><p>The mood of P08 rose.</p></html>', []),
     ('<html lang="en"><p>Young <q>call us if you need to</q></p></html>', []),
     ('<html lang="en"><svg><title>Which prompts you answered</title></svg></html>',
      ["Which prompts you answered"]),
     ('<html lang="en"><img alt="your usual level"></html>', ["your usual level"]),
     ('<html lang="nl"><p>Hoe voel je je?</p><p>Jouw stemming.</p></html>',
      ["Hoe voel je je?", "Jouw stemming."]),
     ('<html lang="nl"><p>De stemming van P05 was stabiel.</p></html>', []),
     ('<html lang="de"><p>Deine Stimmung.</p><p>Wie geht es dir?</p></html>',
      ["Deine Stimmung.", "Wie geht es dir?"]),
     ('<html lang="de"><p>Die Stimmung von P06; durch die Studie.</p></html>', [])],
)
def test_search_for_second_person(html: str, found: list[str]) -> None:
    """Check the search on small pages: second person found, other words and quotes not."""
    assert addressed_to_participant(html) == found


def _lang(path: Path) -> str:
    parser = AllText()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser.lang
