"""LQR design: closed forms, scipy's Riccati solvers as reference, Bryson's rule, refusals.

Reference cases are numbered as in /work/shared/reference-cases.md.
"""

import math

import numpy as np
import pytest
import scipy.linalg
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from gainboard.core import AnalysisError, Plant, discretize_zero_order_hold
from gainboard.core._lqr import bryson_weights, design_lqr

DOUBLE_INTEGRATOR = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])


def test_double_integrator_with_identity_weights_matches_hand_derived_riccati_solution():
    result = design_lqr(DOUBLE_INTEGRATOR, Q=np.eye(2), R=[[1.0]])
    root3 = math.sqrt(3.0)
    # Case 15: P = [[√3, 1], [1, √3]], K = [1, √3] (derived by hand).
    np.testing.assert_allclose(result.riccati_solution, [[root3, 1.0], [1.0, root3]], rtol=1e-12)
    np.testing.assert_allclose(result.gain, [[1.0, root3]], rtol=1e-12)
    # Case 15: closed loop s² + √3 s + 1, poles −√3/2 ± j/2 (derived by hand), as an exact conjugate pair.
    np.testing.assert_allclose(result.closed_loop_poles, [-root3 / 2 + 0.5j, -root3 / 2 - 0.5j], rtol=1e-12)
    assert result.closed_loop_poles[0] == np.conj(result.closed_loop_poles[1])  # common practice, no source
    assert result.weights_source == "given"


def test_double_integrator_benner_laub_mehrmann_example_gives_gain_one_two():
    result = design_lqr(DOUBLE_INTEGRATOR, Q=np.diag([1.0, 2.0]), R=[[1.0]])
    # Case 16: Benner, Laub & Mehrmann (1995) example 1, as used in scipy's tests: K = [1, 2].
    np.testing.assert_allclose(result.gain, [[1.0, 2.0]], rtol=1e-12)


def test_scalar_continuous_plant_gives_gain_three_and_pole_minus_two():
    result = design_lqr(Plant(A=[[1.0]], B=[[1.0]]), Q=[[3.0]], R=[[1.0]])
    # Case 17 (derived): a = b = r = 1, q = 3 → P = K = 3, closed-loop pole −2.
    np.testing.assert_allclose(result.gain, [[3.0]], rtol=1e-13)
    np.testing.assert_allclose(result.closed_loop_poles, [-2.0], rtol=1e-13)


def test_scalar_sampled_plant_gives_golden_ratio_solution():
    result = design_lqr(Plant(A=[[1.0]], B=[[1.0]], sample_time=1.0), Q=[[1.0]], R=[[1.0]])
    golden = (1 + math.sqrt(5.0)) / 2
    # Case 17 (derived): a = b = q = r = 1 → P = 1.6180340 (golden ratio), K = 0.6180340, pole 0.3819660.
    np.testing.assert_allclose(result.riccati_solution, [[golden]], rtol=1e-13)
    np.testing.assert_allclose(result.gain, [[golden - 1]], rtol=1e-13)
    np.testing.assert_allclose(result.closed_loop_poles, [2 - golden], rtol=1e-12)


def _random_plant(rng, n, m):
    return Plant(A=rng.normal(size=(n, n)), B=rng.normal(size=(n, m)))


def _random_weights(rng, n, m):
    M = rng.normal(size=(n, n))
    V = rng.normal(size=(m, m))
    return M @ M.T + 0.1 * np.eye(n), V @ V.T + 0.5 * np.eye(m)


@pytest.mark.parametrize("sampled", [False, True])
def test_riccati_solution_and_gain_match_scipy_solvers_on_random_plants(rng, sampled):
    for n, m in [(1, 1), (3, 1), (4, 2), (6, 3)]:
        plant = _random_plant(rng, n, m)
        if sampled:
            plant = discretize_zero_order_hold(plant, 0.2)
        Q, R = _random_weights(rng, n, m)
        result = design_lqr(plant, Q=Q, R=R)
        A, B = plant.A, plant.B
        if sampled:
            # Reference: scipy.linalg.solve_discrete_are and K = (R + BᵀPB)⁻¹BᵀPA.
            P = scipy.linalg.solve_discrete_are(A, B, Q, R)
            K = np.linalg.solve(R + B.T @ P @ B, B.T @ P @ A)
        else:
            # Reference: scipy.linalg.solve_continuous_are and K = R⁻¹BᵀP.
            P = scipy.linalg.solve_continuous_are(A, B, Q, R)
            K = np.linalg.solve(R, B.T @ P)
        np.testing.assert_allclose(result.riccati_solution, P, rtol=1e-9, atol=1e-11 * np.linalg.norm(P))
        np.testing.assert_allclose(result.gain, K, rtol=1e-9, atol=1e-11 * np.linalg.norm(K))
        # Reference: eigenvalues of A − BK by numpy for the scipy gain.
        np.testing.assert_allclose(
            np.sort_complex(result.closed_loop_poles), np.sort_complex(np.linalg.eigvals(A - B @ K)), atol=1e-8
        )
        # The relative Riccati residual of a well-conditioned solution is at rounding level
        # (common practice, no source: backward-stable solvers leave residuals of order n·eps).
        assert result.riccati_residual < 1e-12


@pytest.mark.parametrize("sampled", [False, True])
def test_cross_weight_matches_scipy_solver_with_cross_term(rng, sampled):
    n, m = 3, 2
    plant = _random_plant(rng, n, m)
    if sampled:
        plant = discretize_zero_order_hold(plant, 0.3)
    Q, R = _random_weights(rng, n, m)
    Q = Q + 2 * np.eye(n)
    N = 0.2 * rng.normal(size=(n, m))
    result = design_lqr(plant, Q=Q, R=R, N=N)
    A, B = plant.A, plant.B
    if sampled:
        # Reference: scipy.linalg.solve_discrete_are(..., s=N), K = (R + BᵀPB)⁻¹(BᵀPA + Nᵀ).
        P = scipy.linalg.solve_discrete_are(A, B, Q, R, s=N)
        K = np.linalg.solve(R + B.T @ P @ B, B.T @ P @ A + N.T)
    else:
        # Reference: scipy.linalg.solve_continuous_are(..., s=N), K = R⁻¹(BᵀP + Nᵀ).
        P = scipy.linalg.solve_continuous_are(A, B, Q, R, s=N)
        K = np.linalg.solve(R, B.T @ P + N.T)
    np.testing.assert_allclose(result.gain, K, rtol=1e-9, atol=1e-11 * np.linalg.norm(K))
    assert result.riccati_residual < 1e-12  # common practice, no source


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 4), m=st.integers(1, 2))
def test_lqr_gain_has_the_lowest_quadratic_cost_among_nearby_stabilising_gains(seed, n, m):
    rng = np.random.default_rng(seed)
    plant = _random_plant(rng, n, m)
    controllability = np.hstack([np.linalg.matrix_power(plant.A, i) @ plant.B for i in range(n)])
    assume(np.linalg.cond(controllability) < 1e6)
    Q, R = _random_weights(rng, n, m)
    result = design_lqr(plant, Q=Q, R=R)
    x0 = rng.normal(size=n)

    def cost(K):
        closed = plant.A - plant.B @ K
        if np.max(np.linalg.eigvals(closed).real) >= 0:
            return math.inf
        # Reference: the cost of u = −Kx from x0 is x0ᵀ X x0 with X from the Lyapunov equation
        # closedᵀX + X closed + Q + KᵀRK = 0 (scipy.linalg.solve_continuous_lyapunov).
        X = scipy.linalg.solve_continuous_lyapunov(closed.T, -(Q + K.T @ R @ K))
        return float(x0 @ X @ x0)

    optimal = cost(result.gain)
    # Reference: the optimal cost equals x0ᵀPx0 (LQR theory; Anderson & Moore, *Optimal Control*, from memory).
    assert optimal == pytest.approx(float(x0 @ result.riccati_solution @ x0), rel=1e-7, abs=1e-10)
    for _ in range(3):
        nudged = result.gain + 1e-3 * np.linalg.norm(result.gain) * rng.normal(size=result.gain.shape)
        # Optimality: no other gain does better (same reference).
        assert cost(nudged) >= optimal * (1 - 1e-9) - 1e-12


def test_bryson_weights_use_initial_state_and_input_limits():
    plant = Plant(
        A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, 0.0, -1.0]],
        B=[[0.0], [0.0], [1.0]],
        initial_state=[0.2, -0.5, 0.0],
        input_limits=((-3.0, 1.5),),
    )
    Q, R = bryson_weights(plant)
    # Bryson's rule Q = diag(1/x_max²), R = diag(1/u_max²): Bryson & Ho, *Applied Optimal Control* (1975),
    # and Franklin, Powell & Emami-Naeini sec. 7.9 (both from memory); zero initial entry → range 1 (our default).
    np.testing.assert_allclose(np.diag(Q), [25.0, 4.0, 1.0], rtol=1e-15)
    np.testing.assert_allclose(R, [[1 / 9.0]], rtol=1e-15)
    assert np.count_nonzero(Q - np.diag(np.diag(Q))) == 0


def test_bryson_weights_take_given_ranges_before_plant_data():
    plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], initial_state=[1.0, 1.0], input_limits=((-9.0, 9.0),))
    Q, R = bryson_weights(plant, state_ranges=[0.1, 2.0], input_ranges=[4.0])
    # Bryson's rule (Bryson & Ho 1975, from memory).
    np.testing.assert_allclose(np.diag(Q), [100.0, 0.25], rtol=1e-14)
    np.testing.assert_allclose(R, [[1 / 16.0]], rtol=1e-15)


def test_design_without_weights_uses_bryson_rule_and_says_where_ranges_came_from():
    plant = Plant(
        A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], initial_state=[0.5, 0.0], input_limits=((-2.0, 2.0),),
        state_names=("position", "speed"), state_units=("m", "m/s"), input_names=("force",), input_units=("N",),
    )
    result = design_lqr(plant)
    Q, R = bryson_weights(plant)
    # Reference: scipy.linalg.solve_continuous_are with the Bryson's-rule weights.
    P = scipy.linalg.solve_continuous_are(plant.A, plant.B, Q, R)
    np.testing.assert_allclose(result.gain, np.linalg.solve(R, plant.B.T @ P), rtol=1e-10)
    assert result.weights_source.startswith("Bryson's rule from input limits (force 2 N)")
    assert "position 0.5 m" in result.weights_source and "speed" in result.weights_source


def test_design_does_not_modify_the_weights_passed_in():
    Q = np.array([[2.0, 0.5], [0.5, 1.0]])
    R = np.array([[0.3]])
    Q_before, R_before = Q.copy(), R.copy()
    result = design_lqr(DOUBLE_INTEGRATOR, Q=Q, R=R)
    np.testing.assert_array_equal(Q, Q_before)  # common practice, no source: inputs are never mutated
    np.testing.assert_array_equal(R, R_before)
    with pytest.raises(ValueError, match="read-only"):
        result.gain[0, 0] = 5.0


# ----------------------------------------------------------------------------- refusals


@pytest.mark.parametrize(
    ("Q", "R", "message"),
    [
        (np.eye(3), [[1.0]], r"Q is 3×3 but must be 2×2"),
        (np.eye(2), np.eye(2), r"R is 2×2 but must be 1×1"),
        ([[1.0, 0.3], [0.0, 1.0]], [[1.0]], r"Q must be symmetric, but entry \(1, 2\) is 0\.3"),
        (np.diag([1.0, -0.5]), [[1.0]], r"Q must be positive semidefinite; its smallest eigenvalue is -0\.5"),
        (np.eye(2), [[-0.1]], r"R must be positive definite; its smallest eigenvalue is -0\.1"),
        (np.eye(2), [[0.0]], r"R must be positive definite; its smallest eigenvalue is 0"),
        ([[1.0, np.nan], [np.nan, 1.0]], [[1.0]], r"Q has a non-finite entry"),
        ("heavy", [[1.0]], r"Q must be a 2×2 matrix of real numbers"),
    ],
)
def test_bad_weights_are_refused_with_a_message_naming_the_matrix(Q, R, message):
    with pytest.raises(AnalysisError, match=message):
        design_lqr(DOUBLE_INTEGRATOR, Q=Q, R=R)


def test_cross_weight_of_wrong_shape_or_too_large_is_refused():
    with pytest.raises(AnalysisError, match=r"N is 1×2 but must be 2×1"):
        design_lqr(DOUBLE_INTEGRATOR, Q=np.eye(2), R=[[1.0]], N=[[1.0, 1.0]])
    # [[Q, N], [Nᵀ, R]] ≥ 0 needs Q − N R⁻¹ Nᵀ ≥ 0 (Schur complement; Horn & Johnson, from memory).
    with pytest.raises(AnalysisError, match=r"Q − N R⁻¹ Nᵀ has smallest eigenvalue -3"):
        design_lqr(DOUBLE_INTEGRATOR, Q=np.eye(2), R=[[1.0]], N=[[2.0], [0.0]])


def test_plant_with_an_unstable_mode_no_input_reaches_is_refused():
    # PBH test (Hautus): the mode s = 1 of diag(1, −1) is uncontrollable from B = [0, 1]ᵀ (from memory).
    plant = Plant(A=[[1.0, 0.0], [0.0, -1.0]], B=[[0.0], [1.0]])
    with pytest.raises(AnalysisError, match=r"\(A, B\) is not stabilisable: the mode at s = 1 "):
        design_lqr(plant, Q=np.eye(2), R=[[1.0]])


def test_sampled_plant_with_unreachable_mode_on_the_unit_circle_is_refused():
    # PBH test (from memory): z = 1 of diag(1, 0.5) is uncontrollable from B = [0, 1]ᵀ.
    plant = Plant(A=[[1.0, 0.0], [0.0, 0.5]], B=[[0.0], [1.0]], sample_time=0.1)
    with pytest.raises(AnalysisError, match=r"not stabilisable: the mode at z = 1 "):
        design_lqr(plant, Q=np.eye(2), R=[[1.0]])


def test_unstable_mode_without_weight_is_refused_as_undetectable():
    # PBH test on (Q^(1/2), A) (from memory): Q = diag(0, 1) does not see the unstable mode s = 1.
    plant = Plant(A=[[1.0, 0.0], [0.0, -1.0]], B=[[1.0], [1.0]])
    with pytest.raises(AnalysisError, match=r"\(Q\^\(1/2\), A\) is not detectable: the mode at s = 1 "):
        design_lqr(plant, Q=np.diag([0.0, 1.0]), R=[[1.0]])
    # An oscillating mode on the imaginary axis with no weight cannot be detected either (same test).
    oscillator = Plant(A=[[0.0, 1.0], [-4.0, 0.0]], B=[[0.0], [1.0]])
    with pytest.raises(AnalysisError, match=r"the mode at s = 0 ± 2j"):
        design_lqr(oscillator, Q=np.zeros((2, 2)), R=[[1.0]])


def test_zero_state_weight_is_accepted_for_a_stable_plant():
    plant = Plant(A=[[-1.0, 0.0], [0.0, -2.0]], B=[[1.0], [1.0]])
    result = design_lqr(plant, Q=np.zeros((2, 2)), R=[[1.0]])
    # With Q = 0 and a stable plant the optimal control is u = 0: P = 0 solves the Riccati equation
    # (scipy.linalg.solve_continuous_are as reference).
    np.testing.assert_allclose(result.gain, 0.0, atol=1e-14)
    np.testing.assert_allclose(scipy.linalg.solve_continuous_are(plant.A, plant.B, np.zeros((2, 2)), [[1.0]]), 0.0,
                               atol=1e-14)


@pytest.mark.parametrize(
    ("keyword", "value", "message"),
    [
        ("state_ranges", [1.0], r"state ranges must be 2 positive numbers \(one per entry\), but 1 were given"),
        ("state_ranges", [1.0, 0.0], r"state ranges: the range of 'x2' is 0;"),
        ("input_ranges", [-1.0], r"input ranges: the range of 'u1' is -1;"),
        ("input_ranges", [math.inf], r"input ranges: the range of 'u1' is inf;"),
    ],
)
def test_bad_bryson_ranges_are_refused(keyword, value, message):
    with pytest.raises(AnalysisError, match=message):
        bryson_weights(DOUBLE_INTEGRATOR, **{keyword: value})
