"""Closed-loop poles: canonical order, what each pole means, stability reports, pairing.

Every numeric check names its outside reference in a comment.
"""

import itertools
import math

import mpmath
import numpy as np
import pytest
import scipy.linalg
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import (
    AnalysisError,
    GainError,
    Plant,
    analyze_closed_loop,
    analyze_open_loop,
    analyze_state_matrix,
    closed_loop_matrix,
    closed_loop_poles,
    describe_poles,
    match_poles,
    sort_poles,
)
from gainboard.core import _closed_loop as closed_loop_module

# reference case 1 (/work/shared/reference-cases.md)
CASE1_A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]]
CASE1_B = [[0.0], [0.0], [1.0]]
CASE1_K = [[199.0, 55.0, 8.0]]


def _case1_plant():
    return Plant(A=CASE1_A, B=CASE1_B)


# -- sort_poles ------------------------------------------------------------------------------------


def test_sort_poles_makes_near_conjugates_exact_and_orders_by_real_part():
    poles = sort_poles([-1 - 2j, -3 + 1e-17j, -1 + 2.0000000000000004j])
    # conjugate root theorem: complex roots of a real polynomial come in exact
    # conjugate pairs (standard algebra, from memory); ordering is our own convention
    assert poles.tolist() == [-3 + 0j, -1 + 2j, -1 - 2j]
    assert poles[1] == np.conj(poles[2])


def test_sort_poles_keeps_a_real_pole_before_a_pair_with_the_same_real_part_despite_rounding():
    poles = sort_poles([-1.0000000000000004 + 2j, -0.9999999999999998, -1.0000000000000004 - 2j])
    # ordering convention (ours): equal real parts (to rounding) → smaller |imaginary part| first
    assert poles[0].imag == 0.0
    assert poles[1] == np.conj(poles[2])  # conjugate root theorem (from memory)


def test_sort_poles_leaves_an_unpaired_complex_pole_alone_and_does_not_mutate_input():
    given_poles = np.array([-1 + 1j, -2.0])
    out = sort_poles(given_poles)
    # no partner within rounding: nothing is invented (common practice, no source)
    assert out.tolist() == [-2 + 0j, -1 + 1j]
    assert given_poles.tolist() == [-1 + 1j, -2.0]


def test_sort_poles_refuses_non_finite_values():
    with pytest.raises(AnalysisError, match="poles must be finite"):
        sort_poles([-1.0, np.nan])


def test_sort_poles_refuses_a_string():
    with pytest.raises(AnalysisError, match="must be a list of numbers"):
        sort_poles("-1, -2")


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 8))
def test_sorted_eigenvalues_of_a_real_matrix_are_exactly_conjugate_closed(seed, n):
    rng = np.random.default_rng(seed)
    matrix = rng.standard_normal((n, n))
    raw = np.linalg.eigvals(matrix)
    poles = sort_poles(raw)
    # conjugate root theorem (from memory): the conjugate of the sorted set is the same set, exactly
    assert sorted(np.conj(poles).tolist(), key=lambda p: (p.real, p.imag)) == sorted(
        poles.tolist(), key=lambda p: (p.real, p.imag)
    )
    # sorting only permutes (and cleans at rounding level): compare with numpy's own eigvals as reference
    _, matched, errors = match_poles(raw, poles)
    assert np.max(errors) <= 1e-12 * max(1.0, np.max(np.abs(raw)))


# -- describe_poles --------------------------------------------------------------------------------


def test_describe_continuous_pair_uses_the_standard_second_order_parameters():
    (d,) = describe_poles([-3 + 4j])
    # s = −ζωn ± jωn√(1−ζ²): Ogata, Modern Control Engineering, 5th ed., sec. 5-3 (from memory)
    assert d.natural_frequency == pytest.approx(5.0, rel=1e-14)
    assert d.damping_ratio == pytest.approx(0.6, rel=1e-14)
    assert d.damped_frequency == pytest.approx(4.0, rel=1e-14)
    # time constant 1/(ζωn) of the envelope (same section, from memory)
    assert d.time_constant == pytest.approx(1.0 / 3.0, rel=1e-14)
    assert d.stable and d.equivalent_continuous == -3 + 4j


def test_describe_unstable_and_marginal_continuous_poles():
    growing, origin, undamped = describe_poles([2.0, 0.0, 5j])
    # ζ = −Re(s)/|s| (Ogata sec. 5-3, from memory): a growing real pole has ζ = −1, an undamped one ζ = 0
    assert growing.damping_ratio == -1.0 and math.isinf(growing.time_constant) and not growing.stable
    assert undamped.damping_ratio == 0.0 and undamped.natural_frequency == 5.0 and not undamped.stable
    # a pole at s = 0 (integrator) neither decays nor grows: our documented convention ζ = 0, τ = ∞
    assert origin.damping_ratio == 0.0 and math.isinf(origin.time_constant) and not origin.stable


def test_describe_sampled_pole_maps_back_through_z_equals_exp_sT():
    T = 0.1
    with mpmath.workdps(50):
        s = mpmath.mpc(-1, 2)
        z = complex(mpmath.exp(s * mpmath.mpf("0.1")))  # mpmath at 50 digits as reference for z = e^{sT}
    (d,) = describe_poles([z], sample_time=T)
    # z = e^{sT} (Franklin, Powell & Workman, Digital Control of Dynamic Systems, 3rd ed., ch. 4, from memory)
    assert d.equivalent_continuous == pytest.approx(complex(s), rel=1e-13)
    assert d.natural_frequency == pytest.approx(math.sqrt(5.0), rel=1e-13)  # |s| = √5
    assert d.damping_ratio == pytest.approx(1 / math.sqrt(5.0), rel=1e-13)  # ζ = −Re s/|s|
    assert d.time_constant == pytest.approx(1.0, rel=1e-13)  # −1/Re s
    assert d.stable  # |z| = e^{−0.1} < 1 (unit-circle criterion, same chapter, from memory)


def test_describe_sampled_special_points():
    T = 0.5
    deadbeat, negative, boundary, outside = describe_poles([0.0, -0.5, 1.0, 1.2], sample_time=T)
    # documented conventions (ours): z = 0 is deadbeat, τ = 0, ζ = 1, ωn = ∞
    assert deadbeat.time_constant == 0.0 and deadbeat.damping_ratio == 1.0
    assert math.isinf(deadbeat.natural_frequency) and deadbeat.stable
    # z on the negative real axis: s = ln|z|/T + jπ/T, the Nyquist oscillation
    # (principal logarithm; Franklin, Powell & Workman ch. 4, from memory)
    assert negative.equivalent_continuous == pytest.approx(complex(math.log(0.5) / T, math.pi / T), rel=1e-14)
    assert negative.damped_frequency == pytest.approx(math.pi / T, rel=1e-14)
    # |z| = 1 is not asymptotically stable, |z| > 1 grows (unit-circle criterion, from memory)
    assert not boundary.stable and math.isinf(boundary.time_constant)
    assert not outside.stable and outside.damping_ratio == -1.0


def test_describe_refuses_a_bad_sample_time():
    with pytest.raises(AnalysisError, match="sample_time must be a positive finite number"):
        describe_poles([0.5], sample_time=-0.1)


# -- closed loop -----------------------------------------------------------------------------------


def test_closed_loop_poles_of_case_1_are_the_textbook_poles():
    poles = closed_loop_poles(_case1_plant(), CASE1_K)
    # Ogata, Modern Control Engineering, 5th ed., Example 10-1 (from memory): K = [199, 55, 8] gives −2±4j, −10
    np.testing.assert_allclose(poles, [-10, -2 + 4j, -2 - 4j], rtol=0, atol=1e-12)


def test_analyze_closed_loop_of_case_1_reports_margin_and_time_scales():
    report = analyze_closed_loop(_case1_plant(), CASE1_K)
    # poles from Ogata Example 10-1 (from memory); margin −max Re s and τ = −1/Re s by definition
    assert report.stable
    assert report.stability_margin == pytest.approx(2.0, rel=1e-12)
    assert report.slowest_time_constant == pytest.approx(0.5, rel=1e-12)
    assert report.fastest_time_constant == pytest.approx(0.1, rel=1e-12)
    assert [d.value for d in report.descriptions] == report.poles.tolist()
    assert report.sample_time is None


def test_open_loop_report_is_the_report_for_zero_gain():
    plant = _case1_plant()
    open_loop = analyze_open_loop(plant)
    zero_gain = analyze_closed_loop(plant, np.zeros((1, 3)))
    # definition: open loop = closed loop with K = 0; compared against numpy's eigvals as reference
    np.testing.assert_allclose(open_loop.poles, zero_gain.poles, atol=1e-13)
    _, _, errors = match_poles(np.linalg.eigvals(np.array(CASE1_A)), open_loop.poles)
    assert np.max(errors) < 1e-12


def test_sampled_closed_loop_of_reference_case_13():
    plant = Plant(A=[[0.0, 1.0], [-0.16, -1.0]], B=[[0.0], [1.0]], sample_time=1.0)
    report = analyze_closed_loop(plant, [[0.34, -2.0]])
    # Ogata, Discrete-Time Control Systems, 2nd ed., ch. 6 (from memory): K = [0.34, −2] puts poles at 0.5±0.5j
    np.testing.assert_allclose(report.poles, [0.5 + 0.5j, 0.5 - 0.5j], atol=1e-14)
    # sampled stability margin 1 − max|z| = 1 − 1/√2 (definition, |0.5±0.5j| = 1/√2)
    assert report.stability_margin == pytest.approx(1 - 1 / math.sqrt(2), rel=1e-13)
    assert report.stable and report.sample_time == 1.0


def test_deadbeat_closed_loop_is_defective_and_reported_so():
    plant = Plant(A=[[0.0, 1.0], [-0.16, -1.0]], B=[[0.0], [1.0]], sample_time=1.0)
    report = analyze_closed_loop(plant, [[-0.16, -1.0]])
    # Ogata, Discrete-Time Control Systems, ch. 6 (from memory): K = [−0.16, −1] is deadbeat, G − HK = [[0,1],[0,0]],
    # a 2×2 Jordan block (defective, one eigenvector: standard linear algebra, from memory)
    np.testing.assert_array_equal(closed_loop_matrix(plant, [[-0.16, -1.0]]), [[0.0, 1.0], [0.0, 0.0]])
    assert math.isinf(report.eigenvector_condition)
    assert report.fastest_time_constant == 0.0 and report.stable


def test_symmetric_closed_loop_has_perfectly_conditioned_poles():
    report = analyze_state_matrix([[-2.0, 1.0], [1.0, -2.0]])
    # spectral theorem: a symmetric matrix has orthonormal eigenvectors, so κ(V) = 1 and each
    # eigenvalue condition number is 1 (Wilkinson, The Algebraic Eigenvalue Problem, 1965, ch. 2, from memory)
    assert report.eigenvector_condition == pytest.approx(1.0, rel=1e-12)
    np.testing.assert_allclose(report.pole_condition_numbers, [1.0, 1.0], rtol=1e-12)
    np.testing.assert_allclose(report.poles, [-3.0, -1.0], atol=1e-14)  # eigenvalues −2 ∓ 1 (by hand)


def test_pole_condition_numbers_of_a_triangular_matrix_match_the_hand_formula():
    a, b, c = -1.0, -3.0, 4.0
    report = analyze_state_matrix([[a, c], [0.0, b]])
    # Wilkinson's κ = ‖x‖‖y‖/|yᴴx| (Wilkinson 1965, from memory); for [[a, c], [0, b]] the right and left
    # eigenvectors give κ = √(1 + (c/(a − b))²) for both eigenvalues (derived by hand)
    expected = math.sqrt(1.0 + (c / (a - b)) ** 2)
    np.testing.assert_allclose(report.pole_condition_numbers, [expected, expected], rtol=1e-12)


def test_error_estimates_are_honest_for_an_ill_conditioned_companion_matrix():
    # companion matrix of ∏(s + 1 + k/10), k = 0..9: clustered roots, very sensitive eigenvalues
    n = 10
    with mpmath.workdps(50):
        coefficients = [mpmath.mpf(1)]
        for k in range(n):  # exact product at 50 digits
            root = -(1 + mpmath.mpf(k) / 10)
            coefficients = [c - root * p for c, p in zip(coefficients + [0], [0] + coefficients)]
        companion = np.diag(np.ones(n - 1), 1)
        companion[-1, :] = [-float(coefficients[n - i]) for i in range(n)]
        # mpmath eig at 50 digits of the same (float) matrix: reference for its true eigenvalues
        exact, _ = mpmath.eig(mpmath.matrix(companion.tolist()))
        exact = np.array([complex(v) for v in exact])
    report = analyze_state_matrix(companion)
    computed, _, errors = match_poles(report.poles, exact)
    np.testing.assert_array_equal(computed, report.poles)  # already canonical: estimates stay aligned
    assert np.all(errors <= report.pole_error_estimates)  # the first-order estimate does not undersell
    assert np.max(report.pole_error_estimates) > 1e-9  # and it does say that many digits are lost here
    assert np.max(errors) > 1e-12  # (the case really is ill-conditioned: rounding shows)
    assert report.eigenvector_condition > 1e8


def test_closed_loop_refuses_a_gain_of_the_wrong_shape():
    with pytest.raises(GainError, match="K is 1×2 but must be 1×3"):
        closed_loop_poles(_case1_plant(), [[1.0, 2.0]])


def test_analyze_state_matrix_refuses_a_non_square_matrix():
    with pytest.raises(AnalysisError, match=r"must be square \(n×n\), but its shape is \(2, 3\)"):
        analyze_state_matrix(np.zeros((2, 3)))


# -- the shared eigendecomposition ------------------------------------------------------------------


def _awkward_matrix(rng, n, kind):
    """A random real matrix: dense, badly scaled (balancing scales it), or with isolated eigenvalues
    (balancing permutes them to the ends), or with an exactly repeated complex pair."""
    matrix = rng.standard_normal((n, n))
    if kind == "scaled":
        scales = 10.0 ** rng.integers(-6, 7, size=n)
        matrix = scales[:, None] * matrix / scales[None, :]
    elif kind == "isolated":
        # a row (or column) that is zero off the diagonal isolates an eigenvalue: gebal permutes
        # it to the bottom (or top) of the matrix
        rows = rng.choice(n, size=max(1, n // 2), replace=False)
        for k in rows[::2]:
            diagonal = matrix[k, k]
            matrix[k, :] = 0.0
            matrix[k, k] = diagonal
        for k in rows[1::2]:
            diagonal = matrix[k, k]
            matrix[:, k] = 0.0
            matrix[k, k] = diagonal
    elif kind == "repeated" and n >= 4:
        block = np.array([[-1.0, 2.0], [-2.0, -1.0]])
        matrix[:4, :4] = np.kron(np.eye(2), block)
        matrix[4:, :4] = 0.0
    return matrix


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 9), kind=st.sampled_from(["dense", "scaled", "isolated",
                                                                                   "repeated"]))
def test_balancing_and_eigenvectors_are_exactly_scipys(seed, n, kind):
    rng = np.random.default_rng(seed)
    matrix = _awkward_matrix(rng, n, kind)
    balanced, scaling, inverse = closed_loop_module._balance(matrix)
    # reference: scipy.linalg.matrix_balance (the same LAPACK gebal, through scipy's checks), bit for bit
    expected_balanced, similarity = scipy.linalg.matrix_balance(matrix)
    np.testing.assert_array_equal(balanced, expected_balanced)
    np.testing.assert_array_equal(np.diag(scaling)[inverse, :], similarity)
    # reference: scipy.linalg.eig with left and right vectors (the same LAPACK geev), bit for bit
    eigenvalues, left, right = closed_loop_module._eigen_with_vectors(balanced)
    expected = scipy.linalg.eig(balanced, left=True, right=True)
    for ours, theirs in zip((eigenvalues, left, right), expected):
        np.testing.assert_array_equal(ours, theirs)


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 8), kind=st.sampled_from(["dense", "scaled", "isolated"]))
def test_condition_numbers_and_error_estimates_match_a_scipy_reference(seed, n, kind):
    rng = np.random.default_rng(seed)
    matrix = _awkward_matrix(rng, n, kind)
    report = analyze_state_matrix(matrix)
    # reference: scipy's balancing and eigendecomposition, then Wilkinson's κ = ‖x‖‖y‖/|yᴴx| of the
    # unit vectors mapped back (Wilkinson, The Algebraic Eigenvalue Problem, 1965, from memory) and the
    # documented estimate κ_balanced · n · eps · ‖D⁻¹MD‖₂
    balanced, similarity = scipy.linalg.matrix_balance(matrix)
    values, left_b, right_b = scipy.linalg.eig(balanced, left=True, right=True)
    right = similarity @ right_b
    left = np.linalg.inv(similarity).T @ left_b
    kappa = np.linalg.norm(left, axis=0) * np.linalg.norm(right, axis=0) / np.abs(np.sum(left.conj() * right, axis=0))
    kappa_balanced = 1.0 / np.abs(np.sum(left_b.conj() * right_b, axis=0))
    estimates = kappa_balanced * n * np.finfo(float).eps * np.linalg.norm(balanced, 2)
    _, order = closed_loop_module._sorted_with_order(values)
    np.testing.assert_allclose(report.pole_condition_numbers, kappa[order], rtol=1e-9)
    np.testing.assert_allclose(report.pole_error_estimates, estimates[order], rtol=1e-9)
    # and the poles themselves are numpy's eigenvalues, matched one to one (numpy as reference)
    _, _, errors = match_poles(report.poles, np.linalg.eigvals(matrix))
    assert errors.max() <= 1e-9 * max(1.0, np.abs(report.poles).max()) * max(1.0, report.pole_condition_numbers.max())


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 10))
def test_sorting_exact_conjugate_pairs_only_reorders_them(seed, n):
    rng = np.random.default_rng(seed)
    raw = np.linalg.eigvals(rng.standard_normal((n, n)))
    poles = sort_poles(raw)
    # LAPACK returns a real matrix's complex eigenvalues as exact conjugates (conjugate root theorem,
    # from memory), so nothing needs averaging: the sorted poles are numpy's eigenvalues, bit for bit,
    # up to order
    assert sorted(poles.tolist(), key=lambda p: (p.real, p.imag)) == sorted(
        raw.astype(complex).tolist(), key=lambda p: (p.real, p.imag))
    # ordering convention (ours): real parts ascending (ties within the rounding tolerance), then
    # |imaginary part| ascending, the positive member of a pair first
    tolerance = 100.0 * n * np.finfo(float).eps * np.abs(raw).max()
    for first, second in zip(poles[:-1], poles[1:]):
        assert first.real <= second.real + tolerance
        if abs(first.real - second.real) <= tolerance and first.real <= second.real:
            assert (abs(first.imag), -first.imag) <= (abs(second.imag), -second.imag)


def test_unpaired_and_near_conjugates_still_go_through_the_assignment():
    # a near-conjugate pair is averaged, an unpaired complex pole is kept (common practice, no source)
    cleaned, unpaired = closed_loop_module._pair_conjugates(np.array([-1 + 2j, -3 + 1j, -1 - 2.000000000000001j]),
                                                            1e-12)
    assert cleaned[0] == np.conj(cleaned[2]) and cleaned[0] == -1 + 2.0000000000000004j
    assert unpaired.tolist() == [1]


# -- match_poles -----------------------------------------------------------------------------------


def test_match_poles_uses_optimal_assignment_not_nearest_neighbour():
    requested, achieved, errors = match_poles([-1.0, -1.1], [-1.05, -0.5])
    # nearest-neighbour would pair −1 with −1.05 and leave −1.1 with −0.5 (sum 0.65); the optimal
    # assignment (Kuhn, "The Hungarian method for the assignment problem", 1955, from memory) sums to 0.55
    assert requested.tolist() == [-1.1 + 0j, -1.0 + 0j]
    assert achieved.tolist() == [-1.05 + 0j, -0.5 + 0j]
    assert errors.sum() == pytest.approx(0.55, rel=1e-12)


def test_match_poles_handles_repeated_poles():
    requested, achieved, errors = match_poles([-2.0, -2.0, -3.0], [-2.0 + 1e-8j, -2.0 - 1e-8j, -3.0])
    # each requested copy gets its own achieved pole (assignment problem definition, Kuhn 1955, from memory)
    assert sorted(achieved.imag.tolist()) == [-1e-8, 0.0, 1e-8]
    assert np.max(errors) == pytest.approx(1e-8, rel=1e-6)


def test_match_poles_refuses_lists_of_different_length():
    with pytest.raises(AnalysisError, match="cannot pair 2 requested poles with 3 achieved poles"):
        match_poles([-1.0, -2.0], [-1.0, -2.0, -3.0])


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 6))
def test_match_poles_total_error_equals_the_exhaustive_minimum(seed, n):
    rng = np.random.default_rng(seed)
    requested = rng.standard_normal(n) + 1j * rng.standard_normal(n)
    achieved = requested[rng.permutation(n)] + 0.3 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    wanted, _, errors = match_poles(requested, achieved)
    # reference: exhaustive search over all n! pairings (definition of the assignment problem)
    best = min(np.abs(wanted - achieved[list(p)]).sum() for p in itertools.permutations(range(n)))
    assert errors.sum() == pytest.approx(best, rel=1e-12, abs=1e-12)
