"""The local review page: held booklets and open actions, decided by a named reviewer.

Public functions:

    make_server(project: Path, port: int = 0) -> ReviewServer   # bound to 127.0.0.1, not started
    serve_page(project: Path, port: int = 0, say=print) -> None # prints the URL, runs to Ctrl-C

The standard library's ThreadingHTTPServer, bound to 127.0.0.1 only. The first request must
carry the one-time token printed with the URL; it is exchanged for a session cookie
(HttpOnly, SameSite=Strict) and cannot be used again. Every request needs that session and the
Host 127.0.0.1:PORT; a request that changes something must be a POST from the page's own
origin carrying the page's form key. Decisions go through `review.actions` (`decide_locked`,
`close`): the same audit-log entries as the command line, for the exact booklet version shown.
The page only reads the archived copy of the latest build; it writes nothing but the audit log
and its key store (in archive/).
"""

from __future__ import annotations

import hmac
import secrets
import threading
from collections.abc import Callable
from http import HTTPStatus
from http.cookies import SimpleCookie
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, unquote, urlsplit

from springback.errors import SpringbackError
from springback.files import project_dirs, sha256_bytes
from springback.review.page import page_html

COOKIE = "springback_review"
MAX_FORM_BYTES = 64 * 1024
CSP = ("default-src 'none'; style-src 'unsafe-inline'; img-src data:; font-src data:; "
       "form-action 'self'; frame-ancestors 'none'; base-uri 'none'")
CONTENT_TYPES = {".html": "text/html; charset=utf-8", ".pdf": "application/pdf"}


class ReviewServer(ThreadingHTTPServer):
    """The server with the page's secrets: one-time token, session, form key."""

    daemon_threads = True

    def __init__(self, project: Path, port: int) -> None:
        self.project = Path(project).resolve()
        self.token = secrets.token_urlsafe(24)
        self.token_used = False
        self.session = secrets.token_urlsafe(32)
        self.form_key = secrets.token_urlsafe(32)
        self.message: tuple[str, str] | None = None
        self.lock = threading.Lock()
        super().__init__(("127.0.0.1", port), Handler)

    @property
    def origin(self) -> str:
        """The page's own origin, e.g. http://127.0.0.1:8765."""
        return f"http://127.0.0.1:{self.server_address[1]}"

    @property
    def url(self) -> str:
        """The one-time address to open."""
        return f"{self.origin}/?token={self.token}"


def _same(a: str, b: str) -> bool:
    return hmac.compare_digest(a.encode("utf-8"), b.encode("utf-8"))


class Handler(BaseHTTPRequestHandler):
    """One request: checks first, then the page, a booklet, or a decision."""

    server: ReviewServer
    server_version = "springback-review"
    sys_version = ""

    def log_message(self, format: str, *args: Any) -> None:
        return  # no request log on the terminal: paths hold participant ids

    # -- replies ---------------------------------------------------------------------------

    def _send(self, status: int, body: bytes, content_type: str = "text/html; charset=utf-8",
              headers: dict[str, str] | None = None) -> None:
        self.send_response(status)
        self.send_header("Content-Type", content_type)
        self.send_header("Content-Length", str(len(body)))
        self.send_header("Content-Security-Policy", CSP)
        self.send_header("X-Content-Type-Options", "nosniff")
        self.send_header("Referrer-Policy", "same-origin")  # "no-referrer" makes Origin null
        self.send_header("Cache-Control", "no-store")
        for k, v in (headers or {}).items():
            self.send_header(k, v)
        self.end_headers()
        if self.command != "HEAD":
            self.wfile.write(body)

    def _refuse(self, status: int, why: str, headers: dict[str, str] | None = None) -> None:
        from springback.review.page import refusal_html

        self._send(status, refusal_html(why).encode("utf-8"), headers=headers)

    def _redirect(self, to: str, headers: dict[str, str] | None = None) -> None:
        self._send(HTTPStatus.SEE_OTHER, b"", headers={"Location": to, **(headers or {})})

    # -- checks ----------------------------------------------------------------------------

    def _host_ok(self) -> bool:
        host = self.headers.get("Host", "")
        if host != f"127.0.0.1:{self.server.server_address[1]}":
            self._refuse(HTTPStatus.FORBIDDEN, "This page answers only at the address springback "
                         "printed (127.0.0.1 and its port).")
            return False
        return True

    def _session_ok(self) -> bool:
        cookie = SimpleCookie(self.headers.get("Cookie", ""))
        value = cookie[COOKIE].value if COOKIE in cookie else ""
        if value and _same(value, self.server.session):
            return True
        self._refuse(HTTPStatus.FORBIDDEN, "This request has no valid review session. Open the "
                     "address springback printed when it started (it works once); if it was "
                     "used already, stop the page with Ctrl-C and start `springback review "
                     "PROJECT --serve` again for a new one.")
        return False

    # -- methods ---------------------------------------------------------------------------

    def do_GET(self) -> None:
        if not self._host_ok():
            return
        parts = urlsplit(self.path)
        if parts.path == "/" and "token" in parse_qs(parts.query):
            self._exchange(parse_qs(parts.query)["token"][0])
            return
        if not self._session_ok():
            return
        if parts.path in ("/decide", "/close"):
            self._refuse(HTTPStatus.METHOD_NOT_ALLOWED, "Decisions are sent with the page's "
                         "buttons (POST), never by opening an address.", {"Allow": "POST"})
            return
        if parts.path == "/":
            self._page()
        elif parts.path.startswith("/booklet/"):
            self._booklet(parts.path[len("/booklet/"):])
        else:
            self._refuse(HTTPStatus.NOT_FOUND, "There is no such page here.")

    def do_POST(self) -> None:
        if not self._host_ok() or not self._session_ok():
            return
        origin = self.headers.get("Origin", "")
        if origin != self.server.origin:
            shown = origin or "none given"
            self._refuse(HTTPStatus.FORBIDDEN, f"Requests from another origin ({shown}) are "
                         f"refused; use the page at {self.server.origin}.")
            return
        length = int(self.headers.get("Content-Length", "0") or 0)
        if length > MAX_FORM_BYTES:
            self._refuse(HTTPStatus.REQUEST_ENTITY_TOO_LARGE, "The form was too large.")
            return
        form = {k: v[0] for k, v in parse_qs(self.rfile.read(length).decode("utf-8", "replace"),
                                             keep_blank_values=True).items()}
        if not _same(form.get("form_key", ""), self.server.form_key):
            self._refuse(HTTPStatus.FORBIDDEN, "The form did not come from this review page; "
                         "reload the page and try again.")
            return
        path = urlsplit(self.path).path
        if path not in ("/decide", "/close"):
            self._refuse(HTTPStatus.NOT_FOUND, "There is no such action here.")
            return
        self._act(path, form)

    def _other(self) -> None:
        self._refuse(HTTPStatus.METHOD_NOT_ALLOWED, "Only GET and POST are answered here.",
                     {"Allow": "GET, POST"})

    do_HEAD = do_PUT = do_DELETE = do_PATCH = _other  # HEAD too: it must not use up the token

    # -- what the page does ----------------------------------------------------------------

    def _exchange(self, token: str) -> None:
        with self.server.lock:
            fresh = not self.server.token_used and _same(token, self.server.token)
            if fresh:
                self.server.token_used = True
        if not fresh:
            self._refuse(HTTPStatus.FORBIDDEN, "This link is wrong or was used already (it works "
                         "once). Stop the page with Ctrl-C and start `springback review PROJECT "
                         "--serve` again for a new link.")
            return
        cookie = f"{COOKIE}={self.server.session}; HttpOnly; SameSite=Strict; Path=/"
        self._redirect("/", {"Set-Cookie": cookie})

    def _page(self) -> None:
        with self.server.lock:
            message, self.server.message = self.server.message, None
        body = page_html(self.server.project, self.server.form_key, message)
        self._send(HTTPStatus.OK, body.encode("utf-8"))

    def _booklet(self, rest: str) -> None:
        """A file of the latest build's booklets, from its hash-checked archived copy."""
        from springback.review.actions import latest_build

        try:
            manifest = latest_build(self.server.project)
        except SpringbackError as exc:
            self._refuse(HTTPStatus.CONFLICT, str(exc))
            return
        pid, _, name = (unquote(part) for part in rest.partition("/"))
        rec = manifest.get("participants", {}).get(pid, {})
        rel = next((f for f in rec.get("files", []) if f == f"booklets/{pid}/{name}"), None)
        kind = CONTENT_TYPES.get(Path(name).suffix)
        if rel is None or kind is None:
            self._refuse(HTTPStatus.NOT_FOUND, "This booklet is not in the latest build.")
            return
        path = project_dirs(self.server.project).archive / str(manifest["build"]) / "out" / rel
        data = path.read_bytes() if path.is_file() else b""
        if sha256_bytes(data) != manifest.get("files", {}).get(f"out/{rel}"):
            self._refuse(HTTPStatus.CONFLICT, f"The archived copy of {rel} is missing or "
                         "changed; run `springback verify`.")
            return
        self._send(HTTPStatus.OK, data, kind)

    def _act(self, path: str, form: dict[str, str]) -> None:
        from springback.review import actions

        pid, by, note = form.get("participant", ""), form.get("by", ""), form.get("note", "")
        try:
            if path == "/decide":
                decision = form.get("decision", "")
                entry = actions.decide_locked(self.server.project, pid, decision, by, note,
                                              form.get("version", ""),
                                              form.get("fingerprint", ""))
                word = "approved" if decision == "approve" else "rejected"
                text = (f"{pid}: booklet version {entry.get('version')} {word} by "
                        f"{entry['by']} at {entry['time']} (recorded in the audit log).")
            else:
                entries = actions.close(self.server.project, pid, by, note,
                                        form.get("rule", ""))
                rules = ", ".join(str(e["rule"]) for e in entries)
                text = f"{pid}: action {rules} recorded as done by {entries[0]['by']}."
            message = ("status", text)
        except SpringbackError as exc:
            message = ("alert", f"Nothing was recorded: {exc}")
        with self.server.lock:
            self.server.message = message
        self._redirect("/")


def make_server(project: Path, port: int = 0) -> ReviewServer:
    """The review page's server on 127.0.0.1 (port 0: a free one), not yet serving."""
    try:
        return ReviewServer(project, port)
    except OSError as exc:
        from springback.errors import ReviewError

        raise ReviewError(f"cannot listen on 127.0.0.1 port {port} ({exc.strerror}); choose "
                          "another --port, or leave it out for a free one") from None


def serve_page(project: Path, port: int = 0, say: Callable[[str], None] = print) -> None:
    """Serve the review page until Ctrl-C; the first line said is the one-time address."""
    from springback.review.actions import latest_build

    latest_build(project)  # nothing built yet: say so now, not in the browser
    server = make_server(project, port)
    say(server.url)
    say("The review page of this study (the link works once, in one browser). Press Ctrl-C "
        "to stop it.")
    try:
        server.serve_forever(poll_interval=0.5)
    except KeyboardInterrupt:
        say("Review page stopped.")
    finally:
        server.server_close()
