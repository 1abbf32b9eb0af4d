"""Each edition's charts: in its voice, and only the ones it shows.

The participant edition's charts speak to the participant ('Your mood over time'); the
therapist edition's speak about them ('Mood over time'), in every text a chart carries. A build
draws only the charts an edition shows (render.context.chart_names), and a chart drawn alone
is the same chart as in the full set.
"""

from __future__ import annotations

import re
from typing import Any

import pytest

from springback import charts, findings, metrics
from springback.charts import Chart
from springback.i18n.language import translations
from springback.intake import load_study
from springback.render.context import SECTION_CHARTS, chart_names
from springback.safety import rules as safety
from tests.support.project import copy_example

SECOND_PERSON = re.compile(r"\b(you|your)\b", re.IGNORECASE)


@pytest.fixture(scope="module")
def inputs(tmp_path_factory: pytest.TempPathFactory) -> tuple[Any, ...]:
    """Data, results, settings and findings of one example participant with questionnaires."""
    study = load_study(copy_example(tmp_path_factory.mktemp("editions") / "study"))
    data = study.slice("P01")
    results = metrics.compute(data, study.settings)
    found = findings.decide(results, safety.evaluate(data, results, study.settings),
                            study.settings)
    return data, results, study.settings, found


def _make(inputs: tuple[Any, ...], edition: str, wanted: Any = None) -> dict[str, Chart]:
    data, results, settings, found = inputs
    return charts.make_charts(data, results, settings, "en",
                              translations("en").gettext, found, edition, wanted)


def _texts(chart: Chart) -> list[str]:
    """Every text of a chart: title, text alternative, table caption and columns, SVG text."""
    svg_text = re.sub(r"<[^>]+>", "\n", chart.svg).split("\n")
    return [chart.title, chart.description, chart.table_caption, chart.print_caption,
            *map(str, chart.table.columns), *svg_text]


def test_therapist_charts_never_say_you(inputs: tuple[Any, ...]) -> None:
    """Check the therapist edition's charts speak about the participant in every text, and
    the participant edition's speak to them."""
    therapist = _make(inputs, "therapist")
    assert set(therapist) >= {"mood", "calendar", "recovery", "warnings", "landscape"}
    said = [f"{key}: {text}" for key, chart in therapist.items() for text in _texts(chart)
            if SECOND_PERSON.search(text)]
    assert said == []
    assert therapist["mood"].title == "Mood over time"
    participant = _make(inputs, "participant")
    assert participant["mood"].title == "Your mood over time"
    assert participant["calendar"].title == "Which prompts you answered"
    assert therapist["calendar"].title == "Which prompts were answered"


@pytest.mark.parametrize("edition", ["participant", "therapist"])
def test_only_the_charts_an_edition_shows_are_drawn(inputs: tuple[Any, ...],
                                                    edition: str) -> None:
    """Check the drawn charts are those the edition's sections show, each the same as when
    every chart is drawn."""
    every = _make(inputs, edition)
    shown = _make(inputs, edition, chart_names(edition))
    names = {n for section in SECTION_CHARTS[edition].values() for n in section}
    assert set(shown) == {k for k in every
                          if k in names or any(k.startswith(n) for n in names if n[-1] == "_")}
    assert {"mood", "recovery", "warnings", "questionnaire_phq9"} <= set(shown)
    if edition == "participant":
        assert not {"calendar", "grid", "landscape", "load"} & set(shown)
    for key, chart in shown.items():
        full = every[key]
        assert (chart.title, chart.description, chart.svg, chart.table_caption) == (
            full.title, full.description, full.svg, full.table_caption), key
        assert chart.table.equals(full.table), key


def test_chart_names_of_each_edition() -> None:
    """Check the names each edition's sections show (a trailing '_' names a family of keys)."""
    assert chart_names("participant") == {"mood", "recovery", "warnings", "questionnaire_"}
    assert chart_names("therapist") == {"mood", "warnings", "grid", "questionnaire_",
                                        "calendar", "recovery", "load", "landscape"}


def test_a_single_chart_can_be_asked_for(inputs: tuple[Any, ...]) -> None:
    """Check the subset is honoured for a single name too (the mood chart alone)."""
    assert set(_make(inputs, "participant", {"mood"})) == {"mood"}
