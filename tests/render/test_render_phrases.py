"""Numbers in words: shares, durations, counts and how sure we can be."""

from __future__ import annotations

import gettext

import pytest

from springback.i18n.language import translations
from springback.render import phrases

EN = gettext.NullTranslations()


@pytest.mark.parametrize(
    ("share", "words"),
    [(0.2, "about one in five prompts"), (0.19, "about one in five prompts"),
     (0.5, "about half of the prompts"), (0.52, "about half of the prompts"),
     (0.76, "about three in four prompts"), (0.91, "about nine in ten prompts"),
     (0.98, "almost every prompt"), (0.03, "fewer than one in ten prompts"),
     (0.34, "about one in three prompts")],
)
def test_share_of_prompts(share: float, words: str) -> None:
    """Check that a share is told as the nearest simple fraction."""
    assert phrases.share_of_prompts(share, EN) == words


@pytest.mark.parametrize(
    ("hours", "words"),
    [(0.5, "less than an hour"), (1.2, "about an hour"), (3.2, "about three hours"),
     (11.6, "about half a day"), (24.0, "about a day"), (36.0, "about a day and a half"),
     (72.0, "about three days"), (24 * 7, "about a week"), (24 * 21, "about three weeks"),
     (24 * 7 * 14, "about 14 weeks")],
)
def test_duration(hours: float, words: str) -> None:
    """Check that durations use the words a person would use."""
    assert phrases.duration(hours, EN) == words


def test_counts() -> None:
    """Check counts in words."""
    assert [phrases.count(n, EN) for n in (1, 2, 5)] == ["once", "twice", "five times"]
    assert phrases.count(13, EN) == "13 times"


@pytest.mark.parametrize("bad", [float("nan"), -0.1])
def test_bad_numbers_are_refused(bad: float) -> None:
    """Check that impossible shares and durations raise instead of producing words."""
    with pytest.raises(ValueError):
        phrases.share_of_prompts(bad, EN)
    with pytest.raises(ValueError):
        phrases.duration(bad, EN)


@pytest.mark.parametrize("language", ["nl", "de"])
def test_phrases_go_through_the_catalogue(language: str) -> None:
    """Check that phrases use the language's catalogue (translated where it has them)."""
    tr = translations(language)
    text = phrases.duration(3.0, tr)
    assert text == {"en": "about three hours", "nl": "ongeveer drie uur",
                    "de": "etwa drei Stunden"}[language]
    assert isinstance(phrases.share_of_prompts(0.2, tr), str)
