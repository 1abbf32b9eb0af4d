"""What was sent: measurement periods, the prompts sent on each day, and compliance.

The rule for the prompts sent to a participant (one rule for `quality.csv`, `metrics.csv`,
the calendar and every sentence of the booklets):

1. When the momentary file has a `scheduled` column and lists unanswered prompts (rows with a
   time and no answer), the prompts sent are the distinct prompts the file lists.
2. Otherwise, when the design's prompts per day are known (`[study] prompts_per_day`, or the
   number of `[data] prompt_times`), every measurement period is sent that many prompts on
   each day from its day 1 to the later of `[data] study_days` (the design's days per
   period) and the participant's last answered day in that period. Rows after that day
   without an answer are padding, not prompts sent; answers on extra days are never dropped.
   Without `study_days`, a period runs from day 1 to its last answered day.
3. Otherwise, when the file lists unanswered prompts, the distinct prompts it lists.
4. Otherwise the number sent is not known (compliance is left empty).

Rows with no time and no answer are never prompts sent. Measurement periods come from the
period column (1 = the first in sorted order), or else a gap of at least `[data]
new_period_after_days` days between two prompts (answered or listed) starts a new period.
Day 1 of a period is day number 1 when times come from day numbers, else the study day of
its first prompt. Compliance is answered / sent (`compliance`), never above 1.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from springback.errors import warning
from springback.intake.problems import Sink
from springback.settings import StudySettings

PROMPT_DAY_COLUMNS = ("participant", "period", "day", "study_day", "answered", "listed",
                    "designed")
"""Per participant, period and day of the period (1 = day 1): study_day (naive midnight),
answered prompts, distinct listed prompts with a time, and whether the day is one of the
design's days (rule 2)."""

FAR_DAYS = 366
"""A time this many days from the middle of a participant's other times is set aside."""


def study_days(local_time: pd.Series, day_start: str) -> pd.Series:
    """Local calendar date of each time after moving midnight to `day_start` (naive midnight)."""
    hh, mm = (int(x) for x in day_start.split(":"))
    wall = local_time.dt.tz_localize(None)
    return (wall - pd.Timedelta(hours=hh, minutes=mm)).dt.normalize().astype("datetime64[ns]")


def moment(frame: pd.DataFrame) -> pd.Series:
    """When each prompt row happened: the answer time, else the time it was sent (UTC)."""
    return frame["time"].fillna(frame["scheduled"]) if "scheduled" in frame.columns else \
        frame["time"]


def per_day(settings: StudySettings) -> int | None:
    """The design's prompts per day: [study] prompts_per_day, else the number of prompt_times."""
    if settings.study.prompts_per_day is not None:
        return settings.study.prompts_per_day
    if settings.data.columns.day is not None and settings.data.prompt_times:
        return len(settings.data.prompt_times)
    return None


def add_periods(frame: pd.DataFrame, settings: StudySettings) -> pd.DataFrame:
    """Give every row its measurement period (1, 2, ...): from the period column or by gaps.

    `frame` holds whole participants' checked prompt rows (participant, time, ...).
    """
    if "period" in frame.columns:
        return frame
    out = frame.copy()
    gap = pd.Timedelta(days=settings.data.new_period_after_days)
    out["_when"] = moment(out)
    timed = out[out["_when"].notna()].sort_values(["participant", "_when"], kind="stable")
    step = timed.groupby("participant", sort=False)["_when"].diff() >= gap
    period = step.astype(np.int64).groupby(timed["participant"], sort=False).cumsum() + 1
    out["period"] = period.reindex(out.index).fillna(1).astype(np.int64)
    return out.drop(columns="_when")


def prompt_days(frame: pd.DataFrame, settings: StudySettings) -> pd.DataFrame:
    """The `PROMPT_DAY_COLUMNS` table of whole participants' prompt rows (with a period).

    Rows without a time are left out (they are no prompt sent and no answer).
    """
    when = moment(frame)
    rows = frame[when.notna()]
    if not len(rows):
        return _empty()
    keys = ["participant", "period"]
    day0 = study_days(when[when.notna()].dt.tz_convert(settings.study.timezone),
                      settings.study.day_start)
    if "_day_number" in rows.columns:
        number = rows["_day_number"].astype(np.int64)
        first = (day0 - pd.to_timedelta(number - 1, unit="D")).groupby(
            [rows[k] for k in keys]).transform("min")
    else:
        first = day0.groupby([rows[k] for k in keys]).transform("min")
    day = ((day0 - first).dt.days + 1).astype(np.int64)
    counted = pd.DataFrame({"participant": rows["participant"].to_numpy(),
                            "period": rows["period"].to_numpy(), "day": day.to_numpy(),
                            "first": first.to_numpy(),
                            "answered": rows["answered"].to_numpy(dtype=np.int64),
                            "listed": (~rows["answered"]).to_numpy(dtype=np.int64)})
    by_day = counted.groupby(["participant", "period", "day"], sort=True).agg(
        first=("first", "min"), answered=("answered", "sum"), listed=("listed", "sum"))
    by_day["listed"] += by_day["answered"]  # every answered row is a listed prompt too
    by_day = by_day.reset_index()
    design = settings.data.study_days or 0
    keys = ["participant", "period"]
    groups = by_day.groupby(keys, sort=True)
    last = by_day["day"].where(by_day["answered"] > 0).groupby(
        [by_day[k] for k in keys], sort=True).max().fillna(0).clip(lower=design)
    last = last.astype(np.int64).reindex(groups.size().index)
    # Every designed day of each period (1 .. last), built with repeats, not a loop.
    span = last.to_numpy()
    group = np.repeat(np.arange(len(span)), span)
    numbers = np.arange(len(group)) - np.repeat(np.cumsum(span) - span, span) + 1
    names = last.index.to_frame(index=False)
    designed = names.iloc[group].reset_index(drop=True).assign(day=numbers.astype(np.int64))
    beyond = by_day.merge(last.rename("last").reset_index(), on=keys)
    beyond = beyond.loc[beyond["day"] > beyond["last"], [*keys, "day"]]
    out = pd.concat([designed, beyond], ignore_index=True).merge(
        by_day[[*keys, "day", "answered", "listed"]], on=[*keys, "day"], how="left")
    out[["answered", "listed"]] = out[["answered", "listed"]].fillna(0).astype(np.int64)
    bounds = pd.DataFrame({"last": last, "first": groups["first"].min()}).reset_index()
    out = out.merge(bounds, on=keys, how="left")
    out["designed"] = out["day"] <= out["last"]
    out["study_day"] = (pd.to_datetime(out["first"]) + pd.to_timedelta(out["day"] - 1, unit="D")
                        ).astype("datetime64[ns]")
    out["participant"] = out["participant"].astype(str)
    out["period"] = out["period"].astype(np.int64)
    out = out.sort_values([*keys, "day"], kind="stable").reset_index(drop=True)
    return out[list(PROMPT_DAY_COLUMNS)]


def sent_by_rule(days: pd.DataFrame, settings: StudySettings, *, has_scheduled: bool,
                 lists_prompts: bool) -> pd.DataFrame:
    """Prompts sent per participant and day by the module's rule: participant, period,
    study_day, answered, sent (float; NaN when not known). Days with nothing sent and
    nothing answered are left out."""
    prompts = per_day(settings)
    if (has_scheduled and lists_prompts) or (prompts is None and lists_prompts):
        sent = days["listed"].astype(float)
    elif prompts is not None:
        sent = days["designed"].astype(float) * prompts
    else:
        sent = pd.Series(np.nan, index=days.index)
    out = days[["participant", "period", "study_day", "answered"]].assign(sent=sent)
    keep = (out["answered"] > 0) | (out["sent"].fillna(0) > 0)
    return out[keep].reset_index(drop=True)


def compliance(answered: pd.Series, sent: pd.Series) -> pd.Series:
    """Answered / sent, at most 1; NaN where the number sent is not known or zero.

    The one place compliance is computed: `quality` holds it, and metrics, the calendar and
    the booklets read it from there.
    """
    sent = sent.astype(float)
    return (answered.astype(float) / sent.where(sent > 0)).clip(upper=1.0)


def odd_times(where: str, frame: pd.DataFrame, sink: Sink) -> pd.DataFrame:
    """Set aside answers far from a participant's other times; warn about answers before
    their prompt. Works on whole participants' rows."""
    when = moment(frame)
    timed = when.notna()
    if not timed.any():
        return frame
    middle = when[timed].groupby(frame.loc[timed, "participant"]).transform("median")
    far = pd.Series(False, index=frame.index)
    far[middle.index] = (when[middle.index] - middle).abs() > pd.Timedelta(days=FAR_DAYS)
    shown = pd.DataFrame({"source_row": frame["source_row"], "time": when})
    for person, rows in shown[far].groupby(frame["participant"][far]):
        first = rows.sort_values("source_row").iloc[0]
        n = len(rows)
        sink.add(warning(where, f"{n} time{'s' if n > 1 else ''} of participant '{person}' "
                         f"lie more than a year from their other times (row "
                         f"{int(first['source_row'])}: {first['time']:%Y-%m-%d}); "
                         f"{'they are' if n > 1 else 'it is'} set aside",
                         row=int(first["source_row"]),
                         fix="correct the time (a device clock or a typed year is usual)",
                         code="time-far-off"))
        sink.aside(where, rows["source_row"].tolist(), [person] * n,
                   "more than a year from the participant's other times")
    out = frame[~far]
    early = out[out["early"]] if "early" in out.columns else out.iloc[:0]
    counts = early.groupby("participant")["source_row"].agg(["size", "min"])
    for person, n, first_row in counts.itertuples(index=True, name=None):
        sink.add(warning(where, f"{n} answer{'s' if n > 1 else ''} of participant '{person}' "
                         f"came before {'their prompts were' if n > 1 else 'its prompt was'} "
                         "sent", row=int(first_row),
                         fix="check the device clocks and the scheduled column; the answers "
                         "are kept", code="answer-before-prompt"))
    return out.reset_index(drop=True)


def _empty() -> pd.DataFrame:
    return pd.DataFrame({"participant": pd.Series(dtype="str"),
                         "period": pd.Series(dtype=np.int64), "day": pd.Series(dtype=np.int64),
                         "study_day": pd.Series(dtype="datetime64[ns]"),
                         "answered": pd.Series(dtype=np.int64),
                         "listed": pd.Series(dtype=np.int64),
                         "designed": pd.Series(dtype=bool)})
