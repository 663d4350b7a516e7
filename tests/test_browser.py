"""The browser check itself can fail: it sees a console error, a page error and a
network request, and passes a clean page (tests/browser.py)."""

from browser import open_page, require_browser


def test_browser_check_sees_errors_and_requests(tmp_path):
    require_browser()
    bad = tmp_path / "bad.html"
    bad.write_text("<!doctype html><html><head><title>t</title></head><body>"
                   "<img src='http://127.0.0.1:9/x.png'>"
                   "<script>console.error('boom'); undefined_function();</script></body></html>")
    view = open_page(bad)
    assert any("boom" in e for e in view.console_errors), view.problems()
    assert view.page_errors, view.problems()
    assert any(u.startswith("http://127.0.0.1:9/") for u in view.requests), view.problems()
    assert not view.ok


def test_browser_check_passes_a_clean_page(tmp_path):
    require_browser()
    good = tmp_path / "good.html"
    good.write_text("<!doctype html><html><head><title>clean</title></head><body>"
                    "<canvas id='c' width='20' height='20'></canvas><script>"
                    "document.getElementById('c').getContext('2d').fillRect(0,0,10,10);"
                    "</script></body></html>")
    view = open_page(good, wait_for="canvas", screenshot=tmp_path / "good.png",
                     evaluate="document.title")
    assert view.ok, view.problems()
    assert view.evaluated == "clean"
    assert view.screenshot.stat().st_size > 100
