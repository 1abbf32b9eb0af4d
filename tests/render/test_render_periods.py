"""The booklets say in how many measurement periods the answers were given and, when the
times come from day and prompt numbers, that they are the scheduled prompt times."""

from __future__ import annotations

import re
from html.parser import HTMLParser

import pandas as pd
import pytest

from springback import findings, metrics, render
from springback.intake import load_study
from tests.support.render_samples import BUILT, render_booklet

# Answers per period, counted here from the vendored open data file with plain pandas
# (Bringmann et al. 2013, PLoS ONE 8:e60188, S4): a row with any of the five items answered
# and a prompt number.
ITEM_COLUMNS = ["opgewkt_", "pieker", "angstig_", "somber__", "ontspann"]


class Marked(HTMLParser):
    """Text of the elements marked data-finding="participation", with their reading."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.found: list[tuple[str, str]] = []
        self._open: list[tuple[str, str, list[str]]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if a.get("data-finding") == "participation":
            self._open.append((tag, a["data-reading"], []))

    def handle_endtag(self, tag: str) -> None:
        if self._open and self._open[-1][0] == tag:
            _, reading, text = self._open.pop()
            self.found.append((reading, " ".join("".join(text).split())))

    def handle_data(self, data: str) -> None:
        for _, _, text in self._open:
            text.append(data)


def _marked(html: str) -> list[tuple[str, str]]:
    parser = Marked()
    parser.feed(html)
    return parser.found


@pytest.fixture(scope="module")
def study(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    from tests.intake.test_intake_bringmann import BRINGMANN, _project

    loaded = load_study(_project(tmp_path_factory.mktemp("bringmann") / "study"))
    raw = pd.read_csv(BRINGMANN)
    answered = raw[raw[ITEM_COLUMNS].notna().any(axis=1) & raw["beepno"].notna()]
    counts = answered.groupby(["subjno", "st_period"]).size()
    return loaded, counts


def _booklet(study, person: str, edition: str, language: str) -> str:  # type: ignore[no-untyped-def]
    loaded, _ = study
    settings = loaded.settings.model_copy(update={"metrics": loaded.settings.metrics.model_copy(
        update={"surrogates": 19})})  # few surrogates: only participation is looked at here
    data = loaded.slice(person)
    results = metrics.compute(data, settings)
    decided = findings.decide(results, [], settings)
    env = render.make_environment(None, language, timezone=settings.study.timezone)
    ctx = render.build_context(
        settings=settings, data=data, results=results, findings=decided, flags=[],
        review_state="not needed", charts={}, edition=edition, language=language, version=1,
        built_at=BUILT, tool_version="0.1.0")
    return render.render_edition(env, ctx, edition)


def test_both_editions_name_the_periods_and_the_scheduled_times(study) -> None:  # type: ignore[no-untyped-def]
    _, counts = study
    n1, n2 = int(counts[(10720, 0)]), int(counts[(10720, 1)])
    for edition, lead in (("participant", "You were asked in 2 measurement periods:"),
                          ("therapist", "10720 was asked in 2 measurement periods:")):
        marks = _marked(_booklet(study, "10720", edition, "en"))
        texts = [t for _, t in marks]
        assert lead in texts
        # The test's period starts (PERIOD_STARTS) and the design's six days per period.
        assert (f"from 1 March 2010 to 6 March 2010: {n1} answers from 10 May 2010 to "
                f"15 May 2010: {n2} answers") in texts
        scheduled = [t for t in texts if t.startswith("The times in this booklet are the "
                                                      "times the questions were scheduled")]
        # Said in the participation section, and in the participant's "how it was made".
        assert len(scheduled) == (2 if edition == "participant" else 1)
        assert any("not counted as a sudden change" in t for t in texts)
        assert len({r for r, _ in marks}) == 1  # one participation reading throughout


def test_the_sentences_are_translated(study) -> None:  # type: ignore[no-untyped-def]
    nl = " ".join(t for _, t in _marked(_booklet(study, "10720", "participant", "nl")))
    de = " ".join(t for _, t in _marked(_booklet(study, "10720", "participant", "de")))
    assert "Je kreeg vragen in 2 meetperiodes:" in nl
    assert "van 1 maart 2010 tot 6 maart 2010" in nl
    assert "gepland" in nl
    assert "Du wurdest in 2 Messzeiträumen befragt:" in de
    assert "vom 1. März 2010 bis zum 6. März 2010" in de
    assert "geplanten Zeiten" in de


def test_one_period_with_answer_times_says_neither() -> None:
    html = render_booklet("participant")
    assert "measurement periods" not in html
    assert "were scheduled" not in html
    assert re.search(r"Your answers cover the days from", html)
