"""evaluate_design: the one call every view reads."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import linear_sum_assignment

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


def _report_fields(report):
    return (report.poles.tobytes(), repr(report.descriptions), report.stable, report.stability_margin,
            report.slowest_time_constant, report.fastest_time_constant, report.eigenvector_condition,
            report.pole_condition_numbers.tobytes(), report.pole_error_estimates.tobytes(), report.sample_time)


def _sensitivity_fields(sensitivity):
    return (sensitivity.entry, sensitivity.poles.tobytes(), sensitivity.derivatives.tobytes(),
            sensitivity.defective.tobytes(), sensitivity.condition_numbers.tobytes(), sensitivity.note)


@pytest.mark.parametrize("sampled", [False, True])
def test_one_decomposition_gives_the_public_functions_numbers_and_the_outside_references(sampled, rng):
    n, m = 5, 2
    A = rng.normal(size=(n, n))
    if sampled:
        A = 0.9 * A / np.abs(np.linalg.eigvals(A)).max()
    B = rng.normal(size=(n, m))
    plant = core.Plant(A=A, B=B, sample_time=0.1 if sampled else None)
    gain = 0.3 * rng.normal(size=(m, n))
    for entry in [(0, 0), (1, 3)]:
        options = core.EvaluationOptions(selected_entry=entry, include_margins=False,
                                         include_all_entry_intervals=False)
        evaluation = core.evaluate_design(plant, gain, options)
        # the shared decomposition changes nothing: the same numbers, bit for bit, as the public functions
        assert _report_fields(evaluation.closed_loop) == _report_fields(core.analyze_closed_loop(plant, gain))
        assert _sensitivity_fields(evaluation.sensitivity) == _sensitivity_fields(
            core.pole_sensitivity(plant, gain, *entry))
        # outside references: numpy's eigenvalues of A − BK …
        reference = np.linalg.eigvals(A - B @ gain)
        _, _, errors = core.match_poles(evaluation.closed_loop.poles, reference)
        assert errors.max() <= 1e-12 * (1.0 + np.abs(reference).max())
        # … and a central finite difference of them in the selected entry (common practice, no source)
        step = 1e-6 * (1.0 + abs(gain[entry]))
        shifted = []
        for sign in (1.0, -1.0):
            moved = gain.copy()
            moved[entry] += sign * step
            values = np.linalg.eigvals(A - B @ moved)
            _, order = linear_sum_assignment(np.abs(evaluation.sensitivity.poles[:, None] - values[None, :]))
            shifted.append(values[order])
        difference = (shifted[0] - shifted[1]) / (2.0 * step)
        assert not evaluation.sensitivity.defective.any()
        np.testing.assert_allclose(evaluation.sensitivity.derivatives, difference, rtol=1e-5, atol=1e-6)
        # the sensitivity's condition numbers are the report's (Wilkinson's κ of each pole), reordered
        _, matched, _ = core.match_poles(evaluation.closed_loop.poles, evaluation.sensitivity.poles)
        by_pole = dict(zip(evaluation.sensitivity.poles.tolist(), evaluation.sensitivity.condition_numbers.tolist()))
        np.testing.assert_array_equal([by_pole[p] for p in matched.tolist()], evaluation.closed_loop.pole_condition_numbers)


def test_all_entry_intervals_in_an_evaluation_equal_the_public_function():
    # reference case 5 plant (reference-cases.md; Ogata Example 10-1, from memory)
    plant = core.Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]])
    gain = [[199.0, 55.0, 8.0]]
    evaluation = core.evaluate_design(plant, gain, core.EvaluationOptions(selected_entry=None,
                                                                          include_margins=False))
    every = core.all_entry_stable_intervals(plant, gain)
    assert {key: repr(value) for key, value in evaluation.entry_intervals.items()} == \
        {key: repr(value) for key, value in every.items()}
    # Routh–Hurwitz intervals of case 5: k1 ∈ (−1, 839), k2 ∈ (65/7, ∞), k3 ∈ (−8/3, ∞)
    assert every[(0, 0)].intervals == (pytest.approx((-1.0, 839.0), rel=1e-9, abs=1e-9),)
    assert every[(0, 1)].intervals[0][0] == pytest.approx(65.0 / 7.0, rel=1e-9)
    assert every[(0, 2)].intervals[0][0] == pytest.approx(-8.0 / 3.0, rel=1e-9)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), hidden=st.integers(1, 2), sampled=st.booleans())
def test_poles_no_gain_moves_are_the_uncontrollable_block_and_match_the_full_structure_analysis(seed, hidden, sampled):
    rng = np.random.default_rng(seed)
    n, m = 4, 1
    # block-triangular plant: the last `hidden` states get no input and no coupling from the others,
    # so their block's eigenvalues are fixed for every K (Kalman decomposition, from memory)
    A = rng.normal(size=(n, n))
    A[n - hidden:, : n - hidden] = 0.0
    B = np.zeros((n, m))
    B[: n - hidden] = rng.normal(size=(n - hidden, m))
    if sampled:
        A = 0.9 * A / np.abs(np.linalg.eigvals(A)).max()
    plant = core.Plant(A=A, B=B, sample_time=0.2 if sampled else None)
    gain = rng.normal(size=(m, n))
    evaluation = core.evaluate_design(plant, gain, core.EvaluationOptions(selected_entry=None, include_margins=False,
                                                                          include_all_entry_intervals=False))
    movable = np.asarray(evaluation.closed_loop_movable)
    poles = np.asarray(evaluation.closed_loop.poles)
    fixed_block = np.linalg.eigvals(A[n - hidden:, n - hidden:])
    if np.min(np.abs(poles[:, None] - fixed_block[None, :]).min(axis=1)[movable], initial=np.inf) < 1e-6:
        return  # a movable pole sits on a fixed one: which copy is "fixed" is arbitrary
    assert (~movable).sum() == hidden
    # reference: numpy's eigenvalues of the uncontrolled block are the poles marked fixed
    _, _, errors = core.match_poles(poles[~movable], fixed_block)
    assert errors.max() <= 1e-9 * (1.0 + np.abs(fixed_block).max())
    # and the flags equal those of the full structure analysis of (A − BK, B), pole for pole
    loop = core.analyze_structure(core.Plant(A=A - B @ gain, B=B))
    ordered, matched, _ = core.match_poles(poles, loop.open_loop_poles)
    flag_of = dict(zip(loop.open_loop_poles.tolist(), loop.pole_movable))
    flag_at = {p: flag_of[q] for p, q in zip(ordered.tolist(), matched.tolist())}
    assert tuple(flag_at[p] for p in poles.tolist()) == evaluation.closed_loop_movable


def test_a_quick_evaluation_completed_has_every_entry_interval_and_keeps_the_rest():
    # Reference case 1/5 (shared/reference-cases.md): the companion plant with K = [199, 55, 8];
    # Routh–Hurwitz on s³ + (6 + k3)s² + (5 + k2)s + (1 + k1) gives −1 < k1 < 839 with k2, k3 fixed.
    plant = core.Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]])
    gain = [[199.0, 55.0, 8.0]]
    quick = core.evaluate_design(plant, gain, core.EvaluationOptions(selected_entry=(0, 1), include_all_entry_intervals=False))
    assert quick.entry_intervals == {}
    completed = core.with_all_entry_intervals(quick)
    assert set(completed.entry_intervals) == {(0, 0), (0, 1), (0, 2)}
    low, high = completed.entry_intervals[(0, 0)].intervals[0]
    assert low == pytest.approx(-1.0, abs=1e-9) and high == pytest.approx(839.0, rel=1e-12)
    # the selected entry's intervals are the very object the locus uses; the rest is the quick one's
    assert completed.entry_intervals[(0, 1)] is quick.selected_intervals
    assert completed.responses is quick.responses and completed.closed_loop is quick.closed_loop
    full = core.evaluate_design(plant, gain, core.EvaluationOptions(selected_entry=(0, 1)))
    for entry, intervals in full.entry_intervals.items():
        assert completed.entry_intervals[entry].intervals == intervals.intervals
    assert core.with_all_entry_intervals(completed) is completed
