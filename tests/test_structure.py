"""Structure analysis: controllability, observability, PBH flags per pole, conditioning.

Every numeric check names its outside reference in a comment.
"""

import math

import numpy as np
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import (
    Plant,
    PlantError,
    WEAK_STRUCTURE_MARGIN,
    analyze_structure,
    controllability_matrix,
    controllability_staircase,
    discretize_zero_order_hold,
    match_poles,
    observability_matrix,
    rank_tolerance,
)


def _random_orthogonal(rng, n):
    q, r = np.linalg.qr(rng.standard_normal((n, n)))
    return q * np.sign(np.diag(r))


# -- matrices and tolerance ---------------------------------------------------------------------


def test_controllability_matrix_of_case_1_matches_powers_of_A():
    A = np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]])
    b = np.array([[0.0], [0.0], [1.0]])
    # definition [B, AB, A²B] (Kalman; Ogata, Modern Control Engineering, 5th ed., ch. 9, from memory),
    # with numpy.linalg.matrix_power as the reference for the powers, and the columns by hand:
    # Ab = [0, 1, −6], A²b = [1, −6, 31]
    expected = np.hstack([np.linalg.matrix_power(A, k) @ b for k in range(3)])
    np.testing.assert_array_equal(controllability_matrix(A, b), expected)
    np.testing.assert_array_equal(expected[:, 2], [1.0, -6.0, 31.0])


def test_observability_matrix_is_the_dual_stack():
    A = np.array([[0.0, 1.0], [-2.0, -3.0]])
    C = np.array([[1.0, 1.0]])
    # definition [C; CA] (Kalman duality; Ogata ch. 9, from memory): CA = [−2, −2] by hand
    np.testing.assert_array_equal(observability_matrix(A, C), [[1.0, 1.0], [-2.0, -2.0]])


def test_rank_tolerance_is_numpys_default_rank_threshold(rng):
    matrix = rng.standard_normal((4, 6))
    singular = np.linalg.svd(matrix, compute_uv=False)
    # numpy.linalg.matrix_rank documents its default tolerance S.max() * max(M, N) * eps (numpy as reference)
    assert rank_tolerance(matrix) == pytest.approx(singular[0] * 6 * np.finfo(float).eps, rel=1e-14)
    assert rank_tolerance(matrix, steps=3) == pytest.approx(3 * rank_tolerance(matrix), rel=1e-14)


def test_structure_functions_refuse_mismatched_shapes():
    with pytest.raises(PlantError, match="B has 3 rows but A is 2×2; B must be 2×m"):
        controllability_matrix(np.eye(2), np.ones((3, 1)))
    with pytest.raises(PlantError, match="C has 3 columns but A is 2×2; C must be p×2"):
        observability_matrix(np.eye(2), np.ones((1, 3)))
    with pytest.raises(PlantError, match="A is 2×3 but must be square"):
        controllability_staircase(np.ones((2, 3)), np.ones((2, 1)))


# -- repeated poles and PBH ---------------------------------------------------------------------


def test_identity_plant_with_one_input_has_one_movable_and_one_fixed_pole():
    report = analyze_structure(Plant(A=np.eye(2), B=[[1.0], [0.0]]))
    # PBH test (Hautus 1969; Kailath, Linear Systems, 1980, sec. 2.4, from memory): rank [0·I, e1] = 1,
    # so one copy of λ = 1 is fixed; Kalman: [e1, e1] has rank 1
    assert report.controllable_rank == 1 and not report.controllable
    assert report.open_loop_poles.tolist() == [1 + 0j, 1 + 0j]
    assert report.pole_movable == (True, False)
    assert report.uncontrollable_poles.tolist() == [1 + 0j]
    assert report.pole_controllability_margins[1] == 0.0


def test_block_plant_flags_the_block_that_the_input_cannot_reach(rng):
    # invented scenario: two decoupled second-order parts, the input drives only the first
    A = np.zeros((4, 4))
    A[:2, :2] = [[0.0, 1.0], [-2.0, -3.0]]  # poles −1, −2
    A[2:, 2:] = [[0.0, 1.0], [-5.0, -2.0]]  # poles −1 ± 2j
    B = np.array([[0.0], [1.0], [0.0], [0.0]])
    C = np.array([[1.0, 1.0, 1.0, 0.0]])  # x1 + x2 cancels the mode at −1 (eigenvector [1, −1])
    Q = _random_orthogonal(rng, 4)
    for A_used, B_used, C_used in ((A, B, C), (Q.T @ A @ Q, Q.T @ B, C @ Q)):
        report = analyze_structure(Plant(A=A_used, B=B_used, C=C_used))
        # roots of s² + 3s + 2 and s² + 2s + 5 by the quadratic formula (by hand); the second block is not
        # reached by B, so by the PBH test (Hautus 1969, from memory) exactly its poles are fixed
        _, _, errors = match_poles([-2.0, -1.0, -1 + 2j, -1 - 2j], report.open_loop_poles)
        assert np.max(errors) < 1e-12
        np.testing.assert_allclose(report.uncontrollable_poles, [-1 + 2j, -1 - 2j], atol=1e-12)
        assert report.controllable_rank == 2
        for pole, movable in zip(report.open_loop_poles, report.pole_movable):
            assert movable == (abs(pole.imag) < 1e-9)
        # PBH for observability (dual test): C·[1, −1, 0, 0] = 0 hides the pole at −1 (by hand)
        np.testing.assert_allclose(report.unobservable_poles, [-1.0], atol=1e-12)
        assert report.observable_rank == 3 and not report.observable


def test_uncontrollable_jordan_block_is_found_after_a_rotation(rng):
    # a 2×2 Jordan block at −1 that the input does not reach, plus a reached pole at −3
    A = np.array([[-1.0, 1.0, 0.0], [0.0, -1.0, 0.0], [0.0, 0.0, -3.0]])
    B = np.array([[0.0], [0.0], [1.0]])
    for _ in range(5):
        Q = _random_orthogonal(rng, 3)
        report = analyze_structure(Plant(A=Q.T @ A @ Q, B=Q.T @ B))
        # Kalman decomposition (Kalman 1963, from memory): both copies of −1 are fixed, whatever the basis;
        # a defective double eigenvalue is only computable to about √eps (Wilkinson 1965, from memory)
        assert report.controllable_rank == 1
        assert sum(report.pole_movable) == 1
        np.testing.assert_allclose(report.uncontrollable_poles, [-1.0, -1.0], atol=1e-6)


def test_diagonal_plant_with_spread_poles_is_controllable_though_its_controllability_matrix_looks_singular():
    n = 20
    A = np.diag(np.arange(1.0, n + 1.0))
    b = np.ones((n, 1))
    report = analyze_structure(Plant(A=A, B=b))
    # Gilbert's criterion (Gilbert 1963, SIAM J. Control 1, from memory): diagonal A with distinct entries
    # and no zero row in B is controllable
    assert report.controllable and report.controllable_rank == n
    # while the rank of the (Vandermonde) controllability matrix is lost in rounding: numpy as reference
    assert np.linalg.matrix_rank(controllability_matrix(A, b)) < n
    assert math.isinf(report.controllability_matrix_condition)


def test_chain_of_integrators_is_controllable_from_the_bottom_but_not_the_top():
    n = 10
    A = np.diag(np.ones(n - 1), 1)
    bottom = np.zeros((n, 1))
    bottom[-1] = 1.0
    top = np.zeros((n, 1))
    top[0] = 1.0
    # controllable canonical form (Ogata ch. 10, from memory): input at the end of the chain reaches all
    assert analyze_structure(Plant(A=A, B=bottom)).controllable_rank == n
    # by hand: A e1 = 0, so the Krylov space of e1 is one-dimensional
    report = analyze_structure(Plant(A=A, B=top))
    assert report.controllable_rank == 1 and sum(report.pole_movable) == 1


# -- plants: unstable, sampled, nearly uncontrollable -------------------------------------------


@pytest.mark.parametrize("omega0", [0.5, 3.0, 20.0])
def test_inverted_pendulum_like_plant_is_controllable_and_observable_from_angle(omega0):
    # invented scenario: linearised inverted pendulum θ'' = ω0² θ + u, angle measured
    plant = Plant(A=[[0.0, 1.0], [omega0**2, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    report = analyze_structure(plant)
    # characteristic equation s² − ω0² = 0 (by hand): poles ±ω0
    np.testing.assert_allclose(report.open_loop_poles, [-omega0, omega0], rtol=1e-13)
    # Kalman rank: [b, Ab] = [[0, 1], [1, 0]] and [c; cA] = I (by hand)
    assert report.controllable and report.observable
    assert report.pole_movable == (True, True) and not report.nearly_uncontrollable


def test_sampled_double_integrator_is_controllable():
    plant = discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), 0.2)
    report = analyze_structure(plant)
    # Φ = [[1, T], [0, 1]], Γ = [T²/2, T] (Franklin, Powell & Workman, 3rd ed., ch. 4, from memory):
    # double pole at z = 1, and [Γ, ΦΓ] is non-singular for T > 0 (by hand: det = −T³)
    np.testing.assert_allclose(report.open_loop_poles, [1.0, 1.0], atol=1e-12)
    assert report.controllable and report.pole_movable == (True, True)


def test_sampling_an_oscillator_at_half_its_period_loses_controllability():
    omega = 2.0
    oscillator = Plant(A=[[0.0, 1.0], [-(omega**2), 0.0]], B=[[0.0], [1.0]])
    sampled = discretize_zero_order_hold(oscillator, math.pi / omega)
    report = analyze_structure(sampled)
    # pathological sampling (Kalman, Ho & Narendra 1963; Åström & Wittenmark, Computer-Controlled Systems,
    # 3rd ed., ch. 2, from memory): T = π/ω gives Φ = −I, so one of the two poles at z = −1 is fixed
    np.testing.assert_allclose(report.open_loop_poles, [-1.0, -1.0], atol=1e-12)
    assert report.controllable_rank == 1
    assert sorted(report.pole_movable) == [False, True]
    # any other sampling time keeps the oscillator controllable (same references)
    assert analyze_structure(discretize_zero_order_hold(oscillator, 0.3)).controllable


def test_nearly_uncontrollable_pole_has_a_small_pbh_margin():
    delta = 1e-9
    report = analyze_structure(Plant(A=np.diag([-1.0, -2.0]), B=[[1.0], [delta]]))
    # PBH margin σ_min([λI − A, B̂])/‖A‖ at λ = −2 with B̂ = B·‖A‖/‖B‖: the 2×3 matrix [[−1, 0, 2], [0, 0, 2δ]]
    # has smallest singular value 2δ/√5 to first order (derived by hand from its 2×2 Gram matrix);
    # relative to ‖A‖ = 2 that is δ/√5. Eising 1984 (Systems & Control Letters 4, from memory) uses σ_min of
    # the PBH matrix as the distance to uncontrollability.
    assert report.controllable
    assert report.pole_controllability_margins[0] == pytest.approx(delta / math.sqrt(5.0), rel=1e-6)
    assert report.controllability_margin < WEAK_STRUCTURE_MARGIN and report.nearly_uncontrollable
    assert not analyze_structure(Plant(A=np.diag([-1.0, -2.0]), B=[[1.0], [0.5]])).nearly_uncontrollable


def test_margins_do_not_depend_on_input_units():
    A = np.array([[0.0, 1.0], [-2.0, -0.5]])
    B = np.array([[0.0], [1.0]])
    base = analyze_structure(Plant(A=A, B=B))
    scaled = analyze_structure(Plant(A=A, B=1e-6 * B))
    # changing the input's unit (B → cB) does not change what feedback can do (common practice, no source)
    np.testing.assert_allclose(base.pole_controllability_margins, scaled.pole_controllability_margins, rtol=1e-9)


# -- against exact ranks ------------------------------------------------------------------------


@settings(max_examples=50, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    n=st.integers(1, 5),
    m=st.integers(1, 2),
    zeros=st.floats(0.0, 0.7),
)
def test_ranks_match_sympys_exact_rank_of_the_integer_controllability_matrix(seed, n, m, zeros):
    rng = np.random.default_rng(seed)
    # small integer plants with many zeros, so that rank-deficient structure is common
    A = rng.integers(-2, 3, (n, n)) * (rng.random((n, n)) > zeros)
    B = rng.integers(-2, 3, (n, m)) * (rng.random((n, m)) > zeros)
    C = rng.integers(-2, 3, (1, n)) * (rng.random((1, n)) > zeros)
    if not B.any() or not C.any():
        B = B.copy()
        C = C.copy()
        B[0, 0] = 1
        C[0, 0] = 1
    report = analyze_structure(Plant(A=A.astype(float), B=B.astype(float), C=C.astype(float)))
    # sympy's exact rational rank of [B, AB, …] and [C; CA; …] as the reference (Kalman rank test)
    exact_A = sympy.Matrix(A.tolist())
    reach = sympy.Matrix.hstack(*[exact_A**k * sympy.Matrix(B.tolist()) for k in range(n)])
    seen = sympy.Matrix.vstack(*[sympy.Matrix(C.tolist()) * exact_A**k for k in range(n)])
    assert report.controllable_rank == reach.rank()
    assert report.observable_rank == seen.rank()
    # the Kalman decomposition fixes exactly n − rank poles (Kalman 1963, from memory)
    assert sum(not movable for movable in report.pole_movable) == n - reach.rank()
    assert sum(not seen_ for seen_ in report.pole_observable) == n - seen.rank()


def test_structure_analysis_runs_each_pbh_svd_once_per_conjugate_pair(monkeypatch, rng):
    # Issue 11 item 7: the staircase check and the report used to run every PBH SVD twice, and once
    # per pole of a conjugate pair (σ([λ̄I − A, B]) = σ([λI − A, B]) for real A, B: conjugate matrices).
    import gainboard.core._structure as structure

    A = rng.normal(size=(6, 6))
    B = rng.normal(size=(6, 2))
    C = rng.normal(size=(1, 6))
    poles = np.linalg.eigvals(A)
    pairs = int(np.sum(poles.imag >= 0))
    svd = np.linalg.svd
    pbh_matrices = []

    def counting_svd(matrix, *args, **kwargs):
        matrix = np.asarray(matrix)
        if matrix.ndim == 3 and matrix.shape[1] == 6:  # a batch of PBH matrices [λI − A, B] (6 rows)
            pbh_matrices.append(matrix.shape[0])
        return svd(matrix, *args, **kwargs)

    monkeypatch.setattr(structure.np.linalg, "svd", counting_svd)
    report = analyze_structure(Plant(A=A, B=B, C=C))
    monkeypatch.undo()
    assert sum(pbh_matrices) == 2 * pairs  # one per pair, for controllability and for observability
    # Reference: numpy's SVD of each PBH matrix, B scaled to ‖A‖ (the definition in StructureReport).
    norm_A = np.linalg.norm(A, 2)
    for pole, margin in zip(report.open_loop_poles, report.pole_controllability_margins):
        matrix = np.hstack([pole * np.eye(6) - A, B * norm_A / np.linalg.norm(B, 2)])
        assert margin == pytest.approx(np.linalg.svd(matrix, compute_uv=False)[-1] / norm_A, rel=1e-9, abs=1e-15)
