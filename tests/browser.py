"""A real headless browser for the report tests: Debian's chromium driven through playwright.

The browser is the machine's own chromium (``/usr/bin/chromium``, or ``CURVESPEED_CHROMIUM``);
playwright never downloads one. Without it the tests FAIL with a message saying how to install
it (CI's ``.ci/run`` installs it): a report nobody opened in a browser is not tested.

:func:`open_page` loads a file and records every console message, page error and network
request, so a test can assert there were none beyond the file itself.
"""

from __future__ import annotations

import os
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import pytest

CHROMIUM = os.environ.get("CURVESPEED_CHROMIUM", "/usr/bin/chromium")

#: The launch flags that keep chromium quiet and offline in a container (no sandbox as root, no
#: GPU, no background fetches of its own).
FLAGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def launch(playwright):
    """The headless chromium, or a test failure naming what is missing."""
    path = CHROMIUM if os.path.sep in CHROMIUM else shutil.which(CHROMIUM)
    if not path or not Path(path).exists():
        pytest.fail(f"chromium not found at {CHROMIUM}: the report's browser tests need "
                    "Debian's chromium (apt-get install -y --no-install-recommends chromium, as "
                    ".ci/run does) or CURVESPEED_CHROMIUM set to a Chromium executable",
                    pytrace=False)
    return playwright.chromium.launch(executable_path=path, headless=True, args=FLAGS)


def start():
    """Start playwright (failing the test with the install step if the package is missing)."""
    try:
        from playwright.sync_api import sync_playwright
    except ImportError as exc:     # the test extra installs it
        pytest.fail(f"playwright is not installed ({exc}): pip install -e '.[test]'",
                    pytrace=False)
    return sync_playwright().start()


@dataclass
class Visit:
    """A loaded page and what it did while loading."""

    page: object
    url: str
    console: list = field(default_factory=list)
    errors: list = field(default_factory=list)
    requests: list = field(default_factory=list)

    def outside_requests(self) -> list[str]:
        """Every request but the page's own file."""
        return [r for r in self.requests if r != self.url]

    def console_errors(self) -> list[str]:
        return [f"{m.type}: {m.text}" for m in self.console if m.type in ("error", "warning")]


def open_page(browser, path: Path, width: int = 900, height: int = 1200) -> Visit:
    """Open ``path`` in a fresh context; any request other than the file itself is aborted."""
    context = browser.new_context(viewport={"width": width, "height": height},
                                  java_script_enabled=True)
    page = context.new_page()
    url = path.resolve().as_uri()
    visit = Visit(page=page, url=url)
    page.on("console", lambda message: visit.console.append(message))
    page.on("pageerror", lambda exc: visit.errors.append(str(exc)))
    page.on("request", lambda req: visit.requests.append(req.url))
    page.route("**/*", lambda route: route.continue_() if route.request.url == url
               else route.abort())
    page.goto(url, wait_until="load")
    return visit
