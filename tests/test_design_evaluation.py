"""evaluate_design: the one call every view reads."""

import numpy as np

from gainboard import core
from gainboard.sample_plants import load_bundled_plant


def test_closed_loop_pole_that_no_gain_moves_is_marked_and_stays_put():
    # The twin-pot heater has one uncontrollable mode (the pots' temperature difference; see its
    # description). By the PBH test, rank [λI − A + BK, B] = rank [λI − A, B] (from memory), so
    # that pole is a closed-loop pole for every K and is the only one marked as not movable.
    plant = load_bundled_plant("twin_pot_heater")
    fixed = core.analyze_structure(plant).uncontrollable_poles
    assert fixed.shape == (1,)
    rng = np.random.default_rng(7)
    for gain in ([[0.0, 0.0, 0.0]], rng.normal(size=(1, 3)), core.design_lqr(plant).gain):
        evaluation = core.evaluate_design(plant, gain, core.EvaluationOptions(selected_entry=None))
        poles = np.asarray(evaluation.closed_loop.poles)
        movable = np.asarray(evaluation.closed_loop_movable)
        assert movable.shape == poles.shape and (~movable).sum() == 1
        # Outside reference: numpy's eigenvalues of A − BK contain the fixed pole.
        eigenvalues = np.linalg.eigvals(plant.A - plant.B @ np.asarray(gain, dtype=float))
        assert np.min(np.abs(eigenvalues - fixed[0])) < 1e-9
        assert abs(poles[~movable][0] - fixed[0]) < 1e-9


def test_every_pole_of_a_controllable_plant_is_movable():
    # Reference-cases.md case 1 (Ogata, Example 10-1, from memory): a controllable companion plant.
    plant = core.Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]])
    evaluation = core.evaluate_design(plant, [[199.0, 55.0, 8.0]])
    assert evaluation.closed_loop_movable == (True, True, True)
