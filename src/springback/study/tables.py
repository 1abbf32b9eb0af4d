"""The cohort's tables from the study tables of one build: pure functions of frames.

`participants` widens out/metrics.csv and out/findings.csv to one row per participant;
`distributions` describes each indicator across participants; `compliance_weeks` the answered
share by study week (from the study's prompt schedule); `readings` counts readings by topic.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import cast

import numpy as np
import pandas as pd

from springback.study.codebook import MEASURES, Measure, definition, expand

DISTRIBUTION_COLUMNS = ("measure", "label", "n", "n_missing", "mean", "sd", "median", "q25",
                        "q75", "min", "max")
COMPLIANCE_COLUMNS = ("week", "participants", "answered", "sent", "pooled", "mean", "median",
                      "min", "max")
READING_COLUMNS = ("topic", "reading", "participants", "share")

def measure_order(names: Iterable[str], questionnaires: Iterable[str]) -> list[str]:
    """Measures in registry order (lead-up after its measure), unknown names last, sorted."""
    present = set(names)
    known = [m.name for m in expand(questionnaires) if m.name in present]
    return known + sorted(present - set(known))


def participants(metrics: pd.DataFrame, findings: pd.DataFrame,
                 questionnaires: Iterable[str]) -> pd.DataFrame:
    """One row per participant: each measure's value (and interval where one is given),
    then each topic's reading and certainty."""
    keys = list(questionnaires)
    people = sorted(set(metrics["participant"].astype(str)) | set(
        findings["participant"].astype(str)))
    out = pd.DataFrame({"participant": pd.Series(people, dtype=object)})
    if len(metrics):
        m = metrics.assign(participant=metrics["participant"].astype(str))
        columns: dict[str, pd.Series] = {}
        for name in measure_order(m["measure"].astype(str), keys):
            rows = m[m["measure"] == name].drop_duplicates("participant").set_index(
                "participant")
            columns[name] = pd.to_numeric(rows["value"], errors="coerce").reindex(people)
            for end in ("lower", "upper"):
                bound = pd.to_numeric(rows[end], errors="coerce").reindex(people)
                if bound.notna().any():
                    columns[f"{name}_{end}"] = bound
        out = pd.concat([out, pd.DataFrame({k: v.to_numpy(float) for k, v in columns.items()})],
                        axis=1)
    if len(findings):
        f = findings.assign(participant=findings["participant"].astype(str))
        topics = list(dict.fromkeys(f["topic"].astype(str)))
        for topic in topics:
            rows = f[f["topic"] == topic].drop_duplicates("participant").set_index("participant")
            out[f"reading_{topic}"] = rows["reading"].reindex(people).astype(object).to_numpy()
            out[f"certainty_{topic}"] = rows["certainty"].reindex(people).astype(
                object).to_numpy()
    return out


def reading_columns(table: pd.DataFrame) -> list[Measure]:
    """Codebook rows for the participants table's columns that are not measures (the id,
    readings, certainties and interval ends)."""
    out = [Measure("participant", "Participant", "The participant's id, as in the roster",
                   "id", "the roster's ids", "roster (data.participants)")]
    for col in table.columns:
        if col.startswith("reading_"):
            topic = col.removeprefix("reading_")
            out.append(Measure(col, f"Reading on {topic}",
                               f"The findings stage's reading code of topic '{topic}' "
                               "(out/findings.csv)", "code", "the topic's reading codes",
                               "springback.findings.decide"))
        elif col.startswith("certainty_"):
            topic = col.removeprefix("certainty_")
            out.append(Measure(col, f"Certainty on {topic}",
                               f"How sure the reading of topic '{topic}' is", "code",
                               "clear, some_signs, no_clear_sign, cannot_tell",
                               "springback.findings.decide"))
        elif col.endswith(("_lower", "_upper")):
            base = col.rsplit("_", 1)[0]
            d = definition(base)
            if d is not None:
                end = "lower" if col.endswith("_lower") else "upper"
                out.append(Measure(col, f"{d.label}, {end} end of the interval",
                                   f"The {end} end of the 95% interval of {base}", d.unit,
                                   d.range, d.method, d.reference))
    return out


def distributions(table: pd.DataFrame) -> pd.DataFrame:
    """Each indicator across participants: n with a value, n without, and its spread."""
    rows = []
    people = len(table)
    for m in (m for m in MEASURES if m.indicator):
        if m.name not in table:
            continue
        x = table[m.name].to_numpy(float)
        x = x[np.isfinite(x)]
        row: dict[str, object] = {"measure": m.name, "label": m.label, "n": int(x.size),
                                  "n_missing": people - int(x.size)}
        stats = ({"mean": float(np.mean(x)),
                  "sd": float(np.std(x, ddof=1)) if x.size > 1 else math.nan,
                  "median": float(np.median(x)), "q25": float(np.percentile(x, 25)),
                  "q75": float(np.percentile(x, 75)), "min": float(np.min(x)),
                  "max": float(np.max(x))} if x.size else {})
        rows.append({**row, **stats})
    return pd.DataFrame(rows, columns=list(DISTRIBUTION_COLUMNS))


def compliance_weeks(schedule: pd.DataFrame, people: Iterable[str]) -> pd.DataFrame:
    """Answered share of prompts sent by study week (week 1 starts at each participant's
    first scheduled day): pooled over participants, and the spread of their own shares."""
    keep = set(people)
    s = schedule[schedule["participant"].astype(str).isin(keep)].copy()
    s = s[pd.to_numeric(s["sent"], errors="coerce") > 0]
    if s.empty:
        return pd.DataFrame(columns=list(COMPLIANCE_COLUMNS))
    day = pd.to_datetime(s["study_day"])
    first = day.groupby(s["participant"]).transform("min")
    s["week"] = ((day - first).dt.days // 7 + 1).astype(int)
    per = s.groupby(["week", "participant"], sort=True)[["answered", "sent"]].sum()
    per["share"] = (per["answered"] / per["sent"]).clip(upper=1.0)
    rows = []
    for key, g in per.groupby(level="week", sort=True):
        week = int(cast(int, key))
        share = g["share"].to_numpy(float)
        rows.append({"week": week, "participants": len(g),
                     "answered": int(g["answered"].sum()), "sent": float(g["sent"].sum()),
                     "pooled": float(min(g["answered"].sum() / g["sent"].sum(), 1.0)),
                     "mean": float(share.mean()), "median": float(np.median(share)),
                     "min": float(share.min()), "max": float(share.max())})
    return pd.DataFrame(rows, columns=list(COMPLIANCE_COLUMNS))


def readings(findings: pd.DataFrame) -> pd.DataFrame:
    """How many participants had each reading, topic by topic (share of those with the topic)."""
    if findings.empty:
        return pd.DataFrame(columns=list(READING_COLUMNS))
    f = findings.drop_duplicates(["participant", "topic"])
    rows = []
    for topic in dict.fromkeys(f["topic"].astype(str)):
        g = f[f["topic"] == topic]
        counts = g["reading"].astype(str).value_counts()
        for reading in sorted(counts.index):
            rows.append({"topic": topic, "reading": reading,
                         "participants": int(counts[reading]),
                         "share": float(counts[reading] / len(g))})
    return pd.DataFrame(rows, columns=list(READING_COLUMNS))
