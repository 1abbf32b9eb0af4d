"""Property tests: results do not depend on row order or clock offset; bad numbers are refused."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from springback import metrics
from springback.errors import DataError
from tests.support.metrics_sim import (
    events_at,
    participant,
    prompt_hours,
    questionnaire_scores,
    settings_for,
)

FAST = settings_for(surrogates=19, windows=[0.4, 0.6], bandwidths_days=[5.0], bandwidth_days=5.0,
                    window=0.4)
PROPERTY = settings(max_examples=8, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])


def _data(seed: int, days: int, offset_days: int = 0, drop: int | None = None):
    rng = np.random.default_rng(seed)
    hours = prompt_hours(days, 5, rng)
    x = np.clip(3.5 + np.cumsum(rng.normal(0, 0.4, len(hours))) * 0.3, 1, 7)
    shift = 24.0 * offset_days
    events = events_at(list(hours[::17][:4] - 0.5 + shift))
    q = questionnaire_scores([0 + offset_days, 7 + offset_days, 14 + offset_days,
                              21 + offset_days], [14, 13, 6, 7])
    return participant(hours + shift, x, rng=np.random.default_rng(seed + 1), events=events,
                       questionnaires=q)


def _values(data) -> dict[str, float | None]:
    return {r["measure"]: r["value"] for r in metrics.results_rows(metrics.compute(data, FAST))}


def _same(a: dict, b: dict) -> None:
    assert a.keys() == b.keys()
    for key in a:
        if a[key] is None or b[key] is None:
            assert a[key] is None and b[key] is None, key
        else:
            # 1e-6: the rate comes from a numerical optimiser (tolerance 1e-8 on log kappa).
            assert math.isclose(a[key], b[key], rel_tol=1e-6, abs_tol=1e-12), key


@PROPERTY
@given(seed=st.integers(0, 10_000), days=st.integers(8, 12), perm_seed=st.integers(0, 10_000))
def test_row_order_does_not_matter(seed, days, perm_seed):
    """Check shuffling the momentary rows leaves every measure unchanged."""
    data = _data(seed, days)
    order = np.random.default_rng(perm_seed).permutation(len(data.momentary))
    shuffled = type(data)(**{**data.__dict__,
                             "momentary": data.momentary.iloc[order].reset_index(drop=True)})
    _same(_values(data), _values(shuffled))


@PROPERTY
@given(seed=st.integers(0, 10_000), days=st.integers(8, 12), offset=st.integers(-400, 400))
def test_shifting_all_times_does_not_matter(seed, days, offset):
    """Check moving every timestamp (answers, events, questionnaires) by whole days is neutral."""
    _same(_values(_data(seed, days)), _values(_data(seed, days, offset_days=offset)))


@PROPERTY
@given(seed=st.integers(0, 10_000), where=st.integers(0, 39),
       bad=st.sampled_from([math.inf, -math.inf]))
def test_infinite_ratings_are_refused_with_a_problem(seed, where, bad):
    """Check an infinite rating raises DataError naming the row, never another exception."""
    data = _data(seed, 8)
    frame = data.momentary.copy()
    frame.loc[where, "low_mood"] = bad
    broken = type(data)(**{**data.__dict__, "momentary": frame})
    with pytest.raises(DataError) as info:
        metrics.compute(broken, FAST)
    problem = info.value.problems[0]
    assert problem.code == "value-not-finite" and problem.row == where + 2


@PROPERTY
@given(seed=st.integers(0, 10_000), where=st.lists(st.integers(0, 39), min_size=1, max_size=5,
                                                    unique=True))
def test_missing_ratings_count_as_unanswered(seed, where):
    """Check a NaN rating gives the same results as leaving that prompt out."""
    data = _data(seed, 8)
    frame = data.momentary.copy()
    frame.loc[where, "low_mood"] = np.nan
    with_nan = type(data)(**{**data.__dict__, "momentary": frame})
    dropped = type(data)(**{**data.__dict__, "momentary": data.momentary.drop(
        index=where).reset_index(drop=True)})
    _same(_values(with_nan), _values(dropped))


def test_missing_time_is_refused():
    """Check an answer without a time raises DataError with code time-missing."""
    data = _data(1, 8)
    frame = data.momentary.copy()
    frame.loc[3, "time"] = None
    with pytest.raises(DataError) as info:
        metrics.compute(type(data)(**{**data.__dict__, "momentary": frame}), FAST)
    assert info.value.problems[0].code == "time-missing"
