"""The study page of the built example in a real headless browser: axe-core, network, zoom.

Debian's chromium through Playwright, as tests/render/test_accessibility_browser.py runs the
booklets: no axe violation at WCAG 2.0/2.1 A and AA, no request beyond the page, no
horizontal overflow at 200% zoom.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.support.browser import WCAG_TAGS

pytestmark = [pytest.mark.browser, pytest.mark.slow, pytest.mark.xdist_group("example")]



def test_the_study_page_passes_axe_and_fetches_nothing(browser: object,
                                                       built_example: Path) -> None:
    """Check results.html with axe-core (A and AA), its requests, and 200% zoom."""
    from axe_playwright_python.sync_playwright import Axe

    path = built_example / "out" / "study" / "results.html"
    context = browser.new_context(  # type: ignore[attr-defined]
        viewport={"width": 640, "height": 900}, device_scale_factor=2)
    page = context.new_page()
    requests: list[str] = []
    page.on("request", lambda r: requests.append(r.url))
    page.goto(path.as_uri(), wait_until="load")
    assert [u for u in requests if u != path.as_uri() and not u.startswith("data:")] == []
    results = Axe().run(page, options={"runOnly": {"type": "tag", "values": WCAG_TAGS}})
    problems = [f"{v['id']} ({v['impact']}): {v['help']} at "
                + "; ".join(n["target"][0] for n in v["nodes"][:3] if n["target"])
                for v in results.response["violations"]]
    assert problems == []
    width = page.evaluate("document.documentElement.scrollWidth")
    client = page.evaluate("document.documentElement.clientWidth")
    assert width <= client + 1, f"content is {width}px wide in a {client}px window"
    context.close()
