"""View ranges that come with an evaluation: sliders, the pole-map frame, arrows and response axes.

The rounding rules are the project's own (1-2-2.5-5 steps: common practice, no source);
the numbers they must contain come from outside: the Routh–Hurwitz interval of
reference case 5 (shared/reference-cases.md), numpy's eigenvalues of A − BK, and a
central difference of numpy's eigenvalues for the direction of each sensitivity arrow.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard import core
from pole_references import REFERENCE_GAIN

DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def reference_plant():
    return core.load_plant_file(DATA / "third_order_reference.toml")


def evaluate(plant, gain, **options):
    return core.evaluate_design(plant, gain, core.EvaluationOptions(**options))


@settings(max_examples=60, deadline=None)
@given(st.floats(1e-6, 1e6))
def test_nice_rounding_is_the_next_1_2_2_5_5_step(value):
    rounded = core.round_up_to_nice(value)
    mantissa = rounded / 10.0 ** math.floor(math.log10(rounded) + 1e-12)
    assert rounded >= value * (1 - 1e-9)
    assert min(abs(mantissa - f) for f in (1.0, 2.0, 2.5, 5.0, 10.0)) < 1e-9
    assert rounded <= 2.0 * value * (1 + 1e-9)  # no factor of the sequence is more than 2× the one before


def test_slider_steps_are_1_2_5_of_a_four_hundredth_of_the_span():
    assert (core.slider_step(800.0), core.slider_step(1000.0), core.slider_step(0.3)) == (2.0, 5.0, 0.001)


def test_slider_ranges_hold_the_value_and_the_routh_interval(reference_plant):
    evaluation = evaluate(reference_plant, REFERENCE_GAIN)
    sliders = evaluation.view_ranges.sliders
    assert set(sliders) == {(0, 0), (0, 1), (0, 2)}
    k11 = sliders[(0, 0)]
    # Reference case 5 (Routh–Hurwitz): k11 is stable exactly on (−1, 839) with k12 = 55, k13 = 8.
    assert k11.low < -1.0 and k11.high > 839.0 and k11.holds(199.0)
    for slider in sliders.values():
        assert slider.low / slider.step == pytest.approx(round(slider.low / slider.step), abs=1e-6)
        assert slider.high / slider.step == pytest.approx(round(slider.high / slider.step), abs=1e-6)


def test_a_slider_range_is_kept_during_a_gesture_and_renewed_near_an_end_after_it(reference_plant):
    first = evaluate(reference_plant, REFERENCE_GAIN).view_ranges
    k11 = first.sliders[(0, 0)]
    near_end = k11.high - 0.01 * (k11.high - k11.low)
    gain = np.array(REFERENCE_GAIN, dtype=float)
    gain[0, 0] = near_end
    during = evaluate(reference_plant, gain, previous_view=first, gesture=True).view_ranges
    assert during.sliders[(0, 0)] is k11  # kept under the dragging mouse
    after = evaluate(reference_plant, gain, previous_view=during, gesture=False).view_ranges
    renewed = after.sliders[(0, 0)]
    assert renewed is not k11 and not renewed.near_an_end(near_end)
    assert after.sliders[(0, 1)] is first.sliders[(0, 1)]  # the others did not move


def test_the_pole_frame_shows_every_pole_with_equal_scales(reference_plant):
    evaluation = evaluate(reference_plant, REFERENCE_GAIN, reference_poles=(-30 + 1j, -30 - 1j))
    frame = evaluation.view_ranges.pole_frame
    poles = np.concatenate([np.linalg.eigvals(reference_plant.A - reference_plant.B @ np.array(REFERENCE_GAIN)),
                            np.linalg.eigvals(reference_plant.A), [-30 + 1j, -30 - 1j]])  # numpy eig
    assert np.all((frame.x_start < poles.real) & (poles.real < frame.x_end))
    assert np.all((frame.y_start < poles.imag) & (poles.imag < frame.y_end))
    assert (frame.x_end - frame.x_start) / frame.height == pytest.approx(395 / 375)


def test_the_spec_region_is_outlined_over_twice_the_frame(reference_plant):
    specs = core.DesignSpecs(min_damping_ratio=0.5, max_settling_time=4.0)
    evaluation = evaluate(reference_plant, REFERENCE_GAIN, specs=specs)
    ranges = evaluation.view_ranges
    expected = core.region_boundary(evaluation.pole_region, ranges.pole_frame.region_extent)
    assert len(ranges.region_outline) == len(expected)
    for (x, y), (ex, ey) in zip(ranges.region_outline, expected):
        np.testing.assert_array_equal(x, ex)
        np.testing.assert_array_equal(y, ey)
    assert ranges.pole_frame.region_extent >= 2 * max(abs(ranges.pole_frame.x_start), ranges.pole_frame.y_end)


def test_sensitivity_arrows_point_where_numpy_eigenvalues_move(reference_plant):
    gain = np.array(REFERENCE_GAIN, dtype=float)
    evaluation = evaluate(reference_plant, gain, selected_entry=(0, 1))
    starts, tips = evaluation.view_ranges.arrows
    step = 1e-6 * abs(gain[0, 1])
    moved = gain.copy()
    moved[0, 1] += step
    A, B = reference_plant.A, reference_plant.B
    before, after = np.linalg.eigvals(A - B @ gain), np.linalg.eigvals(A - B @ moved)  # outside reference
    length = 0.09 * evaluation.view_ranges.pole_frame.height
    for start, tip in zip(starts, tips):
        nearest = np.argmin(np.abs(before - start))
        direction = after[np.argmin(np.abs(after - before[nearest]))] - before[nearest]
        assert abs(tip - start) == pytest.approx(length)
        assert np.angle((tip - start) / direction) == pytest.approx(0.0, abs=1e-4)


def test_response_axes_hold_the_data_and_only_grow_during_a_gesture(reference_plant):
    fast = evaluate(reference_plant, REFERENCE_GAIN)
    slow_gain = np.array(REFERENCE_GAIN, dtype=float)
    slow_gain[0, 0] = 40.0
    slow = evaluate(reference_plant, slow_gain, previous_view=fast.view_ranges, gesture=True)
    back = evaluate(reference_plant, REFERENCE_GAIN, previous_view=slow.view_ranges, gesture=True)
    fitted = evaluate(reference_plant, REFERENCE_GAIN, previous_view=back.view_ranges, gesture=False)
    for evaluation in (fast, slow, fitted):
        response = evaluation.responses.initial
        axes = evaluation.view_ranges.responses["initial"]
        assert axes.time_end >= response.time[-1]
        assert axes.outputs[0] <= np.nanmin(response.outputs) and axes.outputs[1] >= np.nanmax(response.outputs)
    grown = back.view_ranges.responses["initial"]
    assert grown.time_end == slow.view_ranges.responses["initial"].time_end  # kept while the drag goes on
    assert fitted.view_ranges.responses["initial"] == fast.view_ranges.responses["initial"]


def test_an_arrow_nudge_is_a_small_step_relative_to_the_value_not_to_the_slider_grid():
    # Issue 13 item 5: a thousandth of the value per press, a hundredth with the coarse modifier
    # (the project's own rule); a value at zero moves by a tenth of a slider step (coarse: one).
    grid = core.SliderRange(-1000.0, 1000.0, 5.0)
    assert core.nudged_value(-248.949, grid, 1) == pytest.approx(-248.949 + 0.248949, rel=1e-15)
    assert core.nudged_value(-248.949, grid, -1, coarse=True) == pytest.approx(-248.949 - 2.48949, rel=1e-15)
    assert core.nudged_value(0.0, grid, 1) == 0.5 and core.nudged_value(0.0, grid, -1, coarse=True) == -5.0
    assert core.nudged_value(2.0, grid, 1) == pytest.approx(2.002, rel=1e-15)  # small but not zero: relative
    value = -248.949
    for _ in range(3):
        value = core.nudged_value(value, grid, 1)
    assert value == pytest.approx(-248.949 * (1 - 1e-3) ** 3, rel=1e-12)  # each press from where the last left it
