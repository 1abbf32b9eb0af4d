"""The parts of sending that touch no project files: passphrases, protected PDFs, messages, SMTP.

Public functions:

    new_passphrase() -> str                         # 20 letters and digits, from `secrets`
    check_passphrase(text: str) -> str              # '' when usable, else why not
    protect_pdf(pdf: bytes, passphrase: str) -> bytes          # AES-256 (PDF 2.0 security, R=6)
    message_texts(settings, language, edition) -> tuple[str, str]   # subject and body templates
    fill(template: str, values: dict[str, str], where: str) -> str  # {placeholder} filling
    check_texts(settings) -> None                   # every text of [delivery] fills cleanly
    compose(settings, *, to, language, edition, participant, version, attachment, filename)
        -> EmailMessage
    smtp_config(settings, root, environ=os.environ, context=None) -> SmtpConfig
    connect(config: SmtpConfig) -> smtplib.SMTP     # DeliveryError in plain words on any failure
    transmit(smtp, sender, recipient, message: bytes) -> Transmission
    scrub(text: str) -> str                         # server replies without e-mail addresses

`transmit` walks MAIL, RCPT and DATA itself so that it knows how far a message got: a failure
before the message text was handed over means it was not delivered ('refused'); a lost
connection while the text was on its way or before the server answered means nobody knows
('unknown'), and the caller must not send it again without a person deciding so.
"""

from __future__ import annotations

import io
import os
import re
import secrets
import smtplib
import ssl
from collections.abc import Mapping
from dataclasses import dataclass
from email.message import EmailMessage
from email.policy import SMTP
from email.utils import formatdate, make_msgid
from pathlib import Path
from string import Formatter

import pikepdf

from springback.errors import DeliveryError
from springback.settings import StudySettings

PLACEHOLDERS = ("study", "team", "contact", "participant", "version")
"""Names a subject or message text may use in braces, e.g. {study}."""

# Our own default texts; a study writes its own per language under [delivery].
DEFAULT_SUBJECT = {
    "participant": "Your personal booklet from {study}",
    "therapist": "Booklet for study participant {participant} ({study}), therapist edition",
}
DEFAULT_BODY = {
    "participant": (
        "Hello,\n\n"
        "Attached is your personal booklet from {study} (version {version}). It shows how your "
        "mood went during the weeks you took part.\n\n"
        "The booklet is protected with a passphrase. The team gives you the passphrase in "
        "another way, not by e-mail. Open the file and type the passphrase when asked.\n\n"
        "If you have questions about the booklet, or if reading it upsets you, please contact "
        "{contact}.\n\n"
        "With kind regards,\n{team}\n"
    ),
    "therapist": (
        "Hello,\n\n"
        "Attached is the therapist edition of the booklet of participant {participant} of "
        "{study} (version {version}). The participant agreed that you receive it.\n\n"
        "The file is protected with a passphrase. The team gives you the passphrase in another "
        "way, not by e-mail.\n\n"
        "Questions about the booklet: {contact}.\n\n"
        "With kind regards,\n{team}\n"
    ),
}
# Letters and digits that cannot be mistaken for each other when read out on the phone.
_ALPHABET = "abcdefghjkmnpqrstuvwxyz23456789"
_ADDRESS = re.compile(r"[^\s<>@\"']+@[^\s<>@\"']+")


def new_passphrase() -> str:
    """Make a passphrase of 20 characters (about 99 bits) in groups of five, e.g. 'k7m2p-...'."""
    chars = "".join(secrets.choice(_ALPHABET) for _ in range(20))
    return "-".join(chars[i:i + 5] for i in range(0, 20, 5))


def check_passphrase(text: str) -> str:
    """Say why a passphrase cannot protect a PDF ('' when it can)."""
    if len(text) < 8:
        return "it is shorter than 8 characters"
    if len(text.encode("utf-8")) > 127:
        # PDF 2.0 passwords are cut after 127 bytes (ISO 32000-2, 7.6.4.3.3).
        return "it is longer than 127 bytes"
    if text != text.strip():
        return "it starts or ends with a space"
    return ""


def protect_pdf(pdf: bytes, passphrase: str) -> bytes:
    """Encrypt a PDF with AES-256 so that it opens only with the passphrase."""
    problem = check_passphrase(passphrase)
    if problem:
        raise DeliveryError(f"a passphrase cannot be used: {problem}")
    # A separate random owner password: nobody can lift the protection without the reader's
    # passphrase, and the permissions (print, copy, assistive technology) stay all allowed.
    owner = secrets.token_urlsafe(32)
    with pikepdf.open(io.BytesIO(pdf)) as doc:
        out = io.BytesIO()
        doc.save(out, encryption=pikepdf.Encryption(user=passphrase, owner=owner, R=6))
    return out.getvalue()


def message_texts(settings: StudySettings, language: str, edition: str) -> tuple[str, str]:
    """The subject and body templates for a language: the study's own, else English defaults."""
    d = settings.delivery
    subjects, bodies = ((d.subject, d.body) if edition == "participant"
                        else (d.therapist_subject, d.therapist_body))
    subject = subjects.get(language) or subjects.get("en") or DEFAULT_SUBJECT[edition]
    body = bodies.get(language) or bodies.get("en") or DEFAULT_BODY[edition]
    return subject, body


def fill(template: str, values: Mapping[str, str], where: str) -> str:
    """Fill {placeholders}; DeliveryError naming the setting when one is unknown or malformed."""
    try:
        names = {name for _, name, _, _ in Formatter().parse(template) if name is not None}
    except ValueError as exc:
        raise DeliveryError(f"{where}: the text has an unmatched brace ({exc}); write {{{{ and "
                            "}} for a literal brace") from None
    unknown = sorted(n for n in names if n not in values)
    if unknown:
        raise DeliveryError(f"{where}: unknown placeholder {{{unknown[0]}}}; the texts may use "
                            + ", ".join(f"{{{p}}}" for p in PLACEHOLDERS))
    return template.format_map(dict(values))


def check_texts(settings: StudySettings) -> None:
    """Fill every subject and message text once, so a mistake stops the run before any sending."""
    values = text_values(settings, "P00", "1")
    d = settings.delivery
    for key, texts in (("subject", d.subject), ("body", d.body),
                       ("therapist_subject", d.therapist_subject),
                       ("therapist_body", d.therapist_body)):
        for language, text in sorted(texts.items()):
            fill(text, values, f"study.toml: delivery.{key}.{language}")


def _contact_line(settings: StudySettings) -> str:
    c = settings.study.contact
    parts = [p for p in (c.name, c.email, c.phone) if p]
    return ", ".join(parts) if parts else "the study team"


def text_values(settings: StudySettings, participant: str, version: str) -> dict[str, str]:
    """The values the placeholders stand for."""
    return {"study": settings.study.title, "team": settings.study.team or settings.study.title,
            "contact": _contact_line(settings), "participant": participant,
            "version": str(version)}


def compose(settings: StudySettings, *, to: str, language: str, edition: str,
            participant: str, version: str, attachment: bytes, filename: str) -> EmailMessage:
    """Make one message with the protected booklet attached."""
    sender = settings.delivery.sender
    subject_t, body_t = message_texts(settings, language, edition)
    values = text_values(settings, participant, version)
    key = "subject" if edition == "participant" else "therapist_subject"
    subject = fill(subject_t, values, f"study.toml: delivery.{key}.{language}")
    body = fill(body_t, values, f"study.toml: delivery.{key.replace('subject', 'body')}"
                f".{language}")
    msg = EmailMessage(policy=SMTP)
    msg["From"] = sender
    msg["To"] = to
    msg["Subject"] = " ".join(subject.split())
    msg["Date"] = formatdate(usegmt=True)
    msg["Message-ID"] = make_msgid(domain=sender.rpartition("@")[2] or None)
    msg.set_content(body)
    msg.add_attachment(attachment, maintype="application", subtype="pdf", filename=filename)
    msg["Content-Language"] = language  # after the parts: set_content drops Content-* headers
    return msg


# -- SMTP ------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SmtpConfig:
    """Where and how to reach the study's SMTP server (the password never leaves memory)."""

    host: str
    port: int
    security: str
    user: str
    password: str
    timeout: float
    context: ssl.SSLContext | None

    def where(self) -> str:
        return f"{self.host}:{self.port}"


def smtp_config(settings: StudySettings, root: Path, environ: Mapping[str, str] = os.environ,
                context: ssl.SSLContext | None = None) -> SmtpConfig:
    """Read the server settings and the password from its environment variable; check them."""
    d = settings.delivery
    if not d.smtp_host:
        raise DeliveryError("study.toml: delivery.smtp_host is not set; name the study's SMTP "
                            "server, or use --dry-run to write the messages to files instead")
    password = ""
    if d.user:
        if d.security == "none":
            raise DeliveryError("study.toml: delivery.security is 'none' but a user is set; a "
                                "password is never sent unencrypted. Use 'starttls' or 'tls'")
        password = environ.get(d.password_env, "")
        if not password:
            raise DeliveryError(f"the SMTP password is not set: put it in the environment "
                                f"variable {d.password_env} (named by delivery.password_env)")
    if context is None and d.security != "none":
        cafile = None
        if d.ca_file is not None:
            cafile = d.ca_file if d.ca_file.is_absolute() else Path(root) / d.ca_file
            if not cafile.is_file():
                raise DeliveryError(f"study.toml: delivery.ca_file names {cafile}, which does "
                                    "not exist; give the authority's certificate (PEM) there")
        try:
            context = ssl.create_default_context(cafile=str(cafile) if cafile else None)
        except ssl.SSLError as exc:
            raise DeliveryError(f"study.toml: delivery.ca_file {cafile} is not a certificate "
                                f"in PEM form ({exc.reason})") from None
    return SmtpConfig(d.smtp_host, d.smtp_port, d.security, d.user, password,
                      d.timeout_seconds, context)


def _reply(code: int, text: bytes | str) -> str:
    raw = text.decode("utf-8", "replace") if isinstance(text, bytes) else str(text)
    return scrub(f"{code} {' '.join(raw.split())}".strip())


def scrub(text: str) -> str:
    """Replace anything shaped like an e-mail address by '[address]'."""
    return _ADDRESS.sub("[address]", text)


def connect(config: SmtpConfig) -> smtplib.SMTP:
    """Open, secure and log in to the SMTP server; DeliveryError in plain words if it fails."""
    smtp: smtplib.SMTP | None = None
    where = config.where()
    try:
        if config.security == "tls":
            smtp = smtplib.SMTP_SSL(config.host, config.port, timeout=config.timeout,
                                    context=config.context)
        else:
            smtp = smtplib.SMTP(config.host, config.port, timeout=config.timeout)
        smtp.ehlo()
        if config.security == "starttls":
            if not smtp.has_extn("starttls"):
                raise DeliveryError(f"the SMTP server {where} does not offer STARTTLS; set "
                                    "delivery.security to 'tls' if it expects TLS from the "
                                    "start, or ask its administrator")
            smtp.starttls(context=config.context)
            smtp.ehlo()
        if config.user:
            _login(smtp, config.user, config.password)
    except smtplib.SMTPAuthenticationError as exc:
        _close(smtp)
        raise DeliveryError(f"the SMTP server {where} refused the user name or password "
                            f"({_reply(exc.smtp_code, exc.smtp_error)}); check delivery.user "
                            "and the password in the environment variable named by "
                            "delivery.password_env. Nothing was sent") from None
    except smtplib.SMTPNotSupportedError:
        _close(smtp)
        raise DeliveryError(f"the SMTP server {where} does not offer login (AUTH) on this "
                            "connection; check delivery.security, or leave delivery.user empty "
                            "if the server needs no login. Nothing was sent") from None
    except ssl.SSLCertVerificationError as exc:
        _close(smtp)
        raise DeliveryError(f"the certificate of the SMTP server {where} is not trusted "
                            f"({exc.verify_message}); if it comes from your institution's own "
                            "certificate authority, set delivery.ca_file to that authority's "
                            "certificate. Nothing was sent") from None
    except DeliveryError:
        _close(smtp)
        raise
    except (smtplib.SMTPException, OSError) as exc:
        _close(smtp)
        detail = " ".join(str(exc).split()) or type(exc).__name__
        raise DeliveryError(f"cannot talk to the SMTP server {where} ({scrub(detail)}); check "
                            "delivery.smtp_host, smtp_port and security (port 465 is usually "
                            "'tls', 587 'starttls'). Nothing was sent") from None
    return smtp


def _login(smtp: smtplib.SMTP, user: str, password: str) -> None:
    """Log in with one mechanism only: a wrong password is then one refusal, not several."""
    offered = (smtp.esmtp_features.get("auth") or "").upper().split()
    for mechanism in ("PLAIN", "LOGIN", "CRAM-MD5"):
        if mechanism in offered:
            smtp.user, smtp.password = user, password
            method = getattr(smtp, "auth_" + mechanism.lower().replace("-", "_"))
            smtp.auth(mechanism, method, initial_response_ok=mechanism != "LOGIN")
            return
    raise smtplib.SMTPNotSupportedError("no supported AUTH mechanism")


def _close(smtp: smtplib.SMTP | None) -> None:
    if smtp is None:
        return
    try:
        smtp.quit()
    except (smtplib.SMTPException, OSError):
        smtp.close()


def disconnect(smtp: smtplib.SMTP) -> None:
    """Say goodbye to the server (or just drop the connection if it is gone)."""
    _close(smtp)


@dataclass(frozen=True)
class Transmission:
    """How far one message got: 'sent', 'refused' (not delivered) or 'unknown'."""

    state: str
    response: str
    connected: bool = True


def transmit(smtp: smtplib.SMTP, sender: str, recipient: str, message: bytes) -> Transmission:
    """Hand one message to the server, step by step, and say how far it got."""
    try:
        code, text = smtp.mail(sender)
        if code != 250:
            smtp.rset()
            return Transmission("refused", _reply(code, text))
        code, text = smtp.rcpt(recipient)
        if code not in (250, 251):
            smtp.rset()
            return Transmission("refused", _reply(code, text))
    except smtplib.SMTPResponseException as exc:
        return Transmission("refused", _reply(exc.smtp_code, exc.smtp_error))
    except (smtplib.SMTPException, OSError) as exc:
        # Before DATA nothing can have been delivered.
        return Transmission("refused", scrub(f"connection lost: {exc}"), connected=False)
    try:
        code, text = smtp.data(message)
    except smtplib.SMTPDataError as exc:
        # The server refused to take the text at all (no 354): not delivered.
        return Transmission("refused", _reply(exc.smtp_code, exc.smtp_error))
    except (smtplib.SMTPException, OSError) as exc:
        return Transmission("unknown", scrub(f"connection lost during the message: {exc}"),
                            connected=False)
    if code == 250:
        return Transmission("sent", _reply(code, text))
    return Transmission("refused", _reply(code, text))
