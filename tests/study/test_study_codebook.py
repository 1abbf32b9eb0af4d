"""The codebook against every measure out/metrics.csv can contain, and the booklets' labels."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from springback import metrics
from springback.study.codebook import CODEBOOK_COLUMNS, MEASURES, codebook, definition, expand
from tests.support import metrics_sim

SRC = Path(__file__).resolve().parents[2] / "src" / "springback"
LITERAL = re.compile(r'\best\["(\w+)"\]|"(\w+)": Estimate')
TEMPLATED = re.compile(r'(?:\best\[f"|\bkey = f")([\w{}]+)"')


def _source_names() -> tuple[set[str], set[str]]:
    """Measure names the metrics families write: literal keys, and f-string key patterns."""
    literal, templated = set(), set()
    for path in sorted((SRC / "metrics").glob("*.py")):
        text = path.read_text(encoding="utf-8")
        for m in LITERAL.finditer(text):
            if m.group(1) or m.group(2):
                literal.add(m.group(1) or m.group(2))
        templated |= {m.group(1) for m in TEMPLATED.finditer(text)}
    return literal, templated


def test_every_literal_measure_of_the_metrics_families_is_in_the_codebook() -> None:
    """Check each measure name written in springback/metrics/ has a codebook row."""
    literal, templated = _source_names()
    names = {m.name for m in expand(["phq9"])}
    assert len(literal) > 30
    assert sorted(literal - names) == []
    for pattern in templated:
        rx = re.compile("^" + re.sub(r"\\\{\w+\\\}", r"\\w+", re.escape(pattern)) + "$")
        assert any(rx.match(n) for n in names), pattern


def test_every_codebook_measure_is_named_in_the_metrics_source() -> None:
    """Check the registry holds no name that no family reports (or builds from a pattern)."""
    text = "\n".join(p.read_text(encoding="utf-8") for p in (SRC / "metrics").glob("*.py"))
    for m in MEASURES:
        if "{q}" in m.name:
            stem = m.name.split("{q}")[0].replace("gains_", "{plural}_").replace("losses_",
                                                                                "{plural}_")
            assert f'f"{stem}{{name}}"' in text, m.name
        elif f'"{m.name}"' not in text:
            stem, _, label = m.name.rpartition("_")
            assert f'f"{stem}_{{label}}"' in text and f'"{label}"' in text, m.name


def test_a_computed_participant_reports_only_codebook_measures() -> None:
    """Check the measures metrics.compute reports for simulated people are all in it."""
    settings = metrics_sim.settings_for(surrogates=49)
    names = {m.name for m in expand(settings.questionnaires)}
    rng = np.random.default_rng(5)
    hours = metrics_sim.prompt_hours(21, 5, rng)
    values = np.clip(metrics_sim.simulate_ou(hours, 0.3, 0.8, 3.5, rng), 1, 7)
    values[len(values) // 2:] += 2.5  # a shift, so the lead-up's measures appear too
    scores = metrics_sim.questionnaire_scores([0, 7, 14, 20], [14, 12, 6, 5])
    data = metrics_sim.participant(hours, np.clip(values, 1, 7), questionnaires=scores)
    reported = {row["measure"] for row in metrics.results_rows(metrics.compute(data, settings))}
    assert "reliable_change_phq9" in reported
    assert sorted(reported - names) == []


def test_the_labels_are_the_booklets_own() -> None:
    """Check each measure a booklet table labels has that label in the registry."""
    pattern = re.compile(r'\("(\w+)", _\("([^"]+)"\)')
    labels = {}
    for path in (SRC / "templates").rglob("*.html"):
        labels.update(dict(pattern.findall(path.read_text(encoding="utf-8"))))
    registry = {m.name: m.label for m in MEASURES}
    shown = {name: label for name, label in labels.items() if name in registry}
    assert len(shown) > 30
    assert {n: registry[n] for n in shown} == shown


def test_the_codebook_table() -> None:
    """Check the codebook's columns, the lead-up and questionnaire rows and the lookup."""
    book = codebook(["phq9", "gad7"])
    assert tuple(book.columns) == CODEBOOK_COLUMNS
    assert book["measure"].is_unique
    assert {"warning_tau_inertia_leadup", "reliable_change_gad7",
            "sudden_losses_phq9"} <= set(book["measure"])
    assert (book["meaning"].str.len() > 10).all() and (book["unit"] != "").all()
    found = definition("reliable_change_gad7")
    assert found is not None and found.name == "reliable_change_{q}"
    assert definition("warning_p_variance_leadup") is not None
    assert definition("no_such_measure") is None
