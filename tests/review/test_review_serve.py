"""The local review page: token, origin and method refusals; decisions as the command line's."""

from __future__ import annotations

import http.client
import threading
from collections.abc import Iterator
from pathlib import Path
from urllib.parse import urlencode, urlsplit

import pytest

from springback.archive import audit
from springback.review import gate
from springback.review.serve import ReviewServer, make_server
from tests.review.test_review_actions import REVIEWERS, no_booklet
from tests.support.tiny_projects import fake_build, make_project


@pytest.fixture()
def served(tmp_path: Path) -> Iterator[ReviewServer]:
    """A review page over a tiny project with P02 held and P03 without a booklet (refer)."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",), extra=no_booklet())
    server = make_server(project)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield server
    server.shutdown()
    server.server_close()


def request(server: ReviewServer, method: str, path: str, body: dict[str, str] | None = None,
            headers: dict[str, str] | None = None) -> tuple[int, dict[str, str], str]:
    """One request to the page; returns status, headers and text."""
    conn = http.client.HTTPConnection("127.0.0.1", server.server_address[1], timeout=10)
    data = urlencode(body).encode() if body is not None else None
    all_headers = {"Content-Type": "application/x-www-form-urlencoded", **(headers or {})}
    conn.request(method, path, body=data, headers=all_headers)
    reply = conn.getresponse()
    text = reply.read().decode("utf-8", "replace")
    conn.close()
    return reply.status, {k.lower(): v for k, v in reply.getheaders()}, text


def login(server: ReviewServer) -> dict[str, str]:
    """Exchange the one-time token for the session cookie; headers for later requests."""
    status, headers, _ = request(server, "GET", urlsplit(server.url).path + "?"
                                 + urlsplit(server.url).query)
    assert status == 303 and headers["location"] == "/"
    cookie = headers["set-cookie"].split(";")[0]
    assert "HttpOnly" in headers["set-cookie"] and "SameSite=Strict" in headers["set-cookie"]
    return {"Cookie": cookie, "Origin": server.origin}


def decision(server: ReviewServer, **fields: str) -> dict[str, str]:
    """The form fields of a decision on P02's held booklet."""
    held = gate.list_held(server.project)[0]
    return {"form_key": server.form_key, "participant": "P02", "decision": "approve",
            "version": held.version, "fingerprint": held.fingerprint, "by": "Dr. A. Reviewer",
            "note": "read it", **fields}


def test_binds_to_loopback_only(served: ReviewServer) -> None:
    """Check the server listens on 127.0.0.1 and its URL carries the token."""
    assert served.server_address[0] == "127.0.0.1"
    assert served.url.startswith(f"http://127.0.0.1:{served.server_address[1]}/?token=")


def test_refuses_requests_without_the_token(served: ReviewServer) -> None:
    """Check no page without a session, a wrong token is refused, and the token works once."""
    assert request(served, "GET", "/")[0] == 403
    assert request(served, "GET", "/?token=wrong")[0] == 403
    assert request(served, "POST", "/decide", decision(served),
                   {"Origin": served.origin})[0] == 403
    headers = login(served)
    status, _, text = request(served, "GET", "/", headers=headers)
    assert status == 200 and "P02" in text and "stopped answering" in text
    again = request(served, "GET", urlsplit(served.url).path + "?" + urlsplit(served.url).query)
    assert again[0] == 403 and "used already" in again[2]
    assert request(served, "GET", "/", headers={"Cookie": "springback_review=guess"})[0] == 403


def test_refuses_another_origin_and_host(served: ReviewServer) -> None:
    """Check a POST from another origin, or without one, and a foreign Host are refused."""
    headers = login(served)
    for origin in ("http://evil.example", "http://localhost:1", ""):
        status, _, text = request(served, "POST", "/decide", decision(served),
                                  {**headers, "Origin": origin})
        assert status == 403 and "another origin" in text
    status, _, _ = request(served, "GET", "/", headers={**headers, "Host": "evil.example"})
    assert status == 403
    assert gate.list_held(served.project)[0].state == "held"


def test_refuses_state_change_by_get(served: ReviewServer) -> None:
    """Check GET on the decision addresses changes nothing and says to use the buttons."""
    headers = login(served)
    query = urlencode(decision(served))
    for path in (f"/decide?{query}", "/close?participant=P03"):
        status, reply_headers, _ = request(served, "GET", path, headers=headers)
        assert status == 405 and reply_headers["allow"] == "POST"
    assert request(served, "PUT", "/decide", decision(served), headers)[0] == 405
    assert gate.list_held(served.project)[0].state == "held"
    kinds = [e["kind"] for e in audit.read_entries(served.project / "archive")]
    assert kinds == ["build"]


def test_refuses_a_form_without_the_page_key(served: ReviewServer) -> None:
    """Check a same-origin POST without the page's form key is refused."""
    headers = login(served)
    status, _, _ = request(served, "POST", "/decide", decision(served, form_key="x"), headers)
    assert status == 403
    assert gate.list_held(served.project)[0].state == "held"


def test_a_decision_is_the_command_lines_entry(served: ReviewServer) -> None:
    """Check an approval from the page is the same review entry the command line writes."""
    headers = login(served)
    status, _, _ = request(served, "POST", "/decide", decision(served), headers)
    assert status == 303
    entry = audit.read_entries(served.project / "archive")[-1]
    held = gate.list_held(served.project)[0]
    assert entry["kind"] == "review" and entry["decision"] == "approve"
    assert entry["fingerprint"] == held.fingerprint and str(entry["version"]) == held.version
    assert entry["by"] == "Dr. A. Reviewer" and held.state == "approved"
    _, _, text = request(served, "GET", "/", headers=headers)
    assert "approved by Dr. A. Reviewer" in text
    status, _, _ = request(served, "POST", "/close", {"form_key": served.form_key,
                                                      "participant": "P03", "by": "C", "note": "",
                                                      "rule": "stopped answering"}, headers)
    assert status == 303
    assert audit.read_entries(served.project / "archive")[-1]["kind"] == "action"


def test_stale_version_and_unknown_reviewer_are_refused(served: ReviewServer) -> None:
    """Check a decision on an older version names both versions; an unknown name the list."""
    with open(served.project / "study.toml", "a", encoding="utf-8") as fh:
        fh.write(REVIEWERS)
    headers = login(served)
    request(served, "POST", "/decide", decision(served, version="0"), headers)
    _, _, text = request(served, "GET", "/", headers=headers)
    assert "Nothing was recorded" in text and "version 0" in text and "holds version 1" in text
    request(served, "POST", "/decide", decision(served, by="<b>Mallory</b>"), headers)
    _, _, text = request(served, "GET", "/", headers=headers)
    assert "&lt;b&gt;Mallory&lt;/b&gt;" in text and "<b>Mallory" not in text
    assert "Dr. A. Reviewer (clinical psychologist), B. Nurse" in text
    assert gate.list_held(served.project)[0].state == "held"


def test_booklets_open_from_the_archive_only(served: ReviewServer) -> None:
    """Check an edition of the latest build opens; other paths and ids do not."""
    headers = login(served)
    status, reply, text = request(served, "GET", "/booklet/P02/participant.html", headers=headers)
    assert status == 200 and "booklet for P02" in text
    assert "default-src 'none'" in reply["content-security-policy"]
    for path in ("/booklet/P02/../../study.toml", "/booklet/P09/participant.html",
                 "/booklet/P02/manifest.json"):
        assert request(served, "GET", path, headers=headers)[0] == 404


def test_command_prints_the_url_first_and_stops_on_ctrl_c(tmp_path: Path) -> None:
    """Check `review --serve` prints the one-time URL on its first line and stops on SIGINT."""
    import signal
    import subprocess
    import sys

    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    proc = subprocess.Popen([sys.executable, "-m", "springback", "review", str(project),
                             "--serve"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)
    try:
        assert proc.stdout is not None
        first = proc.stdout.readline().strip()
        assert first.startswith("http://127.0.0.1:") and "/?token=" in first
        port = int(urlsplit(first).port or 0)
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=10)
        conn.request("GET", "/")
        assert conn.getresponse().status == 403
        conn.close()
        proc.send_signal(signal.SIGINT)
        rest, errors = proc.communicate(timeout=20)
    finally:
        proc.kill()
    assert proc.returncode == 0, errors
    assert "stopped" in rest and "Traceback" not in errors


def _outside(project: Path) -> dict[str, bytes]:
    """Every file of the project outside archive/ and out/, with its bytes."""
    return {p.relative_to(project).as_posix(): p.read_bytes() for p in project.rglob("*")
            if p.is_file() and p.relative_to(project).parts[0] not in ("archive", "out")}


def test_decisions_change_nothing_outside_the_archive(served: ReviewServer) -> None:
    """Check approving and closing on the page leave every file outside archive/ as it was."""
    before = _outside(served.project)
    headers = login(served)
    request(served, "POST", "/decide", decision(served), headers)
    request(served, "POST", "/close", {"form_key": served.form_key, "participant": "P03",
                                       "by": "C", "note": "phoned", "rule": ""}, headers)
    kinds = [e["kind"] for e in audit.read_entries(served.project / "archive")]
    assert kinds == ["build", "review", "action"]
    assert _outside(served.project) == before


def test_head_does_not_use_up_the_token(served: ReviewServer) -> None:
    """Check a HEAD request (a link preview) is refused and leaves the token usable."""
    query = urlsplit(served.url).query
    assert request(served, "HEAD", f"/?{query}")[0] == 405
    login(served)


def test_listed_reviewers_are_offered_as_a_choice(served: ReviewServer) -> None:
    """Check the page offers the study's reviewers by name and role."""
    with open(served.project / "study.toml", "a", encoding="utf-8") as fh:
        fh.write(REVIEWERS)
    headers = login(served)
    _, _, text = request(served, "GET", "/", headers=headers)
    assert '<select id="by-h0" name="by" required>' in text
    assert '<option value="Dr. A. Reviewer">Dr. A. Reviewer (clinical psychologist)' in text


def test_a_busy_port_is_a_plain_error(tmp_path: Path) -> None:
    """Check --port on a port in use says so and how to fix it, without a traceback."""
    import socket

    from click.testing import CliRunner

    from springback.cli import main

    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",))
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        result = CliRunner().invoke(main, ["review", str(project), "--serve", "--port",
                                           str(port)])
    assert result.exit_code == 1
    assert f"cannot listen on 127.0.0.1 port {port}" in result.output
    assert "another --port" in result.output and "Traceback" not in result.output
    server = make_server(project)
    try:
        assert server.server_address[1] > 0
    finally:
        server.server_close()


def test_an_id_with_a_space_opens_its_booklet(tmp_path: Path) -> None:
    """Check booklet links quote the id and the server reads it back."""
    import re

    ids = ("P 1", "P02")
    project = make_project(tmp_path / "study", ids=ids)
    fake_build(project, tmp_path / "s1", holds=("P 1",), ids=ids)
    server = make_server(project)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    try:
        headers = login(server)
        _, _, page = request(server, "GET", "/", headers=headers)
        link = re.search(r'href="(/booklet/P%201/participant\.html)"', page)
        assert link is not None
        status, _, text = request(server, "GET", link.group(1), headers=headers)
        assert status == 200 and "booklet for P 1" in text
    finally:
        server.shutdown()
        server.server_close()
