"""A real SMTP server on 127.0.0.1 for the delivery tests (aiosmtpd), with TLS and a login.

The certificate comes from a certificate authority made in the test (trustme); the server
keeps every message it accepted, and can be told to refuse or to drop the connection.
"""

from __future__ import annotations

import email
import email.policy
import socket
import ssl
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from email.message import EmailMessage
from pathlib import Path
from typing import Any

import trustme
from aiosmtpd.controller import Controller
from aiosmtpd.smtp import AuthResult, LoginPassword

USER = "mooddesk"
PASSWORD = "correct horse battery staple"


def free_port() -> int:
    """A TCP port nobody listens on right now."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@dataclass
class Received:
    """One message the server accepted."""

    mail_from: str
    rcpt_tos: list[str]
    raw: bytes

    @property
    def message(self) -> EmailMessage:
        return email.message_from_bytes(self.raw, policy=email.policy.default)  # type: ignore

    def attachments(self) -> list[tuple[str, bytes]]:
        return [(part.get_filename() or "", part.get_content())
                for part in self.message.iter_attachments()]


@dataclass
class Recorder:
    """The server's handler: keeps accepted messages; can refuse or drop on request."""

    received: list[Received] = field(default_factory=list)
    refuse_after: int | None = None
    """Answer 421 to every message after this many were accepted."""
    drop_in_data: bool = False
    """Close the connection after reading a message, without answering."""
    refuse_rcpt: set[str] = field(default_factory=set)

    async def handle_RCPT(self, server: Any, session: Any, envelope: Any, address: str,
                          rcpt_options: list[str]) -> str:
        if address in self.refuse_rcpt:
            return "550 5.1.1 mailbox unavailable"
        envelope.rcpt_tos.append(address)
        return "250 OK"

    async def handle_DATA(self, server: Any, session: Any, envelope: Any) -> str:
        if self.drop_in_data:
            server.transport.close()
            return "250 OK"
        if self.refuse_after is not None and len(self.received) >= self.refuse_after:
            return "421 4.3.2 service shutting down"
        self.received.append(Received(envelope.mail_from, list(envelope.rcpt_tos),
                                      bytes(envelope.original_content)))
        return f"250 2.0.0 Ok: queued as Q{len(self.received):04d}"


def _authenticator(server: Any, session: Any, envelope: Any, mechanism: str,
                   auth_data: Any) -> AuthResult:
    ok = (isinstance(auth_data, LoginPassword) and auth_data.login == USER.encode()
          and auth_data.password == PASSWORD.encode())
    # handled=False: the server itself answers 535 to a failed login.
    return AuthResult(success=ok, handled=False)


@dataclass
class Server:
    """A running server: where it listens, how it is secured, what it received."""

    host: str
    port: int
    security: str
    ca_file: Path
    recorder: Recorder
    ca: trustme.CA

    def client_context(self) -> ssl.SSLContext:
        ctx = ssl.create_default_context()
        self.ca.configure_trust(ctx)
        return ctx


@contextmanager
def smtp_server(folder: Path, security: str = "starttls") -> Iterator[Server]:
    """Run a server with a login, secured by STARTTLS ('starttls') or TLS from the start."""
    ca = trustme.CA()
    cert = ca.issue_cert("127.0.0.1", "localhost")
    server_ctx = ssl.create_default_context(ssl.Purpose.CLIENT_AUTH)
    cert.configure_cert(server_ctx)
    ca_file = folder / "study-ca.pem"
    ca.cert_pem.write_to_path(str(ca_file))
    recorder = Recorder()
    port = free_port()
    kwargs: dict[str, Any] = {"authenticator": _authenticator, "auth_require_tls": True}
    if security == "tls":
        # aiosmtpd counts only STARTTLS as encryption for AUTH; here TLS is there from the start.
        kwargs.update(ssl_context=server_ctx, auth_require_tls=False)
    else:
        kwargs.update(tls_context=server_ctx, require_starttls=True)
    controller = Controller(recorder, hostname="127.0.0.1", port=port, **kwargs)
    controller.start()
    try:
        yield Server("127.0.0.1", port, security, ca_file, recorder, ca)
    finally:
        controller.stop()
