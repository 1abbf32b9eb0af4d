"""Every chart spec the example study makes is valid Vega-Lite.

The schema is the Vega-Lite v6 JSON schema (https://vega.github.io/schema/vega-lite/v6.json,
the release altair bundles and names in `alt.SCHEMA_URL`), checked with altair's own
validation (`validate=True`, jsonschema draft 7). Each spec is taken exactly as it goes to
vl-convert, the booklet theme included, for every example participant in their language.
"""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import altair as alt
import pytest
from altair.vegalite.v6.schema import core

from springback import findings, intake, metrics
from springback.charts import make_charts, svg
from springback.i18n.language import translations
from springback.safety import rules as safety
from tests.support.project import copy_example

BLANK_SVG = '<svg xmlns="http://www.w3.org/2000/svg" width="1" height="1"></svg>'


@pytest.fixture(scope="module")
def example_specs(tmp_path_factory: pytest.TempPathFactory) -> list[tuple[str, dict[str, Any]]]:
    """(participant/chart key, the full Vega-Lite spec) of every chart of every booklet."""
    project = copy_example(tmp_path_factory.mktemp("schema") / "study")
    toml = project / "study.toml"
    # The specs do not depend on the surrogate count, only the p-values' resolution does.
    toml.write_text(toml.read_text(encoding="utf-8").replace("surrogates = 1000\n",
                                                             "surrogates = 99\n"),
                    encoding="utf-8")
    study = intake.load_study(Path(project))
    settings = study.settings
    sent: list[dict[str, Any]] = []
    specs: list[tuple[str, dict[str, Any]]] = []

    def capture(spec: dict[str, Any], **_options: Any) -> str:
        sent.append(copy.deepcopy(spec))
        return BLANK_SVG

    finish = svg.finish_svg

    def named(raw: str, key: str, title: str, description: str) -> str:
        specs.append((key, sent[-1]))
        return finish(raw, key, title, description)

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(svg.vl_convert, "vegalite_to_svg", capture)
        patch.setattr(svg, "finish_svg", named)
        for pid in study.participants():
            data = study.slice(pid)
            if data.consent != "yes":
                continue
            results = metrics.compute(data, settings)
            if not results.enough_data:
                continue
            found = findings.decide(results, safety.evaluate(data, results, settings), settings)
            before = len(specs)
            make_charts(data, results, settings, data.language,
                        translations(data.language).gettext, found)
            specs[before:] = [(f"{pid}/{key}", spec) for key, spec in specs[before:]]
    return specs


def test_the_schema_is_vega_lite_6():
    assert alt.SCHEMA_URL.startswith("https://vega.github.io/schema/vega-lite/v6.")


def test_the_example_makes_the_mood_chart_and_calendar_for_everyone(example_specs):
    people = {key.split("/")[0] for key, _spec in example_specs}
    keys = {key for key, _spec in example_specs}
    assert len(people) >= 8
    for pid in people:
        assert {f"{pid}/mood", f"{pid}/calendar"} <= keys


def test_every_example_chart_spec_validates_against_the_vega_lite_schema(example_specs):
    for key, spec in example_specs:
        try:
            core.Root.validate(spec)
        except Exception as error:  # jsonschema's ValidationError, with the failing path
            pytest.fail(f"{key}: {error}")


def test_every_example_chart_spec_is_made_with_altair(example_specs):
    for key, spec in example_specs:
        # altair writes the schema it validated against; a hand-written dict would not.
        assert spec.get("$schema") == alt.SCHEMA_URL, key


def test_the_validation_rejects_a_broken_spec(example_specs):
    """The check can fail: a mood spec with a mark type Vega-Lite does not know is refused."""
    spec = next(s for k, s in example_specs if k.endswith("/mood"))
    broken = copy.deepcopy(spec)
    broken["vconcat"][1]["layer"][-1]["mark"]["type"] = "squiggle"
    with pytest.raises(Exception, match="squiggle"):
        core.Root.validate(broken)
