"""Every text a reader or a screen reader meets in a booklet's HTML, for the language tests."""

from __future__ import annotations

from collections.abc import Iterable
from html.parser import HTMLParser

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
        "track", "wbr"}
"""HTML elements without an end tag."""


class AllText(HTMLParser):
    """Every text a reader or screen reader meets: content, chart titles, alt and labels.

    Text inside an element whose `lang` differs from the page's (say, a reference list marked
    lang="en" in a German booklet) is declared as another language, so screen readers read it
    right; with `marked_foreign=False` it is left out. Text inside scripts, styles and the
    `skipped` elements (such as quotes) is left out too.
    """

    def __init__(self, marked_foreign: bool = True, skipped: Iterable[str] = ()) -> None:
        super().__init__(convert_charrefs=True)
        self.parts: list[str] = []
        self.lang = ""
        self.marked_foreign = marked_foreign
        self.skipped = {"script", "style", *skipped}
        self._open: list[tuple[str, bool]] = []  # (tag, text inside is skipped)

    def _skipping(self) -> bool:
        return bool(self._open) and self._open[-1][1]

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        found = dict(attrs)
        if tag == "html":
            self.lang = found.get("lang") or ""
        foreign = bool(found.get("lang")) and found.get("lang") != self.lang
        skip = self._skipping() or tag in self.skipped or (foreign and not self.marked_foreign)
        if not skip:
            self.parts += [v for k, v in attrs if k in ("alt", "title", "aria-label") and v]
        if tag not in VOID:
            self._open.append((tag, skip))

    def handle_endtag(self, tag: str) -> None:
        if any(t == tag for t, _ in self._open):
            while self._open and self._open.pop()[0] != tag:
                pass

    def handle_data(self, data: str) -> None:
        if not self._skipping():
            self.parts.append(data)
