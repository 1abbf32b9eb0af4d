"""Tidy momentary frame (local times, study days, composites) and the data-quality report."""

from __future__ import annotations

from typing import Any, cast

import pandas as pd
from rich.table import Table as RichTable

from springback.intake.schedule import compliance, study_days
from springback.model import MOMENTARY_COLUMNS, QUALITY_COLUMNS, Study
from springback.settings import StudySettings


def composite_scores(items: pd.DataFrame, settings: StudySettings) -> pd.DataFrame:
    """Each composite: mean of its items after reverse scoring (low + high - x)."""
    out = pd.DataFrame(index=items.index)
    for name, comp in settings.composites.items():
        parts = pd.DataFrame(index=items.index)
        for key in comp.items:
            spec = settings.items[key]
            low, high = spec.scale
            parts[key] = (low + high - items[key]) if spec.reverse else items[key]
        need = comp.min_items or len(comp.items)
        enough = parts.notna().sum(axis=1) >= need
        out[name] = parts.mean(axis=1).where(enough).astype(float)
    return out


def momentary_frame(prompts: pd.DataFrame, settings: StudySettings) -> pd.DataFrame:
    """Answered prompts by the column contract, sorted by participant and time."""
    answered = prompts[prompts["answered"]].sort_values(["participant", "time"], kind="stable")
    answered = answered.reset_index(drop=True)
    zone = settings.study.timezone
    out = pd.DataFrame({
        "participant": answered["participant"].astype(str),
        "time": answered["time"].astype("datetime64[ns, UTC]"),
    })
    out["local_time"] = out["time"].dt.tz_convert(zone)
    out["study_day"] = study_days(out["local_time"], settings.study.day_start)
    out["period"] = (answered["period"].astype("int64") if "period" in answered.columns
                     else pd.Series(1, index=answered.index, dtype="int64"))
    out["scheduled"] = answered["scheduled"].astype("datetime64[ns, UTC]")
    out["source_row"] = answered["source_row"].astype("int64")
    items = answered[list(settings.items)].astype(float)
    out = pd.concat([out, items, composite_scores(items, settings)], axis=1)
    return out[[*MOMENTARY_COLUMNS, *settings.items, *settings.composites]]


SUMMARY_COLUMNS = ("answered", "first_day", "last_day", "days_covered", "longest_gap_hours")


def momentary_summary(momentary: pd.DataFrame) -> pd.DataFrame:
    """Per participant (index): answered prompts, first and last study day, days, longest gap
    within a period.

    Made from every row of each participant it names (a large study is summed up a few
    participants at a time and the parts concatenated).
    """
    by = momentary.groupby("participant")
    within = [momentary["participant"]] + (
        [momentary["period"]] if "period" in momentary.columns else [])
    # The longest gap within a measurement period (the break between periods is by design).
    gaps = momentary["time"].groupby(within).diff().dt.total_seconds() / 3600
    out = pd.DataFrame({
        "answered": by.size().astype("int64"),
        "first_day": by["study_day"].min(),
        "last_day": by["study_day"].max(),
        "days_covered": by["study_day"].nunique().astype("int64"),
        "longest_gap_hours": gaps.groupby(momentary["participant"]).max().astype(float),
    })
    out.index = out.index.astype(str)
    return out


def quality_frame(roster: pd.DataFrame, summary: pd.DataFrame, late: pd.Series,
                  schedule: pd.DataFrame, set_aside: pd.DataFrame) -> pd.DataFrame:
    """One row per roster participant: answered, scheduled, compliance, days, gaps, late, aside.

    `summary` is `momentary_summary` of every participant's rows; `schedule` the prompts sent
    per day by the rule in `intake.schedule` (scheduled is their sum, NaN when not known).
    """
    ids = pd.Index(sorted(roster["participant"].astype(str)), name="participant")
    answered = summary["answered"].reindex(ids, fill_value=0).astype("int64")
    first = summary["first_day"].reindex(ids).astype("datetime64[ns]")
    last = summary["last_day"].reindex(ids).astype("datetime64[ns]")
    days = summary["days_covered"].reindex(ids, fill_value=0).astype("int64")
    longest = summary["longest_gap_hours"].reindex(ids).astype(float)
    sent = schedule["sent"].groupby(schedule["participant"].astype(str)).sum(min_count=1)
    planned = sent.reindex(ids).astype(float)
    if schedule["sent"].notna().any():  # known for everyone: nothing sent is 0
        planned = planned.fillna(0.0)
    share = compliance(answered, planned)
    rows = set_aside.drop_duplicates(["file", "row"])  # a row set aside for two reasons is one
    aside = rows.groupby("participant").size().reindex(ids, fill_value=0).astype("int64")
    out = pd.DataFrame({
        "participant": ids.astype(str),
        "answered": answered.to_numpy(),
        "scheduled": planned.to_numpy(),
        "compliance": share.to_numpy(dtype=float),
        "first_day": first.to_numpy(),
        "last_day": last.to_numpy(),
        "days_covered": days.to_numpy(),
        "longest_gap_hours": longest.to_numpy(),
        "late_answers": late.reindex(ids, fill_value=0).astype("int64").to_numpy(),
        "rows_set_aside": aside.to_numpy(),
    })
    out["first_day"] = out["first_day"].astype("datetime64[ns]")
    out["last_day"] = out["last_day"].astype("datetime64[ns]")
    return out[list(QUALITY_COLUMNS)]


def quality_table(study: Study) -> RichTable:
    """The data-quality report as a terminal table, one line per participant."""
    q = study.quality
    table = RichTable(title=f"Data quality: {study.settings.study.title}", title_justify="left")
    for name, justify in (("participant", "left"), ("answered", "right"),
                          ("scheduled", "right"), ("compliance", "right"),
                          ("days", "right"), ("first day", "left"), ("last day", "left"),
                          ("longest gap (h)", "right"), ("late", "right"),
                          ("set aside", "right")):
        table.add_column(name, justify=justify)  # type: ignore[arg-type]
    for row in cast(Any, q.itertuples(index=False)):
        table.add_row(
            row.participant, str(row.answered), _num(row.scheduled, 0),
            "–" if pd.isna(row.compliance) else f"{row.compliance:.0%}",
            str(row.days_covered), _day(row.first_day), _day(row.last_day),
            _num(row.longest_gap_hours, 1), str(row.late_answers), str(row.rows_set_aside),
        )
    total_answered = int(q["answered"].sum())
    table.caption = (f"{len(q)} participants, {total_answered} answered prompts, "
                     f"{len(study.set_aside)} rows set aside")
    return table


def _num(x: Any, digits: int) -> str:
    return "–" if pd.isna(x) else f"{x:.{digits}f}"


def _day(x: Any) -> str:
    return "–" if pd.isna(x) else pd.Timestamp(x).strftime("%Y-%m-%d")
