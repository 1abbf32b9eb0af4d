"""Real research data with day and prompt numbers, two measurement periods and padded days.

Bringmann et al. (2013), PLoS ONE 8:e60188, supporting file S4 (CC BY), vendored in
tests/data/bringmann2013-esm/ with its SOURCE.md (five participants, lines unchanged).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import pandas as pd
import pytest

from springback.intake import load_study
from springback.metrics.descriptives import participation
from tests.support.project import DATA

BRINGMANN = DATA / "bringmann2013-esm" / "pone.0060188.s004.txt"

# The design, from the paper's methods (Bringmann et al. 2013): ten prompts a day, one in each
# of ten 90-minute blocks between 07:30 and 22:30; six days a period; so at most 60 answers a
# period. Two periods, 2-3 months apart.
PROMPTS_PER_DAY = 10
DAYS_PER_PERIOD = 6
MOST_PER_PERIOD = 60
# The file has no dates and no clock times. Each prompt is placed at the start of its block;
# the dates of day 1 are chosen for the test (ten weeks apart, within the paper's 2-3 months).
# Neither changes what was sent or answered.
BLOCK_STARTS = [f"{7 + (90 * k + 30) // 60:02d}:{(90 * k + 30) % 60:02d}" for k in range(10)]
PERIOD_STARTS = ["2010-03-01", "2010-05-10"]
ITEMS = {"cheerful": "opgewkt_", "worrying": "pieker", "anxious": "angstig_",
         "down": "somber__", "relaxed": "ontspann"}


def _project(root: Path) -> Path:
    assert BRINGMANN.is_file(), f"the vendored open data file is missing: {BRINGMANN}"
    root.mkdir(parents=True)
    times = ", ".join(f'"{t}"' for t in BLOCK_STARTS)
    starts = ", ".join(f'"{d}"' for d in PERIOD_STARTS)
    lines = [
        "[study]", 'title = "Residual depressive symptoms ESM"',
        'timezone = "Europe/Amsterdam"',
        "[data]", f'momentary = "{BRINGMANN.as_posix()}"', 'participants = "participants.csv"',
        'on_bad_rows = "set aside"', f"prompt_times = [{times}]", f"period_starts = [{starts}]",
        f"study_days = {DAYS_PER_PERIOD}",
        "[data.columns]", 'participant = "subjno"', 'day = "dayno"', 'prompt = "beepno"',
        'period = "st_period"',
    ]
    for key, column in ITEMS.items():
        lines += [f"[items.{key}]", "scale = [1, 7]", f'column = "{column}"']
    (root / "study.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    ids = sorted(pd.read_csv(BRINGMANN)["subjno"].astype(str).unique())
    pd.DataFrame({"subjno": ids, "consent": "yes"}).to_csv(root / "participants.csv",
                                                           index=False)
    return root


def _independent_counts() -> pd.DataFrame:
    """Answered and sent per participant, counted here with plain pandas from the file."""
    raw = pd.read_csv(BRINGMANN)  # pandas takes the unnamed first column as the row index
    answer = raw[list(ITEMS.values())].notna().any(axis=1)
    placed = raw["beepno"].notna()  # an answer without a prompt number has no time
    answered = raw[answer & placed]
    last = answered.groupby(["subjno", "st_period"])["dayno"].max()
    periods = raw[placed].groupby(["subjno", "st_period"]).size().index
    days = last.reindex(periods, fill_value=0).clip(lower=DAYS_PER_PERIOD)
    out = pd.DataFrame({
        "answered": answered.groupby("subjno").size(),
        "sent": (days * PROMPTS_PER_DAY).groupby("subjno").sum(),
        "unplaced": raw[answer & ~placed].groupby("subjno").size(),
    }).fillna(0)
    out.index = out.index.astype(str)
    out["compliance"] = out["answered"] / out["sent"]
    return out


@pytest.fixture(scope="module")
def study(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    before = hashlib.sha256(BRINGMANN.read_bytes()).hexdigest()
    loaded = load_study(_project(tmp_path_factory.mktemp("bringmann") / "study"))
    assert hashlib.sha256(BRINGMANN.read_bytes()).hexdigest() == before  # never written
    return loaded


def test_compliance_is_answered_over_sent_by_the_rule(study) -> None:  # type: ignore[no-untyped-def]
    expected = _independent_counts()  # counted independently in the test
    q = study.quality.set_index("participant")
    assert sorted(q.index) == sorted(expected.index)
    # Rule 2: 10 prompts on each day from day 1 to max(6, last answered day), per period.
    assert q["answered"].to_dict() == expected["answered"].astype(int).to_dict()
    assert q["scheduled"].to_dict() == expected["sent"].astype(float).to_dict()
    assert q["compliance"].round(12).to_dict() == expected["compliance"].round(12).to_dict()
    # The paper's design: at least 60 prompts sent in each of the two periods.
    per_period = study.schedule.groupby(["participant", "period"])["sent"].sum()
    assert (per_period >= PROMPTS_PER_DAY * DAYS_PER_PERIOD).all()
    assert set(study.schedule["period"]) == {1, 2}
    # Metrics read the same number (one computation).
    for person in q.index:
        answered, sent, share = participation(study.slice(person), study.settings)
        assert (answered, sent) == (q.at[person, "answered"], q.at[person, "scheduled"])
        assert share == pytest.approx(q.at[person, "compliance"])


def test_padding_days_are_not_prompts_sent(study) -> None:  # type: ignore[no-untyped-def]
    # 10720 answered only on days 1-6 of both periods (counted independently in the test), so
    # the design's 2 x 60 prompts were sent, not the file's 2 x 100 prompt rows.
    assert study.quality.set_index("participant").at["10720", "scheduled"] == \
        2 * MOST_PER_PERIOD
    raw = pd.read_csv(BRINGMANN)
    mine = raw[raw["subjno"] == 10720]
    assert int(mine["beepno"].notna().sum()) == 200


def test_times_are_the_scheduled_times_of_day_and_prompt(study) -> None:  # type: ignore[no-untyped-def]
    m = study.momentary
    assert study.times_scheduled
    assert set(m["period"]) == {1, 2}
    raw = pd.read_csv(BRINGMANN).reset_index(drop=True)  # R's row names count the whole file
    raw["source_row"] = raw.index + 2  # the header is row 1
    both = m.merge(raw, on="source_row")
    assert len(both) == len(m)
    start = pd.to_datetime(pd.Series(PERIOD_STARTS))[both["st_period"]].to_numpy()
    clock = pd.to_timedelta(pd.Series([t + ":00" for t in BLOCK_STARTS]))[
        both["beepno"].astype(int) - 1].to_numpy()
    wanted = (pd.Series(start) + pd.to_timedelta(both["dayno"] - 1, unit="D") + clock)
    local = both["local_time"].dt.tz_localize(None)
    assert (local.to_numpy() == wanted.to_numpy()).all()
    assert (both["period"] == both["st_period"] + 1).all()


def test_answers_without_a_prompt_number_are_set_aside_and_named(study) -> None:  # type: ignore[no-untyped-def]
    expected = _independent_counts()  # counted independently in the test
    reason = "the prompt number is missing, so the answer has no time"
    aside = study.set_aside[study.set_aside["reason"] == reason]
    assert aside.groupby("participant").size().to_dict() == \
        expected.loc[expected["unplaced"] > 0, "unplaced"].astype(int).to_dict()
    warned = [w for w in study.warnings if w.what.endswith(reason)]
    assert warned and all(w.column == "beepno" for w in warned)


def test_quality_metrics_and_calendar_give_the_same_compliance(study) -> None:  # type: ignore[no-untyped-def]
    import gettext

    from springback import metrics
    from springback.charts import make_charts

    settings = study.settings.model_copy(update={"metrics": study.settings.metrics.model_copy(
        update={"surrogates": 19})})  # few surrogates: only participation is looked at here
    data = study.slice("10720")
    results = metrics.compute(data, settings)
    charts = make_charts(data, results, settings, "en", gettext.NullTranslations().gettext)
    # 93 answered of 2 x 60 sent (counted independently in test_compliance_... above).
    assert results.estimate("compliance").value == pytest.approx(93 / 120)
    assert results.estimate("compliance").note == "93 of 120 prompts answered"
    calendar = charts["calendar"]
    assert calendar.description.startswith("You answered 93 of 120 prompts (78%) over 12 days.")
    # Only the two periods' weeks are shown, not the ten weeks between them: one row per
    # period's week and one row naming the gap.
    first = calendar.table.columns[0]
    assert list(calendar.table[first].str.contains("without prompts")) == [False, True, False]


def test_read_in_small_blocks_equals_read_at_once(tmp_path: Path,
                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    # Source of truth: the same file read in one block (see tests/intake/test_intake_stream.py).
    from springback.intake import stream

    whole = load_study(_project(tmp_path / "whole"))
    monkeypatch.setattr(stream, "CHUNK_ROWS", 150)
    monkeypatch.setattr(stream, "GROUP_ROWS", 200)
    blocks = load_study(_project(tmp_path / "blocks"))
    for name in ("momentary", "set_aside", "quality", "schedule"):
        pd.testing.assert_frame_equal(getattr(blocks, name), getattr(whole, name), obj=name)
    assert [w.message() for w in blocks.warnings] == [w.message() for w in whole.warnings]


def test_the_break_between_periods_is_not_the_longest_gap(study) -> None:  # type: ignore[no-untyped-def]
    # The longest gap within a period is under a week (counted in the test from the rows);
    # the ten weeks between the periods are the design, not a gap in answering.
    m = study.momentary
    gaps = m.groupby(["participant", "period"])["time"].diff().dt.total_seconds() / 3600
    longest = gaps.groupby(m["participant"]).max()
    q = study.quality.set_index("participant")["longest_gap_hours"]
    assert q.to_dict() == longest.to_dict()
    assert (q < 24 * 7).all()
