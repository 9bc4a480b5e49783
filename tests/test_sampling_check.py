"""Sampled implementation of a continuous design: survival, pole mapping, largest sample time.

Reference cases are numbered as in /work/shared/reference-cases.md.
"""

import math

import numpy as np
import pytest
import scipy.signal

from gainboard.core import AnalysisError, GainError, Plant, discretize_zero_order_hold
from gainboard.core._sampling_check import check_sampled_implementation

# Case 1: companion plant, K = [199, 55, 8] places −2 ± 4j and −10 (Ogata Example 10-1, from memory).
THIRD_ORDER = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]])
THIRD_ORDER_GAIN = np.array([[199.0, 55.0, 8.0]])
DOUBLE_INTEGRATOR = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])


def _reference_sampled_loop(plant, K, T):
    # Reference: scipy.signal.cont2discrete with the zero-order hold gives Φ, Γ; the loop is Φ − ΓK.
    Phi, Gamma, *_ = scipy.signal.cont2discrete((plant.A, plant.B, np.eye(plant.state_count),
                                                 np.zeros((plant.state_count, plant.input_count))), T, method="zoh")
    return Phi - Gamma @ K


def test_fast_sampling_survives_and_sampled_poles_follow_the_exponential_map():
    def mismatch(T):
        check = check_sampled_implementation(THIRD_ORDER, THIRD_ORDER_GAIN, T)
        assert check.survives
        predicted = np.exp(check.continuous_poles * T)
        return check, np.abs(predicted[:, None] - check.sampled_poles[None, :]).min(axis=1).max()

    check, error = mismatch(1e-3)
    _, error_half = mismatch(5e-4)
    # Case 1: the designed poles are −2 ± 4j and −10.
    np.testing.assert_allclose(check.continuous_poles, [-10.0, -2.0 - 4.0j, -2.0 + 4.0j], rtol=1e-10)
    # z = e^{sT} (Franklin, Powell & Workman, from memory). With a hold, Φ − ΓK differs from e^{(A−BK)T}
    # by T²/2·BK(A − BK) + O(T³) (derived by expanding both series): the mismatch is second order in T,
    # so halving T divides it by about 4, and it is small against |z − 1| ≈ |s|T.
    assert 3.5 < error / error_half < 4.5
    assert error < 1e-2 * 10.0 * 1e-3
    # Equivalent poles ln(z)/T then differ from the design by O(T) (same expansion): within 1 % here.
    np.testing.assert_allclose(np.sort_complex(check.equivalent_continuous_poles),
                               np.sort_complex(check.continuous_poles), rtol=1e-2)
    # e^{sT} keeps the damping ratio (same source), so the change is small for small T.
    assert abs(check.worst_damping_change) < 1e-3


def test_sampled_poles_match_scipy_zero_order_hold_discretisation():
    for T in (0.01, 0.1, 0.3):
        check = check_sampled_implementation(THIRD_ORDER, THIRD_ORDER_GAIN, T)
        reference = np.linalg.eigvals(_reference_sampled_loop(THIRD_ORDER, THIRD_ORDER_GAIN, T))
        np.testing.assert_allclose(np.sort_complex(check.sampled_poles), np.sort_complex(reference), rtol=1e-9,
                                   atol=1e-12)
        # ln(z)/T by numpy as the reference for the equivalent poles.
        np.testing.assert_allclose(np.sort_complex(check.equivalent_continuous_poles),
                                   np.sort_complex(np.log(reference.astype(complex)) / T), rtol=1e-9)


def test_slow_sampling_destroys_the_fast_design():
    check = check_sampled_implementation(THIRD_ORDER, THIRD_ORDER_GAIN, 0.5)
    assert not check.survives
    # Reference: spectral radius of scipy's ZOH loop exceeds 1.
    assert np.max(np.abs(np.linalg.eigvals(_reference_sampled_loop(THIRD_ORDER, THIRD_ORDER_GAIN, 0.5)))) > 1
    assert "UNSTABLE" in check.note
    assert check.worst_damping_change > 0.5


def test_largest_stable_sample_time_of_an_integrator_loop_is_two_over_gain():
    # ẋ = u, u = −kx: x[k+1] = (1 − kT)x[k], stable iff 0 < kT < 2 (first-order Jury condition, derived).
    check = check_sampled_implementation(Plant(A=[[0.0]], B=[[1.0]]), [[4.0]], 0.05)
    assert check.largest_stable_sample_time == pytest.approx(0.5, rel=1e-8)


def test_largest_stable_sample_time_of_double_integrator_lqr_gain_matches_jury_bound():
    # Case 15 gain K = [1, √3]. Jury (case 14 source, Åström & Wittenmark, from memory) on
    # z² + (k1T²/2 + k2T − 2)z + (1 + k1T²/2 − k2T), derived: binding condition k2·T < 2, so T_max = 2/√3.
    check = check_sampled_implementation(DOUBLE_INTEGRATOR, [[1.0, math.sqrt(3.0)]], 0.1)
    assert check.largest_stable_sample_time == pytest.approx(2 / math.sqrt(3.0), rel=1e-8)


def test_largest_stable_sample_time_is_the_first_loss_on_scipy_discretisation():
    check = check_sampled_implementation(THIRD_ORDER, THIRD_ORDER_GAIN, 0.01)
    limit = check.largest_stable_sample_time
    assert 0.01 < limit < 0.5
    # Reference: scipy.signal.cont2discrete: stable just below the limit and on a scan below it, unstable above.
    radius = lambda T: np.max(np.abs(np.linalg.eigvals(_reference_sampled_loop(THIRD_ORDER, THIRD_ORDER_GAIN, T))))  # noqa: E731
    assert all(radius(T) < 1 for T in np.linspace(1e-4, limit * (1 - 1e-6), 60))
    assert radius(limit * (1 + 1e-6)) > 1


def test_note_gives_common_practice_sampling_advice_and_the_caution():
    check = check_sampled_implementation(THIRD_ORDER, THIRD_ORDER_GAIN, 0.01)
    # Bandwidth proxy: fastest designed pole |−10| = 10 rad/s (case 1); ratio (2π/T)/10.
    assert check.closed_loop_bandwidth == pytest.approx(10.0, rel=1e-10)
    assert check.sampling_ratio == pytest.approx(2 * math.pi / 0.01 / 10.0, rel=1e-12)
    assert "10–30×" in check.note  # common practice, no source
    assert "emergency stops" in check.note  # project rule 4


def test_unstable_continuous_design_has_no_largest_sample_time():
    check = check_sampled_implementation(DOUBLE_INTEGRATOR, [[-1.0, 1.0]], 0.1)
    assert check.largest_stable_sample_time is None
    assert "continuous design itself is unstable" in check.note


def test_negative_real_sampled_pole_has_equivalent_pole_on_the_folding_frequency():
    # ẋ = u, k = 15, T = 0.1: z = 1 − 1.5 = −0.5 (derived), ln(−0.5)/T = (ln 0.5 + jπ)/T.
    check = check_sampled_implementation(Plant(A=[[0.0]], B=[[1.0]]), [[15.0]], 0.1)
    assert check.sampled_poles[0] == pytest.approx(-0.5, abs=1e-12)
    assert check.equivalent_continuous_poles[0] == pytest.approx((math.log(0.5) + 1j * math.pi) / 0.1, rel=1e-12)
    assert check.survives


def test_refusals_name_the_problem():
    sampled = discretize_zero_order_hold(DOUBLE_INTEGRATOR, 0.1)
    with pytest.raises(AnalysisError, match=r"is already sampled \(T = 0\.1 s\)"):
        check_sampled_implementation(sampled, [[1.0, 1.0]], 0.1)
    with pytest.raises(AnalysisError, match=r"sample time must be a positive number of seconds, got 0"):
        check_sampled_implementation(DOUBLE_INTEGRATOR, [[1.0, 1.0]], 0)
    with pytest.raises(AnalysisError, match=r"sample time must be a positive number"):
        check_sampled_implementation(DOUBLE_INTEGRATOR, [[1.0, 1.0]], math.nan)
    with pytest.raises(GainError, match=r"K is 1×3 but must be 1×2"):
        check_sampled_implementation(DOUBLE_INTEGRATOR, [[1.0, 1.0, 1.0]], 0.1)
