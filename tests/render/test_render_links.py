"""Booklet links in the overview work for every id the intake accepts ('#', spaces, accents)."""

from __future__ import annotations

from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote

import pytest

from springback import render
from tests.support.render_samples import BUILT, sample_settings


class _Links(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.hrefs: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag == "a":
            self.hrefs += [v or "" for k, v in attrs if k == "href"]


@pytest.mark.parametrize("pid", ["User #25290", "P 01", "Zoë-3", "P01&b", "A.b_c"])
def test_overview_links_are_url_encoded(pid: str) -> None:
    """Check each booklet link is a relative URL that names the id's folder exactly."""
    rows = [{"participant": pid, "status": "built", "reason": "", "compliance": 0.8,
             "flags": [], "review_state": "not needed",
             "editions": [f"booklets/{pid}/participant"], "formats": ["html", "pdf"],
             "version": 1, "period": ("2026-03-02", "2026-03-21")}]
    html = render.render_overview(render.make_environment(None, "en"), rows,
                                  sample_settings(), BUILT)
    parser = _Links()
    parser.feed(html)
    links = [h for h in parser.hrefs if h.startswith("booklets/")]
    assert len(links) == 2
    for href, fmt in zip(links, ("html", "pdf"), strict=True):
        assert not any(ch in href for ch in " #&\"'<>")
        assert unquote(href) == f"booklets/{pid}/participant.{fmt}"
        assert Path(unquote(href)).parts[1] == pid
