"""The notebook workbench (`gainboard.workbench(plant)`) in a real browser: a slider move updates the poles.

The object is served with Panel exactly as returned (tests/browser/notebook_workbench_server.py);
numpy's eigenvalues of A − BK are the outside reference for the poles shown.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from conftest import VIEWPORT, WorkbenchPage
from pole_references import matched_distance, numpy_closed_loop_poles
from workbench_server import CHROMIUM, RunningServer

import gainboard

HARNESS = Path(__file__).resolve().parent / "notebook_workbench_server.py"


@pytest.fixture(scope="module")
def notebook_server():
    if not CHROMIUM.exists():
        pytest.skip("Debian's chromium is not installed at /usr/bin/chromium")
    running = RunningServer("cart_pendulum", launcher=[sys.executable, str(HARNESS)])
    yield running
    running.stop()


def test_a_slider_move_in_the_notebook_workbench_updates_the_poles(browser, notebook_server):
    context = browser.new_context(viewport=VIEWPORT)
    tab = WorkbenchPage(context.new_page(), notebook_server)
    # Unlike `gainboard serve`, the notebook workbench evaluates the design completely while the page
    # is built (no quick first pass off the event loop), so a first load on a busy machine takes longer.
    tab.page.set_default_navigation_timeout(120_000)
    try:
        tab.open()
        tab.screenshot("notebook-workbench-01-open")
        before = tab.settled_snapshot()
        handle = tab.page.locator(".gb-slider-1-1 .noUi-handle")
        handle.focus()
        for _ in range(5):
            handle.press("ArrowRight")
        tab.wait_for_revision_above(before["revision"])
        after = tab.settled_snapshot()
        assert after["gain"][0, 0] > before["gain"][0, 0]
        plant = gainboard.load_bundled_plant("cart_pendulum")
        assert matched_distance(after["poles"], numpy_closed_loop_poles(plant, after["gain"])) < 1e-8
        assert matched_distance(after["poles"], before["poles"]) > 1e-6  # the poles moved
        tab.screenshot("notebook-workbench-02-slider-moved")
    finally:
        context.close()
    assert not tab.problems, "the page reported problems:\n" + "\n".join(tab.problems)
    assert "Traceback" not in notebook_server.log(), notebook_server.log()[-4000:]
