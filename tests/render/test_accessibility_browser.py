"""Every page of the built example study in a real headless browser: axe-core, network, zoom.

Runs Debian's chromium through Playwright (never a downloaded browser). Fails on any axe
violation at WCAG 2.0/2.1 levels A and AA, on any request that is not to the local file, and on
horizontal overflow at 200% zoom; keeps a screenshot of each edition at 200% zoom in
test-artifacts/ for people to look at.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.support.browser import WCAG_TAGS

pytestmark = [pytest.mark.browser, pytest.mark.xdist_group("example")]

ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"


def _pages(project: Path) -> list[Path]:
    out = project / "out"
    return [out / "index.html", *sorted((out / "booklets").rglob("*.html"))]


def test_axe_finds_no_violations_and_nothing_is_fetched(browser: object,
                                                        built_example: Path) -> None:
    """Check every page with axe-core (A and AA) and record every network request."""
    from axe_playwright_python.sync_playwright import Axe

    axe = Axe()
    problems: list[str] = []
    pages = _pages(built_example)
    assert len(pages) >= 10
    context = browser.new_context()  # type: ignore[attr-defined]
    for path in pages:
        page = context.new_page()
        requests: list[str] = []
        page.on("request", lambda r, seen=requests: seen.append(r.url))
        page.goto(path.as_uri(), wait_until="load")
        foreign = [u for u in requests if not (u.startswith("file://") or u.startswith("data:"))]
        foreign += [u for u in requests if u.startswith("file://") and u != path.as_uri()]
        if foreign:
            problems.append(f"{path.name}: requests beyond the page itself: {foreign}")
        results = axe.run(page, options={"runOnly": {"type": "tag", "values": WCAG_TAGS}})
        for v in results.response["violations"]:
            nodes = "; ".join(n["target"][0] if n["target"] else "?" for n in v["nodes"][:3])
            problems.append(f"{path.relative_to(built_example)}: {v['id']} ({v['impact']}): "
                            f"{v['help']} at {nodes}")
        page.close()
    context.close()
    assert not problems, "\n".join(problems)


def test_zoom_200_percent_keeps_everything_visible(browser: object,
                                                   built_example: Path) -> None:
    """Check text at 200% zoom: no horizontal overflow; keep screenshots as artefacts."""
    ARTIFACTS.mkdir(exist_ok=True)
    # A 1280 px wide window at 200% zoom lays pages out in 640 CSS px at twice the pixel size.
    context = browser.new_context(  # type: ignore[attr-defined]
        viewport={"width": 640, "height": 900}, device_scale_factor=2
    )
    booklet = sorted((built_example / "out" / "booklets").iterdir())[0]
    overflow: list[str] = []
    for name in ("participant.html", "therapist.html"):
        path = booklet / name
        if not path.exists():
            continue
        page = context.new_page()
        page.goto(path.as_uri(), wait_until="load")
        width = page.evaluate("document.documentElement.scrollWidth")
        client = page.evaluate("document.documentElement.clientWidth")
        if width > client + 1:
            overflow.append(f"{name}: content is {width}px wide in a {client}px window")
        page.screenshot(path=str(ARTIFACTS / f"zoom200-{booklet.name}-{name}.png"),
                        full_page=True)
        page.close()
    context.close()
    assert not overflow, "\n".join(overflow)
