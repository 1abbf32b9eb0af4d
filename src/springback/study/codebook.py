"""One registry of what every measure of out/metrics.csv means: the codebook's only source.

Names are those of the metrics families' estimates (`Family.estimates` keys). A name with
`{q}` stands for one per questionnaire key of study.toml; every early-warning measure also
exists for the lead-up to the first large shift, with the suffix `_leadup`
(springback.metrics.leadup). `label` is the booklet's own row label of the measure (the
therapist edition's tables); the other fields are written for a research team.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import pandas as pd

from springback.metrics.leadup import SUFFIX

CODEBOOK_COLUMNS = ("measure", "meaning", "unit", "range", "method", "reference")
"""Columns of out/study/codebook.csv, in order."""


@dataclass(frozen=True)
class Measure:
    """The definition of one measure (or one per questionnaire, with `{q}` in the name)."""

    name: str
    label: str
    meaning: str
    unit: str
    range: str
    method: str
    reference: str = ""
    family: str = ""
    indicator: bool = False
    """Shown as a cohort distribution on the study page."""


_PAIRS = "pairs of answers on the same study day at most metrics.max_gap_hours apart"
_KENDALL = "Kendall tau-b of the indicator in rolling windows against time"
_DAKOS = ("Dakos et al. 2012, Methods for detecting early warnings of critical transitions "
          "in time series, PLoS ONE 7:e41010")
_SURR = "one-sided (rise) p-value against AR(1) and phase-randomised surrogates"
_TAU = ("-1 to 1", "tau")
_P = ("0 to 1", "p-value")

_WARNINGS = (
    Measure("warning_tau_inertia", "Kendall's tau, rolling lag-1 autocorrelation",
            "Trend of carry-over (lag-1 autocorrelation) over the study", "tau", _TAU[0],
            f"{_KENDALL}; windows of metrics.window of the answers", _DAKOS, "warnings", True),
    Measure("warning_p_inertia", "Surrogate p-value, autocorrelation trend",
            "How often surrogate series without a trend rose as much", "p-value", _P[0], _SURR,
            "Theiler et al. 1992, Physica D 58:77-94", "warnings"),
    Measure("warning_tau_variance", "Kendall's tau, rolling variance",
            "Trend of the variance over the study", "tau", _TAU[0], _KENDALL, _DAKOS,
            "warnings", True),
    Measure("warning_p_variance", "Surrogate p-value, variance trend",
            "How often surrogate series without a trend rose as much", "p-value", _P[0], _SURR,
            "Theiler et al. 1992, Physica D 58:77-94", "warnings"),
    Measure("warning_tau_sd", "Kendall's tau, rolling standard deviation",
            "Trend of the standard deviation (same ranking as the variance)", "tau", _TAU[0],
            _KENDALL, _DAKOS, "warnings"),
    Measure("warning_tau_skewness", "Kendall's tau, rolling skewness",
            "Trend of the skewness (reported, not tested)", "tau", _TAU[0], _KENDALL, _DAKOS,
            "warnings"),
    Measure("warning_tau_crosscorr", "Kendall's tau, rolling cross-correlation of items",
            "Trend of the mean correlation between the items", "tau", _TAU[0], _KENDALL,
            "Wichers et al. 2016, Psychother Psychosom 85:114-116", "warnings"),
    Measure("warning_p_crosscorr", "Surrogate p-value, cross-correlation trend",
            "How often multivariate surrogates rose as much", "p-value", _P[0],
            "one-sided p-value against multivariate phase-randomised surrogates",
            "Prichard & Theiler 1994, Phys Rev Lett 73:951-954", "warnings"),
    Measure("warning_robustness", "Share of grid cells with p below alpha, carry-over or variance",
            "Share of window x detrending settings in which carry-over or variance rose",
            "share", "0 to 1", "sensitivity grid of window sizes and detrending bandwidths",
            _DAKOS, "warnings"),
    Measure("warning_robustness_inertia", "Share of grid cells with p below alpha, carry-over",
            "Share of the sensitivity grid in which carry-over rose", "share", "0 to 1",
            "sensitivity grid of window sizes and detrending bandwidths", _DAKOS, "warnings"),
    Measure("warning_robustness_variance", "Share of grid cells with p below alpha, variance",
            "Share of the sensitivity grid in which variance rose", "share", "0 to 1",
            "sensitivity grid of window sizes and detrending bandwidths", _DAKOS, "warnings"),
    Measure("warning_windows_skipped", "Rolling windows skipped (too few answers)",
            "Rolling windows left out because they held too few answers or pairs", "windows",
            "0 or more", "count", "", "warnings"),
)

MEASURES: tuple[Measure, ...] = (
    Measure("n_answered", "Answered prompts", "Number of prompts answered", "prompts",
            "0 or more", "count of answered prompts of the booklet's variable", "",
            "descriptives"),
    Measure("compliance", "Compliance (share of scheduled prompts answered)",
            "Share of the prompts sent that were answered", "share", "0 to 1",
            "answered / sent, prompts sent by the rule in intake.schedule", "", "descriptives",
            True),
    Measure("mean", "Mean", "Average rating of the booklet's variable", "scale points",
            "the variable's scale", "arithmetic mean of the answers", "", "descriptives", True),
    Measure("sd", "Standard deviation", "Spread of the ratings", "scale points", "0 or more",
            "sample standard deviation (n - 1)", "", "descriptives", True),
    Measure("relative_variability", "Relative variability index",
            "Standard deviation relative to the largest possible for this mean", "share",
            "0 to 1", "SD / largest SD possible for the mean on the scale",
            "Mestdagh et al. 2018, Psychological Methods 23:690-707", "descriptives"),
    Measure("rmssd", "RMSSD (root mean square of successive differences)",
            "Typical size of a change from one answer to the next", "scale points",
            "0 or more", f"square root of the mean squared successive difference over {_PAIRS}",
            "von Neumann et al. 1941, Ann Math Stat 12:367-395", "descriptives", True),
    Measure("ta_mssd", "Time-adjusted MSSD",
            "Mean squared successive difference adjusted for the time between answers",
            "squared scale points", "0 or more", f"time-adjusted MSSD over {_PAIRS}",
            "Jahng, Wood & Trull 2008, Psychological Methods 13:354-375", "descriptives"),
    Measure("within_day_variance", "Variance within days",
            "Variance of the ratings around each day's mean", "squared scale points",
            "0 or more", "pooled within-day variance", "", "descriptives"),
    Measure("between_day_variance", "Variance between days", "Variance of the daily means",
            "squared scale points", "0 or more", "variance of the daily means", "",
            "descriptives"),
    Measure("n_pairs", "Admissible pairs", "Number of consecutive pairs carry-over uses",
            "pairs", "0 or more", f"count of {_PAIRS}", "", "dynamics"),
    Measure("slow_trend_share", "Share of variance in the slow trend",
            "Share of the ratings' variance held by a slow change of the usual level",
            "share", "0 to 1", "variance of a Gaussian kernel trend / variance of the ratings",
            _DAKOS, "dynamics"),
    Measure("inertia", "Inertia (lag-1 autocorrelation, admissible pairs)",
            "How much one moment's mood carries into the next", "correlation", "-1 to 1",
            f"Pearson lag-1 correlation over {_PAIRS}, delete-one-day jackknife bias "
            "correction and 95% interval",
            "Kuppens, Allen & Sheeber 2010, Psychological Science 21:984-991", "dynamics", True),
    Measure("recovery_rate_per_hour", "Return rate per hour (Ornstein–Uhlenbeck)",
            "Rate at which a deviation from the usual level fades", "per hour", "above 0",
            "Ornstein-Uhlenbeck with answer noise, maximum likelihood on the real intervals, "
            "profile-likelihood 95% interval",
            "Oravecz, Tuerlinckx & Vandekerckhove 2009, Psychometrika 74:395-418", "dynamics"),
    Measure("half_life_hours", "Half-life in hours (Ornstein–Uhlenbeck)",
            "Hours until half of a deviation has faded", "hours", "above 0",
            "ln 2 / Ornstein-Uhlenbeck rate",
            "Oravecz, Tuerlinckx & Vandekerckhove 2009, Psychometrika 74:395-418", "dynamics",
            True),
    Measure("n_episodes", "Episodes (dips and events)",
            "Upsets (events) and dips found for recovery", "episodes", "0 or more", "count",
            "", "recovery"),
    Measure("n_censored", "Episodes without a return before night, end or next event",
            "Episodes cut off before the mood was back at baseline", "episodes", "0 or more",
            "count", "", "recovery"),
    Measure("recovery_half_life_hours", "Recovery half-life in hours (pooled fit across episodes)",
            "Hours until mood was halfway back after upsets and dips", "hours", "above 0",
            "ln 2 / rate of an Ornstein-Uhlenbeck return with answer noise, pooled over the "
            "episodes (followed past the night), profile-likelihood 95% interval",
            "Kuranova et al. 2020, BMC Medicine 18:36", "recovery", True),
    Measure("median_recovery_hours", "Median hours back to baseline",
            "Median time back to baseline after an episode", "hours", "0 or more",
            "Kaplan-Meier median, censored episodes not yet recovered",
            "Kaplan & Meier 1958, JASA 53:457-481", "recovery"),
    Measure("n_shifts", "Abrupt shifts found (PELT on daily means)",
            "Change points in the daily means", "shifts", "0 or more",
            "PELT change points on the daily means",
            "Killick, Fearnhead & Eckley 2012, JASA 107:1590-1598", "shifts", True),
    Measure("shift_largest", "Largest shift in scale points (+ = worse)",
            "Size of the largest change point, positive when worse", "scale points",
            "the scale's width either way", "difference of the segment means around the change",
            "Killick, Fearnhead & Eckley 2012, JASA 107:1590-1598", "shifts"),
    Measure("period_difference", "Largest level difference between measurement periods "
            "(+ = worse)", "How much the level at the start of a period differed from the level "
            "at the end of the period before (only with two or more periods)", "scale points",
            "the scale's width either way",
            "segment mean at the start of a period minus the one at the end of the previous "
            "period (change points are looked for within periods only)",
            "Killick, Fearnhead & Eckley 2012, JASA 107:1590-1598", "shifts"),
    *_WARNINGS,
    Measure("landscape_valleys", "Valleys in the potential",
            "Levels the mood kept coming back to", "valleys", "1 or more",
            "minima of the potential -ln(kernel density) at several bandwidths; the smallest "
            "count", "Livina et al. 2010, Climate of the Past 6:77-82", "landscape", True),
    Measure("bimodality_coefficient", "Bimodality coefficient",
            "Above 5/9 suggests two peaks", "coefficient", "0 to 1",
            "(skewness^2 + 1) / (excess kurtosis + 3(n-1)^2/((n-2)(n-3)))",
            "Pfister et al. 2013, Frontiers in Psychology 4:700", "landscape"),
    Measure("dip_p", "Hartigan's dip test p-value", "Evidence against one peak", "p-value",
            "0 to 1", "dip test of unimodality",
            "Hartigan & Hartigan 1985, Annals of Statistics 13:70-84", "landscape"),
    Measure("switches", "Switches between states",
            "Changes between the two states of a two-valley landscape", "switches",
            "0 or more", "state changes with a hysteresis band at the border", "", "landscape"),
    Measure("residence_hours_low", "Median hours in the lower state",
            "Typical stay in the lower state", "hours", "above 0",
            "hours in the state over completed stays, 95% bootstrap interval", "", "landscape"),
    Measure("residence_hours_high", "Median hours in the higher state",
            "Typical stay in the higher state", "hours", "above 0",
            "hours in the state over completed stays, 95% bootstrap interval", "", "landscape"),
    Measure("flicker_tau", "Kendall's tau of switching over time (flickering)",
            "Trend of the number of switches per rolling window", "tau", _TAU[0], _KENDALL,
            "Dakos, van Nes & Scheffer 2013, Theoretical Ecology 6:309-317", "landscape"),
    Measure("flicker_p", "Surrogate p-value, flickering",
            "How often series with shuffled stays rose as much", "p-value", _P[0],
            "one-sided p-value, surrogates with the stays shuffled",
            "Dakos, van Nes & Scheffer 2013, Theoretical Ecology 6:309-317", "landscape"),
    Measure("entropy_tau", "Kendall's tau, rolling permutation entropy",
            "Trend of the complexity of the ratings", "tau", _TAU[0],
            "Kendall tau-b of permutation entropy in rolling windows",
            "Bandt & Pompe 2002, Phys Rev Lett 88:174102", "complexity"),
    Measure("entropy_p", "Surrogate p-value, entropy trend",
            "How often surrogate series changed as much", "p-value", _P[0],
            "two-sided p-value against AR(1) surrogates rank-matched to the answers",
            "Bandt & Pompe 2002, Phys Rev Lett 88:174102",
            "complexity"),
    Measure("questionnaire_last_{q}", "Latest score",
            "The latest total of questionnaire {q} (its band in the note)", "score points",
            "the questionnaire's range", "latest recorded total", "", "questionnaires"),
    Measure("reliable_change_{q}", "Reliable change index",
            "Change from the first to the last total of {q} in units of measurement error",
            "z", "any", "(last - first) / (sd sqrt(2) sqrt(1 - reliability))",
            "Jacobson & Truax 1991, JCCP 59:12-19", "questionnaires"),
    Measure("sudden_gains_{q}", "Sudden gains",
            "Number of sudden improvements between totals of {q}", "count", "0 or more",
            "Tang & DeRubeis criteria", "Tang & DeRubeis 1999, JCCP 67:894-904",
            "questionnaires"),
    Measure("sudden_losses_{q}", "Sudden losses",
            "Number of sudden worsenings between totals of {q}", "count", "0 or more",
            "Tang & DeRubeis criteria", "Tang & DeRubeis 1999, JCCP 67:894-904",
            "questionnaires"),
)
"""Every measure of out/metrics.csv, in the order the families report them."""


def expand(questionnaires: Iterable[str]) -> list[Measure]:
    """Every concrete measure for a study's questionnaire keys (lead-up variants included)."""
    keys = list(questionnaires)
    out: list[Measure] = []
    for m in MEASURES:
        if "{q}" in m.name:
            out += [Measure(m.name.format(q=k), m.label, m.meaning.format(q=k), m.unit,
                            m.range, m.method, m.reference, m.family) for k in keys]
            continue
        out.append(m)
        if m.family == "warnings":
            out.append(Measure(m.name + SUFFIX, m.label + " (lead-up)",
                               m.meaning + ", on the answers before the first large shift",
                               m.unit, m.range, m.method, m.reference, m.family, m.indicator))
    return out


def definition(name: str) -> Measure | None:
    """The definition behind a concrete measure name, or None if the registry lacks it."""
    for m in MEASURES:
        pattern = "^" + re.escape(m.name).replace(r"\{q\}", "(.+)") + "$"
        if re.match(pattern, name):
            return m
        if m.family == "warnings" and name == m.name + SUFFIX:
            return m
    return None


def codebook(questionnaires: Iterable[str], extra: Sequence[Measure] = ()) -> pd.DataFrame:
    """The codebook: one row per measure (registry order), then the participants table's
    other columns (`extra`; a `participant` row among them leads)."""
    ids = [m for m in extra if m.name == "participant"]
    rest = [m for m in extra if m.name != "participant"]
    rows = [{"measure": m.name, "meaning": f"{m.label}: {m.meaning}", "unit": m.unit,
             "range": m.range, "method": m.method, "reference": m.reference}
            for m in [*ids, *expand(questionnaires), *rest]]
    return pd.DataFrame(rows, columns=list(CODEBOOK_COLUMNS))
