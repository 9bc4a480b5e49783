"""Bundled plants that need an estimator: fewer outputs than states, noise intensities, honest descriptions."""

import numpy as np
import scipy.linalg

from gainboard import core
from gainboard.sample_plants import bundled_plant_files

PLANTS = {stem: core.load_plant_file(path) for stem, path in bundled_plant_files().items()}
NOISY = {stem: plant for stem, plant in PLANTS.items() if plant.noise is not None}


def test_at_least_three_bundled_plants_measure_fewer_outputs_than_states_and_give_their_noise():
    assert len(NOISY) >= 3
    for stem, plant in NOISY.items():
        assert plant.output_count < plant.state_count, stem
        assert "must be estimated" in " ".join(plant.description.split()), stem
        assert "made-up figures" in " ".join(plant.description.split()), stem  # honest: invented numbers


def test_kalman_filters_of_the_noisy_plants_have_the_lyapunov_error_covariance():
    for stem, plant in NOISY.items():
        result = core.design_kalman_estimator(plant)
        W, V, L = plant.noise.process, plant.noise.measurement, result.gain
        A, C = plant.A, plant.C
        # scipy's Lyapunov solvers as the reference (continuous: (A − LC)P + P(A − LC)ᵀ + W + LVLᵀ = 0;
        # sampled prediction form: P = (A − LC)P(A − LC)ᵀ + W + LVLᵀ)
        if plant.is_sampled:
            expected = scipy.linalg.solve_discrete_lyapunov(A - L @ C, W + L @ V @ L.T)
        else:
            expected = scipy.linalg.solve_continuous_lyapunov(A - L @ C, -(W + L @ V @ L.T))
        scale = np.max(np.abs(expected))
        np.testing.assert_allclose(result.error_covariance, expected, atol=1e-7 * scale, err_msg=stem)
        assert result.noise.source == "W and V from the plant"
        assert result.riccati_residual < 1e-12, stem  # the outputs are whitened before solving (see _kalman.py)


def test_noisy_plants_run_the_whole_compensator_evaluation():
    for stem, plant in NOISY.items():
        targets = core.analyze_open_loop(plant).poles
        # a gentle K: LQR with unit weights (any stabilising K will do for this check)
        K = core.design_lqr(plant, Q=np.eye(plant.state_count), R=np.eye(plant.input_count)).gain
        L = core.design_kalman_estimator(plant).gain
        result = core.evaluate_compensator(plant, K, L, core.EstimatorOptions(include_all_entry_intervals=False))
        assert result.closed_loop.report.stable and result.closed_loop.separation_holds, stem
        assert targets.size == plant.state_count
