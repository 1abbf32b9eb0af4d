"""The review page in the real headless Chromium: axe-core, nothing fetched, approve, release."""

from __future__ import annotations

import threading
from pathlib import Path

import pytest
from click.testing import CliRunner

from springback.cli import main
from springback.review.serve import make_server
from tests.review.test_review_actions import no_booklet
from tests.support.browser import WCAG_TAGS
from tests.support.tiny_projects import fake_build, make_project

pytestmark = [pytest.mark.browser]



def _violations(page: object) -> list[str]:
    from axe_playwright_python.sync_playwright import Axe

    results = Axe().run(page, options={"runOnly": {"type": "tag", "values": WCAG_TAGS}})
    return [f"{v['id']}: {v['help']}" for v in results.response["violations"]]


def test_approve_on_the_page_then_release(browser: object, tmp_path: Path) -> None:
    """Check the page passes axe, fetches nothing else, and an approval lets release copy it."""
    project = make_project(tmp_path / "study")
    fake_build(project, tmp_path / "s1", holds=("P02",), extra=no_booklet())
    server = make_server(project)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    try:
        context = browser.new_context()  # type: ignore[attr-defined]
        page = context.new_page()
        requests: list[str] = []
        page.on("request", lambda r: requests.append(r.url))
        page.goto(server.url, wait_until="load")
        assert page.url == server.origin + "/"
        assert _violations(page) == []
        form = page.locator("form[action='/decide']").first
        form.get_by_label("Your name").fill("Dr. A. Reviewer")
        form.get_by_label("Note").fill("read with the therapist")
        form.get_by_role("button", name="Approve for release: P02").click()
        page.wait_for_load_state("load")
        assert "approved by Dr. A. Reviewer" in page.content(), page.content()[-1500:]
        assert _violations(page) == []
        foreign = [u for u in requests if not u.startswith(server.origin)]
        assert foreign == []
        context.close()
    finally:
        server.shutdown()
        server.server_close()
    released = CliRunner().invoke(main, ["release", str(project), "--by", "coordinator"])
    assert released.exit_code == 0, released.output
    assert (project / "out" / "release" / "P02" / "participant.pdf").is_file()
