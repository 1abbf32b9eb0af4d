"""A chart made twice in one process is rendered once, and reads exactly as a fresh render."""

from __future__ import annotations

import copy

import altair as alt
import jsonschema
import pandas as pd
import pytest

from springback.charts import svg


def _chart(values: list[float]) -> alt.Chart:
    frame = pd.DataFrame({"day": range(len(values)), "mood": values})
    return alt.Chart(frame).mark_line().encode(x="day:Q", y="mood:Q")


def test_a_repeat_is_rendered_once_and_is_the_same_text(monkeypatch: pytest.MonkeyPatch) -> None:
    calls: list[int] = []
    real = svg.vl_convert.vegalite_to_svg

    def counted(*args, **kwargs):  # type: ignore[no-untyped-def]
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(svg.vl_convert, "vegalite_to_svg", counted)
    first = svg.to_svg(_chart([3.0, 4.0, 3.5]), "mood", "Mood", "Three days.", "en")
    again = svg.to_svg(_chart([3.0, 4.0, 3.5]), "mood", "Mood", "Three days.", "en")
    other_words = svg.to_svg(_chart([3.0, 4.0, 3.5]), "mood2", "Your mood", "Days.", "en")
    assert len(calls) == 1
    assert again == first
    svg._rendered.clear()  # a fresh render of each: the same text
    assert svg.to_svg(_chart([3.0, 4.0, 3.5]), "mood2", "Your mood", "Days.", "en") == \
        other_words
    assert len(calls) == 2
    # Other data, or another language's number format, is rendered anew.
    svg.to_svg(_chart([3.0, 4.0, 3.6]), "mood", "Mood", "Three days.", "en")
    svg.to_svg(_chart([3.0, 4.0, 3.5]), "mood", "Mood", "Three days.", "de")
    assert len(calls) == 4


def test_an_invalid_chart_is_refused_by_the_vega_lite_schema() -> None:
    broken = _chart([1.0, 2.0])
    broken.mark = "squiggle"  # altair checks a spec when it is written out, not here
    spec = broken.to_dict(validate=False)
    with pytest.raises(jsonschema.ValidationError, match="squiggle"):
        svg.to_svg(broken, "bad", "Bad", "A mark Vega-Lite does not know.", "en")
    # The refusal is the schema's own (altair's Root.validate says the same).
    with pytest.raises(Exception, match="squiggle"):
        alt.vegalite.v6.schema.core.Root.validate(spec)


def _verdict(check, spec) -> bool:  # type: ignore[no-untyped-def]
    try:
        check(spec)
    except Exception:  # jsonschema's ValidationError, from either check
        return False
    return True


def _rows(spec: dict) -> list:  # type: ignore[type-arg]
    if "datasets" in spec:
        return spec["datasets"][spec["data"]["name"]]  # type: ignore[no-any-return]
    return spec["data"]["values"]  # type: ignore[no-any-return]


@pytest.mark.parametrize("inline", [False, True])
def test_checking_a_data_set_by_its_first_row_gives_the_schema_s_verdict(inline: bool) -> None:
    """Against altair's own check of the whole spec (Root.validate, every row), for a named
    data set and for values written inline."""
    rows = [{"day": i, "mood": float(i % 7)} for i in range(60)]
    data = alt.Data(values=rows) if inline else pd.DataFrame(rows)
    good = alt.Chart(data).mark_line().encode(x="day:Q", y="mood:Q").to_dict(validate=False)
    assert len(_rows(good)) == 60
    assert ("datasets" in good) is not inline
    number_row, odd_object = copy.deepcopy(good), copy.deepcopy(good)
    _rows(number_row).append(3)
    _rows(odd_object).append({"anything": {"nested": [1, "a"]}})
    for spec, valid in ((good, True), (number_row, False), (odd_object, True)):
        assert _verdict(alt.vegalite.v6.schema.core.Root.validate, spec) is valid
        assert _verdict(svg.validate_spec, spec) is valid


def test_a_builder_without_altair_s_part_checks_still_refuses_an_invalid_chart() -> None:
    """`checked_whole` turns off altair's check of each part as it is made; the whole spec is
    still checked by `to_svg`, so a wrong part fails there with the schema's reason."""
    @svg.checked_whole
    def build() -> str:
        line = alt.Chart(alt.Data(values=[{"d": 0, "m": 1.0}])).mark_line(
            strokeWidth="thick")  # a number in the schema
        return svg.to_svg(line.encode(x="d:Q", y="m:Q"), "bad", "Bad", "A wrong width.", "en")

    with pytest.raises(jsonschema.ValidationError, match="thick"):
        build()
    # Outside a builder altair itself refuses the same part at once, as before.
    with pytest.raises(Exception, match="thick"):
        alt.Chart(alt.Data(values=[{"d": 0, "m": 1.0}])).mark_line(strokeWidth="thick")
    assert alt.utils.schemapi.DEBUG_MODE  # the builder left altair's setting as it was


def test_rows_held_as_a_tuple_write_the_same_spec_as_a_list() -> None:
    from springback.charts.common import inline, records

    frame = pd.DataFrame({"t": [0, 1, 2], "v": [3.0, float("nan"), 4.5]})

    def spec(data: alt.Data) -> dict:  # type: ignore[type-arg]
        line = alt.Chart(data).mark_line().encode(x="t:Q", y="v:Q")
        return alt.layer(line, line.mark_point()).properties(width=100).to_dict(validate=False)

    held = inline(frame)
    assert isinstance(held.values, tuple)
    assert spec(held) == spec(alt.Data(values=records(frame)))
