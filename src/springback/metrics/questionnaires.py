"""Periodic questionnaires: bands, reliable change from first to last, sudden gains and losses.

Sources: Jacobson & Truax 1991, "Clinical significance: a statistical approach to defining
meaningful change in psychotherapy research", J Consult Clin Psychol 59:12-19 (reliable change
index), with the sqrt 2 for a difference of two fallible scores from Christensen & Mendoza
1986, Behavior Therapy 17:305-308; Tang & DeRubeis 1999, "Sudden gains and critical sessions in
cognitive-behavioral therapy for depression", J Consult Clin Psychol 67:894-904 (three
criteria), with the critical t for missing neighbours attributed to Lutz et al. 2013 as
documented by Wiedemann et al. 2020, PLoS ONE 15:e0230276.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from springback.errors import DataError, error
from springback.metrics.results import Estimate, Family
from springback.settings import Questionnaire, StudySettings

RCI_Z = 1.96
"""|RC| above this is reliable change at p < .05, two-tailed (Jacobson & Truax 1991)."""


def band_of(score: float, spec: Questionnaire) -> str:
    """The band a score falls in (lower bounds inclusive); ValueError outside the range."""
    low, high = spec.range
    if not low <= score <= high:
        raise ValueError(f"score {score:g} is outside the range {low:g}-{high:g}")
    label = ""
    for bound, name in spec.bands:
        if score >= bound:
            label = name
    return label


def reliable_change_sdiff(spec: Questionnaire) -> float | None:
    """Standard error of a difference, sqrt(2) * SD * sqrt(1 - reliability); None if unknown."""
    if spec.reliability is None or spec.sd is None:
        return None
    return math.sqrt(2.0) * spec.sd * math.sqrt(1.0 - spec.reliability)


def reliable_change(first: float, last: float, s_diff: float) -> float:
    """Reliable change index (last - first) / S_diff."""
    return (last - first) / s_diff


def rci_verdict(rc: float, higher_is_worse: bool) -> str:
    """Plain-words verdict of a reliable change index under the scale's polarity."""
    if abs(rc) <= RCI_Z:
        return "no reliable change"
    worse = rc > 0 if higher_is_worse else rc < 0
    return "reliable worsening" if worse else "reliable improvement"


def sudden_changes(scores: np.ndarray, spec: Questionnaire,
                   min_change: float) -> list[tuple[int, str, float]]:
    """Find sudden gains and losses between consecutive scores (NaN = missed occasion).

    Returns (index of the score after the change, 'gain' | 'loss', signed score change).
    Criterion 1: |change| >= min_change; 2: >= sudden_min_relative of the pre-change score
    (measured from the scale's better end); 3: the means of up to three scores before and after
    differ in a two-sample t-test, t = (mean difference) / (pooled SD x sqrt(1/n1 + 1/n2)) above
    t(.975, n1 + n2 - 2) (2.776 for three and three scores), with at least two scores on each
    side (Tang & DeRubeis 1999, J Consult Clin Psychol 67:894-904; a loss mirrors a gain, Lutz
    et al. 2013, Psychotherapy Research 23:14-24).
    """
    low, high = spec.range
    worse = scores - low if spec.higher_is == "worse" else high - scores
    found = []
    for n in range(1, len(worse) - 2):
        a, b = worse[n], worse[n + 1]
        if not (np.isfinite(a) and np.isfinite(b)):
            continue
        pre = worse[max(n - 2, 0): n + 1]
        post = worse[n + 1: n + 4]
        pre, post = pre[np.isfinite(pre)], post[np.isfinite(post)]
        if len(pre) < 2 or len(post) < 2:
            continue
        df = len(pre) + len(post) - 2
        pooled = math.sqrt(((len(pre) - 1) * pre.var(ddof=1) + (len(post) - 1) *
                            post.var(ddof=1)) / df)
        t_crit = float(stats.t.ppf(0.975, df)) * math.sqrt(1 / len(pre) + 1 / len(post))
        # A loss mirrors a gain: the same three criteria with the direction reversed.
        for kind, size, gap in (("gain", a - b, pre.mean() - post.mean()),
                                ("loss", b - a, post.mean() - pre.mean())):
            if size >= min_change and size >= spec.sudden_min_relative * a and \
                    gap > t_crit * pooled:
                found.append((n + 1, kind, float(scores[n + 1] - scores[n])))
    return found


def questionnaire_family(frame: pd.DataFrame, settings: StudySettings) -> Family:
    """Compute bands, reliable change and sudden changes for every configured questionnaire."""
    est: dict[str, Estimate] = {}
    tables: dict[str, pd.DataFrame] = {}
    params: dict[str, Any] = {}
    for name, spec in settings.questionnaires.items():
        rows = frame[frame["questionnaire"].astype(str) == name] if len(frame) else frame
        rows = rows.sort_values("time", kind="stable") if len(rows) else rows
        scores = pd.to_numeric(rows["score"], errors="coerce").to_numpy(dtype=float) \
            if len(rows) else np.zeros(0)
        bands = [_band_or_raise(s, spec, name) if np.isfinite(s) else "" for s in scores]
        tables[f"scores_{name}"] = pd.DataFrame({
            "local_time": rows["local_time"].reset_index(drop=True) if len(rows) else
            pd.Series([], dtype=object), "score": scores, "band": bands})
        s_diff = reliable_change_sdiff(spec)
        worse = spec.higher_is == "worse"
        threshold = RCI_Z * s_diff if s_diff else None
        params[name] = {"bands": [list(b) for b in spec.bands], "range": list(spec.range),
                        "higher_is": spec.higher_is, "rci_threshold": threshold,
                        "s_diff": s_diff, "rci_z": RCI_Z}
        finite = scores[np.isfinite(scores)]
        est[f"questionnaire_last_{name}"] = (
            Estimate(float(finite[-1]), n=len(finite), note=bands[np.flatnonzero(
                np.isfinite(scores))[-1]]) if len(finite) else
            Estimate.missing("no scores were recorded"))
        est[f"reliable_change_{name}"] = _rci_estimate(finite, s_diff, worse, name)
        min_change = spec.sudden_min_change if spec.sudden_min_change is not None else threshold
        params[name].update(sudden_min_change=min_change,
                            sudden_min_relative=spec.sudden_min_relative)
        found: list[tuple[int, str, float]] = []
        if min_change is None:
            why = (f"set questionnaires.{name}.sudden_min_change, or reliability and sd, "
                   "to judge sudden changes")
            est[f"sudden_gains_{name}"] = Estimate.missing(why, n=len(finite))
            est[f"sudden_losses_{name}"] = Estimate.missing(why, n=len(finite))
        elif len(finite) < 4:
            why = f"needs at least 4 scores (two before and two after); there were {len(finite)}"
            est[f"sudden_gains_{name}"] = Estimate.missing(why, n=len(finite))
            est[f"sudden_losses_{name}"] = Estimate.missing(why, n=len(finite))
        else:
            found = sudden_changes(scores, spec, min_change)
            note = (f"Tang & DeRubeis 1999 criteria; change of at least {min_change:g} points "
                    f"and {spec.sudden_min_relative:.0%} of the score before")
            for kind, plural in (("gain", "gains"), ("loss", "losses")):
                count = sum(1 for f in found if f[1] == kind)
                est[f"sudden_{plural}_{name}"] = Estimate(float(count), n=len(finite), note=note)
        tables[f"sudden_{name}"] = pd.DataFrame({
            "local_time": [rows["local_time"].iloc[i] for i, _, _ in found],
            "kind": [k for _, k, _ in found], "change": [c for _, _, c in found]},
            columns=["local_time", "kind", "change"])
    return Family(estimates=est, tables=tables, params=params)


def _rci_estimate(finite: np.ndarray, s_diff: float | None, worse: bool, name: str) -> Estimate:
    """Reliable change from the first to the last score, with the verdict in the note."""
    if s_diff is None:
        return Estimate.missing(f"set questionnaires.{name}.reliability and sd to judge "
                                "reliable change", n=len(finite))
    if len(finite) < 2:
        return Estimate.missing(f"needs two scores; there were {len(finite)}", n=len(finite))
    rc = reliable_change(float(finite[0]), float(finite[-1]), s_diff)
    return Estimate(rc, n=len(finite), note=rci_verdict(rc, worse))


def _band_or_raise(score: float, spec: Questionnaire, name: str) -> str:
    """Band a score, turning an out-of-range total into a DataError the user can act on."""
    try:
        return band_of(float(score), spec)
    except ValueError as exc:
        raise DataError([error("questionnaires data", str(exc), column="score",
                               expected=f"a {name} total between {spec.range[0]:g} and "
                                        f"{spec.range[1]:g}", found=f"{score:g}",
                               code="score-out-of-range")]) from None
