"""Simulated cohorts for the study stage's tests: people with known lag-1 carry-over."""

from __future__ import annotations

import numpy as np
import pandas as pd


def ar1_cohort(people: int, mean_phi: float, sd_phi: float, *, days: int = 40,
               per_day: int = 6, seed: int = 0, gap_hours: float = 2.5) -> tuple[
                   pd.DataFrame, np.ndarray]:
    """Within-day pairs (deviation, next value) of `people` stationary AR(1) people.

    Each person's phi is drawn from N(mean_phi, sd_phi) (clipped to 0.05-0.9), with a random
    mean and innovation SD; every day starts from the stationary distribution, and pairs are
    the answer's deviation from the person's own mean and the next answer, as
    springback.study.group.within_day_pairs forms them. Returns
    the pairs and the people's true phi.
    """
    rng = np.random.default_rng(seed)
    phis = np.clip(rng.normal(mean_phi, sd_phi, people), 0.05, 0.9)
    parts = []
    for i, phi in enumerate(phis):
        mu, sigma = rng.normal(3.0, 0.5), rng.uniform(0.5, 1.0)
        x = np.empty((days, per_day))
        x[:, 0] = rng.normal(0, sigma / np.sqrt(1 - phi**2), days)
        for k in range(1, per_day):
            x[:, k] = phi * x[:, k - 1] + rng.normal(0, sigma, days)
        values = mu + x
        resid = values - values.mean()
        parts.append(pd.DataFrame({"participant": f"S{i:02d}",
                                   "deviation": resid[:, :-1].ravel(),
                                   "next_value": values[:, 1:].ravel(),
                                   "gap_hours": gap_hours}))
    return pd.concat(parts, ignore_index=True), phis


def findings_rows(cases: list[tuple[str, str, str]]) -> pd.DataFrame:
    """Findings rows (course and warning) from (participant, course, warning) triples."""
    rows = []
    for pid, course, warning in cases:
        rows.append({"participant": pid, "topic": "course", "reading": course,
                     "certainty": "some_signs", "detail": "", "reason": ""})
        rows.append({"participant": pid, "topic": "warning", "reading": warning,
                     "certainty": "some_signs", "detail": "", "reason": ""})
    return pd.DataFrame(rows)
