"""The e-mail that carries a booklet concludes nothing of its own about the participant.

What the data say is the findings stage's (springback.findings) and is told inside the booklet;
the subject and body only name the study, the team, the contact, the participant and the
version. Checked on the example study's own delivery texts (study.toml) and the defaults, for
participants whose findings differ as much as the example's do (P01: no clear change, P05: an
abrupt worsening with a referral, P12: a gradual improvement and a silence flag).
"""

from __future__ import annotations

import inspect
import re
from pathlib import Path

import pytest

from springback.delivery import mail
from springback.settings import load_settings

EXAMPLE = Path(__file__).resolve().parents[2] / "example_project"
READING_WORDS = re.compile(
    r"\b(better|worse|improv\w*|worsen\w*|shift\w*|chang\w*|clear\w*|rising|rose|"
    r"warning\w*|risk|flag\w*|urgent\w*|alarm\w*|concern\w*|verbeter\w*|verslechter\w*|"
    r"besser|schlechter)\b", re.IGNORECASE)
"""Words a reading would need (English, Dutch, German)."""


def _texts(settings, participant: str) -> list[str]:
    out = []
    for edition in ("participant", "therapist"):
        for language in ("en", "nl", "de"):
            msg = mail.compose(settings, to="someone@example.net", language=language,
                               edition=edition, participant=participant, version="3",
                               attachment=b"%PDF-1.7", filename="booklet.pdf")
            body = msg.get_body(("plain",))
            assert body is not None
            out.append(f"{msg['Subject']}\n{body.get_content()}")
    return out


def test_a_message_takes_no_findings_and_no_results() -> None:
    """Check compose and the placeholder values take nothing the data decided: the only
    participant-specific values are the participant's id and the version."""
    params = set(inspect.signature(mail.compose).parameters)
    assert params == {"settings", "to", "language", "edition", "participant", "version",
                      "attachment", "filename"}
    assert set(mail.PLACEHOLDERS) == {"study", "team", "contact", "participant", "version"}


@pytest.mark.parametrize("source", ["example", "defaults"])
def test_messages_of_different_findings_differ_only_by_their_id(source: str) -> None:
    """Check the messages for P01, P05 and P12 are the same text once the id is taken out,
    and none uses a word a reading would need."""
    settings, _ = load_settings(EXAMPLE)
    if source == "defaults":
        settings = settings.model_copy(update={"delivery": type(settings.delivery)(
            sender=settings.delivery.sender)})
    texts = {pid: [t.replace(pid, "<id>") for t in _texts(settings, pid)]
             for pid in ("P01", "P05", "P12")}
    assert texts["P01"] == texts["P05"] == texts["P12"]
    for text in texts["P01"]:
        # "If reading it upsets you" speaks of reading the booklet, not of a reading.
        assert not READING_WORDS.search(text), text
