"""The served page under limits: the content security policy, a too-large upload, a lost connection.

Outside references: the Content-Security-Policy header (W3C CSP Level 3) is enforced by Chromium, which
reports each blocked resource on the console (the fixtures fail a test on any console error); the
upload limit is our own (app/upload_guard.py).
"""

from __future__ import annotations

from pathlib import Path

from workbench_server import CHROMIUM_ARGS, VIEWPORT, RunningServer  # noqa: F401

from gainboard.app.upload_guard import MAX_UPLOAD_BYTES

DATA = Path(__file__).resolve().parents[1] / "data"


def test_the_page_works_under_its_content_security_policy(open_page):
    tab = open_page(load=False)
    response = tab.page.goto(tab.server.url)
    policy = response.headers["content-security-policy"]
    assert "frame-ancestors 'none'" in policy and "default-src 'self'" in policy
    assert response.headers["x-frame-options"] == "DENY"
    tab.wait_until_loaded()
    tab.set_gain_text("[[199, 55, 8]]")  # the live connection works: the server answered a change
    tab.screenshot("serving-01-under-csp")
    # the open_page fixture fails the test on any console error (a blocked script or style would be one)


def test_a_file_above_the_limit_is_refused_in_the_page_before_sending(open_page, tmp_path):
    tab = open_page()
    big = tmp_path / "huge-design.json"
    with big.open("wb") as stream:
        stream.truncate(MAX_UPLOAD_BYTES + 1_000_000)  # sparse: no disk cost
    before = tab.revision()
    tab.open_tab("File")
    tab.page.locator(".gb-open-design input[type=file]").set_input_files(str(big))
    refused = tab.page.locator(".gb-upload-refused")
    refused.wait_for(state="visible")
    assert "huge-design.json has 9.0 MB, over the 8.0 MB limit: not sent." in refused.inner_text()
    tab.screenshot("serving-02-upload-refused")
    tab.open_tab("Gains")
    tab.set_gain_text("[[199, 55, 8]]")  # the connection is still alive
    assert tab.revision() > before


def test_a_lost_connection_shows_a_notice(browser, reference_plant_path):
    own = RunningServer(str(reference_plant_path))
    context = browser.new_context(viewport=VIEWPORT)
    try:
        page = context.new_page()
        page.goto(own.url)
        page.locator(".gb-status").wait_for(state="visible")
        own.stop()
        notice = page.get_by_text("The connection to the gainboard server was lost")
        notice.wait_for(state="visible", timeout=20_000)
        from conftest import SCREENSHOTS

        SCREENSHOTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(SCREENSHOTS / "serving-03-connection-lost.png"), full_page=True)
    finally:
        context.close()
        own.stop()
