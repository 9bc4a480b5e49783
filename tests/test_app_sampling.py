"""Sampling keeps the design: the emulation check beside a continuous K, the z-plane as an explicit choice.

Reference values (shared/reference-cases.md):
- case 9: ZOH double integrator Φ = [[1, T], [0, 1]], Γ = [T²/2, T]ᵀ (Franklin, Powell & Workman, from memory);
- case 14: z² + a1 z + a0 is stable iff |a0| < 1 and 1 ± a1 + a0 > 0 (Jury; Åström & Wittenmark, from memory).
  For the double integrator with K = [k1, k2] through a ZOH the characteristic polynomial is
  z² + (k1T²/2 + k2T − 2) z + (1 + k1T²/2 − k2T) (derived by hand from case 9), so the Jury
  conditions give the largest stable T exactly: K = [1, 1] → T < 2; K = [1, 3] → T < 2/3.
scipy.signal.cont2discrete (method "zoh") is the independent reference for the sampled matrices.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from gainboard import core
from gainboard.app.state import DesignState

DOUBLE_INTEGRATOR = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]], name="double integrator")


def scipy_sampled_poles(plant, gain, T):
    """eig(Φ − ΓK) with Φ, Γ from scipy.signal.cont2discrete (reference library)."""
    Ad, Bd, *_ = scipy.signal.cont2discrete((plant.A, plant.B, plant.C, plant.D), T, method="zoh")
    return np.sort_complex(np.linalg.eigvals(Ad - Bd @ np.asarray(gain, float)))


@pytest.fixture
def state():
    return DesignState(DOUBLE_INTEGRATOR, gain=[[1.0, 3.0]])


def test_the_emulation_check_shows_the_sampled_loop_and_keeps_the_design(state):
    state.set_entry(0, 0, 1.5)
    state.set_entry(0, 0, 1.0)
    state.pin()
    undo_depth, pinned, history = state.undo_depth, state.pinned, state.gain_log.entries
    assert state.check_sampling(0.2)
    assert not state.plant.is_sampled and state.plant is DOUBLE_INTEGRATOR
    np.testing.assert_array_equal(state.gain, [[1.0, 3.0]])
    assert state.undo_depth == undo_depth and state.pinned is pinned and state.gain_log.entries == history
    emulation = state.evaluation.emulation
    assert emulation is not None and emulation.sample_time == 0.2
    # z-plane poles: scipy's ZOH as the reference
    np.testing.assert_allclose(np.sort_complex(emulation.sampled.closed_loop.poles),
                               scipy_sampled_poles(DOUBLE_INTEGRATOR, [[1.0, 3.0]], 0.2), atol=1e-12)
    assert emulation.stable
    # Jury (case 14 with case 9's Φ, Γ, derived): K = [1, 3] loses stability at T = 2/3 exactly
    assert emulation.largest_stable_sample_time == pytest.approx(2 / 3, rel=1e-8)
    assert emulation.sampled.margins is not None  # margins of the sampled loop (complete detail)
    assert emulation.sampled.responses.initial is not None


def test_the_emulation_check_follows_k_and_reports_an_unstable_sampled_loop(state):
    assert state.check_sampling(0.5)
    assert state.evaluation.emulation.stable
    assert state.set_entry(0, 1, 1.0)  # K = [1, 1]: Jury gives T < 2, so T = 0.5 is still stable
    assert state.evaluation.emulation.largest_stable_sample_time == pytest.approx(2.0, rel=1e-8)
    assert state.check_sampling(2.5)
    assert not state.evaluation.emulation.stable
    assert np.max(np.abs(scipy_sampled_poles(DOUBLE_INTEGRATOR, state.gain, 2.5))) > 1  # scipy agrees


def test_an_invalid_sample_time_is_refused_in_one_message_and_nothing_changes(state):
    for bad in (0.0, -1.0, float("nan"), float("inf")):
        assert not state.check_sampling(bad)
        assert state.message_kind == "error" and "positive, finite number of seconds" in state.message
        assert state.evaluation.emulation is None


def test_continuing_on_the_z_plane_keeps_k_pins_and_history_and_undo_goes_back(state):
    state.set_entry(0, 0, 2.0)
    state.set_entry(0, 0, 1.0)
    state.pin()
    history = state.gain_log.entries
    depth = state.undo_depth
    assert state.check_sampling(0.1)
    assert state.sample_plant()
    assert state.plant.is_sampled and state.plant.sample_time == 0.1
    Ad, Bd, *_ = scipy.signal.cont2discrete((DOUBLE_INTEGRATOR.A, DOUBLE_INTEGRATOR.B, DOUBLE_INTEGRATOR.C,
                                             DOUBLE_INTEGRATOR.D), 0.1, method="zoh")
    np.testing.assert_allclose(state.plant.A, Ad, atol=1e-14)
    np.testing.assert_allclose(state.plant.B, Bd, atol=1e-14)
    np.testing.assert_array_equal(state.gain, [[1.0, 3.0]])  # the sampled equivalent of K is K itself
    assert state.undo_depth == depth + 1 and state.pinned is not None
    assert state.gain_log.entries[:len(history)] == history
    np.testing.assert_allclose(np.sort_complex(state.evaluation.closed_loop.poles),
                               scipy_sampled_poles(DOUBLE_INTEGRATOR, [[1.0, 3.0]], 0.1), atol=1e-12)
    assert state.undo()  # back to the continuous design, with its check
    assert state.plant is DOUBLE_INTEGRATOR and state.emulation_sample_time == 0.1
    np.testing.assert_array_equal(state.gain, [[1.0, 3.0]])
    assert state.undo()  # and further back through the continuous history
    np.testing.assert_array_equal(state.gain, [[2.0, 3.0]])
    assert state.redo() and state.redo()
    assert state.plant.is_sampled


def test_redesign_on_the_z_plane_is_an_explicit_choice_with_the_sampled_plants_lqr(state):
    assert state.check_sampling(0.1)
    assert state.sample_plant(redesign=True)
    sampled = state.plant
    Q, R = core.bryson_weights(sampled)
    # scipy's discrete Riccati solver as the reference: K = (R + ΓᵀPΓ)⁻¹ΓᵀPΦ
    P = __import__("scipy.linalg").linalg.solve_discrete_are(sampled.A, sampled.B, Q, R)
    expected = np.linalg.solve(R + sampled.B.T @ P @ sampled.B, sampled.B.T @ P @ sampled.A)
    np.testing.assert_allclose(state.gain, expected, rtol=1e-9)
    assert state.undo()
    assert state.plant is DOUBLE_INTEGRATOR
    np.testing.assert_array_equal(state.gain, [[1.0, 3.0]])


def test_back_to_continuous_keeps_k_and_is_undone_like_any_step(state):
    assert state.sample_plant(0.1)
    assert state.set_entry(0, 0, 0.5)
    assert state.restore_continuous()
    assert state.plant is DOUBLE_INTEGRATOR
    np.testing.assert_array_equal(state.gain, [[0.5, 3.0]])
    assert state.undo() and state.plant.is_sampled


def test_opening_another_plant_drops_the_emulation_check(state):
    assert state.check_sampling(0.1)
    assert state.load_plant_reference("cart_pendulum")
    assert state.emulation_sample_time is None and state.evaluation.emulation is None
