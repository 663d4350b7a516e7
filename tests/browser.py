"""Open a report page in a real browser (headless Chromium) and say what it did.

Used by the tests of every HTML page: the page must load from its one file,
make no network request, log no console error and raise no page error.
Chromium is Debian's (`/usr/bin/chromium`, which `.ci/run` installs), driven
through Playwright's Python client with that executable (Playwright's own
browser download is never used).

    from browser import open_page, require_browser
    require_browser()                       # skips only where Chromium is absent locally
    view = open_page(path, wait_for="canvas", screenshot=tmp_path / "page.png")
    assert view.ok, view.problems()
"""

from __future__ import annotations

import os
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import pytest

CHROMIUM = os.environ.get("OPSPACE_CHROMIUM", "/usr/bin/chromium")

# as root, in a sandbox without network: no sandbox, no GPU, nothing in the background
FLAGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-dev-shm-usage"]


@dataclass
class PageView:
    """What a page did while it loaded and settled."""
    console_errors: list = field(default_factory=list)
    page_errors: list = field(default_factory=list)
    requests: list = field(default_factory=list)     # URLs other than file: / data: / blob:
    screenshot: Path | None = None
    title: str = ""
    evaluated: object = None                         # result of `evaluate=`, if given

    @property
    def ok(self):
        return not (self.console_errors or self.page_errors or self.requests)

    def problems(self):
        return (f"console errors: {self.console_errors}; page errors: {self.page_errors}; "
                f"network requests: {self.requests}")


def browser_available():
    if not (Path(CHROMIUM).exists() or shutil.which(CHROMIUM)):
        return False
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return False
    return True


def require_browser():
    """Skip the calling test where no browser is installed, except in CI (there: fail)."""
    if browser_available():
        return
    if os.environ.get("CI"):
        pytest.fail(f"CI must install Chromium ({CHROMIUM}) and playwright (.ci/run)")
    pytest.skip(f"headless Chromium ({CHROMIUM}) or playwright not installed")


def open_page(path, *, wait_for=None, screenshot=None, evaluate=None, settle_ms=300,
              timeout_ms=30000, viewport=(1280, 900)):
    """Load `path` (a local HTML file) in headless Chromium and watch it.

    wait_for: a CSS selector that must appear (e.g. "canvas"), or None.
    screenshot: a PNG path for a full-page screenshot, or None.
    evaluate: JavaScript evaluated after the page settled (its value in `.evaluated`).
    """
    from playwright.sync_api import sync_playwright

    path = Path(path).resolve()
    view = PageView()
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=FLAGS, headless=True)
        try:
            page = browser.new_page(viewport={"width": viewport[0], "height": viewport[1]})
            page.on("console", lambda m: view.console_errors.append(m.text)
                    if m.type == "error" else None)
            page.on("pageerror", lambda e: view.page_errors.append(str(e)))

            def request(route):
                url = route.request.url
                if url.split(":", 1)[0] in ("file", "data", "blob", "about"):
                    route.continue_()
                else:
                    view.requests.append(url)
                    route.abort()

            page.route("**/*", request)
            page.goto(path.as_uri(), wait_until="load", timeout=timeout_ms)
            if wait_for:
                page.wait_for_selector(wait_for, timeout=timeout_ms)
            page.wait_for_timeout(settle_ms)
            view.title = page.title()
            if evaluate:
                view.evaluated = page.evaluate(evaluate)
            if screenshot:
                page.screenshot(path=str(screenshot), full_page=True)
                view.screenshot = Path(screenshot)
        finally:
            browser.close()
    return view
