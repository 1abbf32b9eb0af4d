"""Reading-ease formulas per language, checked against hand-counted worked values."""

from __future__ import annotations

import pytest

from springback.i18n.readability import (
    AMSTAD,
    BROUWER,
    DOUMA,
    FLESCH,
    PLAIN_LEVEL,
    band,
    cmudict_counter,
    measure,
    reading_ease,
    sentence_count,
    text_of_html,
    words,
)

EN = "Your mood was steady this week. You recovered quickly after stressful days."
NL = "Je stemming was deze week stabiel. Je herstelde snel na drukke dagen."
DE = "Deine Stimmung war diese Woche stabil. Du hast dich nach stressigen Tagen schnell erholt."


@pytest.mark.parametrize(
    ("formula", "words_", "sentences", "syllables", "expected"),
    [
        # Flesch 1948, "A new readability yardstick": 206.835 - 1.015 ASL - 84.6 ASW;
        # EN sentence counted by hand [computed]: 12 words, 2 sentences, 18 syllables.
        (FLESCH, 12, 2, 18, 73.845),
        # "The cat sat on the mat." ([computed by hand]; textstat 0.7.13 identical).
        (FLESCH, 6, 1, 6, 116.145),
        # Largest possible English score, one one-syllable word per sentence (computed by hand).
        (FLESCH, 1, 1, 1, 121.22),
        # Douma (Dutch Flesch, DBNL article): 206.84 - 0.77 wl - 0.93 zl; NL hand count.
        (DOUMA, 12, 2, 19, 79.343333),
        # Brouwer Leesindex A: 195 - (2/3) wl - 2 zl, same counts ([computed by hand]).
        (BROUWER, 12, 2, 19, 77.444444),
        # Amstad 1978 (German Flesch): 180 - ASL - 58.5 ASW; DE hand count 14 / 2 / 23.
        (AMSTAD, 14, 2, 23, 76.892857),
    ],
)
def test_formula_constants(formula, words_: int, sentences: int, syllables: int,
                           expected: float) -> None:
    """Check each formula on hand-counted inputs against the worked value (computed by hand)."""
    assert formula.score(words_, sentences, syllables) == pytest.approx(expected, abs=1e-6)


@pytest.mark.parametrize(
    ("text", "language", "counts", "expected"),
    [
        # [computed; hand count agrees with textstat 0.7.13 + CMUdict].
        (EN, "en", (12, 2, 18), 73.845),
        (NL, "nl", (12, 2, 19), 79.343333),  # Douma; textstat's "nl" uses 206.835 (79.338333)
        (DE, "de", (14, 2, 23), 76.892857),  # Amstad; textstat 0.7.13 "de" identical
        ("The cat sat on the mat.", "en", (6, 1, 6), 116.145),
    ],
)
def test_reading_ease_check_values(text: str, language: str, counts: tuple[int, int, int],
                                   expected: float) -> None:
    """Check the counters and formulas together on the hand-counted EN, NL and DE sentences."""
    result = measure(text, language)
    assert result is not None
    assert (result.words, result.sentences, result.syllables) == counts
    assert result.score == pytest.approx(expected, abs=1e-6)
    assert reading_ease(text, language) == pytest.approx(expected, abs=1e-6)


def test_english_counter_is_pinned_to_cmudict() -> None:
    """Check that 'steady' has 2 syllables (CMUdict); pyphen alone says 1 (as in textstat 0.7.3)."""
    count = cmudict_counter()
    assert [count(w) for w in ("steady", "recovered", "stressful", "quickly")] == [2, 3, 2, 2]


def test_pluggable_counter() -> None:
    """Check that a custom syllable counter is used: one syllable per word gives ASW = 1."""
    result = measure(EN, "en", counter=lambda word: 1)
    assert result is not None
    assert result.syllables == 12
    # 206.835 - 1.015 * 6 - 84.6 * 1 (Flesch 1948 constants).
    assert result.score == pytest.approx(206.835 - 6.09 - 84.6)


def test_empty_text_has_no_score() -> None:
    """Check that a text without words gives None rather than 0 (design choice; textstat: 0.0)."""
    assert reading_ease("", "en") is None
    assert reading_ease(" ... – ", "de") is None


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("No end mark here", 1),
        ("One. Two! Three? Four: five; six", 6),  # Flesch's manual rules count : and ;
        ("It was 2.5 on 3.3.2026 at 15:05. Fine.", 2),  # marks inside numbers do not end one
        ("First part – second part.", 2),  # a spaced dash ends a unit of speech
        ("Well-being is a word.", 1),
    ],
)
def test_sentence_count(text: str, expected: int) -> None:
    """Check sentence counting against Flesch's manual counting rules (Flesch 1948)."""
    assert sentence_count(text) == expected


def test_words_keep_contractions_hyphens_and_numbers_whole() -> None:
    """Check that contractions, hyphenated words and numbers count as one word (Flesch's rules)."""
    assert words("Don't worry: well-being, 2,5 points.") == [
        "Don't", "worry", "well-being", "2,5", "points"
    ]


@pytest.mark.parametrize(
    ("score", "language", "label"),
    [
        (60.0, "en", "standard"), (59.99, "en", "fairly difficult"), (100.0, "en", "very easy"),
        (121.2, "en", "very easy"), (-5.0, "en", "very difficult"),
        (60.0, "nl", "normaal"), (45.0, "nl", "tamelijk moeilijk"),
        (60.0, "de", "normal"), (50.0, "de", "anspruchsvoll"), (29.9, "de", "sehr schwer"),
    ],
)
def test_bands(score: float, language: str, label: str) -> None:
    """Check half-open [lower, upper) bands from the tables of Flesch 1949, Douma and Amstad."""
    assert band(score, language) == label


def test_plain_level_is_the_normal_band_in_every_language() -> None:
    """Check that the plain level is the bottom of the 'standard'/'normaal'/'normal' band."""
    for language, level in PLAIN_LEVEL.items():
        assert band(level, language) in {"standard", "normaal", "normal"}
        assert band(level - 0.01, language) not in {"standard", "normaal", "normal"}


def test_text_of_html_ends_blocks_and_skips_tables_and_charts() -> None:
    """Check that list items end as sentences and tables, charts and hidden parts are left out."""
    html = (
        "<html lang='en'><head><title>T</title><style>p{}</style></head><body>"
        "<h1>Your booklet</h1><ul><li>One thing<li>Two things</ul>"
        "<p>Hi <b>there</b>. Read on</p>"
        "<figure><svg><title>chart</title><desc>a line</desc></svg>"
        "<figcaption>What the chart shows</figcaption></figure>"
        "<table><tr><td>1,5</td></tr></table><div aria-hidden='true'><p>hidden</p></div>"
        "<p>End.<br>After a break</p></body></html>"
    )
    assert text_of_html(html).splitlines() == [
        "Your booklet.", "One thing.", "Two things.", "Hi there. Read on.",
        "What the chart shows.", "End.", "After a break.",
    ]


def test_unknown_language() -> None:
    """Check that a language without a formula is refused with a clear message."""
    with pytest.raises(ValueError, match="no readability formula for language 'fr'"):
        reading_ease("Bonjour.", "fr")
