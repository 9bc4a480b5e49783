"""Integral action: the extended plant, zero steady-state error, and refusals.

Reference cases are numbered as in /work/shared/reference-cases.md.
"""

import numpy as np
import pytest
import scipy.signal
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from gainboard.core import (
    AnalysisError,
    GainError,
    Plant,
    discretize_zero_order_hold,
    plant_from_transfer_function,
)
from gainboard.core._integral_action import (
    augment_with_integral_action,
    integral_step_response,
    split_integral_gain,
)

# Case 1 / case 3: companion plant with C = [1, 0, 0] (Ogata, Example 10-1, from memory).
THIRD_ORDER = Plant(
    A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]],
    B=[[0.0], [0.0], [1.0]],
    C=[[1.0, 0.0, 0.0]],
    output_names=("angle",),
    output_units=("rad",),
    input_limits=((-5.0, 5.0),),
    initial_state=[0.1, 0.0, 0.0],
)


def _controllability_rank(plant):
    n = plant.state_count
    matrix = np.hstack([np.linalg.matrix_power(plant.A, i) @ plant.B for i in range(n)])
    return np.linalg.matrix_rank(matrix)


def _placed_gain(plant, poles):
    # Reference design engine: scipy.signal.place_poles on the extended plant.
    return scipy.signal.place_poles(plant.A, plant.B, poles).gain_matrix


def test_extended_plant_has_integrator_rows_names_and_carried_limits():
    extended = augment_with_integral_action(THIRD_ORDER)
    # ξ' = r − y = −Cx: A_e = [[A, 0], [−C, 0]], B_e = [[B], [0]] (Franklin, Powell & Emami-Naeini,
    # integral control section, from memory).
    np.testing.assert_array_equal(extended.A[:3, :3], THIRD_ORDER.A)
    np.testing.assert_array_equal(extended.A[3], [-1.0, 0.0, 0.0, 0.0])
    np.testing.assert_array_equal(extended.A[:3, 3], 0.0)
    np.testing.assert_array_equal(extended.B.ravel(), [0.0, 0.0, 1.0, 0.0])
    assert extended.state_names[-1] == "∫ error of angle" and extended.state_units[-1] == "rad·s"
    assert extended.input_limits == THIRD_ORDER.input_limits
    np.testing.assert_array_equal(extended.initial_state, [0.1, 0.0, 0.0, 0.0])
    assert "emergency stops" in extended.description  # project rule 4
    # Kalman rank test (Ogata, *Modern Control Engineering*, from memory): the extension stays controllable
    # because the plant has no zero at s = 0.
    assert _controllability_rank(extended) == 4


def test_placed_gain_on_extended_plant_gives_zero_error_for_reference_and_disturbance_steps():
    extended = augment_with_integral_action(THIRD_ORDER)
    gain = _placed_gain(extended, [-2.0, -3.0, -4.0, -5.0])
    response = integral_step_response(THIRD_ORDER, gain, horizon=12.0, time_step=0.01, disturbance_step=[0.7])
    assert response.closed_loop_stable
    # Final value theorem with an integrator in the loop (Ogata, from memory): zero error for constant r and d.
    np.testing.assert_allclose(response.steady_state_error_reference, 0.0, atol=1e-12)
    np.testing.assert_allclose(response.steady_state_error_disturbance, 0.0, atol=1e-12)
    # The simulation settles there too (slowest pole −2: e^{−24} ≈ 4e-11 of the initial error left).
    assert response.reference_outputs[-1, 0] == pytest.approx(1.0, abs=1e-8)
    assert response.disturbance_outputs[-1, 0] == pytest.approx(0.0, abs=1e-8)


def test_integral_step_response_matches_scipy_lsim_of_the_closed_loop():
    extended = augment_with_integral_action(THIRD_ORDER)
    gain = _placed_gain(extended, [-1.0, -2.0 + 1.0j, -2.0 - 1.0j, -3.0])
    response = integral_step_response(THIRD_ORDER, gain, horizon=5.0, time_step=0.05)
    closed = extended.A - extended.B @ gain
    reference_entry = np.array([[0.0], [0.0], [0.0], [1.0]])
    output = np.hstack([THIRD_ORDER.C, [[0.0]]])
    # Reference: scipy.signal.lsim of [x; ξ]' = (A_e − B_e K)[x; ξ] + [0; 1] r, y = Cx.
    _, y, _ = scipy.signal.lsim((closed, reference_entry, output, [[0.0]]), np.ones(response.times.size),
                                response.times)
    np.testing.assert_allclose(response.reference_outputs[:, 0], y, atol=1e-9)
    # Same reference for the actuator command u = −K[x; ξ].
    _, u, _ = scipy.signal.lsim((closed, reference_entry, -gain, [[0.0]]), np.ones(response.times.size),
                                response.times)
    np.testing.assert_allclose(response.reference_inputs[:, 0], u, atol=1e-9)


def test_plant_with_feedthrough_is_handled_and_still_reaches_zero_error():
    # (s + 3)/(s + 1): D = 1 (scipy.signal.tf2ss realisation); ξ' = r − Cx − Du.
    plant = plant_from_transfer_function([1.0, 3.0], [1.0, 1.0])
    extended = augment_with_integral_action(plant)
    np.testing.assert_allclose(extended.B[-1], -plant.D[0])
    gain = _placed_gain(extended, [-2.0, -3.0])
    response = integral_step_response(plant, gain, horizon=15.0, time_step=0.01, disturbance_step=[0.5])
    # Final value theorem (Ogata, from memory).
    np.testing.assert_allclose(response.steady_state_error_reference, 0.0, atol=1e-12)
    np.testing.assert_allclose(response.steady_state_error_disturbance, 0.0, atol=1e-12)
    closed = extended.A - extended.B @ gain
    output = np.hstack([plant.C, [[0.0]]]) - plant.D @ gain
    # Reference: scipy.signal.lsim with the feedthrough folded into the output, y = (C_e − D K)[x; ξ].
    _, y, _ = scipy.signal.lsim((closed, [[0.0], [1.0]], output, [[0.0]]), np.ones(response.times.size),
                                response.times)
    np.testing.assert_allclose(response.reference_outputs[:, 0], y, atol=1e-9)


def test_sampled_plant_integrates_with_running_sum_times_sample_time_and_tracks_exactly():
    T = 0.1
    plant = discretize_zero_order_hold(THIRD_ORDER, T)
    extended = augment_with_integral_action(plant)
    # ξ[k+1] = ξ[k] + T(r − y): last row [−T C, 1] (our documented convention; rectangular sum,
    # Franklin, Powell & Workman, from memory).
    np.testing.assert_allclose(extended.A[3], [-T, 0.0, 0.0, 1.0])
    gain = _placed_gain(extended, [0.5, 0.6, 0.7, 0.8])
    response = integral_step_response(plant, gain, horizon=10.0, disturbance_step=[0.3])
    np.testing.assert_allclose(np.diff(response.times), T)
    # Final value theorem for sampled loops (Franklin, Powell & Workman, from memory).
    np.testing.assert_allclose(response.steady_state_error_reference, 0.0, atol=1e-12)
    np.testing.assert_allclose(response.steady_state_error_disturbance, 0.0, atol=1e-12)
    closed = extended.A - extended.B @ gain
    # Reference: scipy.signal.dlsim of the sampled closed loop with r entering as T·r.
    _, y, _ = scipy.signal.dlsim((closed, [[0.0], [0.0], [0.0], [T]], np.hstack([plant.C, [[0.0]]]), [[0.0]], T),
                                 np.ones(response.times.size))
    np.testing.assert_allclose(response.reference_outputs[:, 0], y[:, 0], atol=1e-10)


def test_plant_with_zero_at_the_origin_is_refused_with_a_message():
    # s/(s² + 3s + 2) has a zero at s = 0 (transmission zero blocks constant signals, from memory).
    differentiator = plant_from_transfer_function([1.0, 0.0], [1.0, 3.0, 2.0], output_names=("rate",))
    with pytest.raises(AnalysisError, match=r"integral action on output 'rate' is impossible: the plant has a zero "
                                            r"at s = 0"):
        augment_with_integral_action(differentiator)


def test_sampled_plant_with_zero_at_one_is_refused():
    # (z − 1)/(z² − 0.5z + 0.06): zero at z = 1, the sampled counterpart of s = 0 (from memory).
    plant = plant_from_transfer_function([1.0, -1.0], [1.0, -0.5, 0.06], sample_time=0.1)
    with pytest.raises(AnalysisError, match=r"zero at z = 1"):
        augment_with_integral_action(plant)


def test_two_copies_of_one_output_cannot_be_integrated_together():
    plant = Plant(A=-np.eye(2), B=np.eye(2), C=[[1.0, 0.0], [1.0, 0.0]])
    # Each output alone is fine; together the steady-state map [[A, B], [C, D]] loses rank (from memory).
    augment_with_integral_action(plant, outputs=[0])
    with pytest.raises(AnalysisError, match=r"outputs 'y1', 'y2' together is impossible"):
        augment_with_integral_action(plant, outputs=[0, 1])


@pytest.mark.parametrize(
    ("outputs", "message"),
    [([3], r"distinct zero-based indices below 1"), ([0, 0], r"distinct"), ("x", r"distinct|indices")],
)
def test_bad_output_selection_is_refused(outputs, message):
    with pytest.raises(AnalysisError, match=message):
        augment_with_integral_action(THIRD_ORDER, outputs=outputs)


def test_more_integrated_outputs_than_inputs_is_refused():
    plant = Plant(A=-np.eye(2), B=[[1.0], [0.0]], tracked_outputs=(0,))
    with pytest.raises(AnalysisError, match=r"needs at least 2 inputs, but the plant has 1"):
        augment_with_integral_action(plant, outputs=[0, 1])


def test_output_that_sees_nothing_is_refused():
    plant = Plant(A=-np.eye(2), B=[[1.0], [1.0]], C=[[0.0, 0.0]])
    with pytest.raises(AnalysisError, match=r"output 'y1' does not depend on any state or input"):
        augment_with_integral_action(plant)


def test_split_integral_gain_separates_state_and_integral_columns():
    state_gain, integral_gain = split_integral_gain(THIRD_ORDER, [[1.0, 2.0, 3.0, -4.0]])
    np.testing.assert_array_equal(state_gain, [[1.0, 2.0, 3.0]])  # common practice, no source
    np.testing.assert_array_equal(integral_gain, [[-4.0]])
    with pytest.raises(GainError, match=r"has 3 columns, but the plant has 3 states"):
        split_integral_gain(THIRD_ORDER, [[1.0, 2.0, 3.0]])
    with pytest.raises(GainError, match=r"must have 1 rows"):
        split_integral_gain(THIRD_ORDER, np.ones((2, 4)))
    with pytest.raises(GainError, match=r"non-finite"):
        split_integral_gain(THIRD_ORDER, [[1.0, 2.0, np.inf, 0.0]])


def test_response_arguments_are_checked():
    gain = [[1.0, 1.0, 1.0, -1.0]]
    with pytest.raises(AnalysisError, match=r"horizon must be a positive number"):
        integral_step_response(THIRD_ORDER, gain, horizon=-1.0)
    with pytest.raises(AnalysisError, match=r"reference step must be 1 finite numbers"):
        integral_step_response(THIRD_ORDER, gain, horizon=1.0, reference_step=[1.0, 2.0])
    with pytest.raises(GainError, match=r"K is 1×3 but must be 1×4"):
        integral_step_response(THIRD_ORDER, [[1.0, 1.0, 1.0]], horizon=1.0)


def test_unstable_loop_reports_no_steady_state_error():
    response = integral_step_response(THIRD_ORDER, [[0.0, 0.0, 0.0, 0.0]], horizon=1.0)
    # K = 0 leaves the integrator at s = 0 open: not asymptotically stable (from memory).
    assert response.closed_loop_stable is False
    assert response.steady_state_error_reference is None


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 4), m=st.integers(1, 2))
def test_any_stabilising_gain_of_the_extended_plant_removes_constant_errors(seed, n, m):
    rng = np.random.default_rng(seed)
    plant = Plant(A=rng.normal(size=(n, n)), B=rng.normal(size=(n, m)), C=rng.normal(size=(m, n)),
                  D=rng.normal(size=(m, m)) * rng.integers(0, 2), tracked_outputs=tuple(range(m)))
    try:
        extended = augment_with_integral_action(plant)
    except AnalysisError:
        assume(False)
    size = n + m
    controllability = np.hstack([np.linalg.matrix_power(extended.A, i) @ extended.B for i in range(size)])
    assume(np.linalg.cond(controllability) < 1e6)
    poles = -np.linspace(1.0, 2.0, size)
    gain = _placed_gain(extended, poles)
    response = integral_step_response(plant, gain, horizon=1.0, time_step=0.1,
                                      reference_step=rng.normal(size=m), disturbance_step=rng.normal(size=m))
    assert response.closed_loop_stable
    # Final value theorem / internal model principle (Francis & Wonham 1976, from memory): zero error.
    scale = 1 + np.linalg.norm(gain)
    np.testing.assert_allclose(response.steady_state_error_reference, 0.0, atol=1e-9 * scale)
    np.testing.assert_allclose(response.steady_state_error_disturbance, 0.0, atol=1e-9 * scale)
