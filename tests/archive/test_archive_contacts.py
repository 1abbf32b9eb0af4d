"""The roster's contact columns stay out of the archive unless the study says to keep them."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from springback.archive.manifest import verify
from springback.archive.roster_copy import contact_columns, contact_problems, strip_contacts
from tests.support.tiny_projects import fake_build, make_project, settings_of

ROSTER = ("participant;language;consent;feedback;therapist;region;E-mail;phone number;"
          "therapist_email\r\n"
          "P01;en;yes;yes;yes;default;p01@example.org;+99 555 0101;t@example.org\r\n"
          "P02;en;yes;yes;yes;default;\"o'neil; jr@example.org\";+99 555 0102;\r\n"
          "P03;en;yes;yes;yes;default;p03@example.org;;t@example.org\r\n")


def _project(tmp_path: Path, keep: bool = False) -> Path:
    project = make_project(tmp_path / "study")
    (project / "data" / "participants.csv").write_bytes(ROSTER.encode("utf-8"))
    if keep:
        toml = project / "study.toml"
        toml.write_text(toml.read_text(encoding="utf-8") + "keep_contacts = true\n",
                        encoding="utf-8")
    return project


def test_contact_columns_are_named() -> None:
    """Check which column names count as contact data (and the roster's own never do)."""
    names = ["participant", "language", "consent", "feedback", "therapist", "region", "E-mail",
             "mail", "phone number", "Mobile", "tel", "therapist_email", "Street address",
             "postcode", "first_name", "Surname", "date_of_birth", "notes", "group", "age"]
    assert contact_columns(names) == ["E-mail", "mail", "phone number", "Mobile", "tel",
                                      "therapist_email", "Street address", "postcode",
                                      "first_name", "Surname", "date_of_birth"]


def test_archived_roster_leaves_contact_columns_out(tmp_path: Path) -> None:
    """Check the archived roster has every other cell unchanged and no contact value."""
    project = _project(tmp_path)
    build = fake_build(project, tmp_path / "s1")
    copy = project / "archive" / build / "inputs" / "data" / "participants.csv"
    text = copy.read_bytes().decode("utf-8")
    assert text == ("participant;language;consent;feedback;therapist;region\r\n"
                    "P01;en;yes;yes;yes;default\r\nP02;en;yes;yes;yes;default\r\n"
                    "P03;en;yes;yes;yes;default\r\n")
    assert "example.org" not in text and "555" not in text
    manifest = json.loads((project / "archive" / build / "manifest.json").read_text("utf-8"))
    record = manifest["inputs"]["data/participants.csv"]
    assert record["contact_columns_left_out"] == ["E-mail", "phone number", "therapist_email"]
    assert record["archived"] == "inputs/data/participants.csv"
    assert (project / "data" / "participants.csv").read_bytes() == ROSTER.encode("utf-8")
    assert verify(project) == []


def test_keep_contacts_keeps_them(tmp_path: Path) -> None:
    """Check archive.keep_contacts = true archives the roster byte for byte."""
    project = _project(tmp_path, keep=True)
    build = fake_build(project, tmp_path / "s1")
    copy = project / "archive" / build / "inputs" / "data" / "participants.csv"
    assert copy.read_bytes() == ROSTER.encode("utf-8")


def test_check_names_the_contact_columns(tmp_path: Path) -> None:
    """Check `check`'s warning names the columns, what happens to them and how to change it."""
    project = _project(tmp_path)
    [problem] = contact_problems(project, settings_of(project))
    assert problem.message() == (
        "data/participants.csv: columns 'E-mail', 'phone number', 'therapist_email': these "
        "columns hold contact data; springback does not use them, and the archived copy of the "
        "roster is copied without them. Fix: move contact details to the delivery's contacts "
        "file (outside data/), or set archive.keep_contacts = true if the study must archive "
        "them")
    assert problem.code == "contact-columns" and not problem.is_error
    kept = _project(tmp_path / "k", keep=True)
    [problem] = contact_problems(kept, settings_of(kept))
    assert "archive.keep_contacts = true keeps them in every archived copy" in problem.message()
    plain = make_project(tmp_path / "plain")
    assert contact_problems(plain, settings_of(plain)) == []


def test_spreadsheet_roster_with_contacts_is_kept_as_hash_only(tmp_path: Path) -> None:
    """Check a roster springback cannot copy cell for cell is archived only by its hash."""
    path = tmp_path / "participants.xlsx"
    pd.DataFrame({"participant": ["P01"], "email": ["p01@example.org"]}).to_excel(
        path, index=False)
    stripped = strip_contacts(path)
    assert stripped.data is None and stripped.dropped == ("email",)
    plain = tmp_path / "plain.xlsx"
    pd.DataFrame({"participant": ["P01"], "language": ["en"]}).to_excel(plain, index=False)
    assert strip_contacts(plain).data == plain.read_bytes()
