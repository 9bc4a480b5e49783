"""Loop margins at the plant input: exact gain margins, phase, delay and disk margins.

Reference cases are numbered as in /work/shared/reference-cases.md.
"""

import math

import mpmath
import numpy as np
import pytest
import scipy.linalg
import scipy.optimize
import scipy.signal
import sympy as sp
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from gainboard.core import GainError, Plant, discretize_zero_order_hold, plant_from_transfer_function
from gainboard.core._errors import AnalysisError
from gainboard.core._margins import frequency_response, loop_margins

# Case 19: the loop 1/(s(s+1)(s+2)); in controllable canonical form K = C gives L = K(sI − A)⁻¹B = C(sI − A)⁻¹B.
THIRD_ORDER = plant_from_transfer_function([1.0], [1.0, 3.0, 2.0, 0.0])
THIRD_ORDER_GAIN = np.array(THIRD_ORDER.C)


def _stable(matrix, sample_time=None):
    poles = np.linalg.eigvals(matrix)
    return np.max(np.abs(poles)) < 1 if sample_time else np.max(poles.real) < 0


def test_third_order_loop_gain_and_phase_margins_match_textbook_values():
    margins = loop_margins(THIRD_ORDER, THIRD_ORDER_GAIN)
    assert margins.stable_nominal
    # Case 19: gain margin 6 (Routh: s³ + 3s² + 2s + k stable iff 0 < k < 6), phase crossover at √2 rad/s.
    assert margins.gain_margin_increase == pytest.approx(6.0, rel=1e-10)
    assert margins.phase_crossover_frequencies == pytest.approx((math.sqrt(2.0),), rel=1e-10)
    # Case 19 (Routh): any factor in (0, 1) keeps the loop stable, so the decrease margin is 0.
    assert margins.gain_margin_decrease == 0.0
    assert margins.gain_margin_decrease_db == -math.inf
    assert margins.gain_margin_increase_db == pytest.approx(20 * math.log10(6.0), rel=1e-10)
    assert margins.gain_margin_db_min == pytest.approx(20 * math.log10(6.0), rel=1e-10)
    # Case 19: phase margin 53.411° at 0.44575 rad/s.
    assert margins.phase_margin_deg == pytest.approx(53.411, abs=5e-4)
    assert margins.crossover_frequency == pytest.approx(0.44575, abs=5e-6)
    assert margins.delay_margin_samples is None


def test_third_order_loop_delay_margin_is_phase_margin_over_crossover_frequency():
    margins = loop_margins(THIRD_ORDER, THIRD_ORDER_GAIN)
    # Delay margin = phase margin (rad) / crossover frequency (Åström & Murray, *Feedback Systems*, from memory).
    assert margins.delay_margin == pytest.approx(math.radians(margins.phase_margin_deg) / margins.crossover_frequency,
                                                 rel=1e-12)
    # Definition check: with that delay the loop passes through −1 at the crossover (the Nyquist point).
    omega = margins.crossover_frequency
    value = complex(1.0 / ((1j * omega) * (1j * omega + 1) * (1j * omega + 2)))
    assert value * np.exp(-1j * omega * margins.delay_margin) == pytest.approx(-1.0, abs=1e-9)


def test_gain_margin_is_exactly_where_the_scaled_closed_loop_loses_stability():
    margins = loop_margins(THIRD_ORDER, THIRD_ORDER_GAIN)
    A, B = THIRD_ORDER.A, THIRD_ORDER.B
    factor = margins.gain_margin_increase
    # Routh (case 19): stable just below the factor 6, unstable just above; numpy eigenvalues as check.
    assert _stable(A - (1 - 1e-7) * factor * B @ THIRD_ORDER_GAIN)
    assert not _stable(A - (1 + 1e-7) * factor * B @ THIRD_ORDER_GAIN)


def test_third_order_loop_peak_sensitivity_matches_exact_maximisation_with_sympy():
    margins = loop_margins(THIRD_ORDER, THIRD_ORDER_GAIN)
    # Reference: sympy. |S(jω)|² = ω²(ω²+1)(ω²+4) / ((1 − 3ω²)² + (2ω − ω³)²) for L = 1/(s(s+1)(s+2));
    # its peak is at a real root of the derivative's numerator.
    w = sp.symbols("w", positive=True)
    squared = w**2 * (w**2 + 1) * (w**2 + 4) / ((1 - 3 * w**2) ** 2 + (2 * w - w**3) ** 2)
    critical = [r for r in sp.Poly(sp.numer(sp.together(sp.diff(squared, w))), w).nroots(n=30)
                if r.is_real and r > 0]
    peak_frequency = max(critical, key=lambda r: squared.subs(w, r))
    peak = float(sp.sqrt(squared.subs(w, peak_frequency)))
    assert margins.peak_sensitivity == pytest.approx(peak, rel=1e-10)
    assert margins.peak_sensitivity_frequency == pytest.approx(float(peak_frequency), rel=1e-5)
    alpha = 1 / peak
    assert margins.disk_margin == pytest.approx(alpha, rel=1e-10)
    # Disk of factors 1/(1 − δ), |δ| < α: gains (1/(1+α), 1/(1−α)), phase ±2·arcsin(α/2)
    # (Seiler, Packard & Gahinet, "An introduction to disk margins", IEEE CSM 2020, from memory).
    assert margins.disk_gain_range == pytest.approx((1 / (1 + alpha), 1 / (1 - alpha)), rel=1e-10)
    assert margins.disk_phase_margin_deg == pytest.approx(math.degrees(2 * math.asin(alpha / 2)), rel=1e-10)
    # The disk is a guarantee: its gain range lies inside the exact interval (0, 6) (Routh, case 19)
    # and its phase inside the phase margin.
    assert 0 < margins.disk_gain_range[0] and margins.disk_gain_range[1] < margins.gain_margin_increase
    assert margins.disk_phase_margin_deg < margins.phase_margin_deg


def test_double_integrator_lqr_phase_margin_matches_reference():
    margins = loop_margins(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), [[1.0, math.sqrt(3.0)]])
    # Case 18: case 15's LQR loop has phase margin 72.3756° at ω = 1.81735.
    assert margins.phase_margin_deg == pytest.approx(72.3756, abs=5e-5)
    assert margins.crossover_frequency == pytest.approx(1.81735, abs=5e-6)
    # Case 18 (Safonov & Athans 1977): gain margin [1/2, ∞).
    assert margins.gain_margin_increase == math.inf
    assert margins.gain_margin_decrease <= 0.5


def test_scalar_lqr_with_vanishing_state_weight_approaches_sixty_degrees():
    # Case 18: a = b = r = 1, q → 0 gives K → 2 and phase margin → 60°; K = 1 + √(1 + q).
    q = 1e-10
    margins = loop_margins(Plant(A=[[1.0]], B=[[1.0]]), [[1.0 + math.sqrt(1.0 + q)]])
    assert margins.phase_margin_deg == pytest.approx(60.0, abs=1e-6)
    # Case 18: L = 2/(s − 1) is destabilised below a factor 1/2, never above (Routh, first order).
    assert margins.gain_margin_decrease == pytest.approx(0.5, rel=1e-9)
    assert margins.gain_margin_increase == math.inf


@st.composite
def controllable_single_input_problems(draw):
    n = draw(st.integers(1, 4))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    A = rng.normal(size=(n, n)) * draw(st.sampled_from([0.3, 1.0, 3.0]))
    B = rng.normal(size=(n, 1))
    rank = draw(st.integers(1, n))
    M = rng.normal(size=(rank, n))
    r = draw(st.floats(0.05, 20.0))
    return A, B, M.T @ M, np.array([[r]])


@settings(max_examples=40, deadline=None)
@given(controllable_single_input_problems())
def test_single_input_lqr_loops_keep_the_guaranteed_margins(problem):
    A, B, Q, R = problem
    n = A.shape[0]
    controllability = np.hstack([np.linalg.matrix_power(A, i) @ B for i in range(n)])
    assume(np.linalg.cond(controllability) < 1e5)
    try:
        # Reference gain: scipy.linalg.solve_continuous_are.
        P = scipy.linalg.solve_continuous_are(A, B, Q, R)
    except (np.linalg.LinAlgError, ValueError):
        assume(False)
    K = np.linalg.solve(R, B.T @ P)
    assume(np.max(np.linalg.eigvals(A - B @ K).real) < -1e-6)
    plant = Plant(A=A, B=B)
    margins = loop_margins(plant, K)
    assert margins.stable_nominal
    # Case 18 (Safonov & Athans 1977; Kalman 1964): gain margin [1/2, ∞), phase margin ≥ 60°, |1 + L(jω)| ≥ 1.
    assert margins.gain_margin_increase == math.inf
    assert margins.gain_margin_decrease <= 0.5 + 1e-7
    assert margins.phase_margin_deg >= 60.0 - 1e-6
    assert margins.disk_margin >= 1 - 1e-7
    frequencies = np.concatenate([[0.0], np.geomspace(1e-3, 1e3, 400)])
    return_difference = np.abs(1 + frequency_response(plant, K, frequencies)[:, 0, 0])
    assert np.all(return_difference >= 1 - 1e-9)


def test_multi_input_lqr_with_scalar_input_weight_has_unit_disk_margin(rng):
    n, m = 4, 2
    A = rng.normal(size=(n, n))
    B = rng.normal(size=(n, m))
    # Reference gain: scipy.linalg.solve_continuous_are with R = 2I.
    P = scipy.linalg.solve_continuous_are(A, B, np.eye(n), 2 * np.eye(m))
    K = B.T @ P / 2
    margins = loop_margins(Plant(A=A, B=B), K)
    # Case 18 (Safonov & Athans 1977, multiloop): σ_min(I + L) ≥ 1, so ‖S‖∞ = 1 (reached as ω → ∞), disk
    # margin 1, gains (1/2, ∞) and ±60° in every channel simultaneously.
    assert margins.peak_sensitivity == pytest.approx(1.0, abs=1e-7)
    assert margins.disk_gain_range[0] == pytest.approx(0.5, abs=1e-7)
    assert margins.disk_phase_margin_deg == pytest.approx(60.0, abs=1e-5)
    assert margins.gain_margin_increase is None and len(margins.loop_at_a_time) == m
    for single in margins.loop_at_a_time:
        # Case 18 per channel (diagonal R).
        assert single.gain_margin_increase == math.inf
        assert single.gain_margin_decrease <= 0.5 + 1e-7
        assert single.phase_margin_deg >= 60.0 - 1e-6


def test_loop_at_a_time_gain_margins_bound_the_stable_range_of_each_gain_row():
    # Case 21 (Kautsky, Nichols & Van Dooren 1985, as in scipy's tests): batch reactor; gain from
    # scipy.signal.place_poles, stability of the scaled rows checked with numpy eigenvalues.
    A = np.array([[1.380, -0.2077, 6.715, -5.676], [-0.5814, -4.290, 0, 0.6750],
                  [1.067, 4.273, -6.654, 5.893], [0.0480, 4.273, 1.343, -2.104]])
    B = np.array([[0, 5.679], [1.136, 1.136], [0, 0], [-3.146, 0]])
    K = scipy.signal.place_poles(A, B, [-0.2, -0.5, -5.0566, -8.6659]).gain_matrix
    margins = loop_margins(Plant(A=A, B=B), K)
    for single in margins.loop_at_a_time:
        i = single.input_index

        def stable_with(factor):
            scaled = K.copy()
            scaled[i] *= factor
            return _stable(A - B @ scaled)

        for factor in np.geomspace(1e-3, 1e3, 241):
            inside = single.gain_margin_decrease < factor < single.gain_margin_increase
            near_edge = any(abs(math.log(factor / edge)) < 1e-6
                            for edge in (single.gain_margin_decrease, single.gain_margin_increase)
                            if 0 < edge < math.inf)
            if not near_edge:
                assert stable_with(factor) == inside
        for edge in (single.gain_margin_decrease, single.gain_margin_increase):
            if 0 < edge < math.inf:
                inner = 1 + 1e-7 if edge < 1 else 1 - 1e-7
                assert stable_with(edge * inner) and not stable_with(edge / inner)


def test_sampled_double_integrator_gain_margin_from_jury_test():
    plant = discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), 1.0)
    margins = loop_margins(plant, [[0.5, 1.0]])
    # Jury test as in case 14 (Åström & Wittenmark, from memory), derived for the scaled gain α[0.5, 1]:
    # z² + (0.75α − 2)z + (1 − 0.75α) is stable iff 0 < α < 2; at α = 2 the pole crosses z = −1.
    assert margins.gain_margin_increase == pytest.approx(2.0, rel=1e-10)
    assert margins.gain_margin_decrease == 0.0
    assert margins.phase_crossover_frequencies[-1] == pytest.approx(math.pi, rel=1e-12)
    assert margins.delay_margin_samples == pytest.approx(margins.delay_margin / 1.0)


def test_sampled_phase_margin_matches_mpmath_root_of_unit_loop_magnitude():
    plant = discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), 1.0)
    margins = loop_margins(plant, [[0.5, 1.0]])
    # Reference: sympy for L(z) = K(zI − Φ)⁻¹Γ with Φ = [[1, 1], [0, 1]], Γ = [1/2, 1] (case 9), then
    # mpmath.findroot for |L(e^{jθ})| = 1 started from a coarse scan.
    z = sp.symbols("z")
    L = sp.simplify((sp.Matrix([[sp.Rational(1, 2), 1]]) * (z * sp.eye(2) - sp.Matrix([[1, 1], [0, 1]])).inv()
                     * sp.Matrix([sp.Rational(1, 2), 1]))[0])
    loop = sp.lambdify(z, L, "mpmath")
    excess = lambda theta: abs(loop(mpmath.exp(1j * theta))) ** 2 - 1  # noqa: E731
    scan = [0.05 * k for k in range(1, 63)]
    start = next(t for t, u in zip(scan, scan[1:]) if excess(t) * excess(u) < 0)
    theta = mpmath.findroot(excess, (start, start + 0.05), solver="bisect")
    phase = float(mpmath.degrees(mpmath.arg(loop(mpmath.exp(1j * theta)))))
    assert margins.crossover_frequency == pytest.approx(float(theta), rel=1e-9)
    assert margins.phase_margin_deg == pytest.approx(180.0 + phase, abs=1e-8)


def test_sampled_disk_margin_peak_matches_dense_scipy_frequency_response():
    plant = discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [-2.0, -0.3]], B=[[0.0], [1.0]]), 0.2)
    K = np.array([[1.5, 0.8]])
    margins = loop_margins(plant, K)
    # Reference: scipy.signal.dfreqresp of S = (Φ − ΓK, Γ, −K, 1) on a dense grid; our peak is at least the
    # grid maximum and within the grid's resolution of it.
    closed = plant.A - plant.B @ K
    omega, response = scipy.signal.dfreqresp((closed, plant.B, -K, np.eye(1), 0.2), w=np.linspace(0, np.pi, 200001))
    grid_peak = np.max(np.abs(response))
    assert margins.peak_sensitivity >= grid_peak * (1 - 1e-12)
    assert margins.peak_sensitivity == pytest.approx(grid_peak, rel=1e-7)


def test_unstable_nominal_loop_reports_no_margins_and_says_why():
    margins = loop_margins(THIRD_ORDER, 7.0 * THIRD_ORDER_GAIN)  # case 19: unstable for k > 6 (Routh)
    assert margins.stable_nominal is False
    assert margins.gain_margin_increase is None and margins.phase_margin_deg is None
    assert margins.disk_margin is None and margins.loop_at_a_time == ()
    assert "not stable" in margins.note and "validate" in margins.note


def test_every_margin_note_carries_the_validation_caution():
    margins = loop_margins(THIRD_ORDER, THIRD_ORDER_GAIN)
    assert "emergency stops" in margins.note and "licensed practice" in margins.note  # project rule 4


# scipy converts to a transfer function whose leading numerator coefficient is the zero feedthrough and
# warns when it trims it; that is expected here.
@pytest.mark.filterwarnings("ignore:Badly conditioned filter coefficients")
def test_frequency_response_matches_scipy_state_space_response(rng):
    A = rng.normal(size=(3, 3)) - 2 * np.eye(3)
    B = rng.normal(size=(3, 2))
    K = rng.normal(size=(2, 3))
    frequencies = np.geomspace(0.01, 100, 25)
    ours = frequency_response(Plant(A=A, B=B), K, frequencies)
    for i in range(2):
        for j in range(2):
            # Reference: scipy.signal.freqresp of the single-channel loop (A, B[:, j], K[i], 0).
            _, reference = scipy.signal.freqresp((A, B[:, [j]], K[[i]], np.zeros((1, 1))), w=frequencies)
            np.testing.assert_allclose(ours[:, i, j], reference, rtol=1e-8)


def test_frequency_response_refuses_poles_on_the_axis_and_bad_frequencies():
    integrator = Plant(A=[[0.0]], B=[[1.0]])
    with pytest.raises(AnalysisError, match=r"pole on the stability boundary at ω = 0 rad/s"):
        frequency_response(integrator, [[1.0]], [0.0, 1.0])
    with pytest.raises(AnalysisError, match=r"finite, non-negative"):
        frequency_response(integrator, [[1.0]], [-1.0])
    with pytest.raises(GainError, match=r"K is 1×2 but must be 1×1"):
        loop_margins(integrator, [[1.0, 2.0]])


def _routh_hurwitz_factor_range(A, B, K):
    """The set of α > 0 with A − αBK Hurwitz, exactly, from sympy (Hurwitz determinants of det(sI − A + αBK)).

    Reference: the Routh–Hurwitz criterion (all leading principal minors of the Hurwitz matrix of a
    polynomial with positive leading coefficient are positive; Gantmacher, *The Theory of Matrices*, vol. 2,
    ch. XV, from memory), solved as inequalities in α by sympy.
    """
    s, a = sp.symbols("s alpha", real=True)
    matrix = sp.Matrix(A).applyfunc(sp.nsimplify) - a * sp.Matrix(B).applyfunc(sp.nsimplify) * \
        sp.Matrix(K).applyfunc(sp.nsimplify)
    poly = sp.Poly(sp.expand((s * sp.eye(matrix.shape[0]) - matrix).det()), s)
    coefficients = poly.all_coeffs()  # highest power first, leading 1
    n = len(coefficients) - 1
    hurwitz = sp.zeros(n, n)
    for row in range(n):
        for col in range(n):
            index = 2 * col - row + 1
            if 0 <= index <= n:
                hurwitz[row, col] = coefficients[index]
    region = sp.Interval.open(0, sp.oo)
    for size in range(1, n + 1):
        minor = sp.factor(hurwitz[:size, :size].det())
        region = region.intersect(sp.solveset(minor > 0, a, domain=sp.S.Reals))
    return region


def test_type_two_loop_has_infinite_gain_margins_as_routh_hurwitz_says():
    # Issue 11 item 2: two integrators and a lag; Routh–Hurwitz (sympy) says every α > 0 is stable,
    # so no gain factor destabilises the loop: no false margin from ω → 0.
    A, B, K = [[0, 1, 0], [0, 0, 1], [0, 0, -10]], [[0], [0], [10]], [[8, 6, 1]]
    assert _routh_hurwitz_factor_range(A, B, K) == sp.Interval.open(0, sp.oo)
    margins = loop_margins(Plant(A=A, B=B), K)
    assert margins.gain_margin_increase == math.inf
    assert margins.gain_margin_decrease == 0.0
    assert margins.gain_margin_db_min == math.inf
    assert margins.phase_crossover_frequencies == ()


def test_type_two_loop_with_finite_upper_margin_matches_routh_hurwitz():
    # det(sI − A + αBK) = s³ + (1 − α/4)s² + 2αs + α: Hurwitz for 0 < α < 2 (sympy below). Both
    # integrators make α → 0 a crossing at ω = 0, which must give decrease 0, not a factor of rounding size.
    A, B, K = [[0, 1, 0], [0, 0, 1], [0, 0, -1]], [[0], [0], [1]], [[1, 2, -0.25]]
    region = _routh_hurwitz_factor_range(A, B, K)
    assert region == sp.Interval.open(0, 2)
    margins = loop_margins(Plant(A=A, B=B), K)
    assert margins.gain_margin_increase == pytest.approx(2.0, rel=1e-12)
    assert margins.gain_margin_decrease == 0.0
    # at α = 2 the polynomial is s³ + s²/2 + 4s + 2 = (s + 1/2)(s² + 4): the phase crossover is at 2 rad/s (sympy)
    s = sp.symbols("s")
    assert sp.factor(s**3 + s**2 / 2 + 4 * s + 2) == sp.factor((s + sp.Rational(1, 2)) * (s**2 + 4))
    assert margins.phase_crossover_frequencies == pytest.approx((2.0,), rel=1e-12)


def test_type_two_loop_gain_margin_below_one_matches_routh_hurwitz():
    # A conditionally stable type-2 loop: det = s³ + (2 + 2α)s² + αs + 3α, Hurwitz iff (2 + 2α) > 3, i.e. α > 1/2
    # (sympy below); loop_margins must report exactly that decrease and no upper limit.
    A, B, K = [[0, 1, 0], [0, 0, 1], [0, 0, -2]], [[0], [0], [1]], [[3, 1, 2]]
    region = _routh_hurwitz_factor_range(A, B, K)
    assert region == sp.Interval.open(sp.Rational(1, 2), sp.oo)
    margins = loop_margins(Plant(A=A, B=B), K)
    low = 0.0 if region.start == 0 else float(region.start)
    high = math.inf if region.end == sp.oo else float(region.end)
    assert margins.gain_margin_decrease == pytest.approx(low, rel=1e-12, abs=0)
    assert margins.gain_margin_increase == pytest.approx(high, rel=1e-12)


def _cart_chain(carts: int, rng):
    """Carts joined by springs and light dampers, pushed at the first cart (a demo scenario of our own)."""
    masses = rng.uniform(0.5, 2.0, carts)
    stiffness = np.zeros((carts, carts))
    damping = np.zeros((carts, carts))
    for j in range(carts - 1):
        for matrix, value in ((stiffness, rng.uniform(0.5, 4.0)), (damping, rng.uniform(0.01, 0.1))):
            matrix[j:j + 2, j:j + 2] += value * np.array([[1.0, -1.0], [-1.0, 1.0]])
    A = np.block([[np.zeros((carts, carts)), np.eye(carts)],
                  [-stiffness / masses[:, None], -damping / masses[:, None]]])
    B = np.zeros((2 * carts, 1))
    B[carts, 0] = 1.0 / masses[0]
    return A, B


def test_gain_crossovers_equal_an_independent_dense_sweep(rng):
    # Reference: a per-frequency numpy.linalg.solve of (jωI − A) x = b on a 4 000-point log grid and
    # scipy.optimize.brentq on |L|² − 1 (independent of the shared sweep, the pencil and the modal form).
    A, B = _cart_chain(6, rng)
    K = B.T @ scipy.linalg.solve_continuous_are(A, B, np.eye(12), np.eye(1))  # LQR gain (scipy)
    margins = loop_margins(Plant(A=A, B=B), K)

    def loop(omega):
        return complex(K[0] @ np.linalg.solve(1j * omega * np.eye(12) - A, B[:, 0]))

    grid = np.geomspace(1e-3, 1e3, 4000)
    excess = np.array([abs(loop(w)) ** 2 - 1 for w in grid])
    reference = [scipy.optimize.brentq(lambda w: abs(loop(w)) ** 2 - 1, grid[j], grid[j + 1], xtol=1e-300,
                                       rtol=1e-15)
                 for j in np.flatnonzero(excess[:-1] * excess[1:] < 0)]
    assert len(reference) >= 1
    assert margins.loop_at_a_time[0].gain_crossover_frequencies == pytest.approx(tuple(reference), rel=1e-9)
    # the phase margin is read at the reference crossover with the smallest distance to −1
    angles = [abs(180.0 - abs(math.degrees(np.angle(loop(w))))) for w in reference]
    assert margins.phase_margin_deg == pytest.approx(min(angles), abs=1e-7)
