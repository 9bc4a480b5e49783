"""The design state with an estimator: editing L, its stable ranges, estimator-pole drags, undo/redo,
design files and live rooms — without a browser.

References: reference case 19 (/work/shared/reference-cases.md: A = [[0, 20.6], [1, 0]], C = [0, 1], both
estimator poles at −10 → L = [120.6, 20]ᵀ, derived by hand), Routh–Hurwitz for a quadratic (stable iff all
coefficients positive), the separation principle (case 22), numpy's eigvals as the independent check.
"""

import numpy as np
import pytest

from gainboard import core
from gainboard.app.design_file import design_from_json, design_to_json
from gainboard.app.rooms import SharedDesign, describe_change
from gainboard.app.state import DesignState

PENDULUM = core.Plant(A=[[0.0, 20.6], [1.0, 0.0]], B=[[1.0], [0.0]], C=[[0.0, 1.0]],
                      state_names=("rate", "angle"), output_names=("angle",))
K = [[30.0, 400.0]]


@pytest.fixture
def state():
    return DesignState(PENDULUM, gain=K)


def error_poles(plant, L):
    """numpy's eigenvalues of A − LC (the independent check)."""
    return np.sort_complex(np.linalg.eigvals(plant.A - np.asarray(L) @ plant.C))


def test_switching_to_the_estimator_gives_a_first_l_and_the_compensator_evaluation(state):
    assert state.estimator is None and state.estimator_evaluation is None
    assert state.set_editing("estimator")
    assert state.editing == "estimator" and state.estimator is not None
    compensator = state.estimator_evaluation
    assert compensator is not None and compensator.closed_loop.report.stable
    # the first estimator is 3× faster than the controller: poles of A − BK times 3 (common practice, no source)
    controller = np.linalg.eigvals(PENDULUM.A - PENDULUM.B @ np.array(K))
    np.testing.assert_allclose(np.sort_complex(compensator.estimator_poles.poles), np.sort_complex(3 * controller),
                               rtol=1e-8)
    assert compensator.closed_loop.separation_holds
    assert set(compensator.slider_ranges) == {(0, 0), (1, 0)}


def test_typed_estimator_poles_give_the_textbook_gain_and_its_routh_ranges(state):
    state.set_editing("estimator")
    assert state.place_poles([-10.0, -10.0])  # editing the estimator: targets are estimator poles
    np.testing.assert_allclose(state.estimator.gain, [[120.6], [20.0]], rtol=1e-12)  # case 19
    intervals = state.estimator_evaluation.entry_intervals
    # s² + l2 s + (l1 − 20.6): l1 > 20.6 with l2 = 20, l2 > 0 with l1 = 120.6 (Routh–Hurwitz)
    assert intervals[(0, 0)].intervals[0][0] == pytest.approx(20.6, rel=1e-10)
    assert intervals[(1, 0)].intervals[0][0] == pytest.approx(0.0, abs=1e-9)
    assert state.gain.tolist() == K  # K untouched


def test_an_entry_of_l_moved_live_is_one_undo_step_and_undo_redo_restore_l(state):
    state.set_editing("estimator")
    state.place_poles([-10.0, -10.0])
    for value in (100.0, 90.0, 80.0):
        assert state.set_estimator_entry(0, 0, value, live=True)
    state.end_gesture()
    assert state.estimator.gain[0, 0] == 80.0
    np.testing.assert_allclose(np.sort_complex(state.estimator_evaluation.estimator_poles.poles),
                               error_poles(PENDULUM, state.estimator.gain), atol=1e-9)
    assert state.undo()
    np.testing.assert_allclose(state.estimator.gain, [[120.6], [20.0]], rtol=1e-12)
    assert state.redo() and state.estimator.gain[0, 0] == 80.0
    assert state.undo() and state.undo()  # back past the typed poles to the first estimator
    assert state.undo()  # and before it: no estimator at all
    assert state.estimator is None and state.editing == "controller"


def test_dragging_an_estimator_pole_moves_l_and_its_conjugate_partner(state):
    state.set_editing("estimator")
    state.place_poles([-6 + 2j, -6 - 2j])
    poles = state.estimator_evaluation.estimator_poles.poles
    upper = int(np.argmax(poles.imag))
    assert state.begin_drag(upper)
    assert state.drag_pole(-8 + 3j, live=True)
    assert state.drag_pole(-9 + 4j, live=False)
    np.testing.assert_allclose(error_poles(PENDULUM, state.estimator.gain), np.sort_complex([-9 - 4j, -9 + 4j]),
                               atol=1e-9)
    assert state.estimator.method == "pole assignment" and state.undo_depth >= 1
    assert state.gain.tolist() == K


def test_kalman_design_adopts_l_and_keeps_the_error_covariance(state):
    assert state.design_kalman([0.0, 1.0], [0.01])
    assert state.estimator.method == "steady-state Kalman filter"
    # scipy's Riccati solver as the reference (filter equation = LQR equation of the dual)
    import scipy.linalg

    P = scipy.linalg.solve_continuous_are(PENDULUM.A.T, PENDULUM.C.T, np.diag([0.0, 1.0]), [[0.01]])
    np.testing.assert_allclose(state.kalman_result.error_covariance, P, rtol=1e-9)
    np.testing.assert_allclose(state.estimator.gain, P @ PENDULUM.C.T / 0.01, rtol=1e-9)


def test_the_checks_see_compensator_margins_beside_full_state_margins(state):
    state.set_editing("estimator")
    compensator = state.estimator_evaluation
    assert compensator.margins is not None and compensator.state_feedback_margins is not None
    assert compensator.state_feedback_margins.disk_margin == state.evaluation.margins.disk_margin


def test_design_files_and_rooms_carry_the_estimator(state):
    state.set_editing("estimator")
    state.place_poles([-10.0, -10.0])
    text = design_to_json(state.design())
    reopened = DesignState.from_design(design_from_json(text))
    np.testing.assert_array_equal(reopened.estimator.gain, state.estimator.gain)
    assert reopened.estimator_evaluation is not None
    # a room member adopts another's estimator as one undo step
    other = DesignState(PENDULUM, gain=K)
    shared = state.shared_design()
    assert other.adopt_shared(shared)
    np.testing.assert_array_equal(other.estimator.gain, state.estimator.gain)
    assert other.undo() and other.estimator is None
    assert describe_change(SharedDesign(PENDULUM, "", "", None, K, None), shared) == "changed the estimator gain L"


def test_a_new_plant_drops_the_estimator_and_refusals_keep_the_design(state):
    state.set_editing("estimator")
    before = state.estimator
    assert not state.set_estimator_gain([[1.0, 2.0]])
    assert "L is 1×2 but must be 2×1" in state.message and state.estimator is before
    assert not state.place_poles([-1.0, -2.0, -3.0])
    assert "3 estimator poles were given" in state.message
    assert not state.set_editing("sideways") and "choose what to edit" in state.message
    state.load_plant_reference("motor_arm_servo")
    assert state.estimator is None and state.editing == "controller" and state.estimator_evaluation is None


def test_the_estimator_form_can_change_and_reduced_order_has_its_own_shape():
    from gainboard.sample_plants import resolve_plant_reference

    plant = core.load_plant_file(resolve_plant_reference("cart_pendulum")[0])
    state = DesignState(plant)
    assert state.set_editing("estimator")
    assert state.estimator.method == "steady-state Kalman filter"  # the plant file gives its noise
    assert state.set_estimator_form("reduced-order")
    assert state.estimator.gain.shape == (2, 2) and state.estimator_evaluation.form == "reduced-order"
    assert state.estimator_evaluation.closed_loop.report.poles.size == 6  # n + (n − p)


def test_the_workbench_views_follow_the_estimator_without_a_browser():
    from gainboard.app.workbench import build_workbench

    workbench = build_workbench(PENDULUM).workbench
    state = workbench.state
    assert "Editing the controller gain K" in workbench.edit_mode.banner.object
    assert "add one" in workbench.compensator_checks.box.object
    workbench.edit_mode.switch.value = "Estimator L"  # what a click does
    assert state.editing == "estimator" and "Editing the estimator gain L" in workbench.edit_mode.banner.object
    assert workbench.estimator_panel.gain_text.value.startswith("[[")
    assert "with the estimator" in workbench.compensator_checks.box.object
    assert len(workbench.estimator_panel.sliders.panel.objects) == 2  # one slider per entry of L (2×1)
    assert workbench.pole_map.draw_tool.renderers == [workbench.pole_map.estimator_renderer]
    assert len(workbench.pole_map.estimator_source.data["x"]) == 2
    assert "estimator poles" in workbench.pole_map.legend.object
    workbench.file_panel.export_format.value = "c"
    header = workbench.file_panel._export().getvalue()
    assert "observer-based compensator" in header and "emergency stops" in header
    workbench.edit_mode.switch.value = "Controller K"
    assert workbench.pole_map.draw_tool.renderers == [workbench.pole_map.closed_renderer]
