"""The workbench's robustness state and panel, without a browser."""

import time

import numpy as np
import pytest

from gainboard import core
from gainboard.app.robustness_state import RobustnessState
from gainboard.app.state import DesignState, plant_from_reference

POLES = [-3 + 2j, -3 - 2j, -4, -5]


@pytest.fixture
def cart_state():
    plant, label, text = plant_from_reference("cart_pendulum")
    state = DesignState(plant, plant_label=label, plant_text=text)
    state.set_gain(core.assign_poles(plant, POLES).gain)
    return state


def test_operating_points_follow_the_design(cart_state):
    robust = RobustnessState(cart_state)
    assert [p.name for p in robust.report.points] == ["nominal", "half payload", "full payload",
                                                      "full payload, worn belt"]
    # reference: numpy's eigenvalues of each point's own A − BK
    for point, model in zip(robust.report.points, robust.family.models()):
        expected = np.linalg.eigvals(model.plant.A - model.plant.B @ cart_state.gain)
        assert point.stable == bool(expected.real.max() < 0)
    nominal = robust.common[(0, 0)].per_model["nominal"]
    for low, high in robust.common[(0, 0)].intervals:  # the common range lies inside the nominal one
        assert any(a <= low and high <= b for a, b in nominal.intervals)
    cart_state.set_entry(0, 0, 5.0)  # k11 > 0 tips the cart loop over (outside every stable range)
    assert robust.report.all_stable is False


def test_an_edited_plant_is_no_longer_treated_as_the_family(cart_state):
    robust = RobustnessState(cart_state)
    assert robust.family is not None
    cart_state.sample_plant(0.01)
    assert robust.family is None and "changed after it was loaded" in robust.family_note


def test_sampling_in_the_background_gives_the_cores_figures_and_goes_stale_when_k_changes(cart_state):
    robust = RobustnessState(cart_state)
    robust.param.update(samples=3000, seed=5)
    assert robust.start_sampling()
    robust.wait(60)
    assert robust.running is False and robust.result_is_current
    plan = core.plan_monte_carlo(robust.family, cart_state.gain, samples=3000, seed=5, specs=cart_state.specs,
                                 include_margins=core.margins_needed(cart_state.specs))
    expected = core.run_monte_carlo(plan)
    assert robust.result.stable == expected.stable and robust.result.worst == expected.worst
    cart_state.set_entry(0, 1, float(cart_state.gain[0, 1]) * 1.01)
    assert robust.result_is_current is False


def test_a_cancelled_sampling_reports_it_and_keeps_no_result(cart_state):
    robust = RobustnessState(cart_state)
    robust.samples = 5_000_000
    assert robust.start_sampling()
    assert robust.start_sampling() is False and "already running" in robust.message
    robust.cancel_sampling()
    robust.wait(60)
    assert robust.running is False and robust.result is None and robust.message == "Sampling cancelled."


def test_a_plain_plant_has_no_family_and_refuses_to_sample():
    plant, label, text = plant_from_reference("maglev_ball")
    robust = RobustnessState(DesignState(plant, plant_label=label, plant_text=text))
    assert robust.family is None and "no [parameters]" in robust.family_note
    assert robust.start_sampling() is False and "no [parameters]" in robust.message


def test_background_judging_keeps_only_the_newest_request(cart_state):
    delivered = []
    robust = RobustnessState(cart_state, deliver=lambda function: (delivered.append(1), function()),
                             background=True)
    for factor in (1.01, 1.02, 1.03):
        cart_state.set_entry(0, 1, -18.24 * factor)
    deadline = time.monotonic() + 60
    while robust._working and time.monotonic() < deadline:
        time.sleep(0.02)
    final = robust.report.points[0].evaluation.gain
    np.testing.assert_array_equal(final, cart_state.gain)


def test_the_workbench_shows_the_points_the_cloud_and_the_common_ranges():
    from gainboard.app.workbench import build_workbench

    plant, label, text = plant_from_reference("cart_pendulum")
    page = build_workbench(plant, plant_label=label, plant_text=text)
    workbench = page.workbench
    workbench.state.set_gain(core.assign_poles(plant, POLES).gain)
    panel = workbench.robust_panel
    assert len(panel.points_source.data["x"]) == 4 * 3
    assert "full payload, worn belt" in panel.points_table.object
    assert panel.strips.object.count("<svg") == 4
    # under each gain slider: the values stable at every operating point, with the verdict of the current K
    common = workbench.robust.common[(0, 0)]
    strip = workbench.sliders._controls[(0, 0)].common_strip.object
    assert "at every operating point" in strip and "<svg" in strip
    assert ("✓" in strip) == any(a < workbench.state.gain[0, 0] < b for a, b in common.intervals)
    # the response plot: one shaded band per output of the response shown
    assert len(panel.band_source.data["xs"]) == plant.output_count
    # the checks tab: worst case per spec over the points
    assert "over the operating points" in workbench.checks.family_pane.object
    workbench.robust.samples = 2000
    workbench.robust.start_sampling()
    workbench.robust.wait(60)
    assert len(panel.cloud_source.data["x"]) == 2000 * 4
    assert "never a proof of robustness" in panel.result_box.object
    fraction = f"{workbench.robust.result.stable.fraction:.4f}"
    assert "pass fractions of 2000 sampled models" in workbench.checks.family_pane.object
    assert fraction in workbench.checks.family_pane.object
