"""Check questionnaire bands, the reliable change index and sudden gains and losses."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from springback.errors import DataError
from springback.metrics.questionnaires import (
    band_of,
    questionnaire_family,
    rci_verdict,
    reliable_change,
    reliable_change_sdiff,
    sudden_changes,
)
from springback.settings import Questionnaire
from tests.support.metrics_sim import questionnaire_scores, settings_for

# Kroenke, Spitzer & Williams 2001, J Gen Intern Med 16:606-613: PHQ-9 bands 0/5/10/15/20.
PHQ9 = Questionnaire(range=(0, 27), bands=[(0, "minimal"), (5, "mild"), (10, "moderate"),
                                          (15, "moderately severe"), (20, "severe")],
                     reliability=0.84, sd=5.0)
# Spitzer et al. 2006, Arch Intern Med 166:1092-1097: GAD-7 bands 0/5/10/15.
GAD7 = Questionnaire(range=(0, 21), bands=[(0, "minimal"), (5, "mild"), (10, "moderate"),
                                          (15, "severe")])


@pytest.mark.parametrize(("score", "band"), [
    (0, "minimal"), (4, "minimal"), (5, "mild"), (9, "mild"), (10, "moderate"),
    (14, "moderate"), (15, "moderately severe"), (19, "moderately severe"), (20, "severe"),
    (27, "severe")])
def test_phq9_bands(score, band):
    """Check PHQ-9 band mapping with inclusive lower bounds (Kroenke, Spitzer & Williams 2001)."""
    assert band_of(score, PHQ9) == band


@pytest.mark.parametrize(("score", "band"), [(4, "minimal"), (5, "mild"), (9, "mild"),
                                             (10, "moderate"), (14, "moderate"),
                                             (15, "severe"), (21, "severe")])
def test_gad7_bands(score, band):
    """Check GAD-7 band mapping (Spitzer, Kroenke, Williams & Löwe 2006)."""
    assert band_of(score, GAD7) == band


@pytest.mark.parametrize(("spec", "score"), [(PHQ9, -1), (PHQ9, 28), (GAD7, 22)])
def test_out_of_range_scores_are_refused(spec, score):
    """Check scores outside the range (PHQ-9 0-27, Kroenke 2001; GAD-7 0-21) raise ValueError."""
    with pytest.raises(ValueError, match="outside the range"):
        band_of(score, spec)


def test_reliable_change_worked_values():
    """Check S_diff 2.828427, RC -2.828427 and threshold 5.543717 (computed by hand)."""
    # Jacobson & Truax 1991 with Christensen & Mendoza 1986's sqrt 2: s1 = 5, r = 0.84.
    s_diff = reliable_change_sdiff(PHQ9)
    assert s_diff == pytest.approx(2.828427, abs=1e-6)
    rc = reliable_change(18, 10, s_diff)
    assert rc == pytest.approx(-2.828427, abs=1e-6)
    assert rci_verdict(rc, higher_is_worse=True) == "reliable improvement"
    assert rci_verdict(rc, higher_is_worse=False) == "reliable worsening"
    assert rci_verdict(1.5, higher_is_worse=True) == "no reliable change"
    assert 1.96 * s_diff == pytest.approx(5.543717, abs=1e-6)
    # Leeds Dependence Questionnaire inputs (r = 0.95, S1 = 7.6): S_diff 2.403331.
    ldq = Questionnaire(range=(0, 30), reliability=0.95, sd=7.6)
    assert reliable_change_sdiff(ldq) == pytest.approx(2.403331, abs=1e-6)


def test_critical_t_values():
    """Check scipy t quantiles 2.776445 / 3.182446 / 4.302653 (Tang & DeRubeis 1999)."""
    for df, want in ((4, 2.7764451), (3, 3.1824463), (2, 4.3026527)):
        assert stats.t.ppf(0.975, df) == pytest.approx(want, abs=1e-6)


@pytest.mark.parametrize(("pre", "post", "found"), [
    ([32, 31, 33], [5, 6, 7], True),
    ([20, 30, 25], [15, 25, 10], False),
    ([np.nan, 31, 33], [5, np.nan, 7], True),
    ([24, 22, 20], [14, 13, 15], False),
])
def test_sudden_gain_worked_table(pre, post, found):
    """Check a computed sudden-gain table (criterion 1 at 7 points, Tang & DeRubeis 1999)."""
    spec = Questionnaire(range=(0, 63))
    scores = np.array(pre + post, dtype=float)
    gains = [f for f in sudden_changes(scores, spec, 7.0) if f[1] == "gain"]
    hits = [f for f in gains if f[0] == 3]
    assert bool(hits) is found


def test_sudden_loss_mirrors_gain_and_polarity():
    """Check a mirrored jump is a loss, and a higher-is-better scale flips the direction."""
    spec = Questionnaire(range=(0, 63))
    up = np.array([5, 6, 7, 32, 31, 33], dtype=float)
    assert [f[1] for f in sudden_changes(up, spec, 7.0)] == ["loss"]
    better = Questionnaire(range=(0, 63), higher_is="better")
    assert [f[1] for f in sudden_changes(up, better, 7.0)] == ["gain"]


def test_family_names_tables_and_reasons():
    """Check the family's measures and tables for a weekly PHQ-9 with one sudden gain."""
    settings = settings_for()
    frame = questionnaire_scores([0, 7, 14, 21, 28, 35, 42], [18, 17, 18, 9, 8, 9, 10])
    fam = questionnaire_family(frame, settings)
    est = fam.estimates
    assert est["reliable_change_phq9"].value == pytest.approx((10 - 18) / (math.sqrt(2) * 2))
    assert est["reliable_change_phq9"].note == "reliable improvement"
    assert est["questionnaire_last_phq9"].value == 10
    assert est["questionnaire_last_phq9"].note == "moderate"
    assert est["sudden_gains_phq9"].value == 1 and est["sudden_losses_phq9"].value == 0
    assert fam.tables["scores_phq9"]["band"].tolist()[:4] == ["moderately severe"] * 3 + ["mild"]
    sudden = fam.tables["sudden_phq9"]
    assert list(sudden.columns) == ["local_time", "kind", "change"]
    assert sudden["change"].tolist() == [-9.0]
    assert fam.params["phq9"]["rci_threshold"] == pytest.approx(5.543717, abs=1e-6)
    empty = questionnaire_family(frame.iloc[:1], settings).estimates
    assert empty["reliable_change_phq9"].value is None
    assert "two scores" in empty["reliable_change_phq9"].note


def test_out_of_range_score_in_data_is_a_data_error():
    """Check an impossible total in the data is reported as a problem, not a traceback."""
    frame = questionnaire_scores([0, 7], [12, 30])
    with pytest.raises(DataError) as info:
        questionnaire_family(frame, settings_for())
    assert info.value.problems[0].code == "score-out-of-range"


def test_sudden_loss_of_the_example_p08_uses_the_t_statistic():
    """Check criterion 3 is a two-sample t-test of the three scores before and after.

    Source: Tang & DeRubeis 1999, J Consult Clin Psychol 67:894-904 (the mean of the three
    sessions before and after differ, t above 2.776 for 3 + 3 scores); the t value is
    scipy.stats.ttest_ind's (pooled variance). The PHQ-9 scores are those of the example study's
    P08: 14 -> 20 is 6 points (at least 6, and 43% of 14), t = 3.32 > 2.776: a sudden loss,
    which a rule comparing the mean difference with t x pooled SD (7.33 < 7.52) missed."""
    scores = np.array([9, 8, 6, 8, 7, 9, 6, 6, 9, 9, 14, 14, 20, 17, 22, 22], dtype=float)
    pre, post = scores[9:12], scores[12:15]
    t = stats.ttest_ind(post, pre).statistic
    assert t == pytest.approx(3.32, abs=0.01)
    assert t > stats.t.ppf(0.975, 4) == pytest.approx(2.776, abs=1e-3)
    found = sudden_changes(scores, PHQ9, 5.99)
    assert [(i, kind, change) for i, kind, change in found] == [(12, "loss", 6.0)]
