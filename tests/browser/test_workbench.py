"""The workbench in a real browser: loading offline, sliders, dragging poles, bad plant files.

The plant is reference case 1 of shared/reference-cases.md (tests/data/third_order_reference.toml):
Ogata, *Modern Control Engineering*, 5th ed., Example 10-1 (from memory): with K = [199, 55, 8]
the closed-loop poles are −2 ± 4j and −10.
"""

from __future__ import annotations

import numpy as np
import pytest

from pathlib import Path

from gainboard import core
from pole_references import REFERENCE_POLES, matched_distance, numpy_closed_loop_poles

DATA = Path(__file__).resolve().parents[1] / "data"

REFERENCE_GAIN = "[[199, 55, 8]]"


def reference_plant():
    return core.load_plant_file(DATA / "third_order_reference.toml")


def test_page_loads_offline_with_no_failed_requests_and_no_console_errors(workbench):
    page = workbench.page
    workbench.wait_until_idle()
    # Labs are often air-gapped: every script, style and font must come from our own server.
    assert workbench.foreign_requests() == []
    assert workbench.problems == []
    assert "third-order reference plant" in workbench.header_text()
    caution = page.locator(".gb-caution").inner_text()
    assert "Validate it on the real system" in caution and "emergency stops" in caution
    assert "functional-safety standards" in caution
    # Readable on a 1366×768 laptop: nothing runs off the side of the screen.
    assert page.evaluate("() => document.documentElement.scrollWidth") <= 1366
    workbench.screenshot("01-loaded")


def test_bokehs_style_sheet_rewrite_is_still_there_to_be_skipped(workbench):
    # views/html_box.py skips Bokeh's rewrite of unchanged plot style sheets on every repaint (each
    # rewrite restyled the page: half a repaint in a CPU profile of a slider drag). It wraps
    # core/dom's InlineStyleSheet._update: if Bokeh renames or removes it, this fails.
    assert workbench.page.evaluate(
        "() => Bokeh.require('core/dom').InlineStyleSheet.prototype._update.skipsUnchanged === true")


def test_reference_gain_shows_textbook_poles_and_routh_interval(workbench):
    workbench.set_gain_text(REFERENCE_GAIN)
    # Ogata Example 10-1 (from memory): K = [199, 55, 8] gives −2 ± 4j and −10.
    assert matched_distance(workbench.closed_loop_poles(), REFERENCE_POLES) < 1e-9
    # Reference case 5 (Routh–Hurwitz on s³ + 6s² + (5 + k2)s + (1 + k1)): −1 < k11 < 839 with k2, k3 fixed.
    interval_text = workbench.page.locator(".gb-strip-1-1 .gb-interval-text")
    text = interval_text.inner_text().replace("−", "-")
    assert "-1 < k₁₁ < 839" in text, text
    workbench.screenshot("02-reference-gain")


def test_moving_a_gain_slider_shows_the_poles_the_core_computes(workbench):
    plant = reference_plant()
    workbench.set_gain_text(REFERENCE_GAIN)
    before_gain = workbench.gain()
    before = workbench.revision()
    handle = workbench.page.locator(".gb-slider-1-1 .noUi-handle")
    handle.focus()
    for _ in range(5):
        handle.press("ArrowRight")
    workbench.wait_for(lambda: workbench.gain()[0, 0] != before_gain[0, 0], "k11 to change")
    workbench.wait_for_revision_above(before)
    settled = workbench.settled_snapshot()
    gain, shown = settled["gain"], settled["poles"]
    assert gain[0, 0] > before_gain[0, 0], "ArrowRight must increase k11"
    np.testing.assert_array_equal(gain[0, 1:], before_gain[0, 1:])
    # numpy's eigenvalues of A − BK are the outside reference; the core must agree with them.
    assert matched_distance(shown, numpy_closed_loop_poles(plant, gain)) < 1e-8
    assert matched_distance(shown, core.closed_loop_poles(plant, gain)) < 1e-9
    # The poles really moved away from the textbook design.
    assert matched_distance(shown, REFERENCE_POLES) > 1e-3
    workbench.screenshot("03-slider-moved")


def test_an_arrow_key_nudges_a_gain_by_a_small_relative_step_not_to_the_slider_grid(workbench):
    # Issue 13 item 5: one press moved −248.949 to the grid value −245. Now a press moves by a
    # thousandth of the value itself, Shift by a hundredth (the project's own rule, core.nudged_value).
    plant = reference_plant()
    workbench.set_gain_text("[[-248.949, 55, 8]]")
    workbench.wait_until_idle()
    handle = workbench.page.locator(".gb-slider-1-1 .noUi-handle")
    handle.focus()
    handle.press("ArrowRight")
    settled = workbench.settled_snapshot(quiet_ms=600)  # the burst of presses ends 0.4 s after the key
    assert settled["gain"][0, 0] == pytest.approx(-248.949 + 0.248949, rel=1e-12)
    np.testing.assert_array_equal(settled["gain"][0, 1:], [55.0, 8.0])
    handle.press("Shift+ArrowLeft")
    settled = workbench.settled_snapshot(quiet_ms=600)
    assert settled["gain"][0, 0] == pytest.approx(-248.700051 - 2.48700051, rel=1e-12)
    # numpy's eigenvalues of A − BK are the outside reference for the poles shown.
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, settled["gain"])) < 1e-8
    # Each burst of presses is one undo step.
    workbench.page.get_by_role("button", name="↶ Undo").click()
    workbench.wait_for(lambda: workbench.gain()[0, 0] == pytest.approx(-248.700051, rel=1e-12), "undo of one burst")


# Counts changes of the outputs plot's data in the page (the plot is redrawn on each).
_COUNT_PLOT_UPDATES = """() => {
    window.__plotUpdates = 0;
    const source = Bokeh.documents[0].get_model_by_name('response_output_traces');
    source.change.connect(() => { window.__plotUpdates += 1; });
}"""


def test_held_slider_redraws_plots_live_and_tables_catch_up_before_release(workbench):
    plant = reference_plant()
    workbench.set_gain_text(REFERENCE_GAIN)
    workbench.wait_until_idle()
    page = workbench.page
    page.evaluate(_COUNT_PLOT_UPDATES)
    handle = page.locator(".gb-slider-1-1 .noUi-handle")
    box = handle.bounding_box()
    x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(x, y)
    page.mouse.down()
    for step in range(1, 6):
        x += 4
        page.mouse.move(x, y)
        # The plots follow each step while the mouse is held (the tables may lag behind).
        workbench.wait_for(lambda: page.evaluate("() => window.__plotUpdates") >= step, f"plot update {step}")
    slider_value = float(handle.get_attribute("aria-valuenow"))
    # Still held: within the text refresh interval the K readout and the pole table show the
    # latest step, and they agree with each other (numpy eig of A − BK is the outside reference).
    workbench.wait_for(lambda: abs(workbench.gain()[0, 0] - slider_value) <= 1e-6 * abs(slider_value),
                       "the K readout to catch up with the held slider")
    held = workbench.snapshot()
    assert matched_distance(held["poles"], numpy_closed_loop_poles(plant, held["gain"])) < 1e-8
    page.mouse.up()
    settled = workbench.settled_snapshot()
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, settled["gain"])) < 1e-8
    assert settled["gain"][0, 0] > 199.0, "moving the handle right must increase k11"


def test_dragging_a_closed_loop_pole_assigns_it_to_the_drop_point(workbench):
    plant = reference_plant()
    workbench.set_gain_text(REFERENCE_GAIN)
    page = workbench.page
    start_x, start_y = workbench.map_to_page(-2.0, 4.0)
    target_x, target_y = workbench.map_to_page(-3.0, 2.5)
    before = workbench.revision()
    page.mouse.move(start_x, start_y)
    page.mouse.down()
    page.mouse.move((start_x + target_x) / 2, (start_y + target_y) / 2, steps=6)
    # Live: K and the plots follow while the mouse is still down.
    workbench.wait_for_revision_above(before)
    page.mouse.move(target_x, target_y, steps=6)
    drop = workbench.page_to_map(target_x, target_y)
    # Nothing on the page moved under the mouse while dragging (the drop is where it was aimed).
    assert abs(drop - (-3.0 + 2.5j)) < 1e-6 * abs(drop), drop
    page.mouse.up()
    workbench.wait_for(lambda: matched_distance(
        numpy_closed_loop_poles(plant, workbench.gain()), [drop, drop.conjugate(), -10]) < 0.05,
        "K to place the dragged pair at the drop point")
    settled = workbench.settled_snapshot()
    achieved = numpy_closed_loop_poles(plant, settled["gain"])  # outside reference: numpy eig of A − BK
    pixel = abs(workbench.page_to_map(target_x + 1, target_y) - drop)  # one pixel in map units
    # The conjugate follows the dragged pole and the third pole stays at −10.
    assert matched_distance(achieved, [drop, drop.conjugate(), -10.0]) < 1.5 * pixel
    assert matched_distance(settled["poles"], achieved) < 1e-8
    assert workbench.message() == "" or "Could not" not in workbench.message()
    workbench.screenshot("04-pole-dragged")


def test_bad_plant_file_shows_the_error_and_keeps_the_design(workbench):
    workbench.set_gain_text(REFERENCE_GAIN)
    gain_before = workbench.gain_text()
    poles_before = workbench.closed_loop_poles()
    workbench.open_tab("Plant")
    workbench.page.locator(".gb-plant-file input[type=file]").set_input_files(str(DATA / "broken_plant.toml"))
    message = workbench.wait_for(lambda: workbench.message(), "an error message")
    # The message names the file and what is wrong with it (shape of B against A).
    assert "broken_plant.toml" in message and "B has 2 rows" in message, message
    assert workbench.gain_text() == gain_before
    assert matched_distance(workbench.closed_loop_poles(), poles_before) == 0.0
    assert "third-order reference plant" in workbench.header_text()
    workbench.screenshot("05-bad-plant-file")
    # The page is still alive: a new gain is accepted after the error.
    workbench.open_tab("Gains")
    workbench.set_gain_text("[[100, 40, 8]]")
    assert "broken_plant" not in workbench.message()


def test_undo_and_redo_walk_the_gain_history(workbench):
    workbench.set_gain_text(REFERENCE_GAIN)
    workbench.set_gain_text("[[100, 40, 8]]")
    page = workbench.page
    before = workbench.revision()
    page.get_by_role("button", name="↶ Undo").click()
    workbench.wait_for_revision_above(before)
    workbench.wait_for(lambda: workbench.gain_text() == "[[199, 55, 8]]", "undo to restore K")
    before = workbench.revision()
    page.get_by_role("button", name="↷ Redo").click()
    workbench.wait_for_revision_above(before)
    workbench.wait_for(lambda: workbench.gain_text() == "[[100, 40, 8]]", "redo to reapply K")


@pytest.mark.parametrize("plant_name", ["tilt_rig_sampled"])
def test_bundled_sampled_plant_opens_on_the_z_plane(workbench, plant_name):
    import tomllib

    workbench.open_tab("Plant")
    page = workbench.page
    # The chooser lists every bundled plant by its name and one-line summary, as its file gives them
    # (read here with the standard library's TOML reader).
    listed = page.locator(".gb-bundled select option").all_inner_texts()
    from gainboard.sample_plants import bundled_plant_files

    expected = []
    for path in bundled_plant_files().values():
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
        expected.append(f"{raw['name']} — {raw['summary']}")
    assert sorted(listed) == sorted(expected)
    raw = tomllib.loads(core_bundled(plant_name).read_text(encoding="utf-8"))
    page.locator(".gb-bundled select").select_option(label=f"{raw['name']} — {raw['summary']}")
    workbench.wait_for(lambda: plant_name in page.locator(".gb-plant-panel-summary, .gb-small code").all_inner_texts(),
                       "the chosen plant's short name under the chooser")
    before = workbench.revision()
    page.get_by_role("button", name="Open", exact=True).click()
    workbench.wait_for_revision_above(before)
    plant = core.load_plant_file(core_bundled(plant_name))
    settled = workbench.settled_snapshot()
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, settled["gain"])) < 1e-8
    assert page.locator("table.gb-poles-closed th").nth(1).text_content().strip() == "pole z"
    workbench.open_tab("Gains")
    workbench.screenshot(f"06-{plant_name}")


def core_bundled(name: str):
    from gainboard.sample_plants import bundled_plant_files

    return bundled_plant_files()[name]


def test_lqr_design_can_be_adopted_and_the_pinned_design_stays_as_a_ghost(workbench):
    import scipy.linalg

    plant = reference_plant()
    workbench.set_gain_text(REFERENCE_GAIN)
    page = workbench.page
    page.get_by_role("button", name="Pin", exact=True).click()
    workbench.wait_for(lambda: len(map_source(page, "pinned_poles")) == 3, "ghost poles of the pinned design")
    # The ghosts are the pinned design's poles: Ogata Example 10-1 (from memory).
    assert matched_distance(map_source(page, "pinned_poles"), REFERENCE_POLES) < 1e-9

    workbench.open_tab("LQR")
    page.get_by_label("Q diagonal (one weight per state)").fill("1, 1, 1")
    page.get_by_label("R diagonal (one weight per input)").fill("1")
    page.get_by_role("button", name="Compute LQR").click()
    workbench.wait_for(lambda: len(map_source(page, "lqr_poles")) == 3, "the LQR poles on the map")
    before = workbench.revision()
    page.get_by_role("button", name="Adopt LQR gain").click()
    workbench.wait_for_revision_above(before)
    settled = workbench.settled_snapshot()
    # Outside reference: scipy's Riccati solver, K = R⁻¹BᵀP for Q = I, R = 1.
    riccati = scipy.linalg.solve_continuous_are(plant.A, plant.B, np.eye(3), np.eye(1))
    expected = plant.B.T @ riccati
    np.testing.assert_allclose(settled["gain"], expected, rtol=1e-9)
    assert matched_distance(settled["poles"], numpy_closed_loop_poles(plant, expected)) < 1e-8
    # The pinned ghosts did not follow the new gain.
    assert matched_distance(map_source(page, "pinned_poles"), REFERENCE_POLES) < 1e-9
    workbench.screenshot("07-lqr-adopted-with-pinned-ghost")


def focused_element(page) -> dict:
    """Class and text of the element that has the keyboard focus (through shadow roots)."""
    return page.evaluate(
        """() => { let e = document.activeElement;
                   while (e && e.shadowRoot && e.shadowRoot.activeElement) e = e.shadowRoot.activeElement;
                   return e ? {cls: String(e.className), text: (e.textContent || '').trim()} : {cls: '', text: ''}; }"""
    )


def test_sliders_and_tabs_are_reachable_and_usable_from_the_keyboard(workbench):
    page = workbench.page
    page.locator(".gb-gain-text textarea").focus()
    for _ in range(30):
        page.keyboard.press("Tab")
        if "noUi-handle" in focused_element(page)["cls"]:
            break
    else:
        pytest.fail("30 presses of Tab from the K readout never reached a gain slider")
    # Shift+Tab walks back to the "Plant" tab header; Enter opens it.
    for _ in range(40):
        page.keyboard.press("Shift+Tab")
        element = focused_element(page)
        if "bk-tab" in element["cls"] and element["text"] == "Plant":
            break
    else:
        pytest.fail("Shift+Tab never reached the Plant tab header")
    page.keyboard.press("Enter")
    page.locator(".gb-plant-file").wait_for(state="visible")


def map_source(page, name: str) -> np.ndarray:
    """Points of a named data source on the pole map, as complex numbers."""
    x, y = page.evaluate(
        """(name) => { const s = Bokeh.documents[0].get_model_by_name(name);
                      return [Array.from(s.data.x), Array.from(s.data.y)]; }""",
        name,
    )
    return np.array(x, dtype=float) + 1j * np.array(y, dtype=float)
