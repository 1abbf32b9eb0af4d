"""The coordinator's overview: the to-do list first, then per-participant facts, all escaped."""

from __future__ import annotations

import datetime as dt

from springback import render
from springback.review.actions import Action
from tests.support.render_samples import BUILT, EVIL, sample_settings


def test_todo_list_and_participant_facts() -> None:
    """Check the list of open actions leads, and each row's weeks, score, review and delivery."""
    actions = [Action("P09", "refer", "stopped answering", f"stopped answering: {EVIL}",
                      "2026-02-06", "none: 23 answered prompts"),
               Action("P02", "review", "high", "high: 22", "2026-05-24", "version 1 (held)")]
    rows = [
        {"participant": "P02", "status": "built", "reason": "", "compliance": 0.8, "flags": [],
         "review_state": "held", "editions": ["booklets/P02/participant"], "formats": ["html"],
         "version": 1, "period": ("2026-03-02", "2026-03-21"), "days_since": 3,
         "weeks": [{"week": 1, "start": "2026-03-02", "answered": 30, "share": 0.857},
                   {"week": 2, "start": "2026-03-09", "answered": 10, "share": 0.286}],
         "scores": [{"questionnaire": "PHQ-9", "score": 22.0, "date": "2026-05-24",
                     "band": "severe", "band_since": "2026-05-11"}],
         "actions": [actions[1]], "decided_by": EVIL, "decided_at": "2026-05-25T10:00:00Z",
         "sent_at": "2026-05-26T09:00:00Z", "sent_version": "1"},
        {"participant": "P09", "status": "not enough data", "reason": "23 answered prompts",
         "days_since": 107, "weeks": [], "actions": [actions[0]]},
    ]
    env = render.make_environment(None, "en")
    html = render.render_overview(env, rows, sample_settings(), BUILT, actions=actions,
                                  data_end=dt.date(2026, 5, 24))
    assert html.index('id="todo"') < html.index('id="with-booklet"')
    assert EVIL not in html and "&lt;script&gt;" in html
    assert "contact the participant (a refer rule fired)" in html
    assert "Answered prompts per week: week 1: 86%, week 2: 29%" in html
    assert "severe since 2026-05-11" in html and "sent 2026-05-26T09:00:00Z (version 1)" in html
    assert "participant edition (held)" in html and "HTML, held for review" in html
    without = html[html.index('id="without-booklet"'):]
    assert "107" in without and "contact the participant" in without
    empty = render.render_overview(env, [], sample_settings(), BUILT)
    assert "Nothing to do: no action is open." in empty
