"""The study page's charts are altair specs, valid against the Vega-Lite v6 schema.

The check is altair's own `Root.validate` (the Vega-Lite v6 JSON schema altair bundles,
https://vega.github.io/schema/vega-lite/v6.json), on each spec as `to_svg` receives it.
"""

from __future__ import annotations

from typing import Any

import altair as alt
import numpy as np
import pandas as pd
import pytest
from altair.vegalite.v6.schema import core

from springback.charts import svg
from springback.study import charts

PEOPLE = pd.DataFrame({"participant": ["P1", "P2", "P3"], "inertia": [0.2, 0.5, np.nan],
                       "inertia_lower": [0.1, 0.3, np.nan], "inertia_upper": [0.3, 0.7, np.nan]})
GROUP = pd.DataFrame({"estimate": ["inertia_mixed", "inertia_person_mean"],
                      "label": ["Mean inertia, multilevel model", "Mean of person-level inertia"],
                      "value": [0.35, 0.35], "lower": [0.2, 0.1], "upper": [0.5, 0.6]})
WEEKS = pd.DataFrame({"week": [1, 2], "participants": [3, 2], "pooled": [0.8, 0.7],
                      "min": [0.6, 0.65], "max": [0.9, 0.75]})
CALLS: list[tuple[str, Any]] = [
    ("strip", lambda: charts.strip("mean", "Mean", "points",
                                   pd.DataFrame({"participant": ["P1", "P2"],
                                                 "value": [3.1, np.nan]}))),
    ("forest", lambda: charts.forest(PEOPLE, GROUP)),
    ("weeks", lambda: charts.weeks(WEEKS)),
    ("bars", lambda: charts.bars("readings-course", "Readings on course",
                                 pd.DataFrame({"reading": ["abrupt_shift", "no_clear_change"],
                                               "participants": [1, 2]}))),
]


@pytest.mark.parametrize(("name", "make"), CALLS, ids=[name for name, _ in CALLS])
def test_each_study_chart_is_an_altair_spec_the_schema_accepts(
        name: str, make: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    sent: list[Any] = []
    real = charts.to_svg

    def capture(spec: Any, *args: Any) -> str:
        sent.append(spec)
        return real(spec, *args)

    monkeypatch.setattr(charts, "to_svg", capture)
    picture, table = make()
    (spec,) = sent
    assert isinstance(spec, alt.TopLevelMixin)
    core.Root.validate(svg.vega_lite(spec))
    assert picture.startswith("<svg") and 'role="img"' in picture
    assert len(table) == len(spec.to_dict(validate=False)["data"]["values"])
