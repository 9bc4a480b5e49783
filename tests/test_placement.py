"""Pole assignment: textbook gains, robust multi-input placement, fixed poles, refusals.

Every numeric check names its outside reference in a comment. Reference cases are
numbered as in /work/shared/reference-cases.md.
"""

import math
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import scipy.signal
import sympy
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from gainboard.core import (
    ACKERMANN_CONDITION_LIMIT,
    PlacementError,
    Plant,
    analyze_state_matrix,
    analyze_structure,
    assign_poles,
    closed_loop_poles,
    discretize_zero_order_hold,
    match_poles,
)

CASE1 = dict(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]])
BATCH_REACTOR_A = [
    [1.380, -0.2077, 6.715, -5.676],
    [-0.5814, -4.290, 0.0, 0.6750],
    [1.067, 4.273, -6.654, 5.893],
    [0.0480, 4.273, 1.343, -2.104],
]
BATCH_REACTOR_B = [[0.0, 5.679], [1.136, 1.136], [0.0, 0.0], [-3.146, 0.0]]
JAULIN_A = [[0.0, 7.0, 0.0, 0.0], [0.0, 0.0, 0.0, 7.0 / 3.0], [0.0, 0.0, 0.0, 0.0], [0.0, 0.0, 0.0, 0.0]]
JAULIN_B = [[0.0, 0.0], [0.0, 0.0], [1.0, 0.0], [0.0, 1.0]]


def _random_orthogonal(rng, n):
    q, r = np.linalg.qr(rng.standard_normal((n, n)))
    return q * np.sign(np.diag(r))


# -- case 1: Ackermann, every single-input method, sympy --------------------------------------------


@pytest.mark.parametrize("method", ["auto", "ackermann", "hessenberg", "robust"])
def test_case_1_gain_is_the_textbook_gain_with_every_single_input_method(method):
    result = assign_poles(Plant(**CASE1), [-2 + 4j, -2 - 4j, -10.0], method=method)
    # Ogata, Modern Control Engineering, 5th ed., Example 10-1 (from memory): K = [199, 55, 8]
    np.testing.assert_allclose(result.gain, [[199.0, 55.0, 8.0]], rtol=1e-12)
    assert result.accurate and result.worst_error < 1e-12
    np.testing.assert_allclose(result.achieved, result.requested, atol=1e-12)


def test_case_1_auto_uses_ackermanns_formula_and_explains_why():
    result = assign_poles(Plant(**CASE1), [-10.0, -2 + 4j, -2 - 4j])
    # common practice, no source: a controllability matrix this well conditioned suits Ackermann's formula
    assert result.method == "Ackermann's formula"
    assert "well-conditioned controllability matrix" in result.note
    assert result.controllability_matrix_condition < ACKERMANN_CONDITION_LIMIT


def test_case_1_characteristic_polynomial_is_exact_in_sympy():
    result = assign_poles(Plant(**CASE1), [-2 + 4j, -2 - 4j, -10.0])
    s = sympy.symbols("s")
    A = sympy.Matrix(CASE1["A"]).applyfunc(sympy.Rational)
    b = sympy.Matrix(CASE1["B"]).applyfunc(sympy.Rational)
    gain = [sympy.Rational(round(float(k), 9)).limit_denominator(1000) for k in result.gain.ravel()]
    assert max(abs(float(g) - k) for g, k in zip(gain, result.gain.ravel())) < 1e-10
    closed = A - b * sympy.Matrix([gain])
    # sympy's exact det(sI − A + BK) against the target polynomial (s + 10)(s² + 4s + 20) (by hand)
    difference = sympy.expand((s * sympy.eye(3) - closed).det() - (s + 10) * (s**2 + 4 * s + 20))
    assert difference == 0


# -- case 2: repeated poles on a pendulum-like plant ------------------------------------------------


@pytest.mark.parametrize("omega0", [0.5, 1.0, 3.0, 10.0, 100.0])
def test_case_2_double_pole_on_an_oscillator(omega0):
    plant = Plant(A=[[0.0, 1.0], [-(omega0**2), 0.0]], B=[[0.0], [1.0]])
    result = assign_poles(plant, [-2 * omega0, -2 * omega0])
    # Franklin, Powell & Emami-Naeini, Feedback Control of Dynamic Systems, ch. 7 (from memory): K = [3ω0², 4ω0]
    np.testing.assert_allclose(result.gain, [[3 * omega0**2, 4 * omega0]], rtol=1e-12)
    # a double pole of a single-input loop is a Jordan block: splitting of order √eps · scale
    # (Wilkinson, The Algebraic Eigenvalue Problem, 1965, from memory)
    assert result.worst_error <= 1e-6 * omega0
    assert result.accurate
    assert "requested 2 times" in result.note and "Jordan block" in result.note


@pytest.mark.parametrize("omega0", [0.5, 2.0, 10.0])
def test_inverted_pendulum_like_plant_is_stabilised_with_a_double_pole(omega0):
    # invented scenario: θ'' = ω0² θ + u; by hand, s² + k2 s + (k1 − ω0²) = (s + 2ω0)² gives K = [5ω0², 4ω0]
    plant = Plant(A=[[0.0, 1.0], [omega0**2, 0.0]], B=[[0.0], [1.0]])
    result = assign_poles(plant, [-2 * omega0, -2 * omega0])
    np.testing.assert_allclose(result.gain, [[5 * omega0**2, 4 * omega0]], rtol=1e-12)


# -- sampled plants: cases 12 and 13 ----------------------------------------------------------------


@pytest.mark.parametrize("T", [0.05, 0.1, 0.5, 1.0])
def test_case_12_deadbeat_on_the_sampled_double_integrator(T):
    plant = discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), T)
    result = assign_poles(plant, [0.0, 0.0])
    # Franklin, Powell & Workman, Digital Control of Dynamic Systems, 3rd ed., ch. 8 (from memory):
    # K = [1/T², 3/(2T)] and (Φ − ΓK)² = 0
    np.testing.assert_allclose(result.gain, [[1 / T**2, 1.5 / T]], rtol=1e-10)
    closed = plant.A - plant.B @ result.gain
    assert np.max(np.abs(closed @ closed)) <= 1e-10 * np.linalg.norm(closed) ** 2


def test_case_13_sampled_plant_pair_and_deadbeat():
    plant = Plant(A=[[0.0, 1.0], [-0.16, -1.0]], B=[[0.0], [1.0]], sample_time=1.0)
    # Ogata, Discrete-Time Control Systems, 2nd ed., ch. 6 (from memory): 0.5 ± 0.5j → K = [0.34, −2];
    # deadbeat → K = [−0.16, −1]
    np.testing.assert_allclose(assign_poles(plant, [0.5 + 0.5j, 0.5 - 0.5j]).gain, [[0.34, -2.0]], rtol=1e-12)
    np.testing.assert_allclose(assign_poles(plant, [0.0, 0.0]).gain, [[-0.16, -1.0]], rtol=1e-12)


# -- several inputs: cases 21 and 22, scipy as reference ---------------------------------------------


def test_case_21_batch_reactor_reaches_the_poles_with_well_conditioned_eigenvectors():
    poles = [-0.2, -0.5, -5.0566, -8.6659]
    result = assign_poles(Plant(A=BATCH_REACTOR_A, B=BATCH_REACTOR_B), poles)
    # Kautsky, Nichols & Van Dooren, Int. J. Control 41(5), 1985, batch reactor, as in scipy's test_ltisys.py:
    # eig(A − BK) equal to the request (to 1e-8) and eigenvector conditioning about 2.53 for the robust choice
    _, achieved, errors = match_poles(poles, np.linalg.eigvals(np.array(BATCH_REACTOR_A) - np.array(BATCH_REACTOR_B) @ result.gain))
    assert np.max(errors) < 1e-8
    assert result.eigenvector_condition < 3.0
    assert result.method.startswith("robust eigenvector method")
    # scipy.signal.place_poles as the reference implementation: its computed poles agree with ours
    reference = scipy.signal.place_poles(np.array(BATCH_REACTOR_A), np.array(BATCH_REACTOR_B), poles)
    _, _, gap = match_poles(reference.computed_poles, result.achieved)
    assert np.max(gap) < 1e-8


def test_case_22_four_states_two_inputs_with_a_complex_pair():
    poles = [-3.0, -1.0, -2 + 1j, -2 - 1j]
    result = assign_poles(Plant(A=JAULIN_A, B=JAULIN_B), poles)
    # scipy's test_ltisys.py (Jaulin's example): the requested poles are achieved; scipy as reference
    reference = scipy.signal.place_poles(np.array(JAULIN_A), np.array(JAULIN_B), poles)
    assert result.worst_error < 1e-8
    _, _, gap = match_poles(reference.computed_poles, result.achieved)
    assert np.max(gap) < 1e-8


def test_case_22_refuses_a_pole_repeated_more_often_than_there_are_inputs():
    # a non-defective closed loop has each pole at most rank(B) times (PBH argument; scipy's place_poles
    # refuses the same request, reference case 22)
    with pytest.raises(PlacementError, match=r"pole -2 is requested 4 times but the plant has only 2 inputs"):
        assign_poles(Plant(A=JAULIN_A, B=JAULIN_B), [-2.0, -2.0, -2.0, -2.0])


def test_two_double_poles_are_allowed_where_the_input_structure_permits():
    # batch reactor: two inputs each reaching two states (controllability indices (2, 2)); Rosenbrock's
    # theorem (Rosenbrock, State-Space and Multivariable Theory, 1970, from memory) allows two double poles
    # without Jordan blocks; numpy's eigvals as reference for the achieved poles
    result = assign_poles(Plant(A=BATCH_REACTOR_A, B=BATCH_REACTOR_B), [-2.0, -2.0, -3.0, -3.0])
    closed = np.array(BATCH_REACTOR_A) - np.array(BATCH_REACTOR_B) @ result.gain
    _, _, errors = match_poles([-2.0, -2.0, -3.0, -3.0], np.linalg.eigvals(closed))
    assert np.max(errors) < 1e-6 and np.isfinite(result.eigenvector_condition) and result.accurate


def test_case_22_plant_allows_one_double_pole_but_not_two():
    plant = Plant(A=JAULIN_A, B=JAULIN_B)
    # controllability indices (3, 1): u1 reaches x3 only, u2 reaches x4 → x2 → x1 (by hand). Rosenbrock's
    # theorem (1970, from memory): the number of distinct poles must be at least 3
    result = assign_poles(plant, [-2.0, -2.0, -3.0, -4.0])
    assert result.worst_error < 1e-8 and np.isfinite(result.eigenvector_condition)
    with pytest.raises(PlacementError, match=r"controllability indices \(3, 1\).*at least 3 of the targets"):
        assign_poles(plant, [-2.0, -2.0, -3.0, -3.0])


def test_duplicate_input_columns_are_treated_as_one_input_direction():
    plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0, 0.0], [1.0, 1.0]])
    result = assign_poles(plant, [-2.0, -3.0])
    # with u1 and u2 entering identically, u1 + u2 acts as the one input of the double integrator, whose
    # gain for s² + 5s + 6 is [6, 5] (controllable canonical form, Ogata ch. 10, from memory)
    np.testing.assert_allclose(result.gain.sum(axis=0), [6.0, 5.0], rtol=1e-12)
    assert "rank 1" in result.note
    np.testing.assert_allclose(result.achieved, result.requested, atol=1e-12)


# -- poles no feedback can move ---------------------------------------------------------------------

FIXED = dict(A=[[0.0, 1.0, 0.0], [3.0, -2.0, 0.0], [0.0, 0.0, -1.0]], B=[[0.0], [1.0], [0.0]])


def test_uncontrollable_pole_stays_and_the_others_are_placed(rng):
    # invented scenario: poles 1, −3 reached by the input, −1 not. By hand, s² + (2 + k2)s + (k1 − 3)
    # = (s + 2)(s + 4) gives k1 = 11, k2 = 4; the fixed pole is invariant under feedback (Kalman 1963, from memory)
    result = assign_poles(Plant(**FIXED), [-2.0, -4.0, -1.0])
    np.testing.assert_allclose(result.gain[:, :2], [[11.0, 4.0]], rtol=1e-12)
    np.testing.assert_allclose(result.achieved, result.requested, atol=1e-12)
    assert result.fixed_poles.tolist() == [-1 + 0j]
    assert "not fully controllable" in result.note
    # in rotated coordinates x = Qz the closed-loop poles are the same (similarity invariance)
    Q = _random_orthogonal(rng, 3)
    A, B = np.array(FIXED["A"]), np.array(FIXED["B"])
    rotated = assign_poles(Plant(A=Q.T @ A @ Q, B=Q.T @ B), [-2.0, -4.0, -1.0])
    assert rotated.worst_error < 1e-10
    np.testing.assert_allclose(rotated.gain @ Q.T, result.gain, atol=1e-10)


def test_uncontrollable_pole_left_out_of_the_targets_is_refused():
    # PBH: λ = −1 has rank [λI − A, B] < n, so no K moves it (Hautus 1969, from memory)
    with pytest.raises(PlacementError, match=r"pole -1 cannot be moved by feedback \(uncontrollable\); include it"):
        assign_poles(Plant(**FIXED), [-2.0, -4.0, -5.0])


def test_identity_plant_with_one_input_keeps_one_copy_of_its_pole():
    result = assign_poles(Plant(A=np.eye(2), B=[[1.0], [0.0]]), [-3.0, 1.0])
    # PBH on A = I₂, B = e1 (Hautus 1969, from memory): one copy of λ = 1 is fixed, the other movable;
    # by hand the movable scalar mode ẋ1 = x1 + u needs k = 4 for s = −3
    np.testing.assert_allclose(result.gain, [[4.0, 0.0]], atol=1e-12)
    np.testing.assert_allclose(result.achieved, [-3.0, 1.0], atol=1e-12)


# -- ill-conditioned problems and the conditioning guard ---------------------------------------------


def test_ackermann_guard_switches_method_for_a_vandermonde_controllability_matrix():
    n = 8
    nodes = np.arange(1.0, n + 1.0)
    plant = Plant(A=np.diag(nodes), B=np.ones((n, 1)))
    targets = -nodes
    result = assign_poles(plant, targets)
    # with diagonal A and b = 1 the controllability matrix is the Vandermonde matrix of the diagonal;
    # numpy.linalg.cond of numpy.vander as the reference for its condition number (Gautschi, "How (un)stable
    # are Vandermonde systems?", 1990, from memory: it grows exponentially)
    reference = np.linalg.cond(np.vander(nodes, increasing=True))
    assert result.controllability_matrix_condition == pytest.approx(reference, rel=1e-3)
    assert reference > ACKERMANN_CONDITION_LIMIT
    assert result.method != "Ackermann's formula"
    assert "ill-conditioned" in result.note and "Ackermann's formula was not used" in result.note
    # the poles can only be as accurate as the closed loop's eigenvector conditioning allows (Bauer & Fike,
    # Numer. Math. 2, 1960, from memory): |error| ≤ κ(V)·‖E‖ with ‖E‖ ~ 1e-9 · (‖A‖ + ‖B‖‖K‖) at most
    scale = np.linalg.norm(plant.A, 2) + np.linalg.norm(plant.B, 2) * np.linalg.norm(result.gain, 2)
    assert result.worst_error <= 1e-9 * result.eigenvector_condition * scale


def test_forcing_ackermann_on_an_ill_conditioned_plant_warns_in_the_note():
    n = 8
    plant = Plant(A=np.diag(np.arange(1.0, n + 1.0)), B=np.ones((n, 1)))
    result = assign_poles(plant, -np.arange(1.0, n + 1.0), method="ackermann")
    # the conditioning limit 1/√eps is our documented threshold (common practice, no source)
    assert result.method == "Ackermann's formula" and "ill-conditioned" in result.note


def test_chain_of_ten_integrators_with_clustered_targets_against_exact_arithmetic():
    n = 10
    A = np.diag(np.ones(n - 1), 1)
    b = np.zeros((n, 1))
    b[-1] = 1.0
    roots = [-(1 + Fraction(k, 10)) for k in range(n)]
    result = assign_poles(Plant(A=A, B=b), [float(r) for r in roots])
    # controllable canonical form (Ogata ch. 10, from memory): the last row of A − BK is −K, so K holds the
    # coefficients a0..a9 of ∏(s − r); Fraction gives them exactly
    coefficients = [Fraction(1)]
    for r in roots:
        coefficients = [c - r * p for c, p in zip(coefficients + [0], [0] + coefficients)]
    exact_gain = np.array([float(coefficients[n - i]) for i in range(n)])
    np.testing.assert_allclose(result.gain.ravel(), exact_gain, rtol=1e-12)
    # mpmath eig at 50 digits of the float closed-loop matrix as the reference for its true poles: the
    # reported achieved poles are within the error that the reported conditioning admits
    closed = A - b @ result.gain
    with mpmath.workdps(50):
        exact, _ = mpmath.eig(mpmath.matrix(closed.tolist()))
        true_poles = np.array([complex(v) for v in exact])
    _, _, gap = match_poles(result.achieved, true_poles)
    assert np.all(gap <= result.error_tolerances)
    # and the achieved poles are really off the targets by more than rounding, which the result admits
    assert result.worst_error > 1e-10 and result.eigenvector_condition > 1e8
    assert np.all(result.errors <= result.error_tolerances) and result.accurate


# -- refusals -----------------------------------------------------------------------------------------


def test_missing_conjugate_is_refused_when_completion_is_off():
    with pytest.raises(PlacementError, match=r"pole -2\+4j has no conjugate partner -2-4j"):
        assign_poles(Plant(**CASE1), [-2 + 4j, -10.0, -11.0], complete_conjugates=False)


def test_missing_conjugate_is_completed_and_reported():
    result = assign_poles(Plant(**CASE1), [-2 + 4j, -10.0])
    # conjugate root theorem (from memory): a real K can only give −2−4j together with −2+4j
    assert "Added the missing conjugate(s) [-2-4j]" in result.note
    np.testing.assert_allclose(result.gain, [[199.0, 55.0, 8.0]], rtol=1e-12)  # Ogata Ex. 10-1 (from memory)


def test_wrong_number_of_targets_is_refused():
    with pytest.raises(PlacementError, match="2 target poles were given but the plant has 3 states"):
        assign_poles(Plant(**CASE1), [-1.0, -2.0])
    with pytest.raises(PlacementError, match=r"4 target poles were given \(after adding missing conjugates\)"):
        assign_poles(Plant(**CASE1), [-1 + 1j, -2 + 2j])


@pytest.mark.parametrize("bad", [math.nan, math.inf, complex(-1, math.inf)])
def test_non_finite_target_is_refused(bad):
    with pytest.raises(PlacementError, match="target 2 .* is not a finite number"):
        assign_poles(Plant(**CASE1), [-1.0, bad, -3.0])


def test_unknown_method_and_single_input_methods_on_two_inputs_are_refused():
    with pytest.raises(PlacementError, match="unknown placement method 'fastest'"):
        assign_poles(Plant(**CASE1), [-1.0, -2.0, -3.0], method="fastest")
    with pytest.raises(PlacementError, match="method 'ackermann' needs a single input, but this plant has 2"):
        assign_poles(Plant(A=JAULIN_A, B=JAULIN_B), [-1.0, -2.0, -3.0, -4.0], method="ackermann")


def test_robust_method_refuses_repeated_poles_with_one_input():
    with pytest.raises(PlacementError, match="pole -2 is requested 2 times, but with one input"):
        assign_poles(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), [-2.0, -2.0], method="robust")


def test_targets_that_are_not_numbers_are_refused():
    with pytest.raises(PlacementError, match="must be a list of numbers, but the string"):
        assign_poles(Plant(**CASE1), "-1 -2 -3")
    with pytest.raises(PlacementError, match=r"flat list of numbers, but an array of shape \(3, 1\)"):
        assign_poles(Plant(**CASE1), [[-1.0], [-2.0], [-3.0]])
    with pytest.raises(PlacementError, match="assign_poles needs a Plant"):
        assign_poles({"A": CASE1["A"]}, [-1.0, -2.0, -3.0])


def test_inputs_are_not_mutated_and_results_are_read_only():
    targets = np.array([-10.0, -2 + 4j, -2 - 4j])
    result = assign_poles(Plant(**CASE1), targets)
    assert targets.tolist() == [-10.0, -2 + 4j, -2 - 4j]
    with pytest.raises(ValueError):
        result.gain[0, 0] = 0.0


# -- properties ---------------------------------------------------------------------------------------


def _random_targets(rng, n, sample_time=None):
    """Stable targets in conjugate pairs, at least 0.3 apart (continuous) — invented test data."""
    for _ in range(200):
        pairs = rng.integers(0, n // 2 + 1)
        values = []
        for _ in range(pairs):
            pole = complex(rng.uniform(-4.0, -0.5), rng.uniform(0.3, 3.0))
            values += [pole, pole.conjugate()]
        values += list(rng.uniform(-5.0, -0.5, n - 2 * pairs))
        values = np.array(values, dtype=complex)
        gaps = np.abs(values[:, None] - values[None, :]) + np.eye(n) * 10
        if gaps.min() >= 0.3:
            return values
    return None


@settings(max_examples=50, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 6), m=st.integers(1, 3))
def test_random_controllable_plants_reach_random_targets(seed, n, m):
    rng = np.random.default_rng(seed)
    m = min(m, n)
    plant = Plant(A=rng.standard_normal((n, n)), B=rng.standard_normal((n, m)))
    # keep only plants far from uncontrollable (rejection sampling on our PBH margin)
    assume(analyze_structure(plant).controllability_margin > 0.05)
    targets = _random_targets(rng, n)
    assume(targets is not None)
    result = assign_poles(plant, targets)
    # Bauer–Fike (Bauer & Fike, Numer. Math. 2, 1960, from memory): a gain exact for a plant perturbed by E
    # moves the poles by at most κ(V)·‖E‖; we allow ‖E‖ = 1e-9 · (‖A‖ + ‖B‖‖K‖)
    scale = np.linalg.norm(plant.A, 2) + np.linalg.norm(plant.B, 2) * np.linalg.norm(result.gain, 2)
    assert result.worst_error <= 1e-9 * result.eigenvector_condition * scale
    # numpy's eigvals as the reference for the achieved poles
    _, _, gap = match_poles(targets, np.linalg.eigvals(plant.A - plant.B @ result.gain))
    assert np.max(gap) <= 1e-9 * result.eigenvector_condition * scale
    assert result.accurate


@settings(max_examples=50, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 6), m=st.integers(1, 3))
def test_closed_loop_poles_do_not_depend_on_state_coordinates(seed, n, m):
    rng = np.random.default_rng(seed)
    A = rng.standard_normal((n, n))
    B = rng.standard_normal((n, m))
    K = rng.standard_normal((m, n))
    T = rng.standard_normal((n, n)) + 2.0 * np.eye(n)
    condition_T = np.linalg.cond(T)
    assume(condition_T < 50.0)
    T_inverse = np.linalg.inv(T)
    original = closed_loop_poles(Plant(A=A, B=B), K)
    changed = closed_loop_poles(Plant(A=T_inverse @ A @ T, B=T_inverse @ B), K @ T)
    # similarity invariance of eigenvalues (x = Tz: A → T⁻¹AT, B → T⁻¹B, K → KT; any linear algebra text,
    # from memory); the rounding of the change of basis, ~cond(T)·eps·‖A − BK‖, moves each pole by at most
    # its condition number times that (Wilkinson 1965, from memory)
    report = analyze_state_matrix(A - B @ K)
    _, _, gap = match_poles(original, changed)
    scale = np.linalg.norm(A - B @ K, 2) + np.linalg.norm(A, 2) + np.linalg.norm(B, 2) * np.linalg.norm(K, 2)
    allowed = 1e3 * n * condition_T**2 * np.finfo(float).eps * scale * np.max(report.pole_condition_numbers)
    assert np.max(gap) <= max(allowed, 1e-13)


def _tits_yang_unavailable(monkeypatch):
    real_place_poles = scipy.signal.place_poles

    def refuse_yt(A, B, poles, method="YT", **options):
        if method == "YT":
            raise ValueError("simulated failure of the YT update")
        return real_place_poles(A, B, poles, method=method, **options)

    monkeypatch.setattr(scipy.signal, "place_poles", refuse_yt)


def test_failed_tits_yang_update_falls_back_to_method_0_for_real_targets(monkeypatch):
    _tits_yang_unavailable(monkeypatch)
    poles = [-0.2, -0.5, -5.0566, -8.6659]
    result = assign_poles(Plant(A=BATCH_REACTOR_A, B=BATCH_REACTOR_B), poles)
    # Kautsky, Nichols & Van Dooren 1985 (batch reactor, reference case 21): method 0 reaches the poles too
    assert "method 0" in result.method and "simulated failure" in result.note
    assert result.worst_error < 1e-8 and result.accurate


def test_failed_tits_yang_update_with_complex_targets_is_refused(monkeypatch):
    _tits_yang_unavailable(monkeypatch)
    # method 0 of Kautsky, Nichols & Van Dooren handles real poles only (scipy's documentation)
    with pytest.raises(PlacementError, match="could not place these poles.*real poles only"):
        assign_poles(Plant(A=BATCH_REACTOR_A, B=BATCH_REACTOR_B), [-1 + 1j, -1 - 1j, -3.0, -4.0])
