"""Browser-test fixtures: a real `gainboard serve` on a free loopback port, driven by Debian's chromium.

Playwright's Python package drives ``/usr/bin/chromium`` headless (no browser is
downloaded). One server and one browser serve the whole browser suite; every test
gets a fresh browser context, hence a fresh session with its own design state.
Screenshots go to ``test-artifacts/screenshots/`` (git-ignored).
"""

from __future__ import annotations

import json
import os
import time
from pathlib import Path
from urllib.parse import urlsplit

import numpy as np
import pytest
from workbench_server import CHROMIUM, CHROMIUM_ARGS, VIEWPORT, RunningServer

REPOSITORY = Path(__file__).resolve().parents[2]
DATA = REPOSITORY / "tests" / "data"
SCREENSHOTS = REPOSITORY / "test-artifacts" / "screenshots"
#: Default wait for the page to react, in milliseconds (a loaded 2-core machine is slow).
REACTION_TIMEOUT_MS = 20_000

#: Reads through Panel's shadow roots in one task: the design number, K and the closed-loop pole rows.
_SNAPSHOT_SCRIPT = """() => {
    const found = [];
    const visit = (root, selector) => {
        root.querySelectorAll(selector).forEach(element => found.push(element));
        root.querySelectorAll('*').forEach(element => { if (element.shadowRoot) visit(element.shadowRoot, selector); });
    };
    const all = (selector, root = document) => { found.length = 0; visit(root, selector); return [...found]; };
    const status = all('.gb-status')[0];
    const host = all('.gb-gain-text')[0];
    const gain = all('textarea', host.shadowRoot || host)[0];
    const rows = all('tr.gb-pole-row[data-kind="closed"]');
    return {
        revision: status.dataset.revision,
        gain: gain.value,
        poles: rows.map(row => [row.dataset.real, row.dataset.imag]),
    };
}"""

def pytest_collection_modifyitems(config, items):
    for item in items:
        if Path(str(item.fspath)).is_relative_to(Path(__file__).parent):
            item.add_marker(pytest.mark.browser)


@pytest.fixture(scope="session")
def reference_plant_path() -> Path:
    """Reference case 1 of shared/reference-cases.md (Ogata Example 10-1) as a plant file."""
    return DATA / "third_order_reference.toml"


@pytest.fixture(scope="session")
def server(reference_plant_path):
    if not CHROMIUM.exists():
        message = "Debian's chromium is not installed at /usr/bin/chromium (apt-get install chromium)"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)
    running = RunningServer(str(reference_plant_path))
    yield running
    running.stop()


@pytest.fixture(scope="session")
def browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        launched = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS, headless=True)
        yield launched
        launched.close()


class WorkbenchPage:
    """One browser tab on the workbench, with the reads and waits the tests need."""

    def __init__(self, page, server: RunningServer):
        self.page = page
        self.server = server
        self.problems: list[str] = []
        self.requests: list[str] = []
        page.on("console", self._console)
        page.on("pageerror", lambda error: self.problems.append(f"page error: {error}"))
        page.on("requestfailed", lambda request: self.problems.append(
            f"failed request: {request.url} ({request.failure})"))
        page.on("request", lambda request: self.requests.append(request.url))
        page.set_default_timeout(REACTION_TIMEOUT_MS)

    def _console(self, message) -> None:
        if message.type == "error":
            self.problems.append(f"console error: {message.text}")

    # -- loading and waiting ----------------------------------------------------------------

    def open(self, query: str = "") -> "WorkbenchPage":
        """Load the workbench (``query`` such as ``"?room=lab&name=Ana"``) and wait until it shows a design."""
        self.page.goto(self.server.url + query)
        return self.wait_until_loaded()

    def wait_until_loaded(self) -> "WorkbenchPage":
        self.page.locator(".gb-status").wait_for(state="visible")
        self.page.locator(".gb-pole-row").first.wait_for(state="attached")
        return self

    def revision(self) -> int:
        return int(self.page.locator(".gb-status").get_attribute("data-revision"))

    def wait_for(self, condition, what: str, timeout_ms: int = REACTION_TIMEOUT_MS):
        """Poll ``condition()`` until it returns a true value (short polls, no fixed sleeps)."""
        deadline = time.monotonic() + timeout_ms / 1000
        while True:
            value = condition()
            if value:
                return value
            if time.monotonic() > deadline:
                raise AssertionError(f"timed out waiting for {what}")
            self.page.wait_for_timeout(40)

    def wait_for_revision_above(self, revision: int) -> int:
        return self.wait_for(lambda: self.revision() > revision and self.revision(), f"a design after {revision}")

    def wait_until_idle(self) -> None:
        """Wait until the page's live connection has no changes in flight."""
        self.page.wait_for_function(
            "() => window.Bokeh && Bokeh.documents.length > 0 && Bokeh.documents.every(d => d.is_idle)"
        )

    # -- reading the screen -----------------------------------------------------------------

    def gain_text(self) -> str:
        return self.page.locator(".gb-gain-text textarea").input_value()

    def gain(self) -> np.ndarray:
        return np.array(json.loads(self.gain_text()), dtype=float)

    def snapshot(self) -> dict:
        """Design number, K readout and pole table read in one go (one browser task, so never torn)."""
        data = self.page.evaluate(_SNAPSHOT_SCRIPT)
        return {
            "revision": int(data["revision"]),
            "gain": np.array(json.loads(data["gain"]), dtype=float),
            "poles": np.array([complex(float(re), float(im)) for re, im in data["poles"]]),
        }

    def settled_snapshot(self, quiet_ms: int = 300) -> dict:
        """A snapshot once the design number has stopped changing for ``quiet_ms``."""
        self.wait_until_idle()
        previous = self.snapshot()
        deadline = time.monotonic() + REACTION_TIMEOUT_MS / 1000
        while time.monotonic() < deadline:
            self.page.wait_for_timeout(quiet_ms)
            self.wait_until_idle()
            current = self.snapshot()
            if current["revision"] == previous["revision"]:
                return current
            previous = current
        raise AssertionError("the design kept changing")

    def closed_loop_poles(self) -> np.ndarray:
        """The closed-loop poles the pole table shows (exact values from its data attributes)."""
        return self.snapshot()["poles"]

    def message(self) -> str:
        """The error or note shown to the user ("" when the slot shows only the usage hint)."""
        locator = self.page.locator(".gb-message-error, .gb-message-note")
        return locator.inner_text() if locator.count() else ""

    def header_text(self) -> str:
        return self.page.locator(".gb-header").inner_text()

    # -- acting -------------------------------------------------------------------------------

    def set_gain_text(self, text: str) -> None:
        before = self.revision()
        self.page.locator(".gb-gain-text textarea").fill(text)
        self.page.get_by_role("button", name="Apply K").click()
        self.wait_for_revision_above(before)
        self.wait_for(lambda: self.gain_text() != "" and self._gain_matches(text), f"K readout to show {text}")

    def _gain_matches(self, text: str) -> bool:
        try:
            return np.allclose(self.gain(), np.array(json.loads(text), dtype=float), rtol=0, atol=1e-9)
        except ValueError:
            return False

    def open_tab(self, name: str) -> None:
        self.page.locator(".bk-tab").filter(has_text=name).first.click()

    def map_to_page(self, x: float, y: float) -> tuple[float, float]:
        """Page pixel position of the pole-map point (x, y) in map units."""
        result = self.page.evaluate(
            """([x, y]) => {
                const figure = Bokeh.documents[0].get_model_by_name('pole_map');
                const view = Bokeh.index.find_one(figure);
                const box = view.canvas_view.el.getBoundingClientRect();
                return [box.left + view.frame.x_scale.compute(x), box.top + view.frame.y_scale.compute(y)];
            }""",
            [x, y],
        )
        return float(result[0]), float(result[1])

    def page_to_map(self, px: float, py: float) -> complex:
        """Map point under the page pixel (px, py)."""
        result = self.page.evaluate(
            """([px, py]) => {
                const figure = Bokeh.documents[0].get_model_by_name('pole_map');
                const view = Bokeh.index.find_one(figure);
                const box = view.canvas_view.el.getBoundingClientRect();
                return [view.frame.x_scale.invert(px - box.left), view.frame.y_scale.invert(py - box.top)];
            }""",
            [px, py],
        )
        return complex(result[0], result[1])

    def screenshot(self, name: str) -> Path:
        SCREENSHOTS.mkdir(parents=True, exist_ok=True)
        path = SCREENSHOTS / f"{name}.png"
        self.page.screenshot(path=str(path))
        return path

    def foreign_requests(self) -> list[str]:
        """Requests that left this machine's loopback server (there must be none: offline labs)."""
        served = urlsplit(self.server.url).netloc
        return [url for url in self.requests
                if urlsplit(url).scheme in ("http", "https", "ws", "wss") and urlsplit(url).netloc != served]


@pytest.fixture
def open_page(browser, server):
    """Open more tabs, each in its own browser context (a separate person): ``open_page("?room=lab")``.

    Fails the test if any of them reported problems or the server logged an exception.
    """
    log_start = len(server.log())
    opened: list[tuple] = []

    def open_one(query: str = "", target=None, load: bool = True) -> WorkbenchPage:
        """``target``: another RunningServer; ``load=False``: only go to the address (e.g. a sign-in page)."""
        context = browser.new_context(viewport=VIEWPORT, accept_downloads=True)
        tab = WorkbenchPage(context.new_page(), target or server)
        opened.append((context, tab))
        if not load:
            tab.page.goto(tab.server.url + query)
            return tab
        return tab.open(query)

    yield open_one
    for context, _ in opened:
        context.close()
    for _, tab in opened:
        assert not tab.problems, "a page reported problems:\n" + "\n".join(tab.problems)
    server_log = server.log()[log_start:]
    assert "Traceback" not in server_log, "the server logged an exception:\n" + server_log[-4000:]


@pytest.fixture
def workbench(browser, server):
    """A fresh tab (and so a fresh design session); fails the test if the page or server reported errors."""
    log_start = len(server.log())
    context = browser.new_context(viewport=VIEWPORT)
    page = context.new_page()
    tab = WorkbenchPage(page, server)
    try:
        yield tab.open()
    finally:
        context.close()
    assert not tab.problems, "the page reported problems:\n" + "\n".join(tab.problems)
    server_log = server.log()[log_start:]
    assert "Traceback" not in server_log, "the server logged an exception:\n" + server_log[-4000:]
