"""Steady-state Kalman filter gains and error covariances; noise intensities and their sampling.

References: scipy's Riccati and Lyapunov solvers used directly, the scalar filter of
reference case 21 (/work/shared/reference-cases.md), hand-derived integrals.
"""

import math

import numpy as np
import pytest
import scipy.linalg
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import (
    EstimatorError,
    Plant,
    PlantError,
    design_kalman_estimator,
    discretize_zero_order_hold,
    estimator_noise,
    noise_intensities,
    parse_plant_text,
    sampled_noise_intensities,
)


def test_scalar_filter_error_covariance_is_root_two_minus_one():
    # Case 21: ẋ = −x + w, y = x + v, W = V = 1 → −2P + 1 − P² = 0, P = √2 − 1, L = P/V (derived).
    result = design_kalman_estimator(Plant(A=[[-1.0]], B=[[1.0]]), [[1.0]], [[1.0]])
    assert result.error_covariance[0, 0] == pytest.approx(math.sqrt(2.0) - 1.0, rel=1e-13)
    assert result.gain[0, 0] == pytest.approx(math.sqrt(2.0) - 1.0, rel=1e-13)
    assert result.error_poles[0].real == pytest.approx(-math.sqrt(2.0), rel=1e-13)  # −1 − L
    assert result.design == "steady-state Kalman filter" and result.riccati_residual < 1e-14


def _random_detectable(rng, n, p, sampled):
    A = rng.normal(size=(n, n))
    if sampled:
        A = A / max(1.0, np.max(np.abs(np.linalg.eigvals(A)))) * 1.2
    return Plant(A=A, B=rng.normal(size=(n, 1)), C=rng.normal(size=(p, n)), sample_time=0.1 if sampled else None)


def _random_noise(rng, n, p):
    G = rng.normal(size=(n, n))
    H = rng.normal(size=(p, p))
    return G @ G.T + 0.1 * np.eye(n), H @ H.T + 0.1 * np.eye(p)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 5), p=st.integers(1, 3))
def test_continuous_kalman_gain_equals_scipy_riccati_solution_and_satisfies_the_lyapunov_equation(seed, n, p):
    rng = np.random.default_rng(seed)
    plant = _random_detectable(rng, n, min(p, n), sampled=False)
    W, V = _random_noise(rng, n, plant.output_count)
    result = design_kalman_estimator(plant, W, V)
    # scipy as the reference: the filter Riccati equation is the LQR equation of (Aᵀ, Cᵀ, W, V).
    P = scipy.linalg.solve_continuous_are(plant.A.T, plant.C.T, W, V)
    scale = 1 + np.linalg.norm(P)
    np.testing.assert_allclose(result.error_covariance, P, atol=1e-9 * scale)
    np.testing.assert_allclose(result.gain, P @ plant.C.T @ np.linalg.inv(V), atol=1e-9 * scale * np.linalg.norm(plant.C))
    # Error covariance of e' = (A − LC)e + w − Lv solves (A − LC)P + P(A − LC)ᵀ + W + LVLᵀ = 0 (Lyapunov).
    closed = plant.A - result.gain @ plant.C
    lyapunov = scipy.linalg.solve_continuous_lyapunov(closed, -(W + result.gain @ V @ result.gain.T))
    np.testing.assert_allclose(result.error_covariance, lyapunov, atol=1e-8 * scale)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 5), p=st.integers(1, 3))
def test_sampled_kalman_gains_of_both_forms_equal_scipy_riccati_and_lyapunov_solutions(seed, n, p):
    rng = np.random.default_rng(seed)
    plant = _random_detectable(rng, n, min(p, n), sampled=True)
    W, V = _random_noise(rng, n, plant.output_count)
    A, C = plant.A, plant.C
    P = scipy.linalg.solve_discrete_are(A.T, C.T, W, V)  # scipy as the reference
    scale = 1 + np.linalg.norm(P)
    filter_gain = P @ C.T @ np.linalg.inv(C @ P @ C.T + V)
    prediction = design_kalman_estimator(plant, W, V, form="prediction")
    np.testing.assert_allclose(prediction.gain, A @ filter_gain, atol=1e-8 * scale * (1 + np.linalg.norm(A)))
    np.testing.assert_allclose(prediction.error_covariance, P, atol=1e-8 * scale)
    # Prediction error e[k+1] = (A − LC)e + w − Lv: P = (A − LC)P(A − LC)ᵀ + W + LVLᵀ (discrete Lyapunov).
    L = prediction.gain
    lyapunov = scipy.linalg.solve_discrete_lyapunov(A - L @ C, W + L @ V @ L.T)
    np.testing.assert_allclose(prediction.error_covariance, lyapunov, atol=1e-7 * scale)
    current = design_kalman_estimator(plant, W, V, form="current")
    np.testing.assert_allclose(current.gain, filter_gain, atol=1e-8 * scale)
    # Filtered error (I − LC)e⁻ − Lv: Joseph form P⁺ = (I − LC)P(I − LC)ᵀ + LVLᵀ (standard Kalman filter algebra).
    Lc = current.gain
    joseph = (np.eye(n) - Lc @ C) @ P @ (np.eye(n) - Lc @ C).T + Lc @ V @ Lc.T
    np.testing.assert_allclose(current.error_covariance, joseph, atol=1e-8 * scale)
    np.testing.assert_allclose(current.predicted_error_covariance, P, atol=1e-8 * scale)
    # both forms have the same error poles (eig(A − A Lc C) = eig(A − Lc C A), derived by hand)
    np.testing.assert_allclose(np.sort_complex(current.error_poles), np.sort_complex(prediction.error_poles),
                               atol=1e-8 * (1 + np.linalg.norm(A)))


def test_noise_is_taken_from_the_arguments_then_the_plant_then_the_stated_defaults():
    plant = Plant(A=[[-1.0, 0.0], [0.0, -2.0]], B=[[1.0], [1.0]], C=[[1.0, 1.0]],
                  noise=noise_intensities([2.0, 3.0], [0.5]))
    assert estimator_noise(plant).source == "W and V from the plant"
    mixed = estimator_noise(plant, measurement_noise=[[4.0]])
    assert mixed.measurement.tolist() == [[4.0]] and mixed.process.tolist() == [[2.0, 0.0], [0.0, 3.0]]
    bare = Plant(A=[[-1.0]], B=[[1.0]])
    result = design_kalman_estimator(bare)
    assert result.noise.process.tolist() == [[1.0]] and "placeholder" in result.note


def test_bad_noise_intensities_are_refused_with_what_to_fix():
    plant = Plant(A=[[-1.0, 0.0], [0.0, -2.0]], B=[[1.0], [1.0]], C=[[1.0, 1.0]])
    with pytest.raises(EstimatorError, match="positive semidefinite"):
        design_kalman_estimator(plant, [[1.0, 0.0], [0.0, -1.0]], [[1.0]])
    with pytest.raises(EstimatorError, match="positive definite"):
        design_kalman_estimator(plant, np.eye(2), [[0.0]])
    with pytest.raises(EstimatorError, match="must be symmetric"):
        design_kalman_estimator(plant, [[1.0, 0.5], [0.0, 1.0]], [[1.0]])
    with pytest.raises(EstimatorError, match="W is 3×3 but the plant has 2 states"):
        design_kalman_estimator(plant, np.eye(3), [[1.0]])
    with pytest.raises(EstimatorError, match="V is 2×2 but the plant has 1 outputs"):
        design_kalman_estimator(plant, np.eye(2), np.eye(2))
    with pytest.raises(EstimatorError, match="non-finite"):
        design_kalman_estimator(plant, [[1.0, 0.0], [0.0, float("nan")]], [[1.0]])
    with pytest.raises(EstimatorError, match="reduced-order"):
        design_kalman_estimator(plant, form="reduced-order")


def test_kalman_refuses_an_unstable_mode_no_output_sees_or_no_noise_reaches():
    hidden = Plant(A=[[-1.0, 0.0], [0.0, 2.0]], B=[[1.0], [1.0]], C=[[1.0, 0.0]])
    with pytest.raises(EstimatorError, match="not detectable"):
        design_kalman_estimator(hidden)
    quiet = Plant(A=[[-1.0, 0.0], [0.0, 2.0]], B=[[1.0], [1.0]], C=[[1.0, 1.0]])
    with pytest.raises(EstimatorError, match="no process noise reaches the mode"):
        design_kalman_estimator(quiet, [[1.0, 0.0], [0.0, 0.0]], [[1.0]])


def test_sampled_noise_of_a_first_order_lag_matches_the_integral_by_hand():
    # W_d = ∫₀ᵀ e^{−2aτ} W dτ = W (1 − e^{−2aT}) / (2a) (derived by hand); V_d = V / T (sensor averages over T).
    a, W, V, T = 2.0, 3.0, 0.4, 0.05
    sampled = sampled_noise_intensities(noise_intensities([[W]], [[V]]), [[-a]], T)
    assert sampled.process[0, 0] == pytest.approx(W * (1 - math.exp(-2 * a * T)) / (2 * a), rel=1e-12)
    assert sampled.measurement[0, 0] == pytest.approx(V / T, rel=1e-15)


def test_sampled_noise_of_a_double_integrator_matches_the_integral_by_hand():
    # e^{Aτ} = [[1, τ], [0, 1]]; W = diag(0, q): W_d = q [[T³/3, T²/2], [T²/2, T]] (derived by hand).
    q, T = 2.0, 0.1
    plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]],
                  noise=noise_intensities([0.0, q], [1.0]))
    sampled = discretize_zero_order_hold(plant, T)
    np.testing.assert_allclose(sampled.noise.process, q * np.array([[T**3 / 3, T**2 / 2], [T**2 / 2, T]]), rtol=1e-12)
    assert "sampled with T = 0.1 s" in sampled.noise.source


def test_plant_refuses_noise_of_the_wrong_size():
    with pytest.raises(PlantError, match="noise intensities are for 1 states and 1 outputs"):
        Plant(A=np.eye(2), B=[[1.0], [0.0]], C=[[1.0, 0.0]], noise=noise_intensities([1.0], [1.0]))


def test_plant_file_noise_table_reads_diagonals_and_matrices():
    text = """
[model]
A = [[0.0, 1.0], [0.0, 0.0]]
B = [[0.0], [1.0]]
C = [[1.0, 0.0]]
[noise]
process = [0.0, 0.25]
measurement = [[0.0001]]
"""
    plant = parse_plant_text(text, "demo.toml")
    assert plant.noise.process.tolist() == [[0.0, 0.0], [0.0, 0.25]]
    assert plant.noise.measurement.tolist() == [[0.0001]]
    with pytest.raises(PlantError, match=r"demo.toml: \[noise\] has unknown key"):
        parse_plant_text(text.replace("measurement", "sensor"), "demo.toml")
    with pytest.raises(PlantError, match=r"\[noise\] needs both process and measurement"):
        parse_plant_text(text.replace("measurement = [[0.0001]]", ""), "demo.toml")
    with pytest.raises(PlantError, match="positive definite"):
        parse_plant_text(text.replace("[[0.0001]]", "[[-1.0]]"), "demo.toml")
