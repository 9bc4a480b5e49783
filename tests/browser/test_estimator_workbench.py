"""The estimator in a real browser: switch to editing L, drag an estimator pole, see L and the
compensator's margins change.

The plant is reference case 1 of shared/reference-cases.md (tests/data/third_order_reference.toml;
Ogata, *Modern Control Engineering*, 5th ed., Example 10-1, from memory): K = [199, 55, 8] gives the
controller poles −2 ± 4j and −10. numpy's eigenvalues of A − LC are the outside reference for the
estimator poles (duality, case 20); the separation principle (case 22) for the whole loop.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from gainboard import core
from pole_references import matched_distance

DATA = Path(__file__).resolve().parents[1] / "data"
REFERENCE_GAIN = "[[199, 55, 8]]"


def reference_plant():
    return core.load_plant_file(DATA / "third_order_reference.toml")


def estimator_gain(workbench) -> np.ndarray:
    text = workbench.page.locator(".gb-estimator-text textarea").input_value()
    return np.array(json.loads(text), dtype=float) if text else np.zeros((0, 0))


def compensator_checks_text(workbench) -> str:
    return " ".join((workbench.page.locator(".gb-compensator-checks").text_content() or "").split())


def error_poles(plant, L) -> np.ndarray:
    """numpy's eigenvalues of A − LC: the outside reference for the estimator poles."""
    return np.linalg.eigvals(plant.A - np.asarray(L) @ plant.C)


def test_switch_to_the_estimator_drag_an_estimator_pole_and_see_l_and_the_margins_change(workbench):
    plant = reference_plant()
    page = workbench.page
    workbench.set_gain_text(REFERENCE_GAIN)
    before = workbench.revision()
    page.locator(".gb-edit-mode").get_by_role("button", name="Estimator L").click()
    workbench.wait_for_revision_above(before)
    workbench.wait_for(lambda: estimator_gain(workbench).shape == (3, 1), "a first estimator gain L")
    banner = page.locator(".gb-edit-text").inner_text()
    assert "Editing the estimator gain L" in banner  # the screen says which gain is edited
    first = estimator_gain(workbench)
    # the first estimator is 3× faster than the controller: −6 ± 12j and −30 (common practice, no source)
    assert matched_distance(error_poles(plant, first), [-6 + 12j, -6 - 12j, -30.0]) < 1e-6
    workbench.open_tab("Checks")
    workbench.wait_for(lambda: "with the estimator" in compensator_checks_text(workbench), "the compensator margins")
    margins_before = compensator_checks_text(workbench)
    workbench.screenshot("estimator-01-switched")

    start_x, start_y = workbench.map_to_page(-6.0, 12.0)
    target_x, target_y = workbench.map_to_page(-4.0, 6.0)
    before = workbench.revision()
    page.mouse.move(start_x, start_y)
    page.mouse.down()
    page.mouse.move((start_x + target_x) / 2, (start_y + target_y) / 2, steps=6)
    workbench.wait_for_revision_above(before)  # live: the design follows the drag
    page.mouse.move(target_x, target_y, steps=6)
    drop = workbench.page_to_map(target_x, target_y)
    page.mouse.up()
    workbench.wait_for(lambda: matched_distance(error_poles(plant, estimator_gain(workbench)),
                                                [drop, drop.conjugate(), -30.0]) < 0.05,
                       "L to place the dragged estimator pair at the drop point")
    workbench.settled_snapshot()
    dragged = estimator_gain(workbench)
    pixel = abs(workbench.page_to_map(target_x + 1, target_y) - drop)
    assert matched_distance(error_poles(plant, dragged), [drop, drop.conjugate(), -30.0]) < 1.5 * pixel
    assert not np.allclose(dragged, first)
    # K stayed, and the controller poles with it (the pole table shows A − BK's poles)
    assert np.allclose(workbench.gain(), [[199.0, 55.0, 8.0]])
    workbench.wait_for(lambda: compensator_checks_text(workbench) != margins_before,
                       "the compensator margins to follow the new L")
    after = compensator_checks_text(workbench)
    assert "full-state feedback" in after and "with the estimator" in after
    workbench.screenshot("estimator-02-pole-dragged-checks")
    workbench.open_tab("Estimator")
    workbench.screenshot("estimator-03-estimator-tab")
    workbench.open_tab("Responses")
    box = page.locator(".bk-tab").filter(has_text="Responses").first.bounding_box()
    page.mouse.move(box["x"] + 200, box["y"] + 300)
    page.mouse.wheel(0, 700)  # scroll the responses tab down to the plot of true and estimated states
    page.wait_for_timeout(300)
    workbench.screenshot("estimator-04-responses")
