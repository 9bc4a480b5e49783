"""Time responses, actuator effort and saturation, checked against outside references.

References used (see /work/shared/reference-cases.md for the numbered cases):
textbook formulas and worked examples, closed-form solutions derived by hand (said so),
and scipy (signal.lsim, signal.dlsim, signal.cont2discrete, integrate.solve_ivp,
integrate.quad_vec, linalg.expm, linalg.pinv) and sympy as reference libraries.
"""

import math

import numpy as np
import pytest
import scipy.integrate
import scipy.linalg
import scipy.signal
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import AnalysisError, GainError, Plant
from gainboard.core._propagation import (
    SwitchingLoop,
    augmented_step,
    integral_of_quadratic,
    matrix_exponential,
    propagate_affine,
    step_energies,
    transition_matrices,
)
from gainboard.core._responses import reference_prefilter, simulate_responses

DOUBLE_INTEGRATOR = dict(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
# Case 1 of reference-cases.md: companion plant, K = [199, 55, 8] puts the poles at −2±4j, −10.
CASE1_A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]]
CASE1_B = [[0.0], [0.0], [1.0]]
CASE1_K = [[199.0, 55.0, 8.0]]


def second_order_loop(zeta, natural_frequency, **extra):
    """Double integrator with K = [ωn², 2ζωn]: closed loop s² + 2ζωn s + ωn² (standard form)."""
    plant = Plant(**DOUBLE_INTEGRATOR, C=[[1.0, 0.0]], **extra)
    return plant, [[natural_frequency**2, 2.0 * zeta * natural_frequency]]


def relative_error(found, expected):
    return np.max(np.abs(np.asarray(found) - np.asarray(expected))) / np.max(np.abs(expected))


# -- matrix exponential and zero-order-hold transition matrices ----------------------------------
@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 12), log_size=st.floats(-4.0, 2.0),
       triangular=st.booleans())
def test_matrix_exponential_matches_scipy_expm(seed, n, log_size, triangular):
    rng = np.random.default_rng(seed)
    M = rng.normal(size=(n, n)) * 10.0**log_size / math.sqrt(n)
    if triangular:  # strongly non-normal
        M = np.triu(M) - 2.0 * np.abs(np.diag(np.diag(M)))
    # Reference: scipy.linalg.expm (same Higham 2005 scaling-and-squaring family)
    reference = scipy.linalg.expm(M)
    assert relative_error(matrix_exponential(M), reference) < 1e-11


def test_matrix_exponential_of_a_stiff_decay_is_accurate():
    M = np.array([[-1000.0, 1.0], [0.0, -0.01]]) * 2.0
    # closed form of exp([[a, b], [0, d]]) = [[e^a, b(e^a − e^d)/(a − d)], [0, e^d]] (derived by hand)
    a, b, d = -2000.0, 2.0, -0.02
    expected = np.array([[math.exp(a), b * (math.exp(a) - math.exp(d)) / (a - d)], [0.0, math.exp(d)]])
    np.testing.assert_allclose(matrix_exponential(M), expected, rtol=1e-12, atol=1e-300)


# -- zero-order-hold transition matrices ------------------------------------------------------
@pytest.mark.parametrize("T", [0.1, 0.37, 2.0])
def test_zero_order_hold_of_double_integrator_is_exact(T):
    Phi, Gamma = transition_matrices(DOUBLE_INTEGRATOR["A"], DOUBLE_INTEGRATOR["B"], T)
    # Case 9: Φ = [[1, T], [0, 1]], Γ = [T²/2, T] (Franklin, Powell & Workman, Digital Control, ch. 4, from memory)
    np.testing.assert_allclose(Phi, [[1.0, T], [0.0, 1.0]], rtol=1e-14, atol=1e-15)
    np.testing.assert_allclose(Gamma.ravel(), [T**2 / 2.0, T], rtol=1e-14)


def test_zero_order_hold_of_first_order_lag_is_exact():
    a, T = 2.0, 0.1
    Phi, Gamma = transition_matrices([[-a]], [[1.0]], T)
    # Case 10: Φ = e^{−aT} = 0.8187308 for a = 2, T = 0.1; Γ = (1 − e^{−aT})/a (reference-cases.md)
    assert Phi[0, 0] == pytest.approx(0.8187308, abs=5e-8)
    assert Phi[0, 0] == pytest.approx(math.exp(-a * T), rel=1e-14)
    assert Gamma[0, 0] == pytest.approx((1.0 - math.exp(-a * T)) / a, rel=1e-13)


def test_zero_order_hold_matches_scipy_test_case():
    Phi, Gamma = transition_matrices(np.eye(2), [[0.5], [0.5]], 0.5)
    # Case 11: scipy's test_cont2discrete.py (test_zoh): Ad = 1.648721270700128·I, Bd = 0.324360635350064
    np.testing.assert_allclose(Phi, 1.648721270700128 * np.eye(2), rtol=1e-14)
    np.testing.assert_allclose(Gamma.ravel(), [0.324360635350064] * 2, rtol=1e-14)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 5), m=st.integers(1, 3), T=st.floats(0.01, 3.0))
def test_zero_order_hold_matches_scipy_cont2discrete(seed, n, m, T):
    rng = np.random.default_rng(seed)
    A, B = rng.normal(size=(n, n)), rng.normal(size=(n, m))
    Phi, Gamma = transition_matrices(A, B, T)
    # Reference: scipy.signal.cont2discrete with method="zoh"
    Ad, Bd, *_ = scipy.signal.cont2discrete((A, B, np.eye(n), np.zeros((n, m))), T, method="zoh")
    np.testing.assert_allclose(Phi, Ad, rtol=1e-10, atol=1e-12 * np.max(np.abs(Ad)))
    np.testing.assert_allclose(Gamma, Bd, rtol=1e-10, atol=1e-12 * np.max(np.abs(Bd)))


# -- reference prefilter --------------------------------------------------------------------------
@pytest.mark.parametrize("omega", [0.5, 1.0, 3.0])
def test_prefilter_of_pendulum_like_plant_is_four_omega_squared(omega):
    plant = Plant(A=[[0.0, 1.0], [-(omega**2), 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    K = [[3.0 * omega**2, 4.0 * omega]]
    # Case 3: N = 4ω0² (Franklin, Powell & Emami-Naeini, sec. 7.5, from memory)
    assert reference_prefilter(plant, K)[0, 0] == pytest.approx(4.0 * omega**2, rel=1e-12)


def test_prefilter_of_third_order_companion_plant_is_200():
    plant = Plant(A=CASE1_A, B=CASE1_B, C=[[1.0, 0.0, 0.0]])
    # Case 3: with case 1's K = [199, 55, 8], N = 200 (Franklin, Powell & Emami-Naeini, sec. 7.5, from memory)
    assert reference_prefilter(plant, CASE1_K)[0, 0] == pytest.approx(200.0, rel=1e-12)
    result = simulate_responses(plant, CASE1_K)
    assert result.prefilter[0, 0] == pytest.approx(200.0, rel=1e-12)
    metrics = result.step.output_metrics[0]
    # zero steady-state error is what N is for (same reference); the last sample has settled too
    assert metrics.final_value == pytest.approx(1.0, rel=1e-12)
    assert result.step.outputs[-1, 0] == pytest.approx(1.0, abs=0.02)


def test_prefilter_of_sampled_plant_uses_the_steady_state_at_z_equal_one():
    G = [[0.0, 1.0], [-0.16, -1.0]]
    plant = Plant(A=G, B=[[0.0], [1.0]], C=[[1.0, 0.0]], sample_time=1.0)
    K = [[0.34, -2.0]]  # case 13 (Ogata, Discrete-Time Control Systems, ch. 6, from memory): poles 0.5 ± 0.5j
    # Reference: sympy, exact N = 1 / (C (I − G + HK)⁻¹ H)
    Gs, H, Ks, Cs = sympy.Matrix(G).applyfunc(sympy.nsimplify), sympy.Matrix([0, 1]), sympy.Matrix(
        [[sympy.Rational(34, 100), -2]]), sympy.Matrix([[1, 0]])
    exact = 1 / (Cs * (sympy.eye(2) - Gs + H * Ks).inv() * H)[0, 0]
    assert reference_prefilter(plant, K)[0, 0] == pytest.approx(float(exact), rel=1e-12)


def test_prefilter_with_fewer_tracked_outputs_than_inputs_is_the_minimum_norm_solution(rng):
    A = rng.normal(size=(3, 3))
    B = rng.normal(size=(3, 2))
    K = scipy.signal.place_poles(A, B, [-1.0, -2.0, -3.0]).gain_matrix
    plant = Plant(A=A, B=B, tracked_outputs=(1,))
    N = reference_prefilter(plant, K)
    # Reference: the steady-state gain M = −C_t (A−BK)⁻¹ B and its pseudo-inverse from scipy.linalg.pinv
    M = -(plant.C[[1]] @ np.linalg.solve(A - B @ K, B))
    np.testing.assert_allclose(N, scipy.linalg.pinv(M), rtol=1e-10)
    np.testing.assert_allclose(M @ N, [[1.0]], rtol=1e-12)


def test_prefilter_accounts_for_feedthrough():
    # ẋ = −x + u, y = x + 0.5u, u = −2x + N r. Steady state x = N r/3, y = N r (1/3 − 1 + 0.5)... derived by hand:
    # y = (C − DK) x + D N r = (1 − 0.5·2)(N r/3) + 0.5 N r = 0.5 N r  ⇒  N = 2.
    plant = Plant(A=[[-1.0]], B=[[1.0]], C=[[1.0]], D=[[0.5]])
    assert reference_prefilter(plant, [[2.0]])[0, 0] == pytest.approx(2.0, rel=1e-12)


def test_singular_steady_state_gain_is_refused_with_a_message():
    # Velocity output of a double integrator: the closed loop r → velocity is s/(s²+2s+1), zero DC gain
    # (final-value theorem, Ogata sec. 5-8, from memory)
    plant = Plant(**DOUBLE_INTEGRATOR, C=[[0.0, 1.0]])
    with pytest.raises(AnalysisError, match=r"steady-state gain .* y1 is singular.*zero at s = 0"):
        reference_prefilter(plant, [[1.0, 2.0]])
    result = simulate_responses(plant, [[1.0, 2.0]])
    assert result.step is None and result.prefilter is None
    assert "singular" in result.step_unavailable_reason
    assert result.initial is not None and result.disturbance is not None


def test_singular_steady_state_gain_of_sampled_plant_is_refused():
    sampled = Plant(A=[[1.0, 0.1], [0.0, 1.0]], B=[[0.005], [0.1]], C=[[0.0, 1.0]], sample_time=0.1)
    # ZOH double integrator (case 9) with a velocity output: zero gain at z = 1 (same reasoning as above)
    with pytest.raises(AnalysisError, match=r"singular.*z = 1"):
        reference_prefilter(sampled, [[10.0, 4.0]])


def test_closed_loop_pole_at_origin_is_refused_for_a_reference_step():
    plant = Plant(**DOUBLE_INTEGRATOR, C=[[1.0, 0.0]])
    # K = [0, 1] leaves s² + s = s(s+1): a pole at s = 0 (derived by hand)
    with pytest.raises(AnalysisError, match=r"pole at s = 0"):
        reference_prefilter(plant, [[0.0, 1.0]])


def test_prefilter_refuses_a_gain_of_the_wrong_shape():
    plant = Plant(**DOUBLE_INTEGRATOR)
    with pytest.raises(GainError, match=r"must be 1×2"):
        reference_prefilter(plant, [[1.0, 2.0, 3.0]])


# -- exact second-order metrics ----------------------------------------------------------------------
# Case 20 (Ogata sec. 5-3; Nise sec. 4.6): exact values for the standard second-order step.
CASE20 = [
    # ζ, ωn, peak time, overshoot %, rise 10–90 %, 2 % settling
    (0.5, 1.0, 3.6276, 16.303, 1.6376, 8.0764),
    (0.75, 10.0, 0.47496, 2.838, 0.22875, 0.57426),
]


@pytest.mark.parametrize("zeta, wn, peak_time, overshoot, rise, settling", CASE20)
def test_step_metrics_equal_exact_second_order_values(zeta, wn, peak_time, overshoot, rise, settling):
    plant, K = second_order_loop(zeta, wn)
    metrics = simulate_responses(plant, K).step.output_metrics[0]
    # Case 20 values, quoted to 5 significant digits (reference-cases.md)
    assert metrics.peak_time == pytest.approx(peak_time, rel=2e-5)
    assert metrics.overshoot_percent == pytest.approx(overshoot, rel=2e-4)
    assert metrics.rise_time == pytest.approx(rise, rel=3e-5)
    assert metrics.settling_time == pytest.approx(settling, rel=2e-5)
    # Exact formulas tp = π/(ωn√(1−ζ²)), overshoot = e^{−πζ/√(1−ζ²)} (Ogata sec. 5-3)
    assert metrics.peak_time == pytest.approx(math.pi / (wn * math.sqrt(1 - zeta**2)), rel=1e-7)
    assert metrics.overshoot_percent == pytest.approx(100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2)), rel=1e-7)
    assert metrics.peak_value == pytest.approx(1 + math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2)), rel=1e-9)
    assert metrics.steady_state_error == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("zeta, wn, peak_time, overshoot, rise, settling", CASE20)
def test_regulation_metrics_mirror_the_step_metrics(zeta, wn, peak_time, overshoot, rise, settling):
    plant, K = second_order_loop(zeta, wn)
    metrics = simulate_responses(plant, K, initial_state=[1.0, 0.0]).initial.output_metrics[0]
    # From x0 = (1, 0) the output is 1 − (unit step response) (derived by hand from linearity), so
    # the 90→10 % fall time, undershoot past zero and settling equal case 20's step values.
    assert metrics.rise_time == pytest.approx(rise, rel=3e-5)
    assert metrics.overshoot_percent == pytest.approx(overshoot, rel=2e-4)
    assert metrics.settling_time == pytest.approx(settling, rel=2e-5)
    assert (metrics.start_value, metrics.final_value, metrics.peak_value) == (1.0, 0.0, 1.0)


def test_disturbance_metrics_of_a_second_order_loop():
    zeta, wn = 0.5, 2.0
    plant, K = second_order_loop(zeta, wn, disturbance_step=[3.0])
    metrics = simulate_responses(plant, K).disturbance.output_metrics[0]
    # An input disturbance d gives y = (d/ωn²)·(unit step response) (derived by hand): final d/ωn²,
    # overshoot as in case 20 (Ogata sec. 5-3 formula), peak time π/(ωn√(1−ζ²)).
    assert metrics.final_value == pytest.approx(3.0 / wn**2, rel=1e-12)
    assert metrics.steady_state_error == pytest.approx(-3.0 / wn**2, rel=1e-12)
    assert metrics.overshoot_percent == pytest.approx(100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2)), rel=1e-7)
    assert metrics.peak_time == pytest.approx(math.pi / (wn * math.sqrt(1 - zeta**2)), rel=1e-7)


def test_output_starting_at_rest_uses_its_peak_deviation_and_has_no_overshoot():
    zeta, wn = 0.5, 1.0
    plant, K = second_order_loop(zeta, wn)
    metrics = simulate_responses(plant, K, initial_state=[0.0, 1.0]).initial.output_metrics[0]
    # From x0 = (0, 1): y = e^{−ζωn t} sin(ωd t)/ωd, peak where tan(ωd t) = ωd/(ζωn)
    # (second-order impulse response, Ogata sec. 5-3, from memory)
    wd = wn * math.sqrt(1 - zeta**2)
    t_peak = math.atan2(wd, zeta * wn) / wd
    assert metrics.peak_time == pytest.approx(t_peak, rel=1e-7)
    assert metrics.peak_value == pytest.approx(math.exp(-zeta * wn * t_peak) * math.sin(wd * t_peak) / wd, rel=1e-9)
    assert math.isnan(metrics.rise_time) and "starts and ends" in metrics.reason("rise_time")
    assert math.isnan(metrics.overshoot_percent) and "starts and ends" in metrics.reason("overshoot_percent")
    # Settling band is 2 % of the peak deviation; check the settled value against the exact solution
    peak = metrics.peak_value
    ts = metrics.settling_time
    y = lambda t: math.exp(-zeta * wn * t) * math.sin(wd * t) / wd  # noqa: E731
    assert abs(y(ts)) == pytest.approx(0.02 * peak, rel=1e-6)


def test_output_that_does_not_move_has_undefined_metrics_with_a_reason():
    # Two decoupled integrators; the second state starts at rest and receives nothing (derived by hand)
    plant = Plant(A=np.zeros((2, 2)), B=np.eye(2), initial_state=[1.0, 0.0])
    metrics = simulate_responses(plant, np.eye(2)).initial.output_metrics[1]
    for name in ("rise_time", "settling_time", "overshoot_percent", "peak_value"):
        assert math.isnan(getattr(metrics, name))
        assert metrics.reason(name) == "the output does not move in this response"


def test_sampled_metrics_are_read_at_the_samples():
    plant = Plant(A=[[0.0, 1.0], [-0.16, -1.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]], sample_time=1.0)
    result = simulate_responses(plant, [[0.34, -2.0]])
    step = result.step
    # Reference: scipy.signal.dlsim of the closed loop (G − HK, H N, C, 0); metrics are samples of it
    _, y, _ = scipy.signal.dlsim((plant.A - plant.B @ [[0.34, -2.0]], plant.B * 0.5, plant.C, [[0.0]], 1.0),
                                 np.ones(len(step.time)))
    k = int(np.argmax(y[:, 0]))
    assert step.output_metrics[0].peak_time == step.time[k]
    assert step.output_metrics[0].peak_value == pytest.approx(y[k, 0], rel=1e-12)
    outside = np.flatnonzero(np.abs(y[:, 0] - 1.0) > 0.02)
    assert step.output_metrics[0].settling_time == step.time[outside[-1] + 1]


# -- equality with scipy's simulators --------------------------------------------------------------------
def closed_loop_for_lsim(plant, K, N=None):
    """Closed loop as a state-space system for scipy: inputs r (through N) or none."""
    K = np.asarray(K, dtype=float)
    A = plant.A - plant.B @ K
    C = plant.C - plant.D @ K
    if N is None:
        return A, np.zeros((plant.state_count, 1)), C, np.zeros((plant.output_count, 1))
    return A, plant.B @ N, C, plant.D @ N


def test_initial_and_step_responses_equal_scipy_lsim_and_solve_ivp():
    plant = Plant(A=CASE1_A, B=CASE1_B, C=[[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]], D=[[0.0], [0.3]],
                  initial_state=[0.5, -1.0, 2.0], tracked_outputs=(0,))
    result = simulate_responses(plant, CASE1_K)
    t = result.initial.time
    # Reference: scipy.signal.lsim with zero-order-hold input (exact for a constant input)
    A, B0, C, D0 = closed_loop_for_lsim(plant, CASE1_K)
    _, y, x = scipy.signal.lsim((A, B0, C, D0), np.zeros(len(t)), t, X0=plant.initial_state, interp=False)
    assert relative_error(result.initial.states, x) < 1e-9
    assert relative_error(result.initial.outputs, y) < 1e-9
    # Reference: scipy.integrate.solve_ivp (DOP853, tight tolerances)
    solution = scipy.integrate.solve_ivp(lambda _, z: A @ z, (0, t[-1]), plant.initial_state, t_eval=t,
                                         method="DOP853", rtol=1e-13, atol=1e-15)
    assert relative_error(result.initial.states, solution.y.T) < 1e-9

    N = result.prefilter
    A, BN, C, DN = closed_loop_for_lsim(plant, CASE1_K, N)
    ts = result.step.time
    _, y, x = scipy.signal.lsim((A, BN, C, DN), np.ones(len(ts)), ts, interp=False)
    assert relative_error(result.step.states, x) < 1e-9
    assert relative_error(result.step.outputs, y) < 1e-9
    assert relative_error(result.step.inputs, N[0, 0] - result.step.states @ np.asarray(CASE1_K).T) < 1e-12
    solution = scipy.integrate.solve_ivp(lambda _, z: A @ z + BN[:, 0], (0, ts[-1]), np.zeros(3), t_eval=ts,
                                         method="DOP853", rtol=1e-13, atol=1e-15)
    assert relative_error(result.step.states, solution.y.T) < 1e-9


def test_disturbance_response_equals_scipy_lsim_for_two_inputs():
    A = [[0.0, 1.0, 0.0, 0.0], [-2.0, -0.1, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0], [1.0, 0.0, -3.0, -0.2]]
    B = [[0.0, 0.0], [1.0, 0.0], [0.0, 0.0], [0.0, 1.0]]
    E = [[0.0], [0.5], [0.0], [-1.0]]
    plant = Plant(A=A, B=B, C=[[1.0, 0.0, 0.0, 0.0], [0.0, 0.0, 1.0, 0.0]], disturbance_matrix=E,
                  disturbance_step=[2.0])
    K = scipy.signal.place_poles(plant.A, plant.B, [-1.0, -1.5, -2.0 + 1.0j, -2.0 - 1.0j]).gain_matrix
    result = simulate_responses(plant, K)
    t = result.disturbance.time
    # Reference: scipy.signal.lsim of (A − BK, E, C, 0) with a constant input of 2
    _, y, x = scipy.signal.lsim((plant.A - plant.B @ K, plant.disturbance_matrix, plant.C, np.zeros((2, 1))),
                                2.0 * np.ones(len(t)), t, interp=False)
    assert relative_error(result.disturbance.states, x) < 1e-9
    assert relative_error(result.disturbance.outputs, y) < 1e-9


def test_sampled_responses_equal_scipy_dlsim():
    plant = Plant(A=[[1.0, 0.1], [0.0, 1.0]], B=[[0.005], [0.1]], C=[[1.0, 0.0]], sample_time=0.1,
                  initial_state=[1.0, -0.5])
    K = [[20.0, 6.0]]
    result = simulate_responses(plant, K)
    steps = len(result.initial.time)
    assert result.time_step == 0.1
    # Reference: scipy.signal.dlsim of the sampled closed loop
    Acl = plant.A - plant.B @ K
    _, y, x = scipy.signal.dlsim((Acl, np.zeros((2, 1)), plant.C, [[0.0]], 0.1), np.zeros(steps),
                                 x0=plant.initial_state)
    assert relative_error(result.initial.states, x) < 1e-9
    N = result.prefilter
    _, y, x = scipy.signal.dlsim((Acl, plant.B @ N, plant.C, [[0.0]], 0.1), np.ones(len(result.step.time)))
    assert relative_error(result.step.outputs, y) < 1e-9
    # input energy of a sampled loop: T Σ u[k]² over the held samples (definition, common practice, no source)
    u = result.step.inputs[:, 0]
    assert result.step.input_metrics[0].energy == pytest.approx(0.1 * np.sum(u[:-1] ** 2), rel=1e-12)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 5), m=st.integers(1, 2))
def test_initial_response_of_random_stable_loops_equals_scipy_lsim(seed, n, m):
    rng = np.random.default_rng(seed)
    A, B = rng.normal(size=(n, n)), rng.normal(size=(n, m))
    poles = -np.sort(rng.uniform(0.3, 5.0, size=n))
    poles = poles + 1e-3 * np.arange(n)  # distinct for place_poles
    K = scipy.signal.place_poles(A, B, poles).gain_matrix
    x0 = rng.normal(size=n)
    result = simulate_responses(Plant(A=A, B=B), K, initial_state=x0)
    t = result.initial.time
    # Reference: scipy.signal.lsim of the closed loop from x0
    _, _, x = scipy.signal.lsim((A - B @ K, np.zeros((n, 1)), np.eye(n), np.zeros((n, 1))), np.zeros(len(t)), t,
                                X0=x0, interp=False)
    x = x.reshape(len(t), n)
    # Both sides compute x_N = Φᴺx0 with Φ = e^{Mh} from their own matrix exponential, so they
    # differ by rounding only. Error analysis (derived, Bauer–Fike style): with M = VDV⁻¹ and
    # ‖Φʲ‖ ≤ κ(V) for a stable loop, an error δΦ ≈ eps·(1 + ‖M‖h)·‖Φ‖ in the one-step matrix
    # (scaling and squaring: Higham, SIAM J. Matrix Anal. Appl. 26, 2005, from memory) reaches
    # x_N through Σⱼ Φʲ δΦ Φᴺ⁻¹⁻ʲ x0, at most N·κ(V)²·‖δΦ‖·‖x0‖₂, and the N roundings of the
    # products x ← Φx add less. ‖x0‖₂ ≤ √n·max|x|; 16 covers both computations and the modest
    # constants. place_poles' targets are only 1e-3 apart here, so κ(V) reaches 1e2–1e4: a fixed
    # 1e-9 failed on some examples (1.06e-8 and 2.2e-9 observed) while this bound held with a
    # factor of 400 to spare over 4000 seeded examples.
    closed = A - B @ K
    kappa = np.linalg.cond(np.linalg.eig(closed)[1])
    step = t[1] - t[0]
    tolerance = 16 * len(t) * kappa**2 * np.finfo(float).eps * (1 + np.linalg.norm(closed, 2) * step) * math.sqrt(n)
    assert relative_error(result.initial.states, x) < tolerance


# -- input energy -----------------------------------------------------------------------------------------------
def test_input_energy_of_first_order_loop_is_exact():
    a, k, x0 = 0.5, 1.5, 2.0
    plant = Plant(A=[[-a]], B=[[1.0]], initial_state=[x0])
    result = simulate_responses(plant, [[k]])
    horizon = result.initial.time[-1]
    # ∫₀ᵀ (k x0 e^{−(a+k)t})² dt = k² x0² (1 − e^{−2(a+k)T}) / (2(a+k))  (derived by hand)
    expected = k**2 * x0**2 * (1 - math.exp(-2 * (a + k) * horizon)) / (2 * (a + k))
    assert result.initial.input_metrics[0].energy == pytest.approx(expected, rel=1e-11)
    assert result.initial.input_metrics[0].peak_magnitude == pytest.approx(k * x0, rel=1e-14)


def test_input_energy_of_oscillatory_step_matches_quadrature():
    plant, K = second_order_loop(0.3, 2.0)
    result = simulate_responses(plant, K)
    A = plant.A - plant.B @ np.asarray(K)
    N = result.prefilter[0, 0]
    x_final = -np.linalg.solve(A, plant.B[:, 0] * N)

    def u_squared(t):
        # exact state x(t) = x_f − e^{At} x_f (reference: scipy.linalg.expm)
        x = x_final - scipy.linalg.expm(A * t) @ x_final
        return (N - np.asarray(K)[0] @ x) ** 2

    # Reference: scipy.integrate.quad_vec of u(t)² built from scipy.linalg.expm
    reference, _ = scipy.integrate.quad_vec(u_squared, 0.0, result.step.time[-1], epsabs=1e-13, epsrel=1e-12)
    assert result.step.input_metrics[0].energy == pytest.approx(reference, rel=1e-9)


def test_quadratic_integral_survives_fast_modes_and_long_steps():
    F = np.array([[-400.0, 1.0, 0.0], [0.0, -0.5, 2.0], [0.0, 0.0, 0.0]])
    W = np.array([[1.0, 0.2, 0.1], [0.2, 2.0, -0.3], [0.1, -0.3, 1.5]])
    h = 3.0  # ‖F‖h = 1200: a direct block exponential would overflow e^{1200}
    found = integral_of_quadratic(F, W, h)
    # Reference: scipy.integrate.quad_vec of e^{Fτ} W e^{Fᵀτ} with scipy.linalg.expm
    reference, _ = scipy.integrate.quad_vec(lambda t: scipy.linalg.expm(F * t) @ W @ scipy.linalg.expm(F * t).T,
                                            0.0, h, epsabs=1e-13, epsrel=1e-11, points=[0.01, 0.05])
    np.testing.assert_allclose(found, reference, rtol=1e-8, atol=1e-11)


def test_step_input_energy_stays_exact_when_a_large_prefilter_nearly_cancels_the_feedback():
    # x' = −x + u, u = −k x + N r with N = 1 + k: u = 1 + k e^{−(1+k)t} settles at 1 while N = 10 001,
    # the regime where summing quadratic forms of the state loses digits (derived by hand).
    k, horizon = 1.0e4, 5.0
    plant = Plant(A=[[-1.0]], B=[[1.0]], C=[[1.0]])
    result = simulate_responses(plant, [[k]], horizon=horizon, time_step=horizon / 1999)
    c, T = 1.0 + k, result.step.time[-1]
    assert result.prefilter[0, 0] == pytest.approx(c, rel=1e-14)
    # ∫₀ᵀ (1 + k e^{−ct})² dt = T + 2k(1 − e^{−cT})/c + k²(1 − e^{−2cT})/(2c)  (derived by hand)
    expected = T + 2 * k * (1 - math.exp(-c * T)) / c + k * k * (1 - math.exp(-2 * c * T)) / (2 * c)
    assert result.step.input_metrics[0].energy == pytest.approx(expected, rel=1e-13)


@pytest.mark.parametrize("speed, time_step", [(0.1, 0.5), (2.0, 0.5), (10.0, 0.5), (400.0, 1.0)])
def test_energy_of_one_step_equals_quadrature_of_the_squared_input(rng, speed, time_step):
    # From a slow loop (Taylor series straight away) through non-normal fast ones (the step cut
    # into 2 and 16 pieces) to one far beyond (block-exponential weights); forcings a thousand
    # times the loop's size exercise the rescaled constant states.
    n, r, m = 3, 2, 2
    loop = speed * (np.triu(rng.normal(size=(n, n)), 1) * 3.0 - np.diag([1.0, 2.0, 3.0]))
    forcings = 1e3 * speed * rng.normal(size=(n, r))
    applied = rng.normal(size=(m, n + r))
    points = rng.normal(size=(4, n + r))
    generator = np.zeros((n + r, n + r))
    generator[:n, :n], generator[:n, n:] = loop, forcings

    def u_squared(t):
        inputs = applied @ scipy.linalg.expm(generator * t) @ points.T
        return np.sum(inputs * inputs, axis=1)

    # Reference: scipy.integrate.quad_vec of |u(t)|² with u(t) = G e^{Ft} z built from scipy.linalg.expm
    fast = [time_step * 10.0**-e for e in range(1, 5)]
    reference, _ = scipy.integrate.quad_vec(u_squared, 0.0, time_step, epsabs=0.0, epsrel=1e-13, points=fast)
    np.testing.assert_allclose(step_energies(loop, forcings, applied, time_step, points), reference, rtol=1e-11)


# -- saturation ---------------------------------------------------------------------------------------------------
def test_saturated_integrator_follows_the_exact_clipped_solution():
    k, x0, limit = 2.0, 3.0, 1.0
    plant = Plant(A=[[0.0]], B=[[1.0]], input_limits=((-limit, limit),), initial_state=[x0])
    result = simulate_responses(plant, [[k]], horizon=6.0)
    response = result.initial
    t, h = response.time, result.time_step
    # ẋ = clip(−kx): x = x0 − L t until x = L/k at t1 = (x0 − L/k)/L, then (L/k) e^{−k(t−t1)} (derived by hand).
    t1 = (x0 - limit / k) / limit
    exact = np.where(t < t1, x0 - limit * t, limit / k * np.exp(-k * (t - t1)))
    # Leaving saturation is seen at the next grid point: error at most L k h²/2 (derived by hand)
    assert np.max(np.abs(response.saturated_states[:, 0] - exact)) <= limit * k * h**2 / 2 * 1.01
    assert np.all(np.abs(response.saturated_inputs) <= limit)
    # The linear loop demands u = −k x0 e^{−kt}: beyond −L from t = 0 until t* = ln(k x0/L)/k (derived by hand)
    violation = response.limit_violations[0]
    assert violation.exceeded and violation.first_time == 0.0 and violation.worst_side == "low"
    assert violation.worst_excess == pytest.approx(k * x0 - limit, rel=1e-14)
    assert violation.worst_excess_percent == pytest.approx((k * x0 - limit) / limit * 100, rel=1e-14)
    assert violation.fraction_beyond == pytest.approx(math.log(k * x0 / limit) / k / t[-1], abs=h**2)
    # Saturated effort: L² t1 + L²(1 − e^{−2k(T−t1)})/(2k) (derived by hand), within the switching delay h
    energy = limit**2 * t1 + limit**2 * (1 - math.exp(-2 * k * (t[-1] - t1))) / (2 * k)
    assert response.saturated_input_metrics[0].energy == pytest.approx(energy, abs=limit**2 * h)
    assert response.saturated_input_metrics[0].peak_magnitude == limit


def test_saturated_effort_is_the_exact_integral_over_pinned_and_free_steps():
    k, x0, limit = 2.0, 3.0, 1.0
    plant = Plant(A=[[0.0]], B=[[1.0]], input_limits=((-limit, limit),), initial_state=[x0])
    result = simulate_responses(plant, [[k]], horizon=6.0)
    response, h = result.initial, result.time_step
    x = response.saturated_states[:-1, 0]
    # ẋ = clip(−kx) with the clip decided at each grid point: a pinned step holds u = ∓L, ∫u² = L²h;
    # a free step has u = −k x_j e^{−kτ}, ∫₀ʰ u² dτ = k x_j² (1 − e^{−2kh})/2 (derived by hand)
    pinned = np.abs(k * x) > limit
    per_step = np.where(pinned, limit**2 * h, k * x**2 * (1 - math.exp(-2 * k * h)) / 2)
    assert pinned.any() and not pinned.all()
    assert response.saturated_input_metrics[0].energy == pytest.approx(float(np.sum(per_step)), rel=1e-12)


def test_first_limit_crossing_of_disturbance_response_is_interpolated_exactly():
    a, k, d, limit = 1.0, 3.0, 2.0, 1.0
    plant = Plant(A=[[-a]], B=[[1.0]], input_limits=((-limit, limit),), disturbance_step=[d])
    result = simulate_responses(plant, [[k]])
    violation = result.disturbance.limit_violations[0]
    # x = d(1 − e^{−(a+k)t})/(a+k), u = −kx reaches −L at t* = −ln(1 − L(a+k)/(kd))/(a+k) (derived by hand)
    t_star = -math.log(1 - limit * (a + k) / (k * d)) / (a + k)
    assert violation.first_time == pytest.approx(t_star, rel=1e-7)
    horizon = result.disturbance.time[-1]
    # the demand grows monotonically, so the worst excess is at the end of the horizon (same closed form)
    assert violation.worst_excess == pytest.approx(k * d / (a + k) * (1 - math.exp(-(a + k) * horizon)) - limit,
                                                   rel=1e-12)
    assert violation.fraction_beyond == pytest.approx((horizon - t_star) / horizon, abs=1e-6)
    assert np.all(result.disturbance.saturated_inputs >= -limit)


def test_loose_limits_give_the_linear_response_exactly():
    plant, K = second_order_loop(0.5, 1.0, input_limits=((-100.0, 100.0),))
    result = simulate_responses(plant, K)
    for response in result.responses:
        np.testing.assert_array_equal(response.saturated_states, response.states)
        np.testing.assert_array_equal(response.saturated_inputs, response.inputs)
        assert not any(v.exceeded for v in response.limit_violations)
        assert response.saturated_output_metrics == response.output_metrics


def test_switching_loop_without_saturation_equals_scipy_lsim(rng):
    # The step-by-step clipped loop, never reaching its limits, must reproduce the linear loop.
    A, B = rng.normal(size=(4, 4)), rng.normal(size=(4, 2))
    K = scipy.signal.place_poles(A, B, [-1.0, -2.0, -3.0, -4.0]).gain_matrix
    x0 = rng.normal(size=4)
    h, count = 0.01, 600
    loop = SwitchingLoop(A, B, K, np.zeros(2), np.zeros(4), np.full(2, -1e6), np.full(2, 1e6), h, False)
    states, law, patterns = loop.run(x0, count)
    t = h * np.arange(count)
    # Reference: scipy.signal.lsim of the closed loop
    _, _, x = scipy.signal.lsim((A - B @ K, np.zeros((4, 1)), np.eye(4), np.zeros((4, 1))), np.zeros(count), t,
                                X0=x0, interp=False)
    assert relative_error(states, x) < 1e-9
    assert not patterns.any()


def test_sampled_saturated_loop_follows_the_clipped_recursion():
    k, x0, limit, T = 2.0, 5.0, 1.0, 0.1
    plant = Plant(A=[[1.0]], B=[[T]], input_limits=((-limit, limit),), initial_state=[x0], sample_time=T)
    response = simulate_responses(plant, [[k]]).initial
    # x[j+1] = x[j] − T L while k x[j] > L, then x[j+1] = (1 − kT) x[j] (derived by hand)
    switch = math.floor((x0 - limit / k) / (T * limit)) + 1  # first j with k x[j] ≤ L
    j = np.arange(len(response.time))
    expected = np.where(j <= switch, x0 - j * T * limit, (x0 - switch * T * limit) * (1 - k * T) ** (j - switch))
    np.testing.assert_allclose(response.saturated_states[:, 0], expected, rtol=1e-12, atol=1e-14)


def test_saturation_can_make_a_stabilised_unstable_plant_diverge():
    a, k, limit = 1.0, 3.0, 1.0
    x0 = 2.0 * limit / a  # outside |x| < L/a, where a clipped input can still pull x back (derived by hand)
    plant = Plant(A=[[a]], B=[[1.0]], input_limits=((-limit, limit),), initial_state=[x0])
    result = simulate_responses(plant, [[k]], horizon=20.0)
    response = result.initial
    assert not result.diverging and response.diverged_at is None
    assert response.saturated_diverged_at is not None
    # While pinned at −L: x = L/a + (x0 − L/a) e^{at} (derived by hand); exact because the held input is constant
    valid = np.isfinite(response.saturated_states[:, 0])
    t = response.time[valid]
    np.testing.assert_allclose(response.saturated_states[valid, 0], limit / a + (x0 - limit / a) * np.exp(a * t),
                               rtol=1e-9)
    assert math.isnan(response.saturated_output_metrics[0].settling_time)
    assert "blows up" in response.saturated_output_metrics[0].reason("settling_time")


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), sampled=st.booleans())
def test_saturated_inputs_never_exceed_their_limits(seed, sampled):
    rng = np.random.default_rng(seed)
    n, m = 3, 2
    A, B = rng.normal(size=(n, n)), rng.normal(size=(n, m))
    low, high = -rng.uniform(0.1, 2.0, size=m), rng.uniform(0.1, 2.0, size=m)
    limits = tuple(zip(low.tolist(), high.tolist()))
    if sampled:
        poles = rng.uniform(-0.8, 0.8, size=n) + 1e-3 * np.arange(n)
        plant = Plant(A=A, B=B, input_limits=limits, sample_time=0.1, initial_state=3 * rng.normal(size=n))
    else:
        poles = -rng.uniform(0.5, 4.0, size=n) - 1e-3 * np.arange(n)
        plant = Plant(A=A, B=B, input_limits=limits, initial_state=3 * rng.normal(size=n))
    K = scipy.signal.place_poles(A, B, poles).gain_matrix
    result = simulate_responses(plant, K)
    for response in result.responses:
        inputs = response.saturated_inputs[np.all(np.isfinite(response.saturated_inputs), axis=1)]
        assert np.all(inputs >= low) and np.all(inputs <= high)  # by definition of clipping (common practice)
        for i, violation in enumerate(response.limit_violations):
            beyond = (response.inputs[:, i] < low[i]) | (response.inputs[:, i] > high[i])
            assert violation.exceeded == bool(beyond.any())


# -- unstable and marginal loops ------------------------------------------------------------------------------------
def test_unstable_loop_is_reported_as_diverging_and_cut_at_the_blow_up():
    a = 0.7
    plant = Plant(A=[[a]], B=[[1.0]])
    result = simulate_responses(plant, [[0.0]], horizon=50.0)
    assert result.diverging
    assert "unstable" in result.diverging_reason and "s = 0.7" in result.diverging_reason
    response = result.initial
    # x = e^{at} (closed form); cut at the first grid point past 10⁶, i.e. after t = ln(10⁶)/a
    np.testing.assert_allclose(response.states[:, 0], np.exp(a * response.time), rtol=1e-12)
    assert response.diverged_at == pytest.approx(math.log(1e6) / a, abs=result.time_step)
    assert response.time[-1] < 50.0 and np.all(np.isfinite(response.states))
    assert math.isnan(response.output_metrics[0].settling_time)
    assert "unstable" in response.output_metrics[0].reason("settling_time")


def test_unstable_sampled_loop_is_reported_as_diverging():
    plant = Plant(A=[[1.2]], B=[[1.0]], sample_time=0.5)
    result = simulate_responses(plant, [[0.1]])
    # closed-loop pole z = 1.1 lies outside the unit circle (stability |z| < 1, Franklin, Powell & Workman)
    assert result.diverging and "|z| = 1" in result.diverging_reason


def test_undamped_loop_is_not_diverging_but_has_no_final_value():
    plant = Plant(**DOUBLE_INTEGRATOR, C=[[1.0, 0.0]])
    result = simulate_responses(plant, [[1.0, 0.0]])
    # s² + 1: poles ±j, an undamped oscillation of period 2π (derived by hand)
    assert not result.diverging
    assert any("imaginary axis" in note for note in result.notes)
    assert result.horizon == pytest.approx(3 * 2 * math.pi, rel=1e-9)
    metrics = result.step.output_metrics[0]
    assert math.isnan(metrics.final_value) and math.isnan(metrics.settling_time)
    # y = 1 − cos t for a unit step through N = 1: peak 2 first at t = π (derived by hand); the refinement
    # between grid points (cubic through exact slopes, h ≈ 0.047) is good to about h⁴ in value
    assert metrics.peak_value == pytest.approx(2.0, rel=1e-7)
    assert metrics.peak_time == pytest.approx(math.pi, rel=1e-5)


# -- grid, defaults and refusals ---------------------------------------------------------------------------------
def test_automatic_grid_covers_seven_slowest_time_constants_with_at_most_2000_points():
    plant = Plant(A=np.diag([-0.1, -1000.0]), B=[[1.0], [1.0]])
    result = simulate_responses(plant, [[0.0, 0.0]])
    # slowest time constant 10 s → horizon 70 s (HORIZON rule, common practice, no source)
    assert result.horizon == pytest.approx(70.0, rel=1e-9)
    assert len(result.initial.time) <= 2000
    # the grid stays exact however coarse: e^{−0.1 t} at the samples (closed form)
    assert relative_error(result.initial.states[:, 0], np.exp(-0.1 * result.initial.time)) < 1e-12


def test_horizon_and_time_step_can_be_set():
    plant, K = second_order_loop(0.5, 1.0)
    result = simulate_responses(plant, K, horizon=5.0, time_step=0.01)
    assert result.time_step == 0.01 and result.horizon == pytest.approx(5.0)
    assert len(result.step.time) == 501


def test_default_initial_state_is_a_unit_deviation_of_the_first_state():
    plant, K = second_order_loop(0.5, 1.0)
    result = simulate_responses(plant, K)
    np.testing.assert_array_equal(result.initial_state, [1.0, 0.0])
    np.testing.assert_array_equal(result.initial.states[0], [1.0, 0.0])


def test_reference_vector_scales_the_step():
    plant, K = second_order_loop(0.5, 1.0)
    unit = simulate_responses(plant, K)
    scaled = simulate_responses(plant, K, reference=[2.5])
    # linearity (superposition) of the closed loop
    np.testing.assert_allclose(scaled.step.outputs, 2.5 * unit.step.outputs, rtol=1e-12, atol=1e-15)
    assert scaled.step.targets[0] == 2.5


@pytest.mark.parametrize(
    "arguments, message",
    [
        (dict(initial_state=[1.0, 2.0, 3.0]), r"initial state must be 2 finite numbers"),
        (dict(reference=[1.0, 2.0]), r"reference must be 1 finite number"),
        (dict(horizon=-1.0), r"horizon must be a positive number"),
        (dict(time_step=0.0), r"time step must be a positive number"),
        (dict(settling_band=1.5), r"settling band must lie between 0 and 1"),
        (dict(horizon=1e3, time_step=1e-4), r"needs 10000001 points"),
        (dict(horizon=0.01, time_step=0.1), r"shorter than one time step"),
    ],
)
def test_bad_arguments_are_refused_with_a_message(arguments, message):
    plant, K = second_order_loop(0.5, 1.0)
    with pytest.raises(AnalysisError, match=message):
        simulate_responses(plant, K, **arguments)


def test_sampled_plant_refuses_another_time_step():
    plant = Plant(A=[[0.5]], B=[[1.0]], sample_time=0.2)
    with pytest.raises(AnalysisError, match=r"sample time T = 0.2 s"):
        simulate_responses(plant, [[0.1]], time_step=0.05)


def test_inputs_are_not_modified_and_results_are_read_only():
    plant, K = second_order_loop(0.5, 1.0)
    K = np.array(K)
    x0 = np.array([1.0, 2.0])
    simulate_responses(plant, K, initial_state=x0)
    np.testing.assert_array_equal(K, [[1.0, 1.0]])
    np.testing.assert_array_equal(x0, [1.0, 2.0])
    result = simulate_responses(plant, K)
    with pytest.raises(ValueError):
        result.step.outputs[0, 0] = 5.0


# -- the propagation paths the speed benchmarks time (tests/benchmarks/); timing itself is never asserted here --
def test_exact_propagation_equals_lsim_on_a_long_horizon():
    A = np.diag([-1.0, -2.0, 0.5, 0.0]) + np.eye(4, k=1)
    B = np.ones((4, 1))
    K = scipy.signal.place_poles(A, B, [-1.0, -2.0, -3.0, -4.0]).gain_matrix
    loop, h, count = A - B @ K, 0.005, 2000
    t = h * np.arange(count)
    x0 = np.array([1.0, 0.0, 0.0, 0.0])
    ours = propagate_affine(augmented_step(loop, np.zeros(4), h, False), x0, count)
    reference = scipy.signal.lsim((loop, B, np.eye(4), np.zeros((4, 1))), np.zeros(count), t, X0=x0, interp=False)[2]
    # Reference: scipy.signal.lsim, equal to 1e-9 relative (the speed issue's accuracy target)
    assert relative_error(ours, reference) < 1e-9


def test_saturated_loop_of_1000_steps_exercises_pinned_and_free_steps():
    A = np.diag([-1.0, -2.0, 0.5, 0.0]) + np.eye(4, k=1)
    B = np.ones((4, 1))
    K = scipy.signal.place_poles(A, B, [-1.0, -2.0, -3.0, -4.0]).gain_matrix
    loop = SwitchingLoop(A, B, K, np.zeros(1), np.zeros(4), np.array([-0.5]), np.array([0.5]), 0.01, False)
    x0 = np.array([0.0, 0.0, 1.0, 0.0])
    _, law, patterns = loop.run(x0, 1000)
    assert patterns.any() and not patterns.all()  # both pinned and free steps are exercised
    # Each step is classified by the unclipped law at its start (definition of saturation, no source needed).
    pinned_high, pinned_low, free = patterns[:, 0] == 1, patterns[:, 0] == -1, patterns[:, 0] == 0
    assert np.all(law[pinned_high, 0] > 0.5) and np.all(law[pinned_low, 0] < -0.5)
    assert np.all(np.abs(law[free, 0]) <= 0.5 + 1e-12)


# -- the shortcuts of the per-call cost cut (issue 7): each equals an outside computation -----------------------
def random_stable_design(rng, n, m, p, sampled):
    """A random plant with feedthrough and its own disturbance channel, and a stabilising LQR gain from scipy."""
    A = rng.standard_normal((n, n)) / math.sqrt(n)
    B = rng.standard_normal((n, m))
    if sampled:  # K = (R + BᵀPB)⁻¹BᵀPA from the discrete Riccati equation (textbook LQR)
        P = scipy.linalg.solve_discrete_are(A, B, np.eye(n), np.eye(m))
        K = np.linalg.solve(np.eye(m) + B.T @ P @ B, B.T @ P @ A)
    else:  # K = R⁻¹BᵀP from the continuous Riccati equation
        K = B.T @ scipy.linalg.solve_continuous_are(A, B, np.eye(n), np.eye(m))
    plant = Plant(A=A, B=B, C=rng.standard_normal((p, n)), D=0.1 * rng.standard_normal((p, m)),
                  sample_time=0.1 if sampled else None, disturbance_matrix=rng.standard_normal((n, 2)),
                  disturbance_step=[0.5, -1.5], tracked_outputs=tuple(range(min(p, m))))
    return plant, K


@pytest.mark.parametrize("sampled", [False, True])
@pytest.mark.parametrize("n, m, p", [(3, 1, 2), (6, 2, 3), (18, 2, 2)])  # 18 states: the other side of n = 16
def test_final_values_and_prefilter_equal_the_steady_state_solved_by_scipy(rng, sampled, n, m, p):
    plant, K = random_stable_design(rng, n, m, p, sampled)
    result = simulate_responses(plant, K)
    A, B, C, D, E = plant.A, plant.B, plant.C, plant.D, plant.disturbance_matrix
    system = np.eye(n) - (A - B @ K) if sampled else -(A - B @ K)
    tracked = list(plant.tracked_outputs)
    # Reference: scipy.linalg.solve of the equilibrium 0 = (A − BK)x̄ + f (x̄ = (A − BK)x̄ + f sampled), the
    # steady-state gain M = (C − DK)_t M⁻¹B + D_t and N = pinv(M) (textbook static prefilter), y = Cx̄ + D(u₀ − Kx̄)
    gain = (C - D @ K)[tracked] @ scipy.linalg.solve(system, B) + D[tracked]
    prefilter = scipy.linalg.pinv(gain)
    np.testing.assert_allclose(result.prefilter, prefilter, rtol=1e-9, atol=1e-12 * np.abs(prefilter).max())
    u0 = prefilter @ np.ones(len(tracked))
    step_state = scipy.linalg.solve(system, B @ u0)
    step_final = C @ step_state + D @ (u0 - K @ step_state)
    disturbance_state = scipy.linalg.solve(system, E @ np.array([0.5, -1.5]))
    disturbance_final = (C - D @ K) @ disturbance_state
    found_step = [metric.final_value for metric in result.step.output_metrics]
    found_disturbance = [metric.final_value for metric in result.disturbance.output_metrics]
    np.testing.assert_allclose(found_step, step_final, rtol=1e-9, atol=1e-10 * np.abs(step_final).max())
    np.testing.assert_allclose(found_disturbance, disturbance_final, rtol=1e-9,
                               atol=1e-10 * np.abs(disturbance_final).max())
    # the tracked outputs settle on the reference (definition of the prefilter)
    np.testing.assert_allclose(np.array(found_step)[tracked], 1.0, atol=1e-9)


def test_prefilter_refusal_still_uses_the_exact_condition_number_near_the_limit():
    # A pole 1e-15 from s = 0: cond₂ of the equilibrium matrix ≈ 1e15 passes the refusal limit 1/(100·n·eps),
    # far or near the Frobenius bound (numpy.linalg.cond as the reference for the condition number).
    A = np.array([[-1e-15, 0.0], [0.0, -1.0]])
    plant = Plant(A=A, B=np.eye(2), C=np.eye(2))
    assert np.linalg.cond(A) * 2 * np.finfo(float).eps * 100 >= 1.0
    with pytest.raises(AnalysisError, match=r"pole at s = 0 \(closest pole s = -1e-15\)"):
        reference_prefilter(plant, np.zeros((2, 2)))


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), size=st.integers(2, 12), rows=st.integers(1, 6))
def test_peak_candidates_are_the_local_maxima_scipy_finds_near_each_top(seed, size, rows):
    from gainboard.core._metrics import _peak_candidates

    rng = np.random.default_rng(seed)
    count = 5 * size
    # coarse levels make plateaus and repeated tops, the cases where ≥ and > part ways
    signals = np.round(rng.standard_normal((rows, count)).cumsum(axis=1), 1)
    tops, scales = signals.max(axis=1), 1e2 * np.abs(signals).max(axis=1) + 1e-3
    padded = np.full((rows, count + 2), -np.inf)
    padded[:, 1:-1] = signals
    found = _peak_candidates(padded, tops.tolist(), scales.tolist())
    for row, top, scale, candidates in zip(signals, tops, scales, found):
        # Reference: scipy.signal.argrelextrema with ≥ and mode "clip" (an end point is compared with its one
        # neighbour), then the points within 10⁻³·scale of the top
        local = scipy.signal.argrelextrema(row, np.greater_equal, mode="clip")[0]
        assert candidates == [int(k) for k in local if row[k] >= top - 1e-3 * scale]


def test_power_growth_bound_equals_the_norms_of_the_matrix_powers(rng):
    from gainboard.core._propagation import _power_growth

    matrix = 3.0 * rng.standard_normal((7, 7)) + 20.0 * np.eye(7, k=1)  # far from normal
    # Reference: numpy.linalg.matrix_power and numpy.linalg.norm(·, 1) in the formula of Al-Mohy & Higham 2009,
    # Theorem 4.2: min(‖M‖₁, max(‖M^p‖^{1/p}, ‖M^{p+1}‖^{1/(p+1)}) for p = 2 … 5)
    roots = {p: np.linalg.norm(np.linalg.matrix_power(matrix, p), 1) ** (1.0 / p) for p in range(2, 7)}
    expected = min(np.linalg.norm(matrix, 1), *(max(roots[p], roots[p + 1]) for p in range(2, 6)))
    assert _power_growth(matrix) == pytest.approx(expected, rel=1e-12)

