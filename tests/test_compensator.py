"""The observer-based compensator: separation, margins at the plant input, responses.

References: the separation principle (Luenberger 1964; reference case 22 in
/work/shared/reference-cases.md), Doyle, "Guaranteed margins for LQG regulators: there are
none", IEEE TAC 23(4), 1978, Safonov & Athans 1977 (case 18), Routh–Hurwitz by hand, and
independent frequency sweeps written here from the transfer-function definition.
"""

import math

import numpy as np
import pytest
import scipy.linalg
import scipy.optimize
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import (
    EstimatorError,
    EstimatorOptions,
    GainError,
    Plant,
    assign_estimator_poles,
    assign_poles,
    compare_margins,
    compensator_closed_loop,
    compensator_margins,
    design_kalman_estimator,
    design_lqr,
    discretize_zero_order_hold,
    evaluate_compensator,
    evaluate_observer_design,
    loop_margins,
    observer_based_compensator,
    simulate_compensator_responses,
    simulate_responses,
)

DOUBLE_INTEGRATOR = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]],
                          state_names=("position", "velocity"), initial_state=[1.0, 0.0])
K_DI = [[2.0, 3.0]]      # s² + 3s + 2: poles −1, −2
L_DI = [[7.0], [12.0]]   # s² + 7s + 12: poles −3, −4 (derived by hand)


def _random_plant(rng, n, m, p, sample_time=None):
    A = rng.normal(size=(n, n))
    if sample_time is not None:
        A = A / max(1.0, np.max(np.abs(np.linalg.eigvals(A)))) * 1.1
    return Plant(A=A, B=rng.normal(size=(n, m)), C=rng.normal(size=(p, n)), sample_time=sample_time)


def _matched_distance(a, b):
    """Largest distance after optimal one-to-one pairing (scipy's assignment solver as the matcher)."""
    cost = np.abs(np.asarray(a)[:, None] - np.asarray(b)[None, :])
    rows, cols = scipy.optimize.linear_sum_assignment(cost)
    return float(np.max(cost[rows, cols]))


# -- separation ----------------------------------------------------------------------------------


def _textbook_loop(plant, K, L, form):
    """The 2n closed loop written from the textbook update equations (Franklin, Powell & Workman ch. 8, from memory)."""
    A, B, C = plant.A, plant.B, plant.C
    K, L = np.asarray(K), np.asarray(L)
    if form in ("full-order", "prediction"):
        # x⁺ = Ax − BKx̂, x̂⁺ = LCx + (A − BK − LC)x̂
        return np.block([[A, -B @ K], [L @ C, A - B @ K - L @ C]])
    # current: x̄⁺ = A x̂ + Bu, x̂ = x̄ + L(Cx − Cx̄), u = −K x̂
    n = A.shape[0]
    corrected = np.eye(n) - L @ C
    top = np.hstack([A - B @ K @ L @ C, -B @ K @ corrected])
    bottom = np.hstack([(A - B @ K) @ L @ C, (A - B @ K) @ corrected])
    return np.vstack([top, bottom])


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 5), m=st.integers(1, 2), p=st.integers(1, 2),
       form=st.sampled_from(["full-order", "prediction", "current"]))
def test_compensator_loop_poles_are_controller_poles_and_estimator_poles(seed, n, m, p, form):
    rng = np.random.default_rng(seed)
    m, p = min(m, n), min(p, n)
    sample_time = None if form == "full-order" else 0.1
    plant = _random_plant(rng, n, m, p, sample_time)
    if sample_time is None:
        controller_targets = -rng.uniform(0.5, 3.0, size=n)
        estimator_targets = -rng.uniform(3.0, 8.0, size=n)
    else:
        controller_targets = rng.uniform(-0.6, 0.6, size=n)
        estimator_targets = rng.uniform(-0.3, 0.3, size=n)
    K = assign_poles(plant, controller_targets).gain
    L = assign_estimator_poles(plant, estimator_targets, form=form).gain
    loop = compensator_closed_loop(plant, observer_based_compensator(plant, K, L, form=form))
    # Case 22 (separation, Luenberger 1964): the 2n poles are eig(A − BK) ∪ eig(error matrix) — tested here with
    # numpy's eigvals of the textbook interconnection, independently of the compensator's own assembly.
    textbook = np.linalg.eigvals(_textbook_loop(plant, K, L, form))
    union = np.concatenate([np.linalg.eigvals(plant.A - plant.B @ K), loop.estimator_poles])
    # first-order perturbation bound: a pole moves by (its condition number) × ‖perturbation‖ (Wilkinson)
    scale = np.linalg.norm(_textbook_loop(plant, K, L, form), 2) * max(1.0, np.max(loop.report.pole_condition_numbers))
    assert _matched_distance(textbook, loop.report.poles) <= 1e-10 * scale
    assert _matched_distance(union, loop.report.poles) <= 1e-10 * scale
    assert loop.separation_holds


@settings(max_examples=20, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 5), sampled=st.booleans())
def test_reduced_order_compensator_loop_has_controller_poles_and_the_reduced_estimator_poles(seed, n, sampled):
    rng = np.random.default_rng(seed)
    plant = _random_plant(rng, n, 1, 1, 0.1 if sampled else None)
    controller_targets = rng.uniform(-0.5, 0.5, size=n) if sampled else -rng.uniform(0.5, 3.0, size=n)
    estimator_targets = rng.uniform(-0.3, 0.3, size=n - 1) if sampled else -rng.uniform(3.0, 8.0, size=n - 1)
    K = assign_poles(plant, controller_targets).gain
    result = assign_estimator_poles(plant, estimator_targets, form="reduced-order")
    loop = compensator_closed_loop(plant, observer_based_compensator(plant, K, result.gain, form="reduced-order"))
    # Separation for Luenberger's minimal-order observer (Luenberger 1971): n + (n − 1) poles.
    assert loop.report.poles.size == 2 * n - 1
    union = np.concatenate([np.linalg.eigvals(plant.A - plant.B @ K), result.error_poles])
    assert _matched_distance(union, loop.report.poles) <= 1e-6 * np.linalg.norm(loop.matrix, 2)
    assert loop.separation_holds


def test_integral_action_adds_integrator_poles_to_the_separated_sets():
    # Plant with integral action: the state feedback part is eig of the extended A − B[K Ki]
    # (gainboard.core.augment_with_integral_action), the rest the estimator poles (separation).
    extended_targets = [-1.0, -2.0, -3.0]
    from gainboard.core import augment_with_integral_action

    extended = augment_with_integral_action(DOUBLE_INTEGRATOR)
    gain = assign_poles(extended, extended_targets).gain
    K, Ki = gain[:, :2], gain[:, 2:]
    compensator = observer_based_compensator(DOUBLE_INTEGRATOR, K, L_DI, integral_gain=Ki)
    loop = compensator_closed_loop(DOUBLE_INTEGRATOR, compensator)
    assert compensator.state_count == 3 and compensator.state_names[-1] == "∫ error of y1"
    np.testing.assert_allclose(np.sort(loop.report.poles.real), [-4, -3, -3, -2, -1], atol=1e-6)
    assert loop.separation_holds


# -- margins: hand derivations, Doyle 1978, frequency sweeps ------------------------------------


def test_compensator_gain_margin_of_the_double_integrator_matches_routh_hurwitz():
    # Compensator (A − BK − LC, L, K): K(s) = (50s + 24)/(s² + 10s + 35), G = 1/s² (derived by hand).
    # With loop factor α: s⁴ + 10s³ + 35s² + 50αs + 24α; Routh: stable iff 0 < α < 1510/250 = 6.04.
    margins = compensator_margins(DOUBLE_INTEGRATOR, observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, L_DI))
    assert margins.gain_margin_increase == pytest.approx(6.04, rel=1e-10)
    assert margins.gain_margin_decrease == pytest.approx(0.0, abs=1e-12)
    # Full-state feedback with the same K: L(s) = (3s + 2)/s², never real negative for ω > 0: infinite margin.
    assert loop_margins(DOUBLE_INTEGRATOR, K_DI).gain_margin_increase == math.inf


def _doyle_design(weight):
    # Doyle (1978): ẋ = [[1, 1], [0, 1]]x + [0, 1]ᵀu + [1, 1]ᵀw, y = [1, 0]x + v; Q = q·[1,1]ᵀ[1,1], R = 1;
    # W = σ·[1,1]ᵀ[1,1], V = 1 (from memory). Here q = σ = weight.
    plant = Plant(A=[[1.0, 1.0], [0.0, 1.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    K = design_lqr(plant, Q=weight * np.ones((2, 2)), R=[[1.0]]).gain
    L = design_kalman_estimator(plant, weight * np.ones((2, 2)), [[1.0]]).gain
    return plant, K, L


def test_doyle_lqg_gain_margin_shrinks_to_zero_db_while_full_state_feedback_keeps_its_guarantee():
    previous = math.inf
    for weight in (1.0, 100.0, 1e4):
        plant, K, L = _doyle_design(weight)
        # Doyle (1978): K = f·[1, 1] and L = d·[1, 1]ᵀ with f = d = 2 + √(4 + weight) (from memory).
        f = 2.0 + math.sqrt(4.0 + weight)
        np.testing.assert_allclose(K, [[f, f]], rtol=1e-9)
        np.testing.assert_allclose(L, [[f], [f]], rtol=1e-9)
        both = evaluate_observer_design(plant, K, L)
        full, lqg = both.design.margins, both.compensator.margins
        # Case 18 (Safonov & Athans 1977): full-state LQR keeps gain margin [1/2, ∞) and phase margin ≥ 60°.
        assert full.gain_margin_increase == math.inf and full.gain_margin_decrease <= 0.5
        assert full.phase_margin_deg >= 60.0
        # Doyle (1978): the closed-loop constant term 1 + (1 − m)fd turns negative for a plant-input factor
        # m > 1 + 1/(fd), so the upward gain margin of the LQG loop is exactly 1 + 1/(fd) (from memory).
        assert lqg.gain_margin_increase == pytest.approx(1.0 + 1.0 / (f * f), rel=1e-8)
        assert lqg.gain_margin_db_min < previous
        previous = lqg.gain_margin_db_min
        assert both.compensator.margin_comparison.much_smaller
    assert previous < 0.01  # dB: "there are none"


def test_doyle_lower_gain_margin_is_where_the_textbook_loop_reaches_the_imaginary_axis():
    plant, K, L = _doyle_design(100.0)
    margins = compensator_margins(plant, observer_based_compensator(plant, K, L))
    A, B, C = plant.A, plant.B, plant.C

    def loop_with_factor(m):  # the plant input scaled by m, the estimator still using the command
        return np.block([[A, -m * B @ K], [L @ C, A - B @ K - L @ C]])

    low = margins.gain_margin_decrease
    assert np.max(np.linalg.eigvals(loop_with_factor(low)).real) == pytest.approx(0.0, abs=1e-7)
    assert np.max(np.linalg.eigvals(loop_with_factor(low * 1.001)).real) < 0
    assert np.max(np.linalg.eigvals(loop_with_factor(low * 0.999)).real) > 0


def _sweep_loop(plant, K, L, omega, form="full-order"):
    """L(jω) = K_c(jω) G(jω) from the transfer-function definition at every frequency (batched solves)."""
    A, B, C = plant.A, plant.B, plant.C
    K, L = np.asarray(K), np.asarray(L)
    n = A.shape[0]
    points = 1j * omega if plant.sample_time is None else np.exp(1j * omega * plant.sample_time)
    shifted = points[:, None, None] * np.eye(n)
    G = C @ np.linalg.solve(shifted - A, np.broadcast_to(B.astype(complex), (points.size, n, 1)))
    if form == "current":
        # u = −K x̂, x̂ = (I − LC) x̄ + L y, x̄⁺ = (A − BK) x̂: K_c(z) = K(I − LC)(zI − F)⁻¹(A − BK)L + KL
        F = (A - B @ K) @ (np.eye(n) - L @ C)
        right = np.broadcast_to(((A - B @ K) @ L).astype(complex), (points.size, n, L.shape[1]))
        compensator = K @ (np.eye(n) - L @ C) @ np.linalg.solve(shifted - F, right) + K @ L
    else:
        right = np.broadcast_to(L.astype(complex), (points.size, n, L.shape[1]))
        compensator = K @ np.linalg.solve(shifted - (A - B @ K - L @ C), right)
    return (compensator @ G)[:, 0, 0]


def _sweep_margins(plant, K, L, form="full-order"):
    upper = 1e3 if plant.sample_time is None else math.pi / plant.sample_time
    omega = np.geomspace(1e-3, upper, 400_001) if plant.sample_time is None else np.linspace(1e-4, upper, 400_001)
    values = _sweep_loop(plant, K, L, omega, form)
    sign = np.sign(values.imag)
    phase_crossings = np.flatnonzero(sign[:-1] * sign[1:] < 0)
    factors = [-1.0 / values[i].real for i in phase_crossings if values[i].real < 0]
    at_zero = _sweep_loop(plant, K, L, np.zeros(1), form)[0]  # L is real at ω = 0: a crossing there counts too
    if at_zero.real < 0:
        factors.append(-1.0 / at_zero.real)
    magnitude = np.abs(values)
    unit = np.flatnonzero((magnitude[:-1] - 1) * (magnitude[1:] - 1) < 0)
    phases = [abs(180.0 - abs(math.degrees(np.angle(values[i])))) for i in unit]
    disk = float(np.min(np.abs(1.0 + values)))  # SISO: 1/‖S‖∞ = min |1 + L|
    return factors, phases, disk


def test_compensator_margins_agree_with_an_independent_frequency_sweep_continuous():
    plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]],
                  C=[[1.0, 0.0, 0.0]])
    K = assign_poles(plant, [-2 + 4j, -2 - 4j, -10.0]).gain  # case 1's K = [199, 55, 8]
    L = assign_estimator_poles(plant, [-8.0, -9.0, -12.0]).gain
    margins = compensator_margins(plant, observer_based_compensator(plant, K, L))
    factors, phases, disk = _sweep_margins(plant, K, L)
    above = min(f for f in factors if f > 1)
    assert margins.gain_margin_increase == pytest.approx(above, rel=1e-3)
    assert margins.phase_margin_deg == pytest.approx(min(phases), abs=0.05)
    assert margins.disk_margin == pytest.approx(disk, rel=1e-3)


@pytest.mark.parametrize("form", ["prediction", "current"])
def test_compensator_margins_agree_with_an_independent_frequency_sweep_sampled(form):
    continuous = Plant(A=[[0.0, 1.0], [2.0, -1.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    plant = discretize_zero_order_hold(continuous, 0.05)
    K = assign_poles(plant, np.exp(np.array([-3 + 2j, -3 - 2j]) * 0.05)).gain
    L = assign_estimator_poles(plant, np.exp(np.array([-12.0, -14.0]) * 0.05), form=form).gain
    margins = compensator_margins(plant, observer_based_compensator(plant, K, L, form=form))
    factors, phases, disk = _sweep_margins(plant, K, L, form)
    assert margins.gain_margin_increase == pytest.approx(min(f for f in factors if f > 1), rel=1e-3)
    assert margins.gain_margin_decrease == pytest.approx(max(f for f in factors if f < 1), rel=1e-3)
    assert margins.phase_margin_deg == pytest.approx(min(phases), abs=0.05)
    assert margins.disk_margin == pytest.approx(disk, rel=1e-3)


def test_multi_input_compensator_disk_margin_agrees_with_a_singular_value_sweep(rng):
    plant = _random_plant(rng, 4, 2, 2)
    K = assign_poles(plant, [-1.0, -2.0, -3.0, -4.0]).gain
    L = assign_estimator_poles(plant, [-6.0, -7.0, -8.0, -9.0]).gain
    margins = compensator_margins(plant, observer_based_compensator(plant, K, L))
    A, B, C = plant.A, plant.B, plant.C
    peak = 0.0
    for w in np.geomspace(1e-3, 1e3, 60_001):
        s = 1j * w
        G = C @ np.linalg.solve(s * np.eye(4) - A, B)
        Kc = K @ np.linalg.solve(s * np.eye(4) - (A - B @ K - L @ C), L)
        sensitivity = np.linalg.inv(np.eye(2) + Kc @ G)  # input sensitivity (I + L)⁻¹, definition
        peak = max(peak, np.linalg.svd(sensitivity, compute_uv=False)[0])
    assert margins.disk_margin == pytest.approx(min(1.0 / peak, 1.0), rel=2e-3)
    assert len(margins.loop_at_a_time) == 2


def test_margin_comparison_flags_only_much_smaller_margins():
    full = loop_margins(DOUBLE_INTEGRATOR, K_DI)
    assert not compare_margins(full, full).much_smaller  # the same margins: nothing shrank
    fast = assign_estimator_poles(DOUBLE_INTEGRATOR, [-40.0, -41.0]).gain  # a fast estimator hurts less
    fast_margins = compensator_margins(DOUBLE_INTEGRATOR, observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, fast))
    slow_margins = compensator_margins(DOUBLE_INTEGRATOR, observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, L_DI))
    assert fast_margins.disk_margin > slow_margins.disk_margin
    verdict = compare_margins(full, slow_margins)
    assert verdict.much_smaller and verdict.warning.startswith("Warning: with the estimator")


def test_current_estimator_on_a_plant_with_feedthrough_refuses_margins_with_a_reason():
    plant = Plant(A=[[0.5]], B=[[1.0]], C=[[1.0]], D=[[0.2]], sample_time=0.1)
    with pytest.raises(EstimatorError, match="current estimator needs D = 0"):
        observer_based_compensator(plant, [[0.3]], [[0.2]], form="current")
    # the prediction estimator handles D: it subtracts D u from y (compensator has no feedthrough)
    compensator = observer_based_compensator(plant, [[0.3]], [[0.2]], form="prediction")
    assert np.all(compensator.D_measured == 0)
    assert compensator_margins(plant, compensator).stable_nominal


# -- responses -------------------------------------------------------------------------------------


def test_estimation_error_of_the_initial_response_is_the_matrix_exponential_of_the_error_dynamics():
    compensator = observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, L_DI)
    responses = simulate_compensator_responses(DOUBLE_INTEGRATOR, compensator, initial_estimate=[0.0, 0.5])
    error = responses.initial.estimation_errors
    e0 = np.array([1.0, -0.5])
    closed = DOUBLE_INTEGRATOR.A - np.asarray(L_DI) @ DOUBLE_INTEGRATOR.C
    # e' = (A − LC)e, e(t) = expm((A − LC)t) e0 (scipy's expm as the reference)
    for k in (0, 10, len(error) // 2, len(error) - 1):
        expected = scipy.linalg.expm(closed * responses.initial.time[k]) @ e0
        np.testing.assert_allclose(error[k], expected, atol=1e-10)
    np.testing.assert_allclose(responses.initial.true_states - responses.initial.estimates, error, atol=0)


def test_reference_step_through_the_estimator_equals_full_state_feedback_step():
    # The reference enters as a commanded input the estimator sees, so the error stays 0 and the step is that of
    # full-state feedback (common textbook result, e.g. Franklin, Powell & Emami-Naeini sec. 7.9, from memory).
    responses = simulate_compensator_responses(DOUBLE_INTEGRATOR, observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, L_DI))
    full = simulate_responses(DOUBLE_INTEGRATOR, K_DI, horizon=float(responses.loop_set.horizon),
                              time_step=float(responses.loop_set.time_step))
    np.testing.assert_allclose(responses.step.loop.outputs, full.step.outputs, atol=1e-10)
    np.testing.assert_allclose(responses.step.estimation_errors, 0.0, atol=1e-10)
    disturbance_error = np.max(np.abs(responses.disturbance.estimation_errors))
    assert disturbance_error > 1e-3  # the estimator does not know the disturbance


def test_saturated_loop_feeds_the_estimator_the_applied_input():
    plant = DOUBLE_INTEGRATOR.with_changes(input_limits=((-0.5, 0.5),))
    responses = simulate_compensator_responses(plant, observer_based_compensator(plant, K_DI, L_DI),
                                               initial_estimate=[1.0, 0.0])
    # With the estimate right from the start and the applied input fed back, the estimate stays exact
    # even while the actuator is clipped (the error dynamics do not see u; derived from e' = (A − LC)e).
    assert np.max(np.abs(responses.initial.loop.saturated_inputs)) == pytest.approx(0.5)
    np.testing.assert_allclose(responses.initial.saturated_estimation_errors, 0.0, atol=1e-10)


def test_compensator_responses_refuse_a_bad_initial_estimate():
    compensator = observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, L_DI)
    with pytest.raises(Exception, match="the initial estimate must be 2 finite numbers"):
        simulate_compensator_responses(DOUBLE_INTEGRATOR, compensator, initial_estimate=[1.0])


def test_compensator_refuses_gains_of_the_wrong_shape():
    with pytest.raises(GainError, match="K is 1×3 but must be 1×2"):
        observer_based_compensator(DOUBLE_INTEGRATOR, [[1.0, 2.0, 3.0]], L_DI)
    with pytest.raises(EstimatorError, match="L is 1×2 but must be 2×1"):
        observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, [[1.0, 2.0]])
    with pytest.raises(GainError, match="prefilter N is 1×2 but must be 1×1"):
        observer_based_compensator(DOUBLE_INTEGRATOR, K_DI, L_DI, prefilter=[[1.0, 2.0]])


# -- the one evaluation call ----------------------------------------------------------------------


def test_evaluation_gives_every_view_its_numbers_and_a_plain_warning():
    result = evaluate_compensator(DOUBLE_INTEGRATOR, K_DI, L_DI, EstimatorOptions(selected_entry=(1, 0)))
    assert result.form == "full-order" and result.closed_loop.report.stable
    assert sorted(result.entry_intervals) == [(0, 0), (1, 0)]
    # s² + l1 s + l2: stable iff l1 > 0, l2 > 0 (Routh–Hurwitz, quadratic)
    assert result.entry_intervals[(1, 0)].intervals[0][0] == pytest.approx(0.0, abs=1e-9)
    assert result.selected_locus.entry == (1, 0)
    assert any(message.startswith("Warning: with the estimator") for message in result.messages)
    unstable = evaluate_compensator(DOUBLE_INTEGRATOR, K_DI, [[-1.0], [1.0]])
    assert any("estimation error does not die out" in message for message in unstable.messages)
    assert unstable.margins is not None and not unstable.margins.stable_nominal
