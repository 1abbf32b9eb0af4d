"""End to end on real research data measured in two periods, as a coordinator runs it.

The data are those of Bringmann et al. (2013), "A network approach to psychopathology: new
insights into clinical longitudinal data", PLoS ONE 8:e60188, supporting file S4 (CC BY),
vendored in tests/data/bringmann2013-esm/ (day and prompt numbers, no clock times, two periods
of six days padded to ten day slots). `springback check` and `springback build` run on a project
made here; what was sent and answered is counted in the test itself from the file, by the rule
the issue of real exports states (prompts_per_day for each day of each period from day 1 to the
later of study_days and the last answered day), and every number in the outputs must be it.
"""

from __future__ import annotations

import re
import shutil
from decimal import ROUND_HALF_UP, Decimal
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner

from springback.cli import main
from tests.intake.test_intake_bringmann import (
    BLOCK_STARTS,
    BRINGMANN,
    DAYS_PER_PERIOD,
    ITEMS,
    PERIOD_STARTS,
    PROMPTS_PER_DAY,
    _independent_counts,
)

BUILT = ("10720", "10819")
"""The participants who get booklets: an ordinary one, and one with answers on padding days."""
WORDS = {"one": 1, "two": 2, "three": 3, "four": 4, "five": 5, "six": 6, "seven": 7,
         "eight": 8, "nine": 9, "ten": 10}


def two_period_project(root: Path) -> Path:
    """A project as a coordinator writes it for the file: times from day and prompt numbers,
    the period column, the dates of each period's day 1, a low-mood composite."""
    (root / "data").mkdir(parents=True)
    shutil.copy(BRINGMANN, root / "data" / BRINGMANN.name)
    times = ", ".join(f'"{t}"' for t in BLOCK_STARTS)
    starts = ", ".join(f'"{d}"' for d in PERIOD_STARTS)
    items = {"cheerful": ("opgewkt_", True), "worrying": ("pieker", False),
             "anxious": ("angstig_", False), "down": ("somber__", False),
             "relaxed": ("ontspann", True)}
    lines = [
        "[study]", 'title = "Residual depressive symptoms ESM"', 'timezone = "Europe/Amsterdam"',
        f"prompts_per_day = {PROMPTS_PER_DAY}",
        "[data]", f'momentary = "data/{BRINGMANN.name}"', 'participants = "data/roster.csv"',
        'on_bad_rows = "set aside"', f"prompt_times = [{times}]", f"period_starts = [{starts}]",
        f"study_days = {DAYS_PER_PERIOD}",
        "[data.columns]", 'participant = "subjno"', 'day = "dayno"', 'prompt = "beepno"',
        'period = "st_period"',
    ]
    for key, (column, reverse) in items.items():
        lines += [f"[items.{key}]", "scale = [1, 7]", f'column = "{column}"',
                  f"reverse = {'true' if reverse else 'false'}"]
    lines += [
        "[composites.low_mood]", f"items = {list(items)}".replace("'", '"'),
        'higher_is = "worse"', "min_items = 4",
        "[booklet]", 'about = "low_mood"', 'editions = ["participant", "therapist"]',
        'formats = ["html"]', "min_prompts = 30",
        "[[referral]]", 'region = "default"', 'language = "en"',
        'questions = "Questions about this booklet? Call the study team on 020 555 0100."',
        'feeling_worse = "Feeling worse for a while? Make an appointment with your GP."',
        'self_harm = "Thinking about hurting yourself? Call your GP today, or 113."',
        'emergency = "In danger right now? Call 112."',
    ]
    (root / "study.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    ids = sorted(pd.read_csv(BRINGMANN)["subjno"].astype(str).unique())
    pd.DataFrame({"subjno": ids, "language": "en", "consent": "yes",
                  "feedback": ["yes" if i in BUILT else "no" for i in ids],
                  "therapist": "yes"}).to_csv(root / "data" / "roster.csv", index=False)
    return root


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, str]:
    project = two_period_project(tmp_path_factory.mktemp("periods") / "study")
    runner = CliRunner()
    env = {"SOURCE_DATE_EPOCH": "1700000000", "NO_COLOR": "1"}
    checked = runner.invoke(main, ["check", str(project)], env=env)
    assert checked.exit_code == 0, checked.output
    result = runner.invoke(main, ["build", str(project)], env=env)
    assert result.exit_code == 0, result.output
    return project, checked.output


def _text(html: str) -> str:
    """The page's words with each chart's text alternative, without markup."""
    html = re.sub(r"<style.*?</style>", " ", html, flags=re.S)
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html)).replace("&#39;", "'")


def _svg(html: str, key: str) -> str:
    [svg] = re.findall(rf'<svg[^>]*aria-labelledby="sb-{key}-title".*?</svg>', html, flags=re.S)
    return svg


def _percent(share: float) -> str:
    return f"{Decimal(str(100 * share)).quantize(Decimal('1'), ROUND_HALF_UP)}%"


def test_check_tells_the_answers_without_a_prompt_number(built: tuple[Path, str]) -> None:
    _project, output = built
    unplaced = _independent_counts()["unplaced"]
    assert output.count("the prompt number is missing, so the answer has no time") == \
        int(unplaced.sum())
    assert "The study is ready to build." in output


@pytest.mark.parametrize("who", BUILT)
def test_compliance_is_one_number_everywhere(built: tuple[Path, str], who: str) -> None:
    project, _output = built
    out = project / "out"
    counts = _independent_counts().loc[who]
    answered, sent = int(counts["answered"]), int(counts["sent"])
    share = answered / sent
    metrics = pd.read_csv(out / "metrics.csv", dtype={"participant": str})
    row = metrics[(metrics["participant"] == who) & (metrics["measure"] == "compliance")]
    assert float(row["value"].iloc[0]) == pytest.approx(share)
    quality = pd.read_csv(out / "quality.csv", dtype={"participant": str}).set_index(
        "participant")
    assert (quality.at[who, "answered"], quality.at[who, "scheduled"]) == (answered, sent)
    assert float(quality.at[who, "compliance"]) == pytest.approx(share)
    for edition in ("participant", "therapist"):
        text = _text((out / "booklets" / who / f"{edition}.html").read_text(encoding="utf-8"))
        assert f"answered {answered} times" in text or f"You answered {answered} times" in text
        # Every count of prompts in the booklet is the same pair, every percentage of it the same
        # percentage, and every share in words within half a step of it.
        pairs = set(re.findall(r"(\d+) of (\d+) prompts", text))
        assert pairs <= {(str(answered), str(sent))}
        for pct in re.findall(r"\d+ of \d+ prompts \((\d+%)\)", text):
            assert pct == _percent(share)
        in_words = re.findall(r"about (\w+) in (\w+) prompts", text)
        for n, d in in_words:
            assert abs(WORDS[n] / WORDS[d] - share) <= 0.5 / WORDS[d] + 1e-9
        halves = re.findall(r"about half of the prompts", text)
        assert not halves or abs(share - 0.5) <= 0.125
        assert in_words or halves  # each edition says the share in words
    therapist = (out / "booklets" / who / "therapist.html").read_text(encoding="utf-8")
    calendar = _svg(therapist, "calendar")
    assert f"{answered} of {sent} prompts ({_percent(share)})" in calendar


@pytest.mark.parametrize("edition", ["participant", "therapist"])
def test_the_gap_is_named_and_never_drawn(built: tuple[Path, str], edition: str) -> None:
    project, _output = built
    html = (project / "out" / "booklets" / "10720" / f"{edition}.html").read_text(
        encoding="utf-8")
    # Day 6 of the first period is 6 March; day 1 of the second 10 May: 64 days between.
    gap = "9 weeks without prompts"
    mood = _svg(html, "mood")
    assert gap in mood and "From 7 March to 9 May there were no prompts" in mood
    labels = set(re.findall(r"<text[^>]*>([^<]*)</text>", mood))
    assert not {"15 Mar", "22 Mar", "29 Mar", "5 Apr", "12 Apr", "19 Apr", "26 Apr"} & labels
    if edition == "therapist":
        calendar = _svg(html, "calendar")
        weeks = re.findall(r"<text[^>]*>(\d+ \w+|9 weeks without prompts)</text>", calendar)
        assert gap in weeks and "8 March" not in weeks and "3 May" not in weeks
    text = _text(html)
    assert "2 measurement periods" in text
    assert "the times the questions were scheduled" in text


def _weekly_shares(who: str) -> str:
    """The overview's words for a participant's weeks, counted here from the file: answered and
    sent (rule 2) per calendar week from their first day, weeks between the periods left out."""
    raw = pd.read_csv(BRINGMANN)
    raw = raw[(raw["subjno"].astype(str) == who) & raw["beepno"].notna()]
    answer = raw[list(ITEMS.values())].notna().any(axis=1)
    first = pd.Timestamp(PERIOD_STARTS[0])
    answered: dict[int, int] = {}
    sent: dict[int, int] = {}
    for period, rows in raw.groupby("st_period"):
        start = pd.Timestamp(PERIOD_STARTS[int(period)])
        last = max(DAYS_PER_PERIOD, int(rows.loc[answer[rows.index], "dayno"].max()))
        for day in range(1, last + 1):
            week = (start + pd.Timedelta(days=day - 1) - first).days // 7 + 1
            sent[week] = sent.get(week, 0) + PROMPTS_PER_DAY
            answered[week] = answered.get(week, 0) + int(
                (answer[rows.index] & (rows["dayno"] == day)).sum())
    return ", ".join(f"week {w}: {_percent(answered[w] / sent[w])}" for w in sorted(sent))


@pytest.mark.parametrize("who", BUILT)
def test_the_overview_weeks_leave_out_the_gap(built: tuple[Path, str], who: str) -> None:
    project, _output = built
    html = (project / "out" / "index.html").read_text(encoding="utf-8")
    words = _weekly_shares(who)
    assert words.startswith("week 1: ") and ", week 11: " in words  # 10 May is in week 11
    assert f"Answered prompts per week: {words}</title>" in html
