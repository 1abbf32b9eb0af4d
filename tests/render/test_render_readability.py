"""Reading level of the participant edition's English text (Flesch Reading Ease >= 60)."""

from __future__ import annotations

import pytest

from springback.i18n.readability import measure, text_of_html
from tests.support.render_samples import (
    render_booklet,
    sample_data,
    sample_results,
    sample_settings,
)


@pytest.mark.parametrize(
    "settings",
    [sample_settings(), sample_settings(show_change_to_participant=True)],
    ids=["default", "with-change-section"],
)
def test_participant_edition_is_plain_english(settings) -> None:
    """Check Flesch Reading Ease >= 60 on the rendered participant edition.

    Formula: Flesch 1948, "A new readability yardstick", Journal of Applied Psychology
    (206.835 - 1.015 ASL - 84.6 ASW); 60-70 is "standard" (plain English; Flesch 1949, The Art
    of Readable Writing), which matches a reader of about 12-13 years.
    """
    data = sample_data()
    html = render_booklet("participant", settings=settings, data=data,
                          results=sample_results(data))
    result = measure(text_of_html(html), "en")
    assert result is not None
    assert result.score >= 60, (result.score, result.words_per_sentence,
                                result.syllables_per_word)
