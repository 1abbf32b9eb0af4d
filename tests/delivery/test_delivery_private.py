"""Contacts and passphrase files: where they may live, how they are read, how new ones are kept."""

from __future__ import annotations

import stat
from pathlib import Path

import pytest

from springback.delivery.contacts import (
    Contact,
    check_private_place,
    passphrases,
    read_contacts,
    read_passphrases,
)
from springback.errors import DataError, DeliveryError
from springback.settings import from_mapping


def make_project(root: Path, **delivery: object) -> tuple[Path, object]:
    project = root / "study"
    (project / "data").mkdir(parents=True)
    (project / "study.toml").write_text('[items.sad]\nscale = [1, 7]\n', encoding="utf-8")
    settings = from_mapping({"items": {"sad": {"scale": [1, 7]}}, "delivery": delivery})[0]
    return project, settings


@pytest.mark.parametrize("place", ["data/contacts.csv", "out/contacts.csv",
                                   "archive/keys/contacts.csv", "archive"])
def test_private_files_are_refused_inside_data_out_and_archive(tmp_path: Path,
                                                               place: str) -> None:
    """Check that contacts inside data/, out/ or archive/ are refused with the reason."""
    project, settings = make_project(tmp_path)
    folder = place.split("/")[0]
    with pytest.raises(DeliveryError) as info:
        check_private_place(project, settings, Path(place), "the contacts file")
    assert f"lies inside {folder}/; files there are copied into outputs or the audit archive" \
        in str(info.value)


def test_private_files_are_refused_beside_data_files_kept_elsewhere(tmp_path: Path) -> None:
    """Check that the folder of a data file named in settings counts as a data folder."""
    project, _ = make_project(tmp_path)
    settings = from_mapping({"items": {"sad": {"scale": [1, 7]}},
                             "data": {"momentary": "../exports/momentary.csv"}})[0]
    with pytest.raises(DeliveryError, match="lies inside the data folder"):
        check_private_place(project, settings, Path("../exports/contacts.csv"), "contacts")
    ok = check_private_place(project, settings, Path("../private/contacts.csv"), "contacts")
    assert ok == (tmp_path / "private" / "contacts.csv").resolve()


def test_contacts_are_read_with_optional_therapist_addresses(tmp_path: Path) -> None:
    """Check reading participant,email,therapist_email with a semicolon and a BOM."""
    (tmp_path / "private").mkdir()
    (tmp_path / "private" / "contacts.csv").write_text(
        "\ufeffparticipant;email;therapist_email\nP01;p01@example.net;dr.a@example.net\n"
        "P02; p02@example.net ;\n", encoding="utf-8")
    project, settings = make_project(tmp_path, contacts_file="../private/contacts.csv")
    assert read_contacts(project, settings) == {
        "P01": Contact("P01", "p01@example.net", "dr.a@example.net"),
        "P02": Contact("P02", "p02@example.net", ""),
    }


def test_contact_mistakes_are_all_listed_without_echoing_addresses(tmp_path: Path) -> None:
    """Check one pass over every mistake, and that no cell text is repeated in a message."""
    (tmp_path / "private").mkdir()
    (tmp_path / "private" / "c.csv").write_text(
        "participant,email,therapist_email\nP01,p01 at example.net,\nP01,p@example.net,\n"
        ",x@example.net,\nP03,p03@example.net,two@a.net;three@b.net\n", encoding="utf-8")
    project, settings = make_project(tmp_path, contacts_file="../private/c.csv")
    with pytest.raises(DataError) as info:
        read_contacts(project, settings)
    messages = [p.message() for p in info.value.problems]
    assert messages == [
        "contacts file c.csv, row 2, column 'email': this is not a plain e-mail address; "
        "expected one address like name@domain.org",
        "contacts file c.csv, row 3, column 'participant': participant 'P01' is listed more "
        "than once. Fix: keep one row per person",
        "contacts file c.csv, row 4, column 'participant': the participant id is missing",
        "contacts file c.csv, row 5, column 'therapist_email': this is not a plain e-mail "
        "address; expected one address like name@domain.org",
    ]


def test_contacts_need_the_setting_and_the_columns(tmp_path: Path) -> None:
    """Check the messages for an unset contacts file and for a missing email column."""
    project, settings = make_project(tmp_path)
    with pytest.raises(DeliveryError, match=r"delivery\.contacts_file is not set"):
        read_contacts(project, settings)
    (tmp_path / "c.csv").write_text("participant,mail\nP01,p@example.net\n", encoding="utf-8")
    project2, settings2 = make_project(tmp_path / "b", contacts_file="../../c.csv")
    with pytest.raises(DataError) as info:
        read_contacts(project2, settings2)
    assert info.value.problems[0].message() == (
        "contacts file c.csv: column 'email' is missing; expected columns participant, email, "
        "found columns participant, mail. Fix: add a header row naming the columns")


def test_generated_passphrases_are_kept_private_and_reused(tmp_path: Path) -> None:
    """Check that new passphrases go to an owner-only file and a rerun reuses them."""
    project, settings = make_project(tmp_path)
    target = tmp_path / "private" / "passphrases.csv"
    first, new, written = passphrases(project, settings, ["P02", "P01"], target)
    assert new == ("P01", "P02") and written == target.resolve()
    assert stat.S_IMODE(target.stat().st_mode) == 0o600
    assert read_passphrases(target, "x") == first
    again, new2, _ = passphrases(project, settings, ["P01", "P03"], target)
    assert new2 == ("P03",)
    assert again["P01"] == first["P01"] and again["P02"] == first["P02"]
    assert len(set(again.values())) == 3


def test_passphrases_out_is_refused_inside_out(tmp_path: Path) -> None:
    """Check that generated passphrases are never written under out/ (or archive/)."""
    project, settings = make_project(tmp_path)
    with pytest.raises(DeliveryError, match="lies inside out/"):
        passphrases(project, settings, ["P01"], project / "out" / "pass.csv")
    assert not (project / "out").exists()


def test_team_passphrases_are_read_and_checked(tmp_path: Path) -> None:
    """Check the team's file: used as given, bad rows listed, --passphrases-out refused."""
    (tmp_path / "team.csv").write_text("participant,passphrase\nP01,sea-glass-7731\nP02,short\n",
                                       encoding="utf-8")
    project, settings = make_project(tmp_path, passphrases_file="../team.csv")
    with pytest.raises(DataError) as info:
        passphrases(project, settings, ["P01"], None)
    assert [p.message() for p in info.value.problems] == [
        "passphrases file team.csv, row 3: the passphrase cannot be used: it is shorter than "
        "8 characters"]
    (tmp_path / "team.csv").write_text("participant,passphrase\nP01,sea-glass-7731\n",
                                       encoding="utf-8")
    assert passphrases(project, settings, ["P01"], None) == ({"P01": "sea-glass-7731"}, (), None)
    with pytest.raises(DeliveryError, match="leave out --passphrases-out"):
        passphrases(project, settings, ["P01"], tmp_path / "gen.csv")


def test_passphrases_need_a_source(tmp_path: Path) -> None:
    """Check the message when neither the team's file nor an output file is given."""
    project, settings = make_project(tmp_path)
    with pytest.raises(DeliveryError, match="protected PDFs need passphrases"):
        passphrases(project, settings, ["P01"], None)
