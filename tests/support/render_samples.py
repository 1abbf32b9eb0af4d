"""Small hand-made inputs for the render tests: settings, one participant's data and results."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, replace
from functools import cache
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from springback import findings, render
from springback.metrics.results import Estimate, Family, ParticipantResults, SeriesDescription
from springback.model import ParticipantData
from springback.settings import StudySettings, from_mapping

EVIL = "<script>alert(1)</script>"
"""A user-supplied string that must come out escaped wherever it is shown."""

ZONE = "Europe/Amsterdam"
BUILT = dt.datetime(2026, 3, 25, 9, 30, tzinfo=dt.UTC)
CHART_KEYS = ("mood", "calendar", "recovery", "warnings", "grid", "landscape", "load",
              "questionnaire_phq9")


def sample_settings(title: str = "Harbour Light Mood Study", **booklet: Any) -> StudySettings:
    """Settings of a fictional study with one composite, one questionnaire and referral texts."""
    raw = {
        "study": {
            "title": title,
            "team": "Harbour Light Lab (fictional)",
            "timezone": ZONE,
            "contact": {"name": "Study team", "email": "team@example.org",
                        "phone": "+99 10 555 0199 (fictional)"},
            "answers_checked": {"en": "Someone from the team reads the answers once a week."},
        },
        "items": {
            "down": {"scale": [1, 7], "label": {"en": "down"}},
            "calm": {"scale": [1, 7], "reverse": True, "label": {"en": "calm"}},
        },
        "composites": {
            "low_mood": {"items": ["down", "calm"], "higher_is": "worse",
                         "label": {"en": "low mood"}},
        },
        "questionnaires": {
            "phq9": {"range": [0, 27],
                     "bands": [[0, "minimal"], [5, "mild"], [10, "moderate"],
                               [15, "moderately severe"], [20, "severe"]],
                     "label": {"en": "Mood questionnaire"}, "reliability": 0.84, "sd": 5.0},
        },
        "booklet": booklet,
        "referral": [{
            "region": "default", "language": "en",
            "questions": "Call the study team on weekdays.",
            "feeling_worse": "Make an appointment with your family doctor.",
            "self_harm": "Call the Harbour crisis line on +99 800 0000 (fictional), day and night.",
            "emergency": "Call 999-0 (fictional emergency number).",
        }],
    }
    settings, _ = from_mapping(raw)
    return settings


def sample_data(participant: str = "P007", events: tuple[str, ...] = ("argument", "bad news")
                ) -> ParticipantData:
    """Twenty days of five answers a day, two events and three questionnaire scores."""
    rng = np.random.default_rng(7)
    days = pd.date_range("2026-03-02", periods=20, freq="D")
    local = pd.DatetimeIndex(
        [d + pd.Timedelta(hours=h) for d in days for h in (9, 12, 15, 18, 21)]
    ).tz_localize(ZONE)
    n = len(local)
    down = np.clip(np.round(3 + rng.normal(0, 1, n)), 1, 7)
    calm = np.clip(np.round(5 + rng.normal(0, 1, n)), 1, 7)
    momentary = pd.DataFrame({
        "participant": participant,
        "time": local.tz_convert("UTC"),
        "local_time": local,
        "study_day": local.tz_localize(None).normalize(),
        "scheduled": local.tz_convert("UTC"),
        "source_row": np.arange(2, n + 2),
        "down": down, "calm": calm, "low_mood": (down + 8 - calm) / 2,
    })
    ev_times = pd.DatetimeIndex(["2026-03-05 13:00", "2026-03-12 10:00"]).tz_localize(ZONE)
    ev = pd.DataFrame({
        "participant": participant, "time": ev_times.tz_convert("UTC"), "local_time": ev_times,
        "kind": list(events[:2]), "intensity": [4.0, 3.0], "upsetting": [True, True],
    })
    q_times = pd.DatetimeIndex(["2026-03-02 20:00", "2026-03-11 20:00", "2026-03-21 20:00"]
                               ).tz_localize(ZONE)
    quest = pd.DataFrame({
        "participant": participant, "time": q_times.tz_convert("UTC"), "local_time": q_times,
        "questionnaire": "phq9", "score": [14.0, 11.0, 6.0],
    })
    quality = pd.DataFrame([{
        "participant": participant, "answered": n, "scheduled": 110, "compliance": n / 110,
        "first_day": days[0], "last_day": days[-1], "days_covered": 20,
        "longest_gap_hours": 12.0, "late_answers": 3, "rows_set_aside": 0,
    }])
    set_aside = pd.DataFrame(columns=["participant", "file", "row", "column", "reason"])
    return ParticipantData(
        participant=participant, language="en", region="default", consent="yes",
        feedback=True, therapist=True, momentary=momentary, events=ev,
        questionnaires=quest, quality=quality, set_aside=set_aside,
    )


def sample_results(data: ParticipantData, missing: tuple[str, ...] = ()) -> ParticipantResults:
    """Results of every family with plausible values; measures in `missing` are not available."""
    series = data.momentary[["local_time", "low_mood"]].rename(columns={"low_mood": "value"})
    families = {
        "descriptives": Family(
            estimates={
                "n_answered": Estimate(100.0, n=100), "compliance": Estimate(100 / 110, n=110),
                "mean": Estimate(3.46, 3.31, 3.61, n=100), "sd": Estimate(0.81, n=100),
                "relative_variability": Estimate(0.27, n=100), "rmssd": Estimate(1.13, n=99),
                "ta_mssd": Estimate(1.21, n=99), "within_day_variance": Estimate(0.52, n=100),
                "between_day_variance": Estimate(0.14, n=20),
            },
            tables={"series": series},
            params={"typical_low": 3.0, "typical_high": 4.0},
        ),
        "dynamics": Family(
            estimates={"inertia": Estimate(0.34, 0.18, 0.50, n=76),
                       "n_pairs": Estimate(76.0, n=76),
                       "recovery_rate_per_hour": Estimate(0.231, 0.12, 0.35, n=76),
                       "half_life_hours": Estimate(3.0, 2.0, 5.8, n=76)},
            params={"max_gap_hours": 6.0, "estimator": "pearson on admissible pairs"},
        ),
        "recovery": Family(
            estimates={"recovery_half_life_hours": Estimate(11.6, 8.1, 19.4, n=9),
                       "n_episodes": Estimate(9.0, n=9), "n_censored": Estimate(3.0, n=9),
                       "median_recovery_hours": Estimate(14.5, n=6)},
        ),
        "warnings": Family(
            estimates={"warning_tau_inertia": Estimate(0.42, n=51),
                       "warning_p_inertia": Estimate(0.031, n=1000),
                       "warning_tau_variance": Estimate(-0.05, n=51),
                       "warning_p_variance": Estimate(0.62, n=1000),
                       "warning_robustness": Estimate(0.36, n=25,
                                                      note="share of cells with p < 0.05")},
            params={"window": 0.5, "detrend": "gaussian", "bandwidth_days": 7.0,
                    "surrogates": 1000, "seed": 20240917, "alpha": 0.05},
        ),
        "questionnaires": Family(
            estimates={"questionnaire_last_phq9": Estimate(6.0, n=3),
                       "reliable_change_phq9": Estimate(-2.26, note="reliable improvement"),
                       "sudden_gains_phq9": Estimate(0.0), "sudden_losses_phq9": Estimate(0.0)},
            tables={"scores_phq9": pd.DataFrame({
                "local_time": data.questionnaires["local_time"],
                "score": data.questionnaires["score"],
                "band": ["moderate", "moderate", "mild"]})},
        ),
        "shifts": Family(
            estimates={"n_shifts": Estimate(1.0), "shift_largest": Estimate(-0.9)},
            tables={"change_points": pd.DataFrame({
                "study_day": [pd.Timestamp("2026-03-13")], "direction": ["better"],
                "size": [-0.9], "method": ["PELT"], "exceeds_swings": [True]})},
        ),
        "landscape": Family(
            estimates={"landscape_valleys": Estimate(2.0), "bimodality_coefficient":
                       Estimate(0.581), "dip_p": Estimate(0.04)},
        ),
    }
    if missing:
        families = {
            name: replace(fam, estimates={
                k: (Estimate.missing("too few answers for this") if k in missing else v)
                for k, v in fam.estimates.items()})
            for name, fam in families.items()
        }
    days = data.momentary["study_day"]
    described = SeriesDescription("low_mood", True, (1.0, 7.0), days.min().date(),
                                  days.max().date(), periods=1)
    return ParticipantResults(participant=data.participant, variable="low_mood",
                              families=families, enough_data=True, series=described)


@dataclass(frozen=True)
class SampleChart:
    """A chart record shaped like springback.charts.Chart."""

    key: str
    title: str
    description: str
    svg: str
    table: pd.DataFrame
    table_caption: str
    print_table: pd.DataFrame | None = None
    print_caption: str = ""


def sample_chart(key: str, label: str = "mood") -> SampleChart:
    """A tiny chart whose user-supplied label would be dangerous if not escaped."""
    svg = (f'<svg xmlns="http://www.w3.org/2000/svg" role="img" aria-labelledby="{key}-t {key}-d"'
           f' width="300" height="80" viewBox="0 0 300 80"><title id="{key}-t">{key}</title>'
           f'<desc id="{key}-d">A line.</desc><path d="M0 60 L300 20" stroke="#0072b2"/></svg>')
    table = pd.DataFrame({"Day": ["2 March", "3 March"], label: ["3.5", "3.0"]})
    return SampleChart(key, f"Chart {key}", f"The {label} line goes down.", svg, table,
                       f"Numbers of the {key} chart")


@dataclass(frozen=True)
class SampleFlag:
    """A flag shaped like springback.safety.Flag."""

    participant: str
    rule: str
    action: str
    value: float | None
    when: str
    detail: str


@cache
def _environment(project_templates: Path | None) -> Any:
    """One environment per template folder, so templates compile once per test session."""
    return render.make_environment(project_templates, "en", timezone=ZONE)


def render_booklet(edition: str, *, settings: StudySettings | None = None,
                   data: ParticipantData | None = None,
                   results: ParticipantResults | None = None, flags: tuple[Any, ...] = (),
                   charts: dict[str, Any] | None = None,
                   project_templates: Path | None = None,
                   review_state: str = "not needed") -> str:
    """Render one edition of the sample booklet (all sample charts unless given)."""
    settings = settings or sample_settings()
    data = data or sample_data()
    results = results or sample_results(data)
    charts = {k: sample_chart(k) for k in CHART_KEYS} if charts is None else charts
    env = _environment(project_templates)
    ctx = render.build_context(
        settings=settings, data=data, results=results,
        findings=findings.decide(results, list(flags), settings), flags=list(flags),
        review_state=review_state, charts=charts, edition=edition, language="en", version=3,
        built_at=BUILT, tool_version="0.1.0")
    return render.render_edition(env, ctx, edition)
