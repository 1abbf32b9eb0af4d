"""Passphrases, protected PDFs, message texts and the SMTP conversation (real local server)."""

from __future__ import annotations

import io
import smtplib
import ssl
from pathlib import Path

import pikepdf
import pypdf
import pytest

from springback.delivery import mail
from springback.errors import DeliveryError
from springback.settings import from_mapping, load_settings
from tests.support.delivery_server import PASSWORD, USER, smtp_server

RAW = {"items": {"sad": {"scale": [1, 7]}},
       "study": {"title": "Harbour Diary", "team": "Harbour Lab",
                 "contact": {"name": "Harbour team", "phone": "+99 1 555 0101"}},
       "delivery": {"sender": "Harbour team <diary@example.org>",
                    "subject": {"nl": "Uw boekje van {study}"},
                    "body": {"en": "Dear participant, booklet {version} of {study}."},
                    "therapist_subject": {"de": "Heft für {participant}"}}}


def settings(**delivery: object):
    raw = {**RAW, "delivery": {**RAW["delivery"], **delivery}}
    return from_mapping(raw)[0]


def small_pdf(text: str = "booklet of P01") -> bytes:
    doc = pikepdf.new()
    doc.add_blank_page(page_size=(200, 200))
    font = doc.make_indirect(pikepdf.Dictionary(Type=pikepdf.Name.Font, Subtype=pikepdf.Name.Type1,
                                                BaseFont=pikepdf.Name.Helvetica))
    page = doc.pages[0]
    page.Resources = pikepdf.Dictionary(Font=pikepdf.Dictionary(F1=font))
    page.Contents = doc.make_stream(f"BT /F1 12 Tf 20 100 Td ({text}) Tj ET".encode())
    buf = io.BytesIO()
    doc.save(buf)
    return buf.getvalue()


def test_passphrases_are_long_random_and_readable() -> None:
    """Check that new passphrases have 20 unambiguous characters in groups and never repeat."""
    made = {mail.new_passphrase() for _ in range(200)}
    assert len(made) == 200
    for p in made:
        groups = p.split("-")
        assert [len(g) for g in groups] == [5, 5, 5, 5]
        assert set("".join(groups)) <= set(mail._ALPHABET)
        assert not set("".join(groups)) & set("01ilo")
        assert mail.check_passphrase(p) == ""


@pytest.mark.parametrize(("text", "why"), [
    ("short", "it is shorter than 8 characters"),
    ("é" * 64, "it is longer than 127 bytes"),
    (" leading space", "it starts or ends with a space"),
    ("long enough", ""),
])
def test_passphrase_rules(text: str, why: str) -> None:
    """Check the exact reason a passphrase is refused."""
    assert mail.check_passphrase(text) == why


def test_protected_pdf_opens_only_with_its_passphrase_and_is_aes256() -> None:
    """Check AES-256 (V5/R6, AESV3) with an independent reader, and the content unchanged."""
    original = small_pdf()
    protected = mail.protect_pdf(original, "tidal-pool-42")
    assert protected != original
    # pypdf (a second PDF library) reads the security handler: PDF 2.0 AES-256 is V 5, R 6
    # with the AESV3 crypt filter (ISO 32000-2:2017, 7.6.4 and 7.6.5).
    reader = pypdf.PdfReader(io.BytesIO(protected))
    assert reader.is_encrypted
    encrypt = reader.trailer["/Encrypt"]
    assert (encrypt["/V"], encrypt["/R"]) == (5, 6)
    assert encrypt["/CF"]["/StdCF"]["/CFM"] == "/AESV3"
    assert reader.decrypt("wrong passphrase") == pypdf.PasswordType.NOT_DECRYPTED
    assert reader.decrypt("tidal-pool-42") == pypdf.PasswordType.USER_PASSWORD
    assert "booklet of P01" in reader.pages[0].extract_text()
    with pytest.raises(pikepdf.PasswordError):
        pikepdf.open(io.BytesIO(protected))
    with pikepdf.open(io.BytesIO(protected), password="tidal-pool-42") as doc, \
            pikepdf.open(io.BytesIO(original)) as plain:
        assert doc.pages[0].Contents.read_bytes() == plain.pages[0].Contents.read_bytes()


def test_protect_refuses_an_unusable_passphrase() -> None:
    """Check that a too-short passphrase stops protection with the reason."""
    with pytest.raises(DeliveryError, match="shorter than 8 characters"):
        mail.protect_pdf(small_pdf(), "abc")


def test_texts_fall_back_from_language_to_english_to_our_default() -> None:
    """Check the order: the study's text in the language, its English text, our default."""
    s = settings()
    assert mail.message_texts(s, "nl", "participant")[0] == "Uw boekje van {study}"
    assert mail.message_texts(s, "de", "participant")[0] == mail.DEFAULT_SUBJECT["participant"]
    assert mail.message_texts(s, "de", "participant")[1] == RAW["delivery"]["body"]["en"]
    assert mail.message_texts(s, "de", "therapist") == ("Heft für {participant}",
                                                        mail.DEFAULT_BODY["therapist"])


@pytest.mark.parametrize(("template", "message"), [
    ("Hello {name}", "study.toml: delivery.body.nl: unknown placeholder {name}; the texts may use "
     "{study}, {team}, {contact}, {participant}, {version}"),
    ("Hello {study", "study.toml: delivery.body.nl: the text has an unmatched brace"),
])
def test_fill_names_the_setting_of_a_bad_text(template: str, message: str) -> None:
    """Check that a wrong placeholder is reported with the setting's key."""
    with pytest.raises(DeliveryError) as info:
        mail.fill(template, mail.text_values(settings(), "P01", "2"),
                  "study.toml: delivery.body.nl")
    assert str(info.value).startswith(message)


def test_every_text_is_checked_before_anything_is_sent() -> None:
    """Check that a bad placeholder in any language's text is found up front."""
    mail.check_texts(settings())
    bad = settings(therapist_body={"de": "Heft von {teilnehmer}"})
    with pytest.raises(DeliveryError, match=r"^study\.toml: delivery\.therapist_body\.de: "
                                            r"unknown placeholder \{teilnehmer\}"):
        mail.check_texts(bad)


def test_compose_builds_one_message_with_the_pdf() -> None:
    """Check headers, the filled text and the single PDF attachment."""
    msg = mail.compose(settings(), to="p01@example.net", language="nl", edition="participant",
                       participant="P01", version="3", attachment=b"%PDF-1.7 x",
                       filename="booklet-v3.pdf")
    assert msg["To"] == "p01@example.net"
    assert msg["From"] == "Harbour team <diary@example.org>"
    assert msg["Subject"] == "Uw boekje van Harbour Diary"
    assert msg["Content-Language"] == "nl"
    assert msg["Message-ID"].endswith("@example.org>")
    assert msg.get_body().get_content().strip() == "Dear participant, booklet 3 of Harbour Diary."
    parts = list(msg.iter_attachments())
    assert [(p.get_filename(), p.get_content_type(), p.get_content()) for p in parts] == [
        ("booklet-v3.pdf", "application/pdf", b"%PDF-1.7 x")]


def test_default_text_names_the_study_contact_and_no_passphrase() -> None:
    """Check that the default body points to the study's contact and tells of the passphrase."""
    s = from_mapping({"items": {"sad": {"scale": [1, 7]}}, "study": RAW["study"],
                      "delivery": {"sender": "diary@example.org"}})[0]
    body = mail.fill(mail.message_texts(s, "en", "participant")[1],
                     mail.text_values(s, "P01", "1"), "x")
    assert "Harbour team, +99 1 555 0101" in body
    assert "passphrase in another way, not by e-mail" in body


def test_scrub_removes_addresses() -> None:
    """Check that server replies lose anything shaped like an address."""
    assert mail.scrub("250 2.1.5 <p01@example.net>... ok for x.y@z.org") == \
        "250 2.1.5 <[address]>... ok for [address]"


def test_settings_without_a_password_or_with_plain_login_are_refused() -> None:
    """Check that a missing password and a password over an unencrypted line are refused."""
    s = settings(smtp_host="127.0.0.1", user=USER)
    with pytest.raises(DeliveryError, match="put it in the environment variable "
                                            "SPRINGBACK_SMTP_PASSWORD"):
        mail.smtp_config(s, Path("."), environ={})
    plain = settings(smtp_host="127.0.0.1", user=USER, security="none")
    with pytest.raises(DeliveryError, match="a password is never sent unencrypted"):
        mail.smtp_config(plain, Path("."), environ={"SPRINGBACK_SMTP_PASSWORD": "x"})
    with pytest.raises(DeliveryError, match=r"delivery\.smtp_host is not set"):
        mail.smtp_config(settings(), Path("."), environ={})


@pytest.mark.parametrize("security", ["starttls", "tls"])
def test_send_through_a_tls_server_with_login(tmp_path: Path, security: str) -> None:
    """Check login and delivery over STARTTLS and over TLS from the start (CA file setting)."""
    with smtp_server(tmp_path, security) as srv:
        s = settings(smtp_host=srv.host, smtp_port=srv.port, security=security, user=USER,
                     ca_file=str(srv.ca_file))
        config = mail.smtp_config(s, tmp_path, environ={"SPRINGBACK_SMTP_PASSWORD": PASSWORD})
        smtp = mail.connect(config)
        try:
            got = mail.transmit(smtp, "diary@example.org", "p01@example.net",
                                b"Subject: hi\r\n\r\nhello\r\n")
        finally:
            mail.disconnect(smtp)
        assert got == mail.Transmission("sent", "250 2.0.0 Ok: queued as Q0001")
        assert [(r.mail_from, r.rcpt_tos) for r in srv.recorder.received] == [
            ("diary@example.org", ["p01@example.net"])]


@pytest.mark.parametrize("security", ["starttls", "tls"])
def test_wrong_password_is_a_clear_error(tmp_path: Path, security: str) -> None:
    """Check the message for a refused login, and that nothing reached the server."""
    with smtp_server(tmp_path, security) as srv:
        config = mail.SmtpConfig(srv.host, srv.port, security, USER, "not the password", 10,
                                 srv.client_context())
        with pytest.raises(DeliveryError) as info:
            mail.connect(config)
        assert str(info.value) == (
            f"the SMTP server 127.0.0.1:{srv.port} refused the user name or password (535 5.7.8 "
            "Authentication credentials invalid); check delivery.user and the password in the "
            "environment variable named by delivery.password_env. Nothing was sent")
        assert srv.recorder.received == []


def test_untrusted_certificate_and_closed_port_are_clear_errors(tmp_path: Path) -> None:
    """Check the messages when the certificate is unknown and when nobody listens."""
    with smtp_server(tmp_path, "tls") as srv:
        config = mail.SmtpConfig(srv.host, srv.port, "tls", USER, PASSWORD, 10,
                                 ssl.create_default_context())
        with pytest.raises(DeliveryError, match=r"is not trusted .*set delivery\.ca_file"):
            mail.connect(config)
        port = srv.port
    closed = mail.SmtpConfig("127.0.0.1", port, "starttls", "", "", 5, None)
    with pytest.raises(DeliveryError, match=f"cannot talk to the SMTP server 127.0.0.1:{port}"):
        mail.connect(closed)


def test_transmit_tells_refused_from_unknown(tmp_path: Path) -> None:
    """Check 'refused' for a refused recipient and a 421, 'unknown' for a drop during DATA."""
    with smtp_server(tmp_path, "starttls") as srv:
        config = mail.SmtpConfig(srv.host, srv.port, "starttls", USER, PASSWORD, 10,
                                 srv.client_context())
        smtp = mail.connect(config)
        message = b"Subject: hi\r\n\r\nhello\r\n"
        srv.recorder.refuse_rcpt.add("gone@example.net")
        assert mail.transmit(smtp, "d@example.org", "gone@example.net", message) == \
            mail.Transmission("refused", "550 5.1.1 mailbox unavailable")
        srv.recorder.refuse_after = 0
        assert mail.transmit(smtp, "d@example.org", "p@example.net", message).state == "refused"
        srv.recorder.drop_in_data = True
        got = mail.transmit(smtp, "d@example.org", "p@example.net", message)
        assert (got.state, got.connected) == ("unknown", False)
        after = mail.transmit(smtp, "d@example.org", "p@example.net", message)
        assert (after.state, after.connected) == ("refused", False)
        with pytest.raises(smtplib.SMTPServerDisconnected):
            smtp.noop()
        assert srv.recorder.received == []


def test_example_delivery_section_works_when_uncommented(tmp_path: Path) -> None:
    """Check that the commented [delivery] example in the example study is valid as written."""
    example = Path(__file__).resolve().parents[2] / "example_project" / "study.toml"
    text = example.read_text(encoding="utf-8")
    head, _, section = text.partition("# [delivery]\n")
    assert section, "the example study.toml lost its commented [delivery] section"
    lines = ["[delivery]", *(line.removeprefix("#").removeprefix(" ")
                             for line in section.splitlines())]
    (tmp_path / "study.toml").write_text(head + "\n".join(lines) + "\n", encoding="utf-8")
    s, _ = load_settings(tmp_path)
    mail.check_texts(s)
    assert s.delivery.contacts_file == Path("../private/contacts.csv")
    for language, start in (("nl", "Beste deelnemer,"),
                            ("de", "Liebe Teilnehmerin, lieber Teilnehmer,")):
        msg = mail.compose(s, to="p@example.net", language=language, edition="participant",
                           participant="P02", version="1", attachment=b"%PDF", filename="b.pdf")
        body = msg.get_body().get_content()
        assert body.startswith(start) and "Tidewater Mood Diary" in body
        assert "{" not in body and "{" not in msg["Subject"]
