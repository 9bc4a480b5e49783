"""Estimator gains by pole assignment (duality), estimator forms, observability per pole, refusals.

Reference cases are numbered as in /work/shared/reference-cases.md (estimator section: 19–22).
"""

import numpy as np
import pytest
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import (
    EstimatorError,
    PlacementError,
    Plant,
    analyze_observability,
    assign_estimator_poles,
    assign_poles,
    check_estimator_gain,
    discretize_zero_order_hold,
    estimator_dual_plant,
    estimator_entry_intervals,
    estimator_entry_locus,
    estimator_error_matrix,
    reduced_order_coordinates,
)

# Reference case 19: a pendulum-like plant measuring the second state.
PENDULUM = Plant(A=[[0.0, 20.6], [1.0, 0.0]], B=[[1.0], [0.0]], C=[[0.0, 1.0]])
DOUBLE_INTEGRATOR = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]],
                          state_names=("position", "velocity"))


def _characteristic(matrix):
    return np.poly(np.asarray(matrix))


def test_pendulum_estimator_with_both_poles_at_minus_ten_matches_hand_derived_gain():
    result = assign_estimator_poles(PENDULUM, [-10.0, -10.0])
    # Case 19: det(sI − A + LC) = s² + l2·s + l1 − 20.6 = (s + 10)² → L = [120.6, 20]ᵀ (derived by hand).
    np.testing.assert_allclose(result.gain, [[120.6], [20.0]], rtol=1e-12)
    np.testing.assert_allclose(_characteristic(estimator_error_matrix(PENDULUM, result.gain)), [1.0, 20.0, 100.0],
                               rtol=1e-12)
    assert result.form == "full-order" and result.design == "pole assignment"
    assert result.observable and result.unobservable_poles.size == 0


def test_double_integrator_position_estimator_gain_is_sum_and_product_of_poles():
    # det(sI − A + LC) = s² + l1 s + l2 for A = [[0, 1], [0, 0]], C = [1, 0] (derived by hand):
    # poles p1, p2 → l1 = −(p1 + p2), l2 = p1·p2. Here p = −3 ± 4j → L = [6, 25]ᵀ.
    result = assign_estimator_poles(DOUBLE_INTEGRATOR, [-3 + 4j, -3 - 4j])
    np.testing.assert_allclose(result.gain, [[6.0], [25.0]], rtol=1e-12)
    assert result.error_poles[0] == np.conj(result.error_poles[1])  # exact conjugates, common practice, no source


def test_third_order_estimator_is_the_transpose_of_the_dual_textbook_state_feedback_gain():
    # Case 1 (Ogata, Modern Control Engineering, Example 10-1, from memory): A1, B1, poles −2±4j, −10 → K = [199, 55, 8].
    # Case 20 (Kalman's duality): the estimator for (A1ᵀ, B1ᵀ) with the same poles is L = Kᵀ.
    A1 = np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]])
    B1 = np.array([[0.0], [0.0], [1.0]])
    plant = Plant(A=A1.T, B=np.eye(3)[:, :1], C=B1.T)
    result = assign_estimator_poles(plant, [-2 + 4j, -2 - 4j, -10.0])
    np.testing.assert_allclose(result.gain, [[199.0], [55.0], [8.0]], rtol=1e-10)
    dual_state_feedback = assign_poles(Plant(A=A1, B=B1), [-2 + 4j, -2 - 4j, -10.0]).gain
    np.testing.assert_allclose(result.gain, dual_state_feedback.T, rtol=1e-12)


def test_sympy_characteristic_polynomial_confirms_assigned_estimator_poles_of_a_two_output_plant(rng):
    A = rng.normal(size=(3, 3))
    C = rng.normal(size=(2, 3))
    plant = Plant(A=A, B=np.ones((3, 1)), C=C)
    targets = [-1.0, -2.0 + 1.0j, -2.0 - 1.0j]
    result = assign_estimator_poles(plant, targets)
    # sympy as the reference: det(sI − (A − LC)) in exact rationals of the computed entries.
    s = sp.symbols("s")
    matrix = sp.Matrix(np.array(estimator_error_matrix(plant, result.gain)).tolist()).applyfunc(sp.nsimplify)
    coefficients = [float(c) for c in sp.Poly((s * sp.eye(3) - matrix).det(), s).all_coeffs()]
    np.testing.assert_allclose(coefficients, np.real(np.poly(targets)), rtol=1e-9, atol=1e-9)


# -- sampled forms ---------------------------------------------------------------------------

T = 0.1
SAMPLED_DOUBLE_INTEGRATOR = discretize_zero_order_hold(DOUBLE_INTEGRATOR, T)


def test_deadbeat_prediction_estimator_of_the_sampled_double_integrator_matches_hand_derivation():
    # Case 9: Φ = [[1, T], [0, 1]]. det(zI − Φ + LC) = z² + (l1 − 2) z + (1 − l1 + T l2) (derived by hand):
    # deadbeat needs l1 = 2, l2 = 1/T.
    result = assign_estimator_poles(SAMPLED_DOUBLE_INTEGRATOR, [0.0, 0.0], form="prediction")
    np.testing.assert_allclose(result.gain, [[2.0], [1.0 / T]], rtol=1e-10)
    error = estimator_error_matrix(SAMPLED_DOUBLE_INTEGRATOR, result.gain, "prediction")
    np.testing.assert_allclose(error @ error, np.zeros((2, 2)), atol=1e-12)  # (Φ − LC)² = 0: deadbeat


def test_deadbeat_current_estimator_of_the_sampled_double_integrator_matches_hand_derivation():
    # Current estimator error e[k+1] = (Φ − LCΦ) e[k] (Franklin, Powell & Workman, Digital Control, ch. 8, from
    # memory). With CΦ = [1, T]: det(zI − Φ + LCΦ) = z² + (l1 + T l2 − 2) z + (1 − l1) (derived by hand):
    # deadbeat needs l1 = 1, l2 = 1/T.
    result = assign_estimator_poles(SAMPLED_DOUBLE_INTEGRATOR, [0.0, 0.0], form="current")
    np.testing.assert_allclose(result.gain, [[1.0], [1.0 / T]], rtol=1e-10)
    assert result.form == "current" and "Current estimator" in result.note


def test_prediction_and_current_gains_with_the_same_poles_differ_by_the_state_matrix(rng):
    # Same error poles: eig(Φ − L_p C) = eig(Φ − L_c CΦ) holds for L_p = Φ L_c (substitute; derived by hand).
    plant = Plant(A=rng.normal(size=(3, 3)) * 0.5, B=rng.normal(size=(3, 1)), C=rng.normal(size=(1, 3)),
                  sample_time=0.05)
    targets = [0.2, 0.3 + 0.1j, 0.3 - 0.1j]
    prediction = assign_estimator_poles(plant, targets, form="prediction").gain
    current = assign_estimator_poles(plant, targets, form="current").gain
    np.testing.assert_allclose(prediction, plant.A @ current, rtol=1e-8, atol=1e-10)


# -- reduced-order -----------------------------------------------------------------------------


def test_reduced_order_estimator_of_the_velocity_has_gain_minus_its_pole():
    # Measured position, estimated velocity: Ā_bb = 0, Ā_ab = 1, error pole −L_r (Luenberger 1964; derived by hand).
    result = assign_estimator_poles(DOUBLE_INTEGRATOR, [-5.0], form="reduced-order")
    np.testing.assert_allclose(result.gain, [[5.0]], rtol=1e-12)
    coordinates = reduced_order_coordinates(DOUBLE_INTEGRATOR)
    assert coordinates.direct and coordinates.names == ("velocity",)


def test_reduced_order_coordinates_for_mixed_outputs_use_an_orthonormal_complement(rng):
    plant = Plant(A=rng.normal(size=(4, 4)), B=rng.normal(size=(4, 1)), C=rng.normal(size=(2, 4)))
    coordinates = reduced_order_coordinates(plant)
    assert not coordinates.direct and coordinates.names == ("z1", "z2")
    # T T⁻¹ = I and the top rows of T are C (definition of the coordinates).
    np.testing.assert_allclose(coordinates.transform @ coordinates.inverse, np.eye(4), atol=1e-12)
    np.testing.assert_allclose(coordinates.transform[:2], plant.C, atol=0)
    result = assign_estimator_poles(plant, [-1.0, -2.0], form="reduced-order")
    np.testing.assert_allclose(np.sort(np.linalg.eigvals(estimator_error_matrix(plant, result.gain, "reduced-order"))
                                       .real), [-2.0, -1.0], rtol=1e-9)


def test_reduced_order_estimator_refuses_feedthrough_dependent_outputs_and_full_measurement():
    with pytest.raises(EstimatorError, match="needs D = 0"):
        reduced_order_coordinates(Plant(A=np.eye(2), B=[[1.0], [0.0]], C=[[1.0, 0.0]], D=[[1.0]]))
    with pytest.raises(EstimatorError, match="nothing is left to estimate"):
        reduced_order_coordinates(Plant(A=np.eye(2), B=[[1.0], [0.0]]))
    with pytest.raises(EstimatorError, match="independent outputs"):
        reduced_order_coordinates(Plant(A=np.eye(3), B=np.ones((3, 1)), C=[[1.0, 1.0, 0.0], [2.0, 2.0, 0.0]]))


# -- refusals in estimator words ---------------------------------------------------------------

HIDDEN = Plant(A=[[-1.0, 0.0], [0.0, -2.0]], B=[[1.0], [1.0]], C=[[1.0, 0.0]], state_names=("seen", "hidden"))


def test_estimator_refuses_to_move_an_unobservable_pole_and_names_it():
    with pytest.raises(PlacementError, match=r"pole -2 cannot be moved by the estimator \(unobservable"):
        assign_estimator_poles(HIDDEN, [-5.0, -6.0])
    # Keeping the hidden pole is accepted (PBH test: only the seen mode moves).
    result = assign_estimator_poles(HIDDEN, [-5.0, -2.0])
    np.testing.assert_allclose(np.sort(result.error_poles.real), [-5.0, -2.0], rtol=1e-12)
    assert not result.observable and result.unobservable_poles.tolist() == [-2.0]


def test_estimator_refuses_a_pole_repeated_more_often_than_there_are_outputs():
    plant = Plant(A=np.diag([1.0, 2.0, 3.0]), B=np.ones((3, 1)), C=[[1.0, 1.0, 0.0], [0.0, 1.0, 1.0]])
    with pytest.raises(PlacementError, match="requested 3 times but the plant has only 2 independent outputs"):
        assign_estimator_poles(plant, [-1.0, -1.0, -1.0])


def test_estimator_refuses_repeats_its_observability_indices_forbid_in_estimator_words():
    # Case 22 (Jaulin, scipy's tests): (A, B) with controllability indices (3, 1). Its dual plant (Aᵀ, Bᵀ)
    # has observability indices (3, 1): two double poles give only 2 distinct values < 3 (Rosenbrock).
    A = np.array([[0, 7, 0, 0], [0, 0, 0, 7 / 3], [0, 0, 0, 0], [0, 0, 0, 0]], dtype=float)
    B = np.eye(4)[:, 2:]
    plant = Plant(A=A.T, B=np.ones((4, 1)), C=B.T)
    with pytest.raises(PlacementError, match="observability indices"):
        assign_estimator_poles(plant, [-2.0, -2.0, -3.0, -3.0])
    result = assign_estimator_poles(plant, [-3.0, -1.0, -2.0 + 1j, -2.0 - 1j])  # case 22's achievable set
    assert result.accurate


def test_estimator_refuses_a_wrong_number_of_poles_non_finite_ones_and_bad_forms():
    with pytest.raises(PlacementError, match="3 estimator poles were given but 2 estimator poles"):
        assign_estimator_poles(PENDULUM, [-1.0, -2.0, -3.0])
    with pytest.raises(PlacementError, match="2 estimator poles were given but 1 reduced-order"):
        assign_estimator_poles(DOUBLE_INTEGRATOR, [-1.0, -2.0], form="reduced-order")
    with pytest.raises(PlacementError, match="not a finite number"):
        assign_estimator_poles(PENDULUM, [-1.0, float("nan")])
    with pytest.raises(EstimatorError, match="not for a continuous plant"):
        assign_estimator_poles(PENDULUM, [-1.0, -2.0], form="current")
    with pytest.raises(EstimatorError, match="not for a sampled plant"):
        assign_estimator_poles(SAMPLED_DOUBLE_INTEGRATOR, [0.1, 0.2], form="full-order")
    with pytest.raises(EstimatorError, match="unknown estimator form"):
        assign_estimator_poles(PENDULUM, [-1.0, -2.0], form="sideways")
    feedthrough = Plant(A=[[0.5]], B=[[1.0]], C=[[1.0]], D=[[0.5]], sample_time=0.1)
    with pytest.raises(EstimatorError, match="current estimator needs D = 0"):
        assign_estimator_poles(feedthrough, [0.1], form="current")


def test_a_lonely_complex_estimator_pole_gets_its_conjugate_and_the_note_says_so():
    result = assign_estimator_poles(DOUBLE_INTEGRATOR, [-3 + 4j])
    np.testing.assert_allclose(result.gain, [[6.0], [25.0]], rtol=1e-12)  # as in the hand-derived case above
    assert "Added the missing conjugate" in result.note


def test_estimator_gain_of_the_wrong_shape_is_refused_with_the_expected_shape():
    with pytest.raises(EstimatorError, match="L is 1×2 but must be 2×1"):
        check_estimator_gain(PENDULUM, [[1.0, 2.0]])
    with pytest.raises(EstimatorError, match="L_r is 2×1 but must be 1×1"):
        check_estimator_gain(DOUBLE_INTEGRATOR, [[1.0], [2.0]], "reduced-order")
    with pytest.raises(EstimatorError, match="non-finite"):
        check_estimator_gain(PENDULUM, [[1.0], [float("inf")]])


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 6), p=st.integers(1, 3),
       sampled=st.booleans(), current=st.booleans())
def test_assigned_estimator_poles_are_the_eigenvalues_of_the_error_matrix(seed, n, p, sampled, current):
    rng = np.random.default_rng(seed)
    p = min(p, n)
    plant = Plant(A=rng.normal(size=(n, n)), B=rng.normal(size=(n, 1)), C=rng.normal(size=(p, n)),
                  sample_time=0.1 if sampled else None)
    form = ("current" if current else "prediction") if sampled else "full-order"
    radius = 0.5 if sampled else 3.0
    targets = -radius * rng.uniform(0.2, 1.0, size=n) if not sampled else radius * rng.uniform(-1, 1, size=n)
    result = assign_estimator_poles(plant, targets, form=form)
    # Duality (case 20): the error poles are eig of the error matrix, checked against numpy's eigvals directly,
    # and the reported poles are what numpy finds (the result never claims more than it achieved).
    achieved = np.sort_complex(np.linalg.eigvals(estimator_error_matrix(plant, result.gain, form)))
    scale = max(np.linalg.norm(plant.A, 2), 1.0) * (1 + np.linalg.norm(result.gain, 2))
    assert np.max(np.abs(achieved - np.sort_complex(result.error_poles))) <= 1e-8 * scale * n
    if result.accurate:
        assert np.max(np.abs(achieved - np.sort_complex(targets.astype(complex)))) <= 1e-6 * scale * n
    else:
        assert "Warning" in result.note


# -- one entry of L at a time, through duality -------------------------------------------------


def test_stable_range_of_each_pendulum_estimator_entry_matches_routh_hurwitz():
    # s² + l2 s + (l1 − 20.6): stable iff l2 > 0 and l1 > 20.6 (Routh–Hurwitz for a quadratic, Ogata sec. 5-6).
    intervals = estimator_entry_intervals(PENDULUM, [[120.6], [20.0]])
    assert intervals[(0, 0)].intervals[0][0] == pytest.approx(20.6, rel=1e-10)
    assert intervals[(0, 0)].intervals[0][1] == np.inf
    assert intervals[(1, 0)].intervals[0][0] == pytest.approx(0.0, abs=1e-10)
    assert intervals[(1, 0)].entry == (1, 0)
    bounds, locus = estimator_entry_locus(PENDULUM, [[120.6], [20.0]], 1, 0, entry_range=(0.0, 40.0))
    assert locus.entry == (1, 0) and locus.gains[0] == 0.0 and locus.gains[-1] == 40.0
    with pytest.raises(EstimatorError, match="outside L"):
        estimator_entry_locus(PENDULUM, [[120.6], [20.0]], 2, 0)


def test_dual_plant_of_the_current_estimator_uses_c_times_a():
    dual = estimator_dual_plant(SAMPLED_DOUBLE_INTEGRATOR, "current")
    # eig(A − LCA) = eig(Aᵀ − (CA)ᵀ Lᵀ) (transposition; derived by hand)
    np.testing.assert_allclose(dual.B.T, SAMPLED_DOUBLE_INTEGRATOR.C @ SAMPLED_DOUBLE_INTEGRATOR.A, atol=0)
    assert dual is estimator_dual_plant(SAMPLED_DOUBLE_INTEGRATOR, "current")  # kept per plant for the caches


# -- observability per pole ----------------------------------------------------------------------


def test_observability_report_names_the_hidden_pole_its_states_and_detectability():
    report = analyze_observability(HIDDEN)
    # PBH: [λI − A; C] loses rank at λ = −2 (column 2 of C is zero there); derived by hand.
    assert not report.observable and report.detectable
    hidden = [mode for mode in report.modes if not mode.observable]
    assert len(hidden) == 1 and hidden[0].pole == -2.0 and hidden[0].hidden_states == ("hidden",)
    assert "decays by itself" in hidden[0].explanation
    unstable = analyze_observability(Plant(A=[[-1.0, 0.0], [0.0, 2.0]], B=[[1.0], [1.0]], C=[[1.0, 0.0]]))
    assert not unstable.detectable and "measure more" in unstable.note


def test_observability_report_of_an_observable_plant_lets_every_pole_move():
    report = analyze_observability(PENDULUM)
    assert report.observable and report.detectable and all(mode.observable for mode in report.modes)
    assert report.observability_margin > 0
