"""The coordinator's overview (out/index.html) and the open actions (out/actions.csv).

The overview opens with the list of open actions ("to do this week", from
`review.actions.open_actions` over this build's records), then one row per participant: days
since the last answer, answered prompts per week, the latest questionnaire score with the date
its band was first reached, the review state and who decided, and the delivery state.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from springback.metrics.questionnaires import band_of

if TYPE_CHECKING:
    from springback.build.records import ParticipantOutcome
    from springback.model import ParticipantData, Study
    from springback.settings import StudySettings


def outcome_record(o: ParticipantOutcome) -> dict[str, Any]:
    """An outcome in the shape of a manifest's participant record (for the open actions)."""
    from springback.safety.rules import FLAG_RECORD_KEYS

    return {"status": o.status, "reason": o.reason, "fingerprint": o.fingerprint,
            "version": o.version, "review_state": o.review_state,
            "flags": [f.to_row(FLAG_RECORD_KEYS) for f in o.flags], "files": o.outputs}


def weekly_compliance(data: ParticipantData, settings: StudySettings,
                      end: pd.Timestamp | None) -> list[dict[str, Any]]:
    """Answered prompts per week of the participant's period (week 1 starts on their first
    day) and the share of prompts sent, from the prompts-sent table of intake (the rule and
    the one compliance function of `springback.intake.schedule`). Without a design length
    (`[data] study_days`), days after the last scheduled one up to the end of the data count
    as days the study kept sending `prompts_per_day` prompts, so a silence shows as empty
    weeks; with one, the table already holds every day of the design. Weeks wholly between
    two measurement periods are left out (the week numbers go on)."""
    from springback.intake.schedule import compliance

    sched = data.schedule
    if not len(sched):
        return []
    days = pd.to_datetime(sched["study_day"])
    first, last = days.min(), days.max()
    weeks = ((days - first).dt.days // 7).to_numpy()
    answered = sched["answered"].groupby(weeks).sum()
    sent = sched["sent"].astype(float).groupby(weeks).sum(min_count=1)
    stop = last
    if end is not None and pd.notna(end) and settings.data.study_days is None:
        stop = max(last, pd.Timestamp(end).tz_localize(None).normalize())
    per_day = settings.study.prompts_per_day
    for day in pd.date_range(last + pd.Timedelta(days=1), stop, freq="D"):
        w = int((day - first).days // 7)
        answered[w] = answered.get(w, 0)
        extra = float(per_day) if per_day else float("nan")
        sent[w] = sent.get(w, 0.0) + extra if pd.notna(sent.get(w, 0.0)) else extra
    n_weeks = int((stop - first).days // 7) + 1
    answered = answered.reindex(range(n_weeks), fill_value=0)
    sent = sent.reindex(range(n_weeks))
    shares = compliance(answered, sent)
    between: set[int] = set()  # weeks wholly between two measurement periods
    if "period" in sched.columns:
        by = days.groupby(sched["period"].to_numpy())
        for end_day, start_day in zip(by.max().iloc[:-1], by.min().iloc[1:], strict=True):
            between |= set(range(int((end_day - first).days // 7) + 1,
                                 int((start_day - first).days // 7)))
    return [{"week": w + 1, "start": (first + pd.Timedelta(days=7 * w)).date().isoformat(),
             "answered": int(answered[w]),
             "share": float(shares[w]) if pd.notna(shares[w]) else None}
            for w in range(n_weeks) if w not in between]


def latest_scores(data: ParticipantData, settings: StudySettings) -> list[dict[str, Any]]:
    """Per questionnaire: the latest score and date, its band, and the first date of the run of
    scores in that band that ends with the latest one."""
    q = data.questionnaires
    out: list[dict[str, Any]] = []
    if not len(q):
        return out
    for name, rows in q.groupby("questionnaire", sort=True):
        spec = settings.questionnaires.get(str(name))
        rows = rows.sort_values("local_time", kind="stable")
        scores = rows["score"].astype(float).tolist()
        dates = [pd.Timestamp(t).date().isoformat() for t in rows["local_time"]]
        if not scores or not math.isfinite(scores[-1]):
            continue
        # Scores were checked against the range on intake; the band is the metrics' band_of.
        banded = spec if spec is not None and spec.bands else None
        band = band_of(scores[-1], banded) if banded is not None else ""
        since = dates[-1]
        for score, day in zip(reversed(scores), reversed(dates), strict=True):
            if banded is not None and (not math.isfinite(score)
                                       or band_of(score, banded) != band):
                break
            since = day
        label = spec.label.get("en", str(name)) if spec is not None else str(name)
        out.append({"questionnaire": label, "score": scores[-1], "date": dates[-1],
                    "band": band, "band_since": since if band else ""})
    return out


def days_since_answer(data: ParticipantData, end: pd.Timestamp | None) -> int | None:
    """Whole days from the last answered prompt to the end of the data period."""
    m = data.momentary
    if not len(m) or end is None or pd.isna(end):
        return None
    last = pd.to_datetime(m["local_time"]).max()
    end = pd.Timestamp(end)
    if end.tzinfo is None and last.tzinfo is not None:
        end = end.tz_localize(last.tzinfo)
    return max(int((end - last) / pd.Timedelta(days=1)), 0)


def _decisions(project: Path, records: dict[str, dict[str, Any]]) -> dict[str, dict[str, str]]:
    """Participant -> the latest review decision on this booklet version, and the last send."""
    from springback.archive.audit import read_entries, subject
    from springback.errors import ArchiveError
    from springback.files import project_dirs

    archive = project_dirs(project).archive
    if not (archive / "audit.jsonl").exists():
        return {}
    try:
        entries = read_entries(archive)
    except ArchiveError:
        return {}
    tokens = {t: pid for pid in records if (t := subject(archive, pid)) is not None}
    out: dict[str, dict[str, str]] = {}
    for e in entries:
        pid = tokens.get(str(e.get("subject", "")))
        if pid is None:
            continue
        info = out.setdefault(pid, {})
        if (e.get("kind") == "review"
                and e.get("fingerprint") == records[pid].get("fingerprint")):
            info["decided_by"] = str(e.get("by", ""))
            info["decided_at"] = str(e.get("time", ""))
        elif e.get("kind") == "send" and e.get("state") == "sent":
            info["sent_at"] = str(e.get("time", ""))
            info["sent_version"] = str(e.get("version", ""))
    return out


def overview(project: Path, study: Study, outcomes: Iterable[ParticipantOutcome],
             built_at: datetime) -> tuple[str, bytes]:
    """The overview page and out/actions.csv of this build."""
    from springback import render
    from springback.build.records import BOOKLETS
    from springback.review.actions import actions_csv, open_actions, silence_rules
    from springback.safety.rules import study_end

    outcomes = list(outcomes)
    records = {o.participant: outcome_record(o) for o in outcomes}
    actions = open_actions(project, records, today=built_at.date().isoformat(),
                           silence=silence_rules(study.settings))
    by_person: dict[str, list[Any]] = {}
    for a in actions:
        by_person.setdefault(a.participant, []).append(a)
    end = study_end(study)
    decided = _decisions(project, records)
    settings = study.settings
    rows = []
    for o in outcomes:
        data = study.slice(o.participant) if o.status != "withdrawn" else None
        rows.append({
            "participant": o.participant, "status": o.status, "reason": o.reason,
            "compliance": o.compliance, "flags": o.flags, "review_state": o.review_state,
            "editions": [f"{BOOKLETS}/{o.participant}/{e}" for e in o.editions],
            "formats": list(settings.booklet.formats), "version": o.version,
            "period": o.period,
            "days_since": days_since_answer(data, end) if data is not None else None,
            "weeks": weekly_compliance(data, settings, end) if data is not None else [],
            "scores": latest_scores(data, settings) if data is not None else [],
            "actions": by_person.get(o.participant, []),
            **decided.get(o.participant, {}),
        })
    env = render.make_environment(project / "templates", "en")  # the page states times in UTC
    end_day = pd.Timestamp(end).date() if end is not None else None
    html = render.render_overview(env, rows, settings, built_at, actions=actions,
                                  data_end=end_day)
    return html, actions_csv(actions)
