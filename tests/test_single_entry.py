"""One gain entry at a time: exact stable intervals, adaptive loci, pole sensitivities.

Every numeric check names its outside reference beside it: the vetted cases in
/work/shared/reference-cases.md (Routh–Hurwitz and Jury derivations, textbook
root-locus facts), sympy's symbolic determinant, numpy/scipy eigenvalues on dense
grids (brute force), and central finite differences.
"""

import math

import numpy as np
import pytest
import scipy.linalg
import scipy.signal
import sympy
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import linear_sum_assignment

from gainboard.core import (
    GainError,
    Plant,
    all_entry_stable_intervals,
    default_entry_range,
    discretize_zero_order_hold,
    entry_locus,
    entry_polynomials,
    entry_stable_intervals,
    pole_sensitivity,
    scaled_gain_locus,
)
from gainboard.core import _single_entry as single_entry
from gainboard.core import _single_entry_family as family_module
from gainboard.core import _single_entry_sampler as sampler

# ---------------------------------------------------------------------------
# Helpers
# ---------------------------------------------------------------------------
CASE1_A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]]
CASE1_K = [[199.0, 55.0, 8.0]]


def companion_plant(last_row, sample_time=None):
    """x' = Ax + Bu with A in companion form (ones above the diagonal) and B = e_n."""
    n = len(last_row)
    A = np.diag(np.ones(n - 1), 1)
    A[-1, :] = last_row
    B = np.zeros((n, 1))
    B[-1, 0] = 1.0
    return Plant(A=A, B=B, sample_time=sample_time)


def boundary_excess(poles, sampled):
    """Largest Re s (continuous) or |z| − 1 (sampled) over the poles in the last axis."""
    return (np.abs(poles) - 1.0).max(axis=-1) if sampled else poles.real.max(axis=-1)


def swept_poles(plant, K, row, col, grid):
    """Eigenvalues of A − B·K(v) for every v of the grid (numpy as the reference engine)."""
    gains = np.repeat(np.asarray(K, dtype=float)[None], grid.size, axis=0)
    gains[:, row, col] = grid
    return np.linalg.eigvals(plant.A[None] - plant.B[None] @ gains)


def assert_agrees_with_sweep(plant, K, row, col, result, points=2001, low=None, high=None):
    """Brute force: classify a dense grid by numpy eigenvalues and compare with the intervals.

    Grid points within two grid steps of a reported crossing, and points whose worst pole is
    within rounding of the boundary, are skipped (agreement to the grid resolution).
    """
    gains = [c.gain for c in result.crossings]
    if low is None or high is None:
        low, high = default_entry_range(plant, K, row, col)
        if gains:
            pad = 0.25 * (max(gains) - min(gains)) + 1.0
            low, high = min(low, min(gains) - pad), max(high, max(gains) + pad)
    grid = np.linspace(low, high, points)
    step = grid[1] - grid[0]
    poles = swept_poles(plant, K, row, col, grid)
    excess = boundary_excess(poles, plant.is_sampled)
    scale = np.linalg.norm(plant.A) + np.linalg.norm(plant.B) * np.abs(grid).max() * max(1.0, np.abs(K).max())
    mismatches = []
    for value, worst in zip(grid, excess):
        if any(abs(value - g) <= 2.0 * step for g in gains):
            continue
        if abs(worst) <= 1e-9 * scale:
            continue
        if (worst < 0.0) != result.contains(value):
            mismatches.append((float(value), float(worst)))
    assert not mismatches, f"intervals {result.intervals} disagree with the sweep at {mismatches[:5]}"


def matched_distance(first, second):
    """Largest distance between two pole sets paired by optimal assignment."""
    cost = np.abs(first[:, None] - second[None, :])
    rows, cols = linear_sum_assignment(cost)
    return cost[rows, cols].max()


def random_plant(rng, sampled, structure="dense", n=None, m=None):
    """A random plant for property tests (rng is a numpy Generator)."""
    n = n or int(rng.integers(1, 6))
    m = m or int(rng.integers(1, 3))
    if structure == "sparse":
        A = rng.integers(-2, 3, size=(n, n)) * (rng.random((n, n)) < 0.5)
        B = rng.integers(-1, 2, size=(n, m)) * (rng.random((n, m)) < 0.6)
        K = rng.integers(-2, 3, size=(m, n)).astype(float)
    else:
        A = rng.normal(size=(n, n))
        B = rng.normal(size=(n, m))
        K = rng.normal(size=(m, n))
    A = np.asarray(A, dtype=float)
    B = np.asarray(B, dtype=float)
    if sampled:
        radius = np.abs(np.linalg.eigvals(A)).max()
        A = A / max(radius, 1.0)
    if not np.any(B):
        B[0, 0] = 1.0
    return Plant(A=A, B=B, sample_time=0.1 if sampled else None), K


# ---------------------------------------------------------------------------
# Reference cases: Routh–Hurwitz and Jury
# ---------------------------------------------------------------------------
def test_case_5_intervals_of_each_entry_match_routh_hurwitz():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    # reference-cases.md case 5 (plant and K: Ogata Example 10-1, from memory; intervals derived by
    # Routh–Hurwitz on s³ + (6+k3)s² + (5+k2)s + (1+k1), Ogata sec. 5-6)
    expected = {0: (-1.0, 839.0), 1: (65.0 / 7.0, math.inf), 2: (-8.0 / 3.0, math.inf)}
    for col, (low, high) in expected.items():
        result = entry_stable_intervals(plant, CASE1_K, 0, col)
        assert len(result.intervals) == 1
        found_low, found_high = result.intervals[0]
        assert found_low == pytest.approx(low, rel=1e-9, abs=1e-9 * 200)  # case 5, Routh–Hurwitz
        if math.isfinite(high):
            assert found_high == pytest.approx(high, rel=1e-9)  # case 5, Routh–Hurwitz
        else:
            assert found_high == math.inf  # case 5: no upper limit
        assert result.current_is_stable  # case 1: poles −2±4j, −10 are stable (Ogata Example 10-1)


def test_case_5_crossing_frequencies_and_directions_match_the_routh_array():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    result = entry_stable_intervals(plant, CASE1_K, 0, 0)
    low, high = result.crossings
    # Routh: k1 = −1 puts a root at s = 0; k1 = 839 makes the auxiliary polynomial 14s² + 840 = 0, s = ±j√60
    assert low.frequency == pytest.approx(0.0, abs=1e-9) and low.point == 0j
    assert high.frequency == pytest.approx(math.sqrt(60.0), rel=1e-10)
    # Routh array first column 1, 14, (840 − (1+k1))/14, 1 + k1: one sign change below −1, two above 839
    assert (low.unstable_below, low.unstable_above) == (1, 0)
    assert (high.unstable_below, high.unstable_above) == (0, 2)
    assert not low.touches_only and not high.touches_only
    k2 = entry_stable_intervals(plant, CASE1_K, 0, 1)
    # Routh: 14(5 + k2) = 200 → auxiliary 14s² + 200 = 0, ω² = 100/7
    assert [c.frequency for c in k2.crossings] == [pytest.approx(math.sqrt(100.0 / 7.0), rel=1e-10)]


def test_case_6_third_order_stable_range_and_crossing():
    plant = companion_plant([0.0, -77.0, -18.0])
    result = entry_stable_intervals(plant, [[100.0, 0.0, 0.0]], 0, 0)
    # reference-cases.md case 6 (Nise ch. 6, from memory): 0 < k < 1386, crossing at ±j√77
    assert result.intervals == (pytest.approx((0.0, 1386.0), rel=1e-10, abs=1e-9),)
    frequencies = sorted(c.frequency for c in result.crossings)
    assert frequencies == [pytest.approx(0.0, abs=1e-12), pytest.approx(math.sqrt(77.0), rel=1e-10)]


def test_case_7_fourth_order_stable_range_and_crossing():
    plant = companion_plant([0.0, -2.0, -3.0, -3.0])
    result = entry_stable_intervals(plant, [[1.0, 0.0, 0.0, 0.0]], 0, 0)
    # reference-cases.md case 7 (Routh on s⁴+3s³+3s²+2s+k): 0 < k < 14/9, crossing ±j0.8165
    ((low, high),) = result.intervals
    assert low == pytest.approx(0.0, abs=1e-12)
    assert high == pytest.approx(14.0 / 9.0, rel=1e-10)
    upper = max(result.crossings, key=lambda c: c.gain)
    assert upper.frequency == pytest.approx(math.sqrt(2.0 / 3.0), rel=1e-10)  # 0.8165 = √(2/3), case 7


def test_case_14_sampled_double_integrator_jury_ranges_and_unit_circle_crossings():
    double_integrator = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    plant = discretize_zero_order_hold(double_integrator, 1.0)
    first = entry_stable_intervals(plant, [[1.0, 1.0]], 0, 0)
    # reference-cases.md case 14 (Jury; Åström & Wittenmark, from memory): k2 = 1 → k1 ∈ (0, 2)
    assert first.intervals == (pytest.approx((0.0, 2.0), abs=1e-12),)
    # characteristic z² − (2 − k1/2 − k2)z + (1 − k2 + k1/2): k1 = 0 → z = 1; k1 = 2 → z = ±j
    assert [c.point for c in first.crossings] == [pytest.approx(1.0), pytest.approx(1j)]
    assert [c.frequency for c in first.crossings] == [pytest.approx(0.0, abs=1e-12), pytest.approx(math.pi / 2)]
    second = entry_stable_intervals(plant, [[1.0, 1.0]], 0, 1)
    # Jury on the same polynomial with k1 = 1 (derived): |1.5 − k2| < 1 and 4 − 2k2 > 0 → k2 ∈ (0.5, 2);
    # at k2 = 0.5: z² − z + 1 = 0, z = e^{±jπ/3}; at k2 = 2: a root at z = −1
    assert second.intervals == (pytest.approx((0.5, 2.0), rel=1e-12),)
    assert [c.frequency for c in second.crossings] == [pytest.approx(math.pi / 3), pytest.approx(math.pi)]
    assert second.sampled and second.current_is_stable
    polys = entry_polynomials(plant, [[1.0, 1.0]], 0, 0)
    # the same polynomial, z² − (1 − k1/2)z + k1/2 at k2 = 1 (derived from case 14's Φ, Γ)
    assert polys.variable == "z"
    np.testing.assert_allclose(polys.base, [1.0, -1.0, 0.0], atol=1e-12)
    np.testing.assert_allclose(polys.direction, [0.0, 0.5, 0.5], atol=1e-12)


def test_touching_point_splits_the_interval_without_an_unstable_sliver():
    # Changing one entry along the direction [2, 1, 1] of a companion plant with
    # p = s³+s²+s+1 gives s³ + (1+v)s² + (1+v)s + (1+2v). Routh–Hurwitz (case 4): stable iff
    # 1 + v > 0, 1 + 2v > 0 and (1+v)² − (1+2v) = v² > 0, so (−1/2, 0) ∪ (0, ∞); at v = 0 the
    # poles ±j touch the axis without crossing it (derived).
    companion = np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -1.0, -1.0]])
    inverse = np.array([[2.0, 1.0, 1.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])
    transform = np.linalg.inv(inverse)
    plant = Plant(A=inverse @ companion @ transform, B=inverse @ np.array([[0.0], [0.0], [1.0]]))
    result = entry_stable_intervals(plant, [[1.0, 0.0, 0.0]], 0, 0)
    assert len(result.intervals) == 2
    (a, b), (c, d) = result.intervals
    assert a == pytest.approx(-0.5, rel=1e-12)  # Routh: 1 + 2v = 0
    assert b == pytest.approx(0.0, abs=1e-7) and c == pytest.approx(0.0, abs=1e-7)  # Routh: v² = 0
    assert d == math.inf
    touch = [x for x in result.crossings if x.touches_only]
    assert len(touch) == 1 and touch[0].point == pytest.approx(1j, abs=1e-7)  # poles ±j at v = 0 (derived)
    assert touch[0].ill_conditioned and any("touches" in w for w in result.warnings)


def test_a_crossing_missed_by_the_exact_method_is_found_by_bisection_and_flagged(monkeypatch):
    import gainboard.core._single_entry as single_entry

    exact = single_entry.boundary_points

    def without_the_upper_crossing(family):
        return [point for point in exact(family) if point.gain < 100.0]

    # Simulate a miss in the structured eigenvalue problem: the safety net must still find the end.
    monkeypatch.setattr(single_entry, "boundary_points", without_the_upper_crossing)
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    result = entry_stable_intervals(plant, CASE1_K, 0, 0)
    ((low, high),) = result.intervals
    assert low == pytest.approx(-1.0, abs=1e-9) and high == pytest.approx(839.0, rel=1e-8)  # case 5, Routh
    located = [c for c in result.crossings if not c.exact]
    assert len(located) == 1 and located[0].ill_conditioned
    assert located[0].frequency == pytest.approx(math.sqrt(60.0), rel=1e-6)  # Routh auxiliary 14s² + 840
    assert any("located by bisection" in w for w in result.warnings)


# ---------------------------------------------------------------------------
# Structure: entries without effect, fixed poles, mirror pairs
# ---------------------------------------------------------------------------
def test_entry_that_moves_no_pole_gives_the_whole_line_or_nothing():
    plant = Plant(A=np.diag([-1.0, -2.0]), B=[[1.0], [0.0]])
    result = entry_stable_intervals(plant, [[0.0, 0.0]], 0, 1)
    # A − BK is upper triangular for every k12: poles −1 − k11 and −2 stay put (triangular
    # matrix eigenvalues, handbook fact)
    assert not result.entry_has_effect
    assert result.intervals == ((-math.inf, math.inf),)
    unstable = entry_stable_intervals(Plant(A=np.diag([1.0, -2.0]), B=[[1.0], [0.0]]), [[0.0, 0.0]], 0, 1)
    assert unstable.intervals == () and "moves no pole" in unstable.never_stable_reason


def test_fixed_unstable_pole_is_named_in_the_reason():
    plant = Plant(A=np.diag([1.0, -2.0]), B=[[0.0], [1.0]])
    result = entry_stable_intervals(plant, [[0.0, 0.0]], 0, 1)
    # x1' = x1 is not reached by the input: the pole 1 is fixed (block triangular, handbook fact)
    assert result.intervals == ()
    assert "pole(s) 1 " in result.never_stable_reason and "cannot move" in result.never_stable_reason
    assert result.fixed_poles == (pytest.approx(1.0),)


def test_entry_that_only_moves_poles_in_mirror_pairs_is_never_stable():
    plant = Plant(A=[[0.0, 1.0], [-1.0, 0.0]], B=[[0.0], [1.0]])
    result = entry_stable_intervals(plant, [[0.5, 0.0]], 0, 0)
    # closed loop s² + (1 + k) (derived): roots ±j√(1+k) or ±√(−1−k); Routh: the missing s term
    # means never asymptotically stable
    assert result.intervals == ()
    assert "mirror-image pairs" in result.never_stable_reason


# ---------------------------------------------------------------------------
# Polynomials (sympy as the reference)
# ---------------------------------------------------------------------------
def _symbolic_coefficients(A, B, K, row, col):
    s, k = sympy.symbols("s k")
    K_symbolic = sympy.Matrix(K)
    K_symbolic[row, col] = k
    n = len(A)
    characteristic = (s * sympy.eye(n) - sympy.Matrix(A) + sympy.Matrix(B) * K_symbolic).det()
    polynomial = sympy.Poly(sympy.expand(characteristic), s)
    coefficients = [sympy.expand(polynomial.coeff_monomial(s**p)) for p in range(n, -1, -1)]
    base = [float(c.subs(k, 0)) for c in coefficients]
    direction = [float(sympy.diff(c, k)) for c in coefficients]
    # det is affine in k (rank-one change): the second derivative vanishes
    assert all(sympy.diff(c, k, 2) == 0 for c in coefficients)
    return base, direction


@pytest.mark.parametrize("row, col", [(0, 0), (0, 1), (1, 2), (1, 3)])
def test_entry_polynomials_equal_sympys_symbolic_determinant(row, col):
    A = [[0, 1, 0, 0], [-2, -1, 1, 0], [0, 0, 0, 1], [1, 0, -3, -2]]
    B = [[0, 0], [1, 0], [0, 0], [0, 1]]
    K = [[3, -1, 2, 0], [1, 2, -4, 5]]
    plant = Plant(A=np.array(A, float), B=np.array(B, float))
    polys = entry_polynomials(plant, np.array(K, float), row, col)
    base, direction = _symbolic_coefficients(A, B, K, row, col)
    # sympy's exact det(sI − A + BK) with K[row, col] a symbol is the reference
    np.testing.assert_allclose(polys.base, base, rtol=1e-10, atol=1e-10)
    np.testing.assert_allclose(polys.direction, direction, rtol=1e-10, atol=1e-10)
    assert polys.variable == "s" and polys.current_value == K[row][col]


def test_entry_polynomials_of_case_1_match_sympy():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    polys = entry_polynomials(plant, CASE1_K, 0, 1)
    base, direction = _symbolic_coefficients(
        [[0, 1, 0], [0, 0, 1], [-1, -5, -6]], [[0], [0], [1]], [[199, 55, 8]], 0, 1
    )
    # sympy reference; by hand: s³ + 14s² + 5s + 200 + k2·s (case 1 companion form)
    np.testing.assert_allclose(polys.base, base, atol=1e-9)
    np.testing.assert_allclose(polys.direction, direction, atol=1e-12)
    np.testing.assert_allclose(polys.base, [1.0, 14.0, 5.0, 200.0], atol=1e-9)


# ---------------------------------------------------------------------------
# Hypothesis: brute force, coordinate changes, finite differences
# ---------------------------------------------------------------------------
@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), sampled=st.booleans(), structure=st.sampled_from(["dense", "sparse"]))
def test_stable_intervals_agree_with_a_dense_eigenvalue_sweep(seed, sampled, structure):
    rng = np.random.default_rng(seed)
    plant, K = random_plant(rng, sampled, structure)
    row = int(rng.integers(0, plant.input_count))
    col = int(rng.integers(0, plant.state_count))
    result = entry_stable_intervals(plant, K, row, col)
    # reference: numpy eigenvalues of A − BK(v) on a 2001-point grid (brute force)
    assert_agrees_with_sweep(plant, K, row, col, result)
    current = boundary_excess(np.linalg.eigvals(plant.A - plant.B @ K), sampled)
    if abs(current) > 1e-9 * (1.0 + np.abs(K).max()):
        assert result.current_is_stable == bool(current < 0)  # numpy eigenvalues at the given K


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), sampled=st.booleans())
def test_stable_intervals_are_invariant_under_a_change_of_coordinates(seed, sampled):
    rng = np.random.default_rng(seed)
    plant, K = random_plant(rng, sampled, n=int(rng.integers(2, 6)))
    n, m = plant.state_count, plant.input_count
    row, col = int(rng.integers(0, m)), int(rng.integers(0, n))
    # x = T z and u = S w: A → T⁻¹AT, B → T⁻¹BS, K → S⁻¹KT. The entry (row, col) of the new K
    # moves the old K along S·e_i·e_jᵀ·T⁻¹; with row j of T⁻¹ equal to d·e_jᵀ that is the old
    # entry scaled by s_i·d, so the intervals map by v' = K'₀ij + (v − K₀ij)/(s_i·d) (derived).
    inverse = rng.normal(size=(n, n))
    d = float(rng.uniform(0.5, 2.0))
    inverse[col, :] = 0.0
    inverse[col, col] = d
    assume(np.linalg.cond(inverse) < 1e3)
    transform = np.linalg.inv(inverse)
    input_scales = rng.uniform(0.5, 2.0, size=m)
    new_plant = Plant(A=inverse @ plant.A @ transform, B=inverse @ plant.B @ np.diag(input_scales),
                      sample_time=plant.sample_time)
    new_K = np.diag(1.0 / input_scales) @ K @ transform
    old = entry_stable_intervals(plant, K, row, col)
    new = entry_stable_intervals(new_plant, new_K, row, col)
    assume(not any(c.ill_conditioned for c in old.crossings + new.crossings))
    factor = input_scales[row] * d

    def mapped(value):
        return new_K[row, col] + (value - K[row, col]) / factor

    assert len(new.intervals) == len(old.intervals)
    size = 1.0 + abs(K[row, col]) + abs(new_K[row, col])
    for (low, high), (new_low, new_high) in zip(old.intervals, new.intervals):
        for end, new_end in ((low, new_low), (high, new_high)):
            if math.isinf(end):
                assert new_end == end
            else:
                assert new_end == pytest.approx(mapped(end), rel=1e-7, abs=1e-7 * size)


@settings(max_examples=50, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), sampled=st.booleans())
def test_pole_sensitivity_matches_a_central_finite_difference(seed, sampled):
    rng = np.random.default_rng(seed)
    plant, K = random_plant(rng, sampled, n=int(rng.integers(1, 7)))
    row, col = int(rng.integers(0, plant.input_count)), int(rng.integers(0, plant.state_count))
    result = pole_sensitivity(plant, K, row, col)
    poles = result.poles
    size = 1.0 + np.linalg.norm(plant.A - plant.B @ K)
    gaps = np.where(np.eye(poles.size, dtype=bool), np.inf, np.abs(poles[:, None] - poles[None, :]))
    assume(gaps.min() > 1e-2 * size and result.condition_numbers.max() < 1e3)
    assert not result.defective.any()
    step = 1e-6 * (1.0 + abs(K[row, col]))
    shifted = []
    for sign in (1.0, -1.0):
        moved = np.array(K, dtype=float)
        moved[row, col] += sign * step
        eigenvalues = np.linalg.eigvals(plant.A - plant.B @ moved)
        _, order = linear_sum_assignment(np.abs(poles[:, None] - eigenvalues[None, :]))
        shifted.append(eigenvalues[order])
    # central finite difference (common practice, no source), error O(step²) + rounding/step
    difference = (shifted[0] - shifted[1]) / (2.0 * step)
    np.testing.assert_allclose(result.derivatives, difference, rtol=1e-5, atol=1e-5 * size)


def test_pole_sensitivity_of_case_5_matches_implicit_differentiation():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    result = pole_sensitivity(plant, CASE1_K, 0, 0)
    # P(s, k1) = s³ + 14s² + 60s + 1 + k1 (case 1); implicit differentiation: dλ/dk1 = −1/P'(λ),
    # P'(s) = 3s² + 28s + 60 (derived)
    expected = -1.0 / (3.0 * result.poles**2 + 28.0 * result.poles + 60.0)
    np.testing.assert_allclose(result.derivatives, expected, rtol=1e-10)
    np.testing.assert_allclose(sorted(result.poles, key=lambda p: (p.real, p.imag)),
                               [-10.0, -2.0 - 4.0j, -2.0 + 4.0j], atol=1e-10)  # case 1 poles


def test_pole_sensitivity_flags_a_defective_double_pole():
    plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    result = pole_sensitivity(plant, [[1.0, 2.0]], 0, 0)
    # s² + 2s + 1 = (s + 1)²: a 2×2 Jordan block, whose pole moves like sqrt(Δk), not linearly
    # (eigenvalue perturbation theory, from memory)
    assert result.defective.all()
    assert np.isnan(result.derivatives).all()
    assert "repeated or defective" in result.note


# ---------------------------------------------------------------------------
# Loci
# ---------------------------------------------------------------------------
def _dense_comparison(plant, K, row, col, low, high):
    locus = entry_locus(plant, K, row, col, low, high)
    grid = np.linspace(low, high, 10_000)
    dense = swept_poles(plant, K, row, col, grid)
    span = math.hypot(np.ptp(dense.real), np.ptp(dense.imag))
    worst = 0.0
    interpolated = np.stack(
        [np.interp(grid, locus.gains, locus.poles[:, b].real) + 1j * np.interp(grid, locus.gains, locus.poles[:, b].imag)
         for b in range(locus.poles.shape[1])],
        axis=1,
    )
    for k in range(grid.size):
        worst = max(worst, matched_distance(interpolated[k], dense[k]))
    return locus, worst / span


@pytest.mark.parametrize("sampled", [False, True])
def test_adaptive_locus_matches_a_dense_grid_with_ten_times_fewer_evaluations(sampled, rng):
    if sampled:
        plant = discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), 1.0)
        cases = [(plant, [[1.0, 1.0]], 0, 0, -1.0, 3.0)]
    else:
        random_A = rng.normal(size=(6, 6))
        random_B = rng.normal(size=(6, 2))
        random_K = rng.normal(size=(2, 6))
        cases = [
            (companion_plant([0.0, -2.0, -3.0]), [[1.0, 0.0, 0.0]], 0, 0, 0.0, 10.0),
            (Plant(A=random_A, B=random_B), random_K, 1, 3, -5.0, 5.0),
        ]
    for plant, K, row, col, low, high in cases:
        locus, relative_error = _dense_comparison(plant, K, row, col, low, high)
        # reference: numpy eigenvalues on a 10 000-point grid, matched by optimal assignment
        assert relative_error <= 1e-3
        assert locus.evaluation_count * 10 <= 10_000


def test_locus_end_points_are_the_poles_at_the_range_ends(rng):
    A, B, K = rng.normal(size=(5, 5)), rng.normal(size=(5, 2)), rng.normal(size=(2, 5))
    plant = Plant(A=A, B=B)
    locus = entry_locus(plant, K, 1, 2, -3.0, 4.0)
    for value, poles in ((-3.0, locus.start_poles), (4.0, locus.end_poles)):
        moved = np.array(K)
        moved[1, 2] = value
        # numpy eigenvalues of A − BK at the range ends are the reference
        assert matched_distance(poles, np.linalg.eigvals(A - B @ moved)) <= 1e-10 * (1 + np.abs(poles).max())
    assert locus.gains[0] == -3.0 and locus.gains[-1] == 4.0
    assert K[1, 2] in locus.gains  # the current value is always sampled
    assert np.all(np.diff(locus.gains) > 0)


def test_case_8_locus_breakaway_crossing_and_centroid():
    plant = companion_plant([0.0, -2.0, -3.0])
    locus = entry_locus(plant, [[1.0, 0.0, 0.0]], 0, 0, 0.0, 10.0)
    # reference-cases.md case 8 (Ogata root-locus chapter, from memory): crossing ±j√2 at k = 6
    assert [c.gain for c in locus.crossings] == [pytest.approx(0.0, abs=1e-12), pytest.approx(6.0, rel=1e-10)]
    assert np.abs(locus.gains - 6.0).min() <= 1e-9  # crossing values are always sampled
    assert locus.crossings[1].frequency == pytest.approx(math.sqrt(2.0), rel=1e-10)
    # breakaway s = −0.42265 at k = 0.38490 (case 8): the two tracked branches that leave 0 and −1
    # come closest there
    start = locus.poles[0]
    first, second = np.argsort(np.abs(start - 0.0))[0], np.argsort(np.abs(start + 1.0))[0]
    distance = np.abs(locus.poles[:, first] - locus.poles[:, second])
    closest = int(np.argmin(distance))
    midpoint = 0.5 * (locus.poles[closest, first] + locus.poles[closest, second])
    assert distance[closest] <= 0.02
    assert midpoint == pytest.approx(-0.42265, abs=1e-4)
    assert locus.gains[closest] == pytest.approx(0.38490, abs=1e-4)
    # branch tracking: no branch jumps between consecutive samples (common practice, no source)
    assert np.abs(np.diff(locus.poles, axis=0)).max() <= 0.05 * locus.span + 1e-12


def test_case_8_asymptotes_leave_the_centroid_at_sixty_degrees():
    plant = companion_plant([0.0, -2.0, -3.0])
    locus = entry_locus(plant, [[1.0, 0.0, 0.0]], 0, 0, 0.0, 1e4)
    # case 8: centroid −1; three asymptotes at ±60° and 180° (Ogata root-locus rules, from memory)
    assert locus.end_poles.mean() == pytest.approx(-1.0, abs=1e-9)
    complex_pole = locus.end_poles[np.argmax(locus.end_poles.imag)]
    angle = math.degrees(math.atan2(complex_pole.imag, complex_pole.real + 1.0))
    assert angle == pytest.approx(60.0, abs=0.1)
    real_pole = locus.end_poles[np.argmin(np.abs(locus.end_poles.imag))]
    assert real_pole.real < -1.0 and abs(real_pole.imag) < 1e-9


def test_scaled_gain_locus_of_a_single_input_design_has_exact_crossings():
    plant = companion_plant([0.0, -2.0, -3.0])
    locus = scaled_gain_locus(plant, [[1.0, 0.0, 0.0]], 0.0, 10.0)
    # case 8 with K = α·[1, 0, 0]: stable for 0 < α < 6 (Routh)
    assert locus.exact
    assert [c.gain for c in locus.crossings] == [pytest.approx(0.0, abs=1e-12), pytest.approx(6.0, rel=1e-10)]
    assert locus.stable_intervals == (pytest.approx((0.0, 6.0), abs=1e-9),)
    assert 1.0 in locus.scales


def test_scaled_gain_locus_of_a_multi_input_design_agrees_with_a_sweep():
    # reference-cases.md case 21 (Kautsky, Nichols & Van Dooren 1985 batch reactor, as in scipy's tests);
    # scipy.signal.place_poles supplies the design
    A = np.array([[1.380, -0.2077, 6.715, -5.676], [-0.5814, -4.290, 0, 0.6750],
                  [1.067, 4.273, -6.654, 5.893], [0.0480, 4.273, 1.343, -2.104]])
    B = np.array([[0, 5.679], [1.136, 1.136], [0, 0], [-3.146, 0]])
    K = scipy.signal.place_poles(A, B, [-0.2, -0.5, -5.0566, -8.6659]).gain_matrix
    plant = Plant(A=A, B=B)
    locus = scaled_gain_locus(plant, K, 0.0, 3.0)
    assert not locus.exact
    grid = np.linspace(0.0, 3.0, 3001)[1:-1]  # the range ends bound the reported ranges, open
    excess = boundary_excess(np.linalg.eigvals(A[None] - grid[:, None, None] * (B @ K)[None]), False)
    for value, worst in zip(grid, excess):
        # numpy eigenvalue sweep as the reference, to the grid resolution
        if any(abs(value - c.gain) <= 2e-3 for c in locus.crossings) or abs(worst) < 1e-9:
            continue
        assert (worst < 0) == any(lo < value < hi for lo, hi in locus.stable_intervals)
    for crossing in locus.crossings:
        eigenvalues = np.linalg.eigvals(A - crossing.gain * B @ K)
        assert np.abs(eigenvalues.real).min() <= 1e-6  # a pole on the axis (numpy reference)
    assert any(lo < 1.0 < hi for lo, hi in locus.stable_intervals)  # case 21: the design is stable


# ---------------------------------------------------------------------------
# All entries, ranges, size
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("sampled", [False, True])
def test_all_entries_agree_with_single_entries_and_with_a_sweep(sampled, rng):
    plant, K = random_plant(rng, sampled, n=4, m=2)
    every = all_entry_stable_intervals(plant, K)
    assert set(every) == {(i, j) for i in range(2) for j in range(4)}
    for (row, col), result in every.items():
        single = entry_stable_intervals(plant, K, row, col)
        assert result.intervals == single.intervals
        assert_agrees_with_sweep(plant, K, row, col, result, points=801)  # numpy sweep reference


def test_default_range_covers_the_stable_interval_and_is_never_empty():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    low, high = default_entry_range(plant, CASE1_K, 0, 0)
    assert low < -1.0 and high > 839.0  # case 5 ends (Routh–Hurwitz)
    double_integrator = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    low, high = default_entry_range(double_integrator, [[0.0, 0.0]], 0, 0)
    assert low < 0.0 < high  # current value 0 still gives a proper range (common practice, no source)


@pytest.mark.parametrize("sampled", [False, True])
def test_fifty_state_intervals_agree_with_a_sweep(sampled, rng):
    n, m = 50, 2
    A = rng.normal(size=(n, n)) / math.sqrt(n)
    if sampled:
        A = 0.8 * A / np.abs(np.linalg.eigvals(A)).max()
    else:
        A = A - 1.3 * np.eye(n)  # circular law: spectrum near the disc of radius 1 about −1.3
    B = rng.normal(size=(n, m))
    K = np.zeros((m, n))
    plant = Plant(A=A, B=B, sample_time=0.05 if sampled else None)
    row, col = 1, 17
    result = entry_stable_intervals(plant, K, row, col)
    assert result.current_is_stable and result.intervals
    finite = [end for interval in result.intervals for end in interval if math.isfinite(end)]
    low, high = min(finite) - 0.5 * (1 + abs(min(finite))), max(finite) + 0.5 * (1 + abs(max(finite)))
    # numpy eigenvalues of the 50×50 closed loop on an 801-point grid are the reference
    assert_agrees_with_sweep(plant, K, row, col, result, points=801, low=low, high=high)


# ---------------------------------------------------------------------------
# Batched work gives each entry exactly the numbers it gets alone
# ---------------------------------------------------------------------------
@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 12))
def test_pencil_eigenvalues_are_exactly_scipys_finite_generalized_eigenvalues(seed, n):
    rng = np.random.default_rng(seed)
    F = rng.standard_normal((n, n))
    E = np.diag((rng.random(n) < 0.8).astype(float))  # singular E: infinite eigenvalues too
    if rng.random() < 0.3:
        F[:, 0] = 0.0  # a zero column with a zero E column: an undetermined (0/0) eigenvalue
        E[0, 0] = 0.0
    with np.errstate(all="ignore"):
        expected = scipy.linalg.eigvals(F, E, check_finite=False)
        ours = family_module._finite_pencil_eigenvalues(F, E)
    # reference: scipy.linalg.eigvals (the same LAPACK ggev), its finite values in its order, bit for bit
    np.testing.assert_array_equal(ours, expected[np.isfinite(expected)])


def test_boundary_pencil_of_case_5_gives_the_routh_frequency():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    family = single_entry._entry_family(plant, np.array(CASE1_K), 0, 0)
    eigenvalues = family_module._finite_pencil_eigenvalues(*family_module.boundary_pencil(family))
    # the zeros of h(s) = g(s) − g(−s) include ±j√60, where k1 = 839 puts poles on the axis
    # (reference-cases.md case 5, Routh auxiliary polynomial 14s² + 840)
    assert np.min(np.abs(eigenvalues - 1j * math.sqrt(60.0))) <= 1e-8 * math.sqrt(60.0)


def _mixed_jobs():
    """Families of several plants and orders: moving no pole, mirror pairs, sampled, fixed poles, dense."""
    jobs = []
    plants = [
        (Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]]), np.array(CASE1_K)),
        (Plant(A=[[0.0, 1.0], [-1.0, 0.0]], B=[[0.0], [1.0]]), np.array([[0.5, 0.0]])),  # mirror pairs for k11
        (Plant(A=np.diag([-1.0, -2.0]), B=[[1.0], [0.0]]), np.zeros((1, 2))),  # k12 moves no pole
        (Plant(A=np.diag([1.0, -2.0, -3.0]), B=[[0.0], [1.0], [1.0]]), np.array([[0.0, 1.0, 2.0]])),  # fixed pole 1
        (discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), 1.0), np.array([[1.0, 1.0]])),
        companion_plant([0.0, -2.0, -3.0, -3.0]),
    ]
    plants[-1] = (plants[-1], np.array([[1.0, 0.0, 0.0, 0.0]]))
    rng = np.random.default_rng(11)
    for _ in range(3):
        plant, K = random_plant(rng, sampled=False, n=3, m=2)
        plants.append((plant, K))
    for plant, K in plants:
        for row in range(plant.input_count):
            for col in range(plant.state_count):
                family = single_entry._entry_family(plant, K, row, col)
                jobs.append(single_entry._family_job(plant, family, row, col))
    return jobs


def test_families_analysed_together_equal_each_family_alone():
    jobs = _mixed_jobs()
    together = single_entry._intervals_from_families(jobs)
    orders = {job[0].order for job in jobs}
    assert len(orders) >= 4  # the batch really mixes matrix sizes (0 = moves no pole)
    for job, result in zip(jobs, together):
        alone = single_entry._intervals_from_family(*job)
        assert repr(result) == repr(alone)  # every field, every digit
    by_entry = {(id(job[0]), job[1]): result for job, result in zip(jobs, together)}
    # outside references for some of the batch: case 5 (Routh–Hurwitz, reference-cases.md) …
    case5 = [by_entry[(id(job[0]), job[1])] for job in jobs[:3]]
    assert case5[0].intervals == (pytest.approx((-1.0, 839.0), rel=1e-9, abs=1e-9),)
    assert case5[1].intervals[0][0] == pytest.approx(65.0 / 7.0, rel=1e-9)
    # … the mirror-pair entry (s² + 1 + k: never asymptotically stable, Routh) and the entry that
    # moves no pole (triangular closed loop, handbook fact)
    assert "mirror-image pairs" in together[3].never_stable_reason
    assert not together[6].entry_has_effect and together[6].intervals == ((-math.inf, math.inf),)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), sampled=st.booleans(), structure=st.sampled_from(["dense", "sparse"]))
def test_all_entries_at_once_equal_each_entry_alone_in_every_field(seed, sampled, structure):
    rng = np.random.default_rng(seed)
    plant, K = random_plant(rng, sampled, structure, n=int(rng.integers(1, 6)), m=int(rng.integers(1, 3)))
    every = all_entry_stable_intervals(plant, K)
    for (row, col), result in every.items():
        assert repr(result) == repr(entry_stable_intervals(plant, K, row, col))
    # and one entry against the brute-force reference: numpy eigenvalues on a dense grid
    row, col = int(rng.integers(0, plant.input_count)), int(rng.integers(0, plant.state_count))
    assert_agrees_with_sweep(plant, K, row, col, every[(row, col)], points=601)


def test_poles_and_counts_of_many_families_equal_each_alone_and_numpy():
    jobs = _mixed_jobs()
    families = [job[0] for job in jobs]
    values = [np.linspace(-3.0, 3.0, 1 + k % 4) + family.current_value for k, family in enumerate(families)]
    together = single_entry._poles_and_counts_each(families, values)
    for family, at, (poles, counts) in zip(families, values, together):
        alone_poles, alone_counts = single_entry._poles_and_counts(family, at)
        np.testing.assert_array_equal(poles, alone_poles)
        np.testing.assert_array_equal(counts, alone_counts)
        for value, row in zip(at, poles):
            # reference: numpy eigenvalues of the family's full moving matrix plus its fixed poles
            moving = family.moving_closed_loop([value])[0] if family.order else np.zeros((0, 0))
            expected = np.concatenate([np.linalg.eigvals(moving), family.fixed_poles]) if moving.size else \
                family.fixed_poles
            assert matched_distance(row, np.asarray(expected, complex)) <= 1e-12 * (1.0 + np.abs(row).max())


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 7), spread=st.sampled_from([0.01, 1.0]))
def test_matching_one_row_is_an_optimal_assignment(seed, n, spread):
    rng = np.random.default_rng(seed)
    reference = rng.standard_normal(n) + 1j * rng.standard_normal(n)
    candidates = reference[rng.permutation(n)] + spread * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    order = sampler.match_to(reference, candidates)
    assert sorted(order.tolist()) == list(range(n))
    np.testing.assert_array_equal(order, sampler.match_rows(reference[None, :], candidates[None, :])[0])
    # reference: scipy's linear_sum_assignment minimum of Σ|reference − candidate|
    cost = np.abs(reference[:, None] - candidates[None, :])
    rows, cols = linear_sum_assignment(cost)
    assert cost[np.arange(n), order].sum() == pytest.approx(cost[rows, cols].sum(), rel=1e-12, abs=1e-15)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), sampled=st.booleans())
def test_pole_sensitivity_follows_a_change_of_state_units_by_the_chain_rule(seed, sampled):
    rng = np.random.default_rng(seed)
    plant, K = random_plant(rng, sampled, n=int(rng.integers(2, 6)))
    n = plant.state_count
    row, col = int(rng.integers(0, plant.input_count)), int(rng.integers(0, n))
    # new state units x' = D x with D spanning four decades (balancing has real work to do):
    # A' = DAD⁻¹, B' = DB, K' = KD⁻¹ give the same poles, and k'_ij = k_ij/d_j, so
    # dλ/dk'_ij = d_j · dλ/dk_ij (chain rule, derived)
    scales = 10.0 ** rng.uniform(-2, 2, size=n)
    scaled = Plant(A=scales[:, None] * plant.A / scales[None, :], B=scales[:, None] * plant.B,
                   sample_time=plant.sample_time)
    original = pole_sensitivity(plant, K, row, col)
    changed = pole_sensitivity(scaled, np.asarray(K) / scales[None, :], row, col)
    size = 1.0 + np.abs(original.poles).max()
    gaps = np.where(np.eye(n, dtype=bool), np.inf, np.abs(original.poles[:, None] - original.poles[None, :]))
    assume(gaps.min() > 1e-2 * size and original.condition_numbers.max() < 1e3)
    # the repeated-pole test measures rounding in the given units, so a badly scaled plant can
    # have well-separated poles flagged (conservative); those examples are left out here
    assume(not changed.defective.any())
    _, order = linear_sum_assignment(np.abs(original.poles[:, None] - changed.poles[None, :]))
    expected = scales[col] * original.derivatives
    np.testing.assert_allclose(changed.derivatives[order], expected, rtol=1e-7, atol=1e-7 * np.abs(expected).max())
    # and the unscaled derivatives against scipy.linalg.eig of the plain closed loop, formula
    # dλ/dk = −(yᴴb)(e_jᵀx)/(yᴴx) (first-order eigenvalue perturbation; Wilkinson 1965, from memory)
    values, left, right = scipy.linalg.eig(plant.A - plant.B @ np.asarray(K), left=True, right=True)
    reference = -(left.conj().T @ plant.B[:, row]) * right[col, :] / np.sum(left.conj() * right, axis=0)
    _, order = linear_sum_assignment(np.abs(original.poles[:, None] - values[None, :]))
    np.testing.assert_allclose(original.derivatives, reference[order], rtol=1e-9, atol=1e-9 * size)


# ---------------------------------------------------------------------------
# Refusals
# ---------------------------------------------------------------------------
def test_refuses_an_entry_out_of_range():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    with pytest.raises(GainError, match=r"row 1 is out of range: K has 1 row .*from 0 to 0"):
        entry_stable_intervals(plant, CASE1_K, 1, 0)
    with pytest.raises(GainError, match=r"column 3 is out of range: K has 3 columns .*'x3'"):
        entry_locus(plant, CASE1_K, 0, 3, 0.0, 1.0)
    with pytest.raises(GainError, match=r"column index must be a whole number"):
        pole_sensitivity(plant, CASE1_K, 0, 1.5)
    with pytest.raises(GainError, match=r"row -1 is out of range"):
        default_entry_range(plant, CASE1_K, -1, 0)


def test_refuses_an_empty_or_infinite_sweep_range():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    with pytest.raises(GainError, match=r"range is empty: low = 5 must be smaller than high = 5"):
        entry_locus(plant, CASE1_K, 0, 0, 5.0, 5.0)
    with pytest.raises(GainError, match=r"range is empty: low = 2 must be smaller than high = 1"):
        scaled_gain_locus(plant, CASE1_K, 2.0, 1.0)
    with pytest.raises(GainError, match=r"must have finite ends"):
        entry_locus(plant, CASE1_K, 0, 0, 0.0, math.inf)


def test_refuses_a_gain_of_the_wrong_shape():
    plant = Plant(A=CASE1_A, B=[[0.0], [0.0], [1.0]])
    with pytest.raises(GainError, match=r"K is 1×2 but must be 1×3"):
        entry_stable_intervals(plant, [[1.0, 2.0]], 0, 0)
    with pytest.raises(GainError, match=r"K is 2×3 but must be 1×3"):
        all_entry_stable_intervals(plant, np.zeros((2, 3)))
    with pytest.raises(GainError, match=r"K is 1×4 but must be 1×3"):
        entry_polynomials(plant, [[1.0, 2.0, 3.0, 4.0]], 0, 0)
