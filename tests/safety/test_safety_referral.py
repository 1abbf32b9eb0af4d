"""Referral texts: missing ones stop the build, the example's fictional ones warn, all escape."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

from springback.model import Study
from springback.safety.rules import referral_problems
from springback.settings import Referral, from_mapping

LADDER = {"questions": "Call the team on +31 20 000 0000.", "feeling_worse": "See your GP.",
          "self_harm": "Call your GP today.", "emergency": "Call 112."}


def _study(referrals: list[dict[str, Any]], roster: list[tuple[str, str, str, str, bool]]) -> Study:
    settings, _ = from_mapping({"items": {"sad": {"scale": [1, 7]}}, "referral": referrals})
    frame = pd.DataFrame(roster, columns=["participant", "language", "region", "consent",
                                          "feedback"])
    empty = pd.DataFrame()
    return Study(Path("."), settings, frame, empty, empty, empty, empty, empty)


def test_missing_referral_is_an_error_per_language_and_region() -> None:
    """Check that a consenting participant without a referral text for their place is an error."""
    study = _study(
        [{"region": "north", "language": "en", **LADDER},
         {"region": "default", "language": "nl", **LADDER}],
        [("P01", "en", "north", "yes", True), ("P02", "nl", "south", "yes", True),
         ("P03", "de", "north", "yes", True), ("P04", "de", "north", "yes", True),
         ("P05", "en", "south", "withdrawn", True), ("P06", "en", "south", "yes", False)],
    )
    problems = referral_problems(study)
    assert [(p.code, p.is_error, p.what) for p in problems] == [
        ("no-referral", True, "no referral text for language 'de' and region 'north'")]
    assert problems[0].found == "2 participant(s) who need it: P03, P04"
    assert problems[0].where == "study.toml: referral"


def test_example_numbers_warn() -> None:
    """Check that the example's fictional numbers and marks are warned about, field by field."""
    fictional = {**LADDER, "emergency": "Call the emergency number +99 999 (fictional).",
                 "self_harm": "Call the Harbour Line (Fictional), day and night."}
    study = _study([{"region": "default", "language": "en", **fictional}],
                   [("P01", "en", "north", "yes", True)])
    problems = referral_problems(study)
    assert [(p.where, p.is_error) for p in problems] == [
        ("study.toml: referral[0].self_harm", False),
        ("study.toml: referral[0].emergency", False)]
    assert all(p.code == "fictional-referral" for p in problems)


def test_real_numbers_pass() -> None:
    """Check that complete, real-looking referral texts give no problem."""
    study = _study([{"region": "default", "language": "en", **LADDER}],
                   [("P01", "en", "east", "yes", True)])
    assert referral_problems(study) == []


def test_example_project_warns_but_has_every_text() -> None:
    """Check the example study: fictional services warn, and no language or region is missing."""
    import tomllib

    repo = Path(__file__).resolve().parents[2] / "example_project"
    settings, _ = from_mapping(tomllib.loads((repo / "study.toml").read_text(encoding="utf-8")))
    roster = pd.read_csv(repo / "data" / "participants.csv", dtype=str)
    roster["feedback"] = roster["feedback"] == "yes"
    empty = pd.DataFrame()
    problems = referral_problems(Study(repo, settings, roster, empty, empty, empty, empty, empty))
    assert not [p for p in problems if p.is_error]
    assert len(problems) == 4 * len(settings.referral)


def test_referral_texts_render_escaped() -> None:
    """Check that markup in a referral text is shown as text, never run, in the help section."""
    from springback.render import make_environment

    env = make_environment(None, "en")
    hostile = Referral(region="default", language="en",
                       questions='<script>alert("x")</script> Q & A',
                       feeling_worse="<b>GP</b>", self_harm="<img src=x onerror=alert(1)>",
                       emergency='"112"')
    from springback.findings import Finding

    help_finding = Finding("P1", "help", "refer", "clear", {"rule": "r"})
    common = dict(refer=True, findings={"help": help_finding}, contact_name="Team <A>",
                  contact_email="", contact_phone="", edition="participant",
                  refer_reasons=['<i>reason</i> & more'])
    template = env.get_template("sections/help.html")
    html = template.render(referral=hostile, **common)
    assert "<script>" not in html and "<img" not in html and "<b>GP" not in html
    assert "<i>" not in html and "&lt;i&gt;reason&lt;/i&gt; &amp; more" in html
    assert "&lt;script&gt;alert(&#34;x&#34;)&lt;/script&gt; Q &amp; A" in html
    assert "&lt;img src=x onerror=alert(1)&gt;" in html
    # Without a referral text the study's own contact is the first rung, escaped as well.
    assert "Team &lt;A&gt;" in template.render(referral=None, **common)
