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


def painted_share(canvas, background):
    """JavaScript expression: the share (0..1) of the pixels of the canvas found by the
    JS expression `canvas` that differ from `background` (r, g, b) by more than 24 in
    some channel.  WebGL canvases need preserveDrawingBuffer (or a fresh render)."""
    r, g, b = background
    return (f"(() => {{ const c = {canvas}; const t = document.createElement('canvas');"
            f" t.width = c.width; t.height = c.height; const x = t.getContext('2d');"
            f" x.drawImage(c, 0, 0); const d = x.getImageData(0, 0, t.width, t.height).data;"
            f" let n = 0; for (let i = 0; i < d.length; i += 4) {{"
            f" if (Math.abs(d[i] - {r}) > 24 || Math.abs(d[i + 1] - {g}) > 24 ||"
            f" Math.abs(d[i + 2] - {b}) > 24) n++; }} return n / (d.length / 4); }})()")


#: the 3-D view's background, #f4f6f8 (opspace/report/_view3d.js)
VIEW3D_BACKGROUND = (244, 246, 248)


def open_view3d(path, *, screenshot=None):
    """Open a page holding a 3-D view (opspace/report/_scene3d.py), wait for its scene
    and measure its canvas: with the ground grid hidden, `drawn` is the share of
    pixels the robot covers; with every part hidden too, `empty` (should be ~0: the
    measure can fail).  Returns the PageView; `.evaluated` is a dict (state, drawn,
    empty, parts, frames)."""
    probe = painted_share("root.querySelector('canvas')", VIEW3D_BACKGROUND)
    script = ("(() => { const root = document.querySelector('.view3d'); const v = root.view3d;"
              " const out = {state: root.dataset.view3d, frames: v.frames,"
              " parts: v.objects.length}; v.grid.visible = false; v.render();"
              f" out.drawn = {probe}; const shown = v.objects.map(o => o.visible);"
              f" v.objects.forEach(o => {{ o.visible = false; }}); v.render(); out.empty = {probe};"
              " v.objects.forEach((o, i) => { o.visible = shown[i]; }); v.grid.visible = true;"
              " v.render(); return out; })()")
    return open_page(path, wait_for=".view3d[data-view3d=ready]", screenshot=screenshot,
                     evaluate=script)


def visible_text_problems(text):
    """What a report page's visible text (document.body.innerText) must not show:
    "inf", "nan", a bare "−∞", a unit "1" after a number, a margin rounded to
    "-0%".  Returns a list of (pattern, excerpts); empty when clean."""
    import re

    found = []
    for bad in (r"\binf\b", r"\bnan\b", r"\d 1\b(?![\d.:])", r"-0%", r"[−-]∞"):
        hits = re.findall(rf".{{0,30}}{bad}.{{0,30}}", text, flags=re.IGNORECASE)
        if hits:
            found.append((bad, hits[:3]))
    return found
