"""The gain matrix in a real browser, on the bundled 12-state, 3-input flexure stage.

K has 36 entries, so the Gains tab shows K as a matrix with one large slider for the
selected entry. The poles shown are held to numpy's eigenvalues of A − BK (the outside
reference), the cell colours to the exact stable intervals of the core (checked against
numpy's eigenvalues at values inside and just outside the interval).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import REACTION_TIMEOUT_MS, SCREENSHOTS, WorkbenchPage
from workbench_server import RunningServer

from gainboard import core
from gainboard.sample_plants import load_bundled_plant
from pole_references import matched_distance, numpy_closed_loop_poles

PLANT = "flexure_stage_xy"

#: Reads the matrix through its shadow root: the selected cell and the cells' colour classes.
_MATRIX_SCRIPT = """() => {
    const found = [];
    const visit = (root) => {
        root.querySelectorAll('td[data-entry]').forEach(cell => found.push(cell));
        root.querySelectorAll('*').forEach(element => { if (element.shadowRoot) visit(element.shadowRoot); });
    };
    visit(document);
    return found.map(cell => ({entry: cell.dataset.entry, classes: cell.className, text: cell.textContent}));
}"""


@pytest.fixture(scope="module")
def stage_server():
    running = RunningServer(PLANT)
    yield running
    running.stop()


@pytest.fixture
def stage(browser, stage_server):
    context = browser.new_context(viewport={"width": 1440, "height": 900})
    tab = WorkbenchPage(context.new_page(), stage_server)
    try:
        yield tab.open()
    finally:
        context.close()
    assert not tab.problems, "the page reported problems:\n" + "\n".join(tab.problems)
    assert "Traceback" not in stage_server.log()


def cells(stage) -> dict:
    return {tuple(int(v) for v in cell["entry"].split(",")): cell for cell in stage.page.evaluate(_MATRIX_SCRIPT)}


def selected(stage):
    return next((entry for entry, cell in cells(stage).items() if "gb-selected" in cell["classes"]), None)


def wait_for_selected(stage, entry):
    stage.wait_for(lambda: selected(stage) == entry, f"cell {entry} selected")


def test_a_large_k_is_a_matrix_of_cells_with_names_on_the_margins(stage):
    plant = load_bundled_plant(PLANT)
    stage.wait_until_idle()
    shown = cells(stage)
    assert set(shown) == {(i, j) for i in range(3) for j in range(12)}
    # One slider only: the selected entry's (k11 at first).
    assert stage.page.locator(".gb-entry .noUi-handle").count() == 1
    assert selected(stage) == (0, 0)
    text = " ".join(stage.page.locator(".gb-gain-matrix th").all_text_contents())
    for name in (*plant.input_names, "payload yaw", "stage x velocity"):
        assert name in text
    stage.screenshot("20-gain-matrix-1440x900")


def test_cell_colours_follow_the_exact_stable_interval_of_each_entry(stage):
    plant = load_bundled_plant(PLANT)
    settled = stage.settled_snapshot()
    gain = settled["gain"]
    shown = cells(stage)
    for entry in [(0, 0), (1, 6), (2, 10)]:
        intervals = core.entry_stable_intervals(plant, gain, *entry)
        classes = shown[entry]["classes"]
        assert ("gb-stable" in classes) == intervals.current_is_stable
        # Outside reference for the interval itself: numpy's eigenvalues just inside and outside its ends.
        for low, high in intervals.intervals:
            for end, inward in ((low, 1), (high, -1)):
                if not np.isfinite(end):
                    continue
                step = 1e-6 * max(abs(end), 1.0)
                for offset, stable in ((inward * step, True), (-inward * step, False)):
                    probe = gain.copy()
                    probe[entry] = end + offset
                    assert (np.max(np.linalg.eigvals(plant.A - plant.B @ probe).real) < 0) == stable


def test_selecting_a_cell_and_moving_its_slider_shows_numpy_poles(stage):
    plant = load_bundled_plant(PLANT)
    page = stage.page
    page.locator(".gb-gain-matrix td[data-entry='1,6']").click()
    wait_for_selected(stage, (1, 6))
    stage.wait_for(lambda: page.locator(".gb-slider-2-7 .noUi-handle").count() == 1, "the large slider on k₂₇")
    before = stage.settled_snapshot()
    handle = page.locator(".gb-slider-2-7 .noUi-handle")
    box = handle.bounding_box()
    x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(x, y)
    page.mouse.down()
    for _ in range(4):
        x += 5
        page.mouse.move(x, y)
        page.wait_for_timeout(60)
    page.mouse.up()
    stage.wait_for(lambda: stage.gain()[1, 6] != before["gain"][1, 6], "k₂₇ to change")
    settled = stage.settled_snapshot()
    assert settled["gain"][1, 6] > before["gain"][1, 6]  # moved right: larger
    changed = np.argwhere(settled["gain"] != before["gain"])
    assert changed.tolist() == [[1, 6]]
    # numpy's eigenvalues of A − BK are the outside reference for the 12 poles shown.
    assert len(settled["poles"]) == 12
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, settled["gain"])) < 1e-8


def test_arrow_keys_move_the_selection_and_plus_nudges_the_selected_entry(stage):
    plant = load_bundled_plant(PLANT)
    page = stage.page
    grid = page.locator(".gb-matrix").first
    grid.click(position={"x": 5, "y": 5})  # focus, on the corner (no cell)
    page.locator(".gb-gain-matrix td[data-entry='0,0']").click()
    wait_for_selected(stage, (0, 0))
    for key, expected in (("ArrowRight", (0, 1)), ("ArrowDown", (1, 1)), ("ArrowDown", (2, 1)),
                          ("ArrowDown", (2, 1)), ("ArrowLeft", (2, 0))):
        page.keyboard.press(key)
        wait_for_selected(stage, expected)
    before = stage.settled_snapshot()
    page.keyboard.press("+")
    stage.wait_for(lambda: stage.gain()[2, 0] != before["gain"][2, 0], "k₃₁ to be nudged")
    settled = stage.settled_snapshot(quiet_ms=600)
    value = before["gain"][2, 0]
    # a thousandth of the value itself (the project's own rule, gainboard.core.nudged_value)
    assert settled["gain"][2, 0] == pytest.approx(core.nudged_value(value, None, 1), rel=1e-12)
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, settled["gain"])) < 1e-8


def test_collapsing_an_input_and_filtering_states_hide_cells(stage):
    page = stage.page
    page.locator(".gb-matrix-filter input").fill("payload")
    stage.wait_for(lambda: {j for _, j in cells(stage)} == set(range(6, 12)), "only the payload states")
    page.locator(".gb-gain-matrix th[data-input='1']").click()
    stage.wait_for(lambda: page.locator(".gb-gain-matrix tr.gb-collapsed").count() == 1, "input 2 collapsed")
    stage.screenshot("21-gain-matrix-filtered")


def test_the_matrix_at_a_narrow_width(browser, stage_server):
    context = browser.new_context(viewport={"width": 800, "height": 900})
    tab = WorkbenchPage(context.new_page(), stage_server)
    try:
        tab.open()
        tab.wait_until_idle()
        assert len(cells(tab)) == 36
        tab.screenshot("22-gain-matrix-800-wide")
    finally:
        context.close()
    assert not tab.problems
