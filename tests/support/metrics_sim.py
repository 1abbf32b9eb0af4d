"""Simulated participants for the metrics tests: prompt schedules, OU processes, frames."""

from __future__ import annotations

import numpy as np
import pandas as pd

from springback.model import ParticipantData
from springback.settings import StudySettings, from_mapping
from tests.support import sim

ZONE = "Europe/Amsterdam"


def prompt_hours(days: int, per_day: int, rng: np.random.Generator,
                 start: float = 9.0, end: float = 21.0) -> np.ndarray:
    """Stratified random prompt times (hours since day 0 midnight), one per block of the day."""
    return sim.prompt_hours(days, per_day, rng, start, end)


def simulate_ou(hours: np.ndarray, kappa: float | np.ndarray, sd: float | np.ndarray, mu: float,
                rng: np.random.Generator) -> np.ndarray:
    """Sample dX = -kappa (X - mu) dt + s dW exactly at the given times (stationary SD `sd`);
    a per-step kappa and sd give a slowly changing rate (sd = s / sqrt(2 kappa))."""
    return sim.ou_values(hours, rate=kappa, sd=sd, mean=mu, rng=rng)


def settings_for(**metrics: object) -> StudySettings:
    """A small study: items sad and down (1-7, higher = worse), composite low_mood."""
    raw = {
        "study": {"timezone": ZONE, "prompts_per_day": 5},
        "items": {"sad": {"scale": [1, 7]}, "down": {"scale": [1, 7]},
                  "cheerful": {"scale": [1, 7], "reverse": True}},
        "composites": {"low_mood": {"items": ["sad", "down", "cheerful"], "higher_is": "worse"}},
        "booklet": {"about": "low_mood", "min_prompts": 30},
        "questionnaires": {"phq9": {"range": [0, 27], "reliability": 0.84, "sd": 5.0,
                                    "bands": [[0, "minimal"], [5, "mild"], [10, "moderate"],
                                              [15, "moderately severe"], [20, "severe"]]}},
        "metrics": dict(metrics),
    }
    settings, _ = from_mapping(raw)
    return settings


def participant(hours: np.ndarray, composite: np.ndarray, *, pid: str = "p01",
                item_noise: float = 0.4, rng: np.random.Generator | None = None,
                events: pd.DataFrame | None = None,
                questionnaires: pd.DataFrame | None = None) -> ParticipantData:
    """Build a ParticipantData whose composite low_mood equals `composite` exactly."""
    rng = rng or np.random.default_rng(0)
    origin = pd.Timestamp("2026-03-02", tz=ZONE)
    local = origin + pd.to_timedelta(np.asarray(hours), unit="h")
    noise = rng.normal(0, item_noise, (len(hours), 2))
    sad = composite + noise[:, 0]
    down = composite + noise[:, 1]
    cheerful_rev = 3 * composite - sad - down
    frame = pd.DataFrame({
        "participant": pid,
        "time": local.tz_convert("UTC"),
        "local_time": local,
        "study_day": (local - pd.Timedelta(hours=4)).tz_localize(None).normalize(),
        "scheduled": pd.Series(pd.NaT, index=range(len(hours)), dtype="datetime64[ns, UTC]"),
        "source_row": np.arange(2, len(hours) + 2),
        "sad": sad, "down": down, "cheerful": 8.0 - cheerful_rev,
        "low_mood": np.asarray(composite, dtype=float),
    })
    empty_events = pd.DataFrame({"participant": pd.Series([], dtype=str),
                                 "time": pd.Series([], dtype="datetime64[ns, UTC]"),
                                 "local_time": pd.Series([], dtype=f"datetime64[ns, {ZONE}]"),
                                 "kind": pd.Series([], dtype=str),
                                 "intensity": pd.Series([], dtype=float),
                                 "upsetting": pd.Series([], dtype=bool)})
    empty_q = pd.DataFrame({"participant": pd.Series([], dtype=str),
                            "time": pd.Series([], dtype="datetime64[ns, UTC]"),
                            "local_time": pd.Series([], dtype=f"datetime64[ns, {ZONE}]"),
                            "questionnaire": pd.Series([], dtype=str),
                            "score": pd.Series([], dtype=float)})
    return ParticipantData(
        participant=pid, language="en", region="default", consent="yes", feedback=True,
        therapist=True, momentary=frame,
        events=events if events is not None else empty_events,
        questionnaires=questionnaires if questionnaires is not None else empty_q,
        quality=pd.DataFrame(), set_aside=pd.DataFrame(),
    )


def events_at(hours: list[float], kind: str = "argument", pid: str = "p01") -> pd.DataFrame:
    """Upsetting events at the given hours since day 0 midnight."""
    local = pd.Timestamp("2026-03-02", tz=ZONE) + pd.to_timedelta(hours, unit="h")
    return pd.DataFrame({"participant": pid, "time": local.tz_convert("UTC"),
                         "local_time": local, "kind": kind, "intensity": 5.0, "upsetting": True})


def questionnaire_scores(days: list[float], scores: list[float], name: str = "phq9",
                         pid: str = "p01") -> pd.DataFrame:
    """Questionnaire totals on the given days (at 10:00)."""
    local = pd.Timestamp("2026-03-02 10:00", tz=ZONE) + pd.to_timedelta(days, unit="D")
    return pd.DataFrame({"participant": pid, "time": local.tz_convert("UTC"), "local_time": local,
                         "questionnaire": name, "score": np.asarray(scores, dtype=float)})
