"""The example's booklets against their own findings and flags: what each sentence says agrees
with the number or rule it comes from (the readings of issue examples, checked on a build).

Sources: the build's out/findings.csv and out/flags.csv (what the findings and safety stages
decided), the example's answers (tallied here with pandas), and Jacobson & Truax 1991 (Journal
of Consulting and Clinical Psychology 59:12-19) for the reliable change criterion of 1.96.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd
import pytest

from springback.findings.topics import VARIABILITY_SHARES
from tests.render.test_render_findings import Marks

pytestmark = pytest.mark.xdist_group("example")


def _text(path: Path) -> str:
    """The booklet's text with tags removed and spaces collapsed."""
    html = path.read_text(encoding="utf-8")
    html = re.sub(r"<(style|script|svg)\b.*?</\1>", " ", html, flags=re.S)
    return " ".join(re.sub(r"<[^>]+>", " ", html).split())


@pytest.fixture(scope="module")
def findings(built_example: Path) -> pd.DataFrame:
    return pd.read_csv(built_example / "out" / "findings.csv", dtype=str, keep_default_na=False)


def _detail(findings: pd.DataFrame, pid: str, topic: str) -> dict[str, str]:
    row = findings[(findings["participant"] == pid) & (findings["topic"] == topic)]
    assert len(row) == 1, (pid, topic)
    return dict(part.split("=", 1) for part in row["detail"].iloc[0].split("; ") if part)


def _booklet(built_example: Path, pid: str, edition: str) -> Path:
    return built_example / "out" / "booklets" / pid / f"{edition}.html"


def test_review_state_follows_the_flags(built_example: Path) -> None:
    """Check every therapist edition says 'held' exactly when a rule of out/flags.csv asked
    for a hold, and P12, whose only flag is a silence with the action 'refer', says no review
    is needed and names the silence rule in its flag table."""
    flags = pd.read_csv(built_example / "out" / "flags.csv", dtype=str, keep_default_na=False)
    held = set(flags.loc[flags["action"] == "hold", "participant"])
    pages = sorted((built_example / "out" / "booklets").glob("*/therapist.html"))
    assert pages
    assert held == {"P08"}  # its severe depression score
    for path in pages:
        # The review state is an alert exactly when held (class "alert", in any language).
        html = path.read_text(encoding="utf-8")
        alert = re.search(r'<p class="alert"><strong>[^<]*</strong>', html) is not None
        assert alert == (path.parent.name in held), path.parent.name
    p12 = flags[flags["participant"] == "P12"]
    assert list(p12["rule"]) == ["stopped answering"] and list(p12["action"]) == ["refer"]
    text = _text(_booklet(built_example, "P12", "therapist"))
    assert "No review needed: no rule asked for a hold." in text
    assert "stopped answering" in text


def test_largest_shift_without_a_change_point_is_none_found(built_example: Path,
                                                              findings: pd.DataFrame) -> None:
    """Check a participant with no change point (P01) reads 'None found' for the largest shift,
    not 'Not enough data', beside 'no change point was larger than the usual swings'."""
    assert _detail(findings, "P01", "course")["change_points"] == "0"
    text = _text(_booklet(built_example, "P01", "therapist"))
    row = re.search(r"Largest shift in scale points \(\+ = worse\) (.{0,40})", text)
    assert row is not None
    assert row.group(1).startswith("None found.")


def test_ups_and_downs_adjective_comes_from_the_printed_number(built_example: Path,
                                                               findings: pd.DataFrame) -> None:
    """Check each English participant edition prints the RMSSD the variability reading rests
    on, and the reading is the band of that printed number's share of the scale."""
    checked = 0
    for path in sorted((built_example / "out" / "booklets").glob("*/participant.html")):
        text = _text(path)
        said = re.search(r"From one answer to the next, your score changed by about "
                         r"([0-9.]+) points", text)
        if said is None:
            continue  # another language
        pid = path.parent.name
        detail = _detail(findings, pid, "variability")
        row = findings[(findings["participant"] == pid) & (findings["topic"] == "variability")]
        rmssd, width = float(detail["rmssd"]), float(detail["scale_range"])
        assert float(said.group(1)) == pytest.approx(rmssd, abs=0.05), pid
        share = rmssd / width
        band = ("small" if share < VARIABILITY_SHARES[0] else
                "moderate" if share < VARIABILITY_SHARES[1] else "large")
        assert row["reading"].iloc[0] == band, pid
        checked += 1
    assert checked >= 3


def _tally(built_example: Path) -> pd.DataFrame:
    """Per participant, tallied from the example's answers with pandas: the mean of the daily
    low-mood averages of the last 14 days and the quartiles of all answers (the typical range)."""
    raw = pd.read_csv(built_example / "data" / "momentary.csv")
    items = raw[["down", "anxious", "irritated", "tense"]].astype(float)
    turned = 8.0 - raw[["cheerful", "relaxed", "content"]].astype(float)  # reverse-scored 1-7
    frame = pd.DataFrame({"participant": raw["participant"],
                          "day": pd.to_datetime(raw["timestamp"].str[:10]),
                          "mood": pd.concat([items, turned], axis=1).mean(axis=1)})
    rows = []
    for pid, person in frame.groupby("participant"):
        daily = person.groupby("day")["mood"].mean()
        last = daily[daily.index > daily.index.max() - pd.Timedelta(days=14)].mean()
        rows.append({"participant": pid, "last": float(last),
                     "low": float(person["mood"].quantile(0.25)),
                     "high": float(person["mood"].quantile(0.75))})
    return pd.DataFrame(rows).set_index("participant")


def test_the_landscape_tells_no_resting_place_the_last_weeks_left(
        built_example: Path, findings: pd.DataFrame) -> None:
    """Check the landscape is not told as the mood's resting place when the last two weeks
    averaged far outside the typical range: P08 (a gradual worsening; its valley near 3.2, its
    last weeks near 6.2) and P05 (an abrupt worsening) read moved_away and their booklets say
    the last weeks' average; where the tallied last weeks lie well inside the typical range,
    the reading stays one_level."""
    tally = _tally(built_example)
    land = findings[findings["topic"] == "landscape"].set_index("participant")
    checked = 0
    for pid, row in tally.iterrows():
        if pid not in land.index or land.loc[pid, "reading"] not in ("one_level", "moved_away"):
            continue
        margin = max(row["low"] - row["last"], row["last"] - row["high"])
        if abs(margin) < 0.2:
            continue  # too close to the typical range's edge to call here
        expected = "moved_away" if margin > 0 else "one_level"
        assert land.loc[pid, "reading"] == expected, (pid, row.to_dict())
        checked += 1
    assert checked >= 6
    for pid in ("P05", "P08"):
        detail = _detail(findings, pid, "landscape")
        assert float(detail["last_mean"]) == pytest.approx(tally.loc[pid, "last"], abs=0.05)
        assert float(detail["last_mean"]) > float(detail["typical_high"]) + 0.5
    marks = Marks()
    marks.feed(_booklet(built_example, "P08", "therapist").read_text(encoding="utf-8"))
    said = [m for m in marks.marks if m["topic"] == "landscape"]
    assert said and said[0]["reading"] == "moved_away"
    last = float(_detail(findings, "P08", "landscape")["last_mean"])
    assert f"{last:.1f}".replace(".", ",") in said[0]["text"]  # German decimal comma


def test_a_reliable_change_just_beyond_the_criterion_is_not_called_clear(
        built_example: Path, findings: pd.DataFrame) -> None:
    """Check P12's PHQ-9 reliable change index of -1.964 (just beyond 1.96, Jacobson & Truax
    1991) is read 'improved' with 'some signs' and phrased without 'clearly'."""
    row = findings[(findings["participant"] == "P12") & (findings["topic"] == "questionnaire_phq9")]
    z = float(_detail(findings, "P12", "questionnaire_phq9")["reliable_change_index"])
    assert 1.96 < abs(z) < 2.576
    assert (row["reading"].iloc[0], row["certainty"].iloc[0]) == ("improved", "some_signs")
    text = _text(_booklet(built_example, "P12", "participant"))
    assert "the score got better, by a little more than the usual wobble" in text
    assert "the score got clearly better" not in text
