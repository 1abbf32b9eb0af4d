"""The headless browser of the accessibility tests: Debian's chromium through Playwright
(never a downloaded browser), with axe-core from the axe-playwright-python wheel."""

from __future__ import annotations

import shutil
import warnings
from collections.abc import Iterator
from pathlib import Path

import pytest

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
WCAG_TAGS = ["wcag2a", "wcag2aa", "wcag21a", "wcag21aa"]
LAUNCH_ARGS = [
    "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
]


@pytest.fixture(scope="module")
def browser() -> Iterator[object]:
    """A headless chromium, or a loud skip when none can be had on this machine."""
    if not Path(CHROMIUM).exists():
        message = ("CHROMIUM IS NOT INSTALLED: the browser accessibility tests were SKIPPED. "
                   "Install Debian's chromium (apt-get install chromium) to run them.")
        warnings.warn(message, stacklevel=1)
        print("\n" + "!" * 80 + "\n" + message + "\n" + "!" * 80)
        pytest.skip(message)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        instance = pw.chromium.launch(executable_path=CHROMIUM, headless=True, args=LAUNCH_ARGS)
        yield instance
        instance.close()
