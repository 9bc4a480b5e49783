"""The workbench's design state, views and helpers, without a browser.

Reference values (shared/reference-cases.md):
- case 1: A = [[0,1,0],[0,0,1],[−1,−5,−6]], B = e3, K = [199, 55, 8] → poles −2 ± 4j, −10
  (Ogata, *Modern Control Engineering*, 5th ed., Example 10-1, from memory);
- case 5: with k2, k3 fixed, k11 is stable exactly for −1 < k11 < 839 (Routh–Hurwitz);
- case 9: ZOH double integrator Φ = [[1, T], [0, 1]], Γ = [T²/2, T]ᵀ (Franklin, Powell & Workman, from memory);
- case 15: double integrator, Q = I, R = 1 → K = [1, √3] (derived by hand);
- case 22: Jaulin's four-state plant refuses the poles (−2, −2, −2, −2) (multiplicity above rank B, scipy's tests).
numpy's eigenvalues of A − BK serve as the independent check of displayed poles.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard import core
from gainboard.app.pole_drag import conjugate_partner, targets_after_drag
from gainboard.app.refresh_policy import Detail, RefreshPolicy
from gainboard.app.scheduling import LatestOnly, guarded
from gainboard.app.state import DesignState, plant_from_reference
from gainboard.app.theme import format_complex, format_gain_text, format_number
from pole_references import REFERENCE_GAIN, REFERENCE_POLES, matched_distance
from pole_references import numpy_closed_loop_poles as eig_closed_loop

DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def reference_plant():
    return core.load_plant_file(DATA / "third_order_reference.toml")


@pytest.fixture
def state(reference_plant):
    return DesignState(reference_plant, gain=REFERENCE_GAIN)


# -- the design state --------------------------------------------------------------------------


def test_reference_gain_gives_the_textbook_poles(state, reference_plant):
    poles = state.evaluation.closed_loop.poles
    assert matched_distance(poles, REFERENCE_POLES) < 1e-9  # Ogata Example 10-1 (from memory)
    assert matched_distance(poles, eig_closed_loop(reference_plant, REFERENCE_GAIN)) < 1e-9  # numpy eig


def test_the_stable_interval_beside_k11_is_the_routh_interval(state):
    intervals = state.evaluation.entry_intervals[(0, 0)].intervals
    # Reference case 5 (Routh–Hurwitz): −1 < k11 < 839 with k2 = 55, k3 = 8 fixed.
    assert len(intervals) == 1
    low, high = intervals[0]
    assert low == pytest.approx(-1.0, abs=1e-7) and high == pytest.approx(839.0, rel=1e-9)


def test_setting_one_entry_changes_only_that_entry_and_the_poles_follow(state, reference_plant):
    assert state.set_entry(0, 0, 300.0)
    expected_gain = [[300.0, 55.0, 8.0]]
    np.testing.assert_array_equal(state.gain, expected_gain)
    # numpy eig of A − BK is the outside reference for the poles the views show.
    assert matched_distance(state.evaluation.closed_loop.poles, eig_closed_loop(reference_plant, expected_gain)) < 1e-9
    assert state.message == ""


def test_a_slider_gesture_is_one_undo_step_and_redo_reapplies_it(state):
    start = state.gain.copy()
    for value in (210.0, 220.0, 230.0):
        state.set_entry(0, 0, value, live=True)
    assert state.undo_depth == 0  # nothing recorded while the gesture lasts
    state.set_entry(0, 0, 240.0)  # the release
    assert state.undo_depth == 1
    assert state.undo()
    np.testing.assert_array_equal(state.gain, start)
    assert state.redo_depth == 1
    assert state.redo()
    assert state.gain[0, 0] == 240.0
    assert not state.redo()  # nothing left to redo


def test_quick_drag_steps_leave_intervals_out_until_the_pause_or_the_release(reference_plant):
    now = [0.0]
    policy = RefreshPolicy(pause_after=0.15, texts_at_least_every=1.0, clock=lambda: now[0])
    state = DesignState(reference_plant, gain=REFERENCE_GAIN, refresh=policy)
    assert set(state.evaluation.entry_intervals) == {(0, 0), (0, 1), (0, 2)}
    state.set_entry(0, 0, 210.0, live=True)  # the first step: the tables have never been brought up to date
    assert state.detail is Detail.PAUSE
    now[0] = 0.05
    state.set_entry(0, 0, 220.0, live=True)
    assert state.detail is Detail.STEP and state.evaluation.entry_intervals == {}
    # The quick step still has the poles of the new K (numpy eig of A − BK is the outside reference).
    poles = state.evaluation.closed_loop.poles
    assert matched_distance(poles, eig_closed_loop(reference_plant, state.gain)) < 1e-9
    assert not state.catch_up()  # 50 ms later: no pause yet
    now[0] = 0.25
    assert state.catch_up()
    assert state.detail is Detail.PAUSE and state.evaluation.margins is None  # still dragging: no margins
    # Routh–Hurwitz (as in reference case 5): s³ + (6 + k13)s² + (5 + k12)s + (1 + k11) is stable
    # for k12 > (1 + k11)/(6 + k13) − 5; with k11 = 220, k13 = 8 fixed: k12 > 10.785…
    low, high = state.evaluation.entry_intervals[(0, 1)].intervals[0]
    assert low == pytest.approx((1 + 220.0) / 14 - 5, rel=1e-9) and math.isinf(high)
    now[0] = 0.3
    state.set_entry(0, 0, 230.0, live=True)
    assert state.detail is Detail.STEP
    state.set_entry(0, 0, 240.0)  # the release is always complete, with margins
    assert state.detail is Detail.COMPLETE and state.evaluation.margins is not None
    assert set(state.evaluation.entry_intervals) == {(0, 0), (0, 1), (0, 2)}


def test_arrow_nudges_move_one_entry_by_relative_steps_and_a_burst_is_one_undo_step(state, reference_plant):
    for _ in range(3):
        assert state.nudge_entry(0, 0, 1)
    assert state.nudge_entry(0, 0, -1, coarse=True)
    expected = 199.0 * 1.001 ** 3  # three fine presses up (a thousandth each), from where each left it
    expected -= float(f"{0.01 * expected:.12g}")  # one coarse press down
    assert state.gain[0, 0] == pytest.approx(expected, rel=1e-12)
    np.testing.assert_array_equal(state.gain[0, 1:], REFERENCE_GAIN[0][1:])
    assert matched_distance(state.evaluation.closed_loop.poles, eig_closed_loop(reference_plant, state.gain)) < 1e-9
    state.end_gesture()
    assert state.undo_depth == 1 and state.undo()
    np.testing.assert_array_equal(state.gain, REFERENCE_GAIN)


def test_a_new_change_after_undo_clears_the_redo_history(state):
    state.set_entry(0, 1, 60.0)
    state.undo()
    state.set_entry(0, 2, 9.0)
    assert state.redo_depth == 0 and not state.redo()


def test_dragging_a_pole_assigns_it_and_its_conjugate(state, reference_plant):
    index = int(np.argmin(np.abs(state.evaluation.closed_loop.poles - (-2 + 4j))))
    assert state.begin_drag(index)
    assert state.drag_pole(-3 + 2j, live=True)
    assert state.dragging and state.undo_depth == 0
    assert state.drag_pole(-3 + 3j)  # the release
    assert not state.dragging and state.undo_depth == 1
    # numpy eig of A − BK: the dragged pair lands on −3 ± 3j and −10 stays.
    assert matched_distance(eig_closed_loop(reference_plant, state.gain), [-3 + 3j, -3 - 3j, -10]) < 1e-8
    assert "Ackermann" in state.placement_summary or state.placement_summary


def test_dragging_a_z_plane_pair_onto_the_origin_gives_the_deadbeat_gain():
    # Reference case 13 (Ogata, Discrete-Time Control Systems, 2nd ed., ch. 6, from memory):
    # G = [[0, 1], [−0.16, −1]], H = [0, 1]ᵀ; K = [0.34, −2] puts the poles at 0.5 ± 0.5j,
    # and the deadbeat gain (both poles at z = 0) is K = [−0.16, −1].
    plant = core.Plant(A=[[0.0, 1.0], [-0.16, -1.0]], B=[[0.0], [1.0]], sample_time=1.0)
    state = DesignState(plant, gain=[[0.34, -2.0]])
    assert matched_distance(state.evaluation.closed_loop.poles, [0.5 + 0.5j, 0.5 - 0.5j]) < 1e-12
    index = int(np.argmax(state.evaluation.closed_loop.poles.imag))
    assert state.begin_drag(index)
    assert state.drag_pole(0.0 + 0.004j, snap_distance=0.01)  # dropped just above the axis: snaps onto it
    np.testing.assert_allclose(state.gain, [[-0.16, -1.0]], atol=1e-12)


def test_an_impossible_drag_keeps_the_design_and_says_why():
    # Reference case 22 (Jaulin's plant in scipy's tests): two inputs cannot give a fourfold pole.
    plant = core.Plant(A=[[0, 7, 0, 0], [0, 0, 0, 7 / 3], [0, 0, 0, 0], [0, 0, 0, 0]],
                       B=[[0, 0], [0, 0], [1, 0], [0, 1]])
    state = DesignState(plant)
    before = state.gain.copy()
    assert not state.place_poles([-2, -2, -2, -2])
    assert state.message_kind == "error" and "Could not place the poles there" in state.message
    np.testing.assert_array_equal(state.gain, before)


def test_an_uncontrollable_pole_is_marked_and_cannot_be_dragged():
    # PBH test (Hautus): with A = diag(−1, −2, 1) and B = [1, 0, 1]ᵀ the mode at −2 is not reached by B.
    plant = core.Plant(A=[[-1.0, 0, 0], [0, -2.0, 0], [0, 0, 1.0]], B=[[1.0], [0.0], [1.0]])
    state = DesignState(plant)
    poles = state.evaluation.closed_loop.poles
    movable = state.closed_loop_movable()
    fixed = [p for p, m in zip(poles, movable) if not m]
    assert len(fixed) == 1 and abs(fixed[0] - (-2.0)) < 1e-12
    before = state.gain.copy()
    assert state.begin_drag(movable.index(False))
    assert not state.drag_pole(-5.0)
    assert "uncontrollable" in state.message
    np.testing.assert_array_equal(state.gain, before)


def test_a_broken_plant_file_shows_the_error_and_keeps_the_design(state):
    plant_before, gain_before = state.plant, state.gain.copy()
    text = (DATA / "broken_plant.toml").read_text()
    assert not state.load_plant_text(text, "broken_plant.toml")
    assert state.message_kind == "error"
    assert "B has 2 rows but A is 3×3" in state.message
    assert state.plant is plant_before
    np.testing.assert_array_equal(state.gain, gain_before)


@pytest.mark.parametrize("text, expected", [
    ("not json", "write K as rows of numbers"),
    ("[[1, 2]]", "K is 1×2 but must be 1×3"),
    ('[["a", 2, 3]]', "write K as rows of numbers"),
    ("[[1, 2, NaN]]", "non-finite"),
])
def test_bad_gain_text_is_refused_with_a_message(state, text, expected):
    before = state.gain.copy()
    assert not state.set_gain_text(text)
    assert state.message_kind == "error" and expected in state.message
    np.testing.assert_array_equal(state.gain, before)


def test_the_k_readout_text_reads_back_to_the_same_gain(state):
    state.set_gain([[199.123456789012, -55.5, 8.0]])
    text = format_gain_text(state.gain)
    assert state.set_gain_text(text)
    np.testing.assert_allclose(state.gain, [[199.123456789012, -55.5, 8.0]], rtol=1e-12)


def test_lqr_comparison_matches_the_hand_derived_gain_and_can_be_adopted():
    # Reference case 15 (derived by hand): double integrator, Q = I, R = 1 → K = [1, √3].
    plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    state = DesignState(plant, gain=[[1.0, 1.0]])
    assert state.compute_lqr(np.eye(2), np.eye(1))
    np.testing.assert_allclose(state.lqr_result.gain, [[1.0, math.sqrt(3.0)]], rtol=1e-10)
    assert matched_distance(state.lqr_poles, eig_closed_loop(plant, [[1.0, math.sqrt(3.0)]])) < 1e-9
    assert state.adopt_lqr()
    np.testing.assert_allclose(state.gain, [[1.0, math.sqrt(3.0)]], rtol=1e-10)
    assert state.undo_depth == 1


def test_pinning_keeps_the_old_design_to_compare_against(state):
    state.pin()
    pinned = state.pinned
    state.set_entry(0, 0, 400.0)
    assert state.pinned is pinned
    np.testing.assert_array_equal(state.pinned.gain, REFERENCE_GAIN)
    assert state.adopt_pinned()
    np.testing.assert_array_equal(state.gain, REFERENCE_GAIN)
    state.unpin()
    assert state.pinned is None


def test_sampling_the_plant_uses_the_zero_order_hold_and_can_be_undone():
    # Reference case 9 (Franklin, Powell & Workman, ch. 4, from memory): Γ = [T²/2, T]ᵀ.
    plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    state = DesignState(plant, gain=[[1.0, 1.0]])
    assert state.sample_plant(0.1)
    assert state.plant.is_sampled
    np.testing.assert_allclose(state.plant.B.ravel(), [0.005, 0.1], rtol=1e-12)
    np.testing.assert_allclose(state.plant.A, [[1.0, 0.1], [0.0, 1.0]], rtol=1e-12)
    assert not state.sample_plant(0.1)  # already sampled: refused with a message
    assert state.message_kind == "error"
    assert state.restore_continuous()
    assert state.plant is plant


def test_opening_a_bundled_plant_replaces_the_design_and_clears_history(state):
    state.set_entry(0, 0, 250.0)
    assert state.load_plant_reference("tilt_rig_sampled")
    assert state.plant.is_sampled and state.plant_label == "tilt_rig_sampled"
    assert state.undo_depth == 0 and state.pinned is None
    assert state.gain.shape == (state.plant.input_count, state.plant.state_count)


def test_an_unknown_plant_name_is_refused_naming_the_choices():
    with pytest.raises(core.PlantError, match="no bundled plant of that name; bundled plants: .*cart_pendulum"):
        plant_from_reference("no_such_plant")


def test_selecting_an_entry_moves_the_locus_to_that_entry(state):
    state.select_entry(0, 2)
    assert state.evaluation.selected_locus.entry == (0, 2)
    state.select_entry(3, 0)  # outside K
    assert state.message_kind == "error" and "there is no entry (4, 1)" in state.message
    assert state.selected_entry == (0, 2)


def test_a_failing_evaluation_restores_the_inputs(state, monkeypatch):
    before = state.gain.copy()

    def broken(*args, **kwargs):
        raise core.AnalysisError("simulated failure")

    monkeypatch.setattr(core, "evaluate_design", broken)
    assert not state.set_entry(0, 0, 123.0)
    assert "simulated failure" in state.message
    np.testing.assert_array_equal(state.gain, before)


# -- dragging rules ----------------------------------------------------------------------------


def test_a_complex_pole_takes_its_conjugate_along():
    # A real matrix has a real characteristic polynomial, so complex poles come in conjugate
    # pairs (common practice, no source).
    poles = [-1 + 2j, -1 - 2j, -5]
    assert conjugate_partner(poles, 0) == 1 and conjugate_partner(poles, 2) is None
    request = targets_after_drag(poles, 1, -3 - 1j)
    assert request.targets == (-3 + 1j, -3 - 1j, -5 + 0j) and set(request.moved) == {0, 1}


def test_a_real_pole_leaving_the_axis_pairs_with_the_nearest_real_pole():
    request = targets_after_drag([-1, -4, -9], 0, -2 + 1j)
    assert request.targets == (-2 + 1j, -2 - 1j, -9 + 0j)
    assert "joined" in request.note


def test_a_lone_real_pole_stays_on_the_real_axis():
    request = targets_after_drag([-1 + 1j, -1 - 1j, -3], 2, -4 + 2j)
    assert request.targets[2] == -4 + 0j and "stays on the real axis" in request.note


def test_drops_near_the_axis_snap_onto_it():
    request = targets_after_drag([-1 + 1j, -1 - 1j], 0, -2 + 0.01j, snap_distance=0.05)
    assert request.targets == (-2 + 0j, -2 + 0j)


def test_an_uncontrollable_pole_cannot_be_dragged():
    with pytest.raises(core.PlacementError, match="cannot be moved by any gain"):
        targets_after_drag([-1, -2], 1, -3, movable=[True, False])


@settings(max_examples=60, deadline=None)
@given(
    real=st.floats(-50, 50), imag=st.floats(0.1, 50),
    target_real=st.floats(-50, 50), target_imag=st.floats(-50, 50),
)
def test_drag_targets_are_always_a_conjugate_set(real, imag, target_real, target_imag):
    poles = [complex(real, imag), complex(real, -imag), -7.0, -8.0]
    for index in range(4):
        request = targets_after_drag(poles, index, complex(target_real, target_imag))
        targets = np.array(request.targets)
        # Self-conjugate set: sorting the conjugates gives the same multiset (common practice, no source).
        assert np.allclose(np.sort_complex(targets), np.sort_complex(targets.conj()))
        # The dragged pole lands on the drop point (or below it on the real axis); the others stay.
        target = complex(target_real, target_imag)
        assert request.targets[index] in (target, complex(target.real, 0.0))
        assert all(request.targets[i] == poles[i] for i in range(4) if i not in request.moved)


# -- scheduling and callbacks ------------------------------------------------------------------


class _FakeDocument:
    def __init__(self):
        self.callbacks = []

    def add_next_tick_callback(self, callback):
        self.callbacks.append(callback)

    def run(self):
        pending, self.callbacks = self.callbacks, []
        for callback in pending:
            callback()


def test_latest_only_runs_just_the_newest_request_per_key():
    document, ran = _FakeDocument(), []
    scheduler = LatestOnly(document)
    for value in range(5):
        scheduler.submit("drag", lambda value=value: ran.append(value))
    scheduler.submit("other", lambda: ran.append("other"))
    assert len(document.callbacks) == 1 and ran == []
    document.run()
    assert ran == [4, "other"]


def test_a_failing_request_is_reported_and_the_next_still_runs():
    document, ran, errors = _FakeDocument(), [], []
    scheduler = LatestOnly(document, on_error=errors.append)
    scheduler.submit("a", lambda: 1 / 0)
    scheduler.submit("b", lambda: ran.append("b"))
    document.run()
    assert ran == ["b"] and isinstance(errors[0], ZeroDivisionError)


def test_guarded_callbacks_report_instead_of_raising():
    reports = []

    @guarded(reports.append)
    def callback():
        raise RuntimeError("boom")

    assert callback() is None
    assert "RuntimeError: boom" in reports[0]


# -- formatting --------------------------------------------------------------------------------


def test_numbers_are_shown_with_a_true_minus_sign_and_pairs_as_a_plus_minus_b_j():
    assert format_number(-0.5) == "−0.5"
    assert format_complex(-2 - 4j) == "−2 − 4j"
    assert format_gain_text([[-0.0, 1.5]]) == "[[0, 1.5]]"


# -- the views, built without a browser --------------------------------------------------------


def test_the_workbench_builds_and_shows_the_design_without_a_browser(reference_plant):
    from gainboard.app.workbench import build_workbench

    page = build_workbench(reference_plant, plant_label="third_order_reference.toml")
    workbench = page.workbench
    state = workbench.state
    state.set_gain(REFERENCE_GAIN)
    # One slider per entry of K, each showing the current value.
    assert len(workbench.sliders._controls) == 3
    assert [c.slider.value for c in workbench.sliders._controls.values()] == [199.0, 55.0, 8.0]
    shown = np.array(workbench.pole_map.closed_source.data["x"]) + 1j * np.array(workbench.pole_map.closed_source.data["y"])
    assert matched_distance(shown, REFERENCE_POLES) < 1e-9  # Ogata Example 10-1 (from memory)
    assert "−1 &lt; k₁₁ &lt; 839" in workbench.sliders._controls[(0, 0)].strip.object  # Routh, case 5
    assert "Validate it on the real system" in workbench.page_header.caution.object
    assert workbench.design_bar.gain_text.value == "[[199, 55, 8]]"


def test_response_axes_only_grow_during_a_drag_and_fit_the_data_on_release(reference_plant):
    from gainboard.app.workbench import build_workbench

    workbench = build_workbench(reference_plant).workbench
    state, plots = workbench.state, workbench.responses
    state.set_gain(REFERENCE_GAIN)
    x_range, y_range = plots.output_figure.x_range, plots.output_figure.y_range
    shown = [(x_range.end, y_range.start, y_range.end)]
    # k11 down from 199 towards 40 slows the loop (longer horizon), then back up (shorter)
    for value in (150.0, 100.0, 60.0, 120.0, 199.0):
        state.set_entry(0, 0, value, live=True)
        shown.append((x_range.end, y_range.start, y_range.end))
    ends, lows, highs = zip(*shown)
    assert list(ends) == sorted(ends) and list(highs) == sorted(highs) and list(lows) == sorted(lows, reverse=True)
    state.set_entry(0, 0, 199.0)  # the release: the axes fit this design's data again
    response = state.evaluation.responses.initial
    traces = [response.outputs] + ([response.saturated_outputs] if response.saturated_outputs is not None else [])
    low, high = min(float(np.nanmin(t)) for t in traces), max(float(np.nanmax(t)) for t in traces)
    # Fitted: the data inside, rounded out by less than a quarter (a whole 1-2-2.5-5 step of an
    # eighth of the span; common practice, no source).
    end = float(response.time[-1])
    assert end <= x_range.end <= 1.25 * end
    assert y_range.start <= low and y_range.end >= high
    assert (y_range.end - y_range.start) <= 1.6 * (high - low)
    assert x_range.end < max(ends)  # the design at release settles faster than the slowest one shown


def test_dragging_on_the_map_without_a_browser_assigns_the_poles(reference_plant):
    from bokeh.events import Pan, PanEnd, PanStart

    from gainboard.app.workbench import build_workbench

    page = build_workbench(reference_plant)
    workbench = page.workbench
    workbench.state.set_gain(REFERENCE_GAIN)
    figure = workbench.pole_map.figure
    figure._trigger_event(PanStart(figure, x=-2.0, y=4.0, sx=0, sy=0))
    figure._trigger_event(Pan(figure, x=-2.5, y=3.5, sx=0, sy=0, delta_x=0, delta_y=0))
    figure._trigger_event(PanEnd(figure, x=-3.0, y=3.0, sx=0, sy=0))
    assert matched_distance(eig_closed_loop(reference_plant, workbench.state.gain), [-3 + 3j, -3 - 3j, -10]) < 1e-8
    assert workbench.state.undo_depth == 2  # set_gain above, and the drag as one step


def test_importing_the_core_loads_no_user_interface_library():
    code = "import sys, gainboard.core; print(sorted(m for m in ('panel', 'bokeh', 'param') if m in sys.modules))"
    output = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert output.strip() == "[]"


# -- the design as a whole: history, files, autosave, snapshots ---------------------------------
# Reference case 3 (Franklin, Powell & Emami-Naeini, sec. 7.5, from memory): for case 1 with
# C = [1, 0, 0] the reference prefilter is N = 200.


def test_only_accepted_changes_are_counted_not_live_steps(state):
    committed = state.committed
    state.set_entry(0, 0, 250.0, live=True)
    state.set_entry(0, 0, 260.0, live=True)
    assert state.committed == committed
    state.end_gesture()
    assert state.committed == committed + 1
    state.undo()
    assert state.committed == committed + 2
    assert not state.set_gain_text("[[1, 2]]")  # refused: nothing committed
    assert state.committed == committed + 2


def test_the_design_keeps_k_notes_and_the_gain_history_in_order(state, reference_plant):
    from gainboard.app.design_file import design_from_json, design_to_json

    state.set_entry(0, 0, 250.0)
    state.set_notes("k11 raised for a faster response")
    design = design_from_json(design_to_json(state.design()))
    np.testing.assert_array_equal(design.gain, [[250.0, 55.0, 8.0]])
    assert [entry[1].tolist() for entry in design.gain_history] == [REFERENCE_GAIN, [[250.0, 55.0, 8.0]]]
    assert design.notes == "k11 raised for a faster response"
    again = DesignState.from_design(design, "saved.json")
    np.testing.assert_array_equal(again.gain, [[250.0, 55.0, 8.0]])
    assert matched_distance(again.evaluation.closed_loop.poles,
                            eig_closed_loop(reference_plant, [[250.0, 55.0, 8.0]])) < 1e-9  # numpy eig
    assert core.parse_plant_text(again.plant_text).A.tolist() == reference_plant.A.tolist()


def test_opening_a_design_file_brings_plant_gain_specs_and_notes(state):
    from gainboard.app.design_file import Design, design_to_json
    from gainboard.sample_plants import load_bundled_plant

    plant = load_bundled_plant("maglev_ball")
    gain = DesignState(plant).gain * 1.25
    text = design_to_json(Design(plant=plant, gain=gain, notes="from the lab"))
    assert state.load_design_bytes(text.encode(), "maglev.json")
    assert state.plant.name == plant.name and state.notes == "from the lab"
    np.testing.assert_array_equal(state.gain, gain)
    assert state.specs == plant.specs and state.undo_depth == 0
    assert "Opened maglev.json" in state.message
    assert matched_distance(state.evaluation.closed_loop.poles, eig_closed_loop(plant, gain)) < 1e-8  # numpy


@pytest.mark.parametrize("data, expected", [
    (b"\xff\xfe not text", "not UTF-8 text"),
    (b'{"format": "gainboard-design", "version": 99}', "version 99 is not known"),
    (b'{"format": "gainboard-design", "version": 1, "plant": {}, "gain": {"K": [[1]]}, "run": "x"}',
     "unknown key"),
    (b" " * 8_000_001, "larger than the 8 MB"),
])
def test_a_bad_design_file_is_refused_and_the_design_kept(state, data, expected):
    before = state.gain.copy()
    assert not state.load_design_bytes(data, "bad.json")
    assert state.message_kind == "error" and expected in state.message
    np.testing.assert_array_equal(state.gain, before)


def test_a_design_files_prefilter_is_kept_until_k_changes(reference_plant):
    from gainboard.app.design_file import Design

    # Reference case 3 (from memory): N = 200 belongs to K = [199, 55, 8] with C = [1, 0, 0].
    design = Design(plant=reference_plant, gain=REFERENCE_GAIN, prefilter=[[200.0]])
    state = DesignState(reference_plant)
    assert state.load_design(design, "with-prefilter.json")
    assert state.design().prefilter.tolist() == [[200.0]]
    state.set_entry(0, 0, 300.0)
    assert state.design().prefilter is None
    assert "prefilter N and integral gain Ki were made for its K" in state.message


def test_the_plant_chooser_lists_every_bundled_plant_with_its_name_and_summary():
    import tomllib

    from gainboard.app.state import bundled_plant_catalogue
    from gainboard.sample_plants import bundled_plant_files

    catalogue = bundled_plant_catalogue()
    files = bundled_plant_files()
    assert [entry.stem for entry in catalogue] == sorted(files)
    for entry in catalogue:
        raw = tomllib.loads(files[entry.stem].read_text(encoding="utf-8"))  # the standard library's TOML reader
        assert (entry.name, entry.summary) == (raw["name"], raw["summary"])
        assert entry.summary and "\n" not in entry.summary


def test_autosave_keeps_each_accepted_edit_and_the_next_session_offers_it(reference_plant, tmp_path, monkeypatch):
    from gainboard.app.design_file import load_design
    from gainboard.app.workbench import open_session

    monkeypatch.setenv("GAINBOARD_DATA_DIR", str(tmp_path))
    first = open_session(reference_plant, plant_label="third_order_reference.toml").workbench
    assert not first.page_header.offer_row.visible  # nothing saved before
    first.state.set_gain(REFERENCE_GAIN)
    first.state.set_entry(0, 0, 205.0, live=True)  # a live step is not written...
    assert load_design(first.autosave.path).gain.tolist() == REFERENCE_GAIN
    first.state.end_gesture()  # ...the release is
    assert load_design(first.autosave.path).gain.tolist() == [[205.0, 55.0, 8.0]]
    assert oct(first.autosave.folder.stat().st_mode & 0o777) == "0o700"  # designs may be confidential
    # While the first page is open, another page is not offered its work.
    assert not open_session(reference_plant).workbench.page_header.offer_row.visible
    first.close()  # the tab is closed (or the server stopped): the next start offers the design
    second = open_session(reference_plant, plant_label="third_order_reference.toml").workbench
    assert second.page_header.offer_row.visible and "[[205, 55, 8]]" in second.page_header.offer.object
    assert not np.array_equal(second.state.gain, [[205.0, 55.0, 8.0]])  # offered, not applied silently
    assert second.restore_offered()
    np.testing.assert_array_equal(second.state.gain, [[205.0, 55.0, 8.0]])
    assert matched_distance(second.state.evaluation.closed_loop.poles,
                            eig_closed_loop(reference_plant, [[205.0, 55.0, 8.0]])) < 1e-9  # numpy eig
    assert not first.autosave.path.exists()  # the restored file is now this session's own autosave
    assert second.autosave.path.exists()


def test_discarding_the_offer_removes_the_autosave(reference_plant, tmp_path, monkeypatch):
    from gainboard.app.workbench import open_session

    monkeypatch.setenv("GAINBOARD_DATA_DIR", str(tmp_path))
    first = open_session(reference_plant).workbench
    first.state.set_gain(REFERENCE_GAIN)
    first.close()
    second = open_session(reference_plant).workbench
    assert second.page_header.offer_row.visible
    second.discard_offered()
    assert not second.page_header.offer_row.visible and not first.autosave.path.exists()


def test_a_snapshot_link_opens_the_same_design_in_a_fresh_session(reference_plant, tmp_path, monkeypatch):
    from gainboard.app.workbench import open_session

    monkeypatch.setenv("GAINBOARD_DATA_DIR", str(tmp_path))
    source = open_session(reference_plant).workbench
    source.state.set_gain([[199.123456789012, 55.0, 8.0]])
    link = source.make_snapshot_link()
    code = link.split("design=", 1)[1]
    fresh = open_session(core.Plant(A=[[-1.0]], B=[[1.0]]), arguments={"design": [code.encode()]}).workbench
    assert fresh.state.gain.tobytes() == source.state.gain.tobytes()  # every bit
    assert fresh.state.plant.A.tolist() == reference_plant.A.tolist()
    assert "snapshot link" in fresh.state.message
    broken = open_session(reference_plant, arguments={"design": [code[:40].encode()]}).workbench
    assert broken.state.message_kind == "error" and "Could not open the snapshot link" in broken.state.message
    assert broken.state.plant is reference_plant  # the server's plant instead


def test_the_file_tab_downloads_are_the_library_exports(reference_plant):
    from gainboard.app.export import export_design
    from gainboard.app.workbench import build_workbench

    workbench = build_workbench(reference_plant, plant_label="third_order_reference.toml").workbench
    workbench.state.set_gain(REFERENCE_GAIN)
    panel = workbench.file_panel
    panel.export_format.value = "c"
    assert panel.download_export.filename == "third_order_reference-gains.h"
    assert panel._export().read() == export_design(workbench.state.design(), "c")
    design_text = panel._design_file().read()
    assert '"K": [\n      [199.0, 55.0, 8.0]' in design_text
    panel.export_format.value = "csv"
    assert panel.download_export.filename.endswith(".csv")
