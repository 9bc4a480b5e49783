"""Unstable counts of the pieces between exact crossings, carried across the crossings (issue 15).

Reference: numpy.linalg.eigvals of A − B·K(v) at a point inside each piece (a brute-force count).
"""

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

import gainboard.core._single_entry as single_entry
from gainboard.core import Plant, entry_stable_intervals


def _count_at(plant, K, row, col, value):
    gain = np.array(K, dtype=float)
    gain[row, col] = value
    poles = np.linalg.eigvals(plant.A - plant.B @ gain)
    return int(np.sum(np.abs(poles) >= 1.0)) if plant.is_sampled else int(np.sum(poles.real >= 0.0))


def _inside(low, high, current):
    if math.isinf(low) and math.isinf(high):
        return current
    if math.isinf(low):
        return high - max(1.0, abs(high))
    if math.isinf(high):
        return low + max(1.0, abs(low))
    return 0.5 * (low + high)


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 6), sampled=st.booleans())
def test_piece_counts_equal_eigenvalue_counts_inside_each_piece(seed, n, sampled):
    rng = np.random.default_rng(seed)
    plant = Plant(A=rng.normal(size=(n, n)) * (0.5 if sampled else 1.0), B=rng.normal(size=(n, 1)),
                  sample_time=0.1 if sampled else None)
    K = rng.normal(size=(1, n))
    col = int(rng.integers(n))
    result = entry_stable_intervals(plant, K, 0, col)
    for low, high, count in result.pieces:
        value = _inside(low, high, result.current_value)
        # a point of rounding size away from a crossing is not a fair reference; skip pieces too thin
        if not math.isinf(low) and not math.isinf(high) and high - low <= 1e-6 * max(1.0, abs(value)):
            continue
        assert count == _count_at(plant, K, 0, col, value)


def test_well_conditioned_crossings_need_no_eigenvalues_per_piece(monkeypatch):
    # s³ + 3s² + 2s + k (Routh: stable for 0 < k < 6; case 19 of reference-cases.md): two exact crossings,
    # three pieces. Counting them needs the count at the current value and the two far ends only.
    plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]], B=[[0.0], [0.0], [1.0]])
    counted = []
    original = single_entry._poles_and_counts_each

    def recording(families, value_lists):
        counted.extend(np.size(values) for values in value_lists)
        return original(families, value_lists)

    monkeypatch.setattr(single_entry, "_poles_and_counts_each", recording)
    result = entry_stable_intervals(plant, [[1.0, 0.0, 0.0]], 0, 0)
    assert [(round(low, 9), round(high, 9)) for low, high in result.intervals] == [(0.0, 6.0)]
    assert [count for _, _, count in result.pieces] == [1, 0, 2]  # Routh: one real pole for k < 0, a pair for k > 6
    assert sum(counted) == 3


def test_carried_counts_that_miss_the_far_end_fall_back_to_counting_every_piece(monkeypatch):
    # Remove the crossing at k = 6 from the exact method's answer: carrying from k = 1 then predicts 0 unstable
    # poles far right, the far-end count (2, Routh) disagrees, and the safety net finds the crossing by bisection.
    plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]], B=[[0.0], [0.0], [1.0]])
    original = single_entry.boundary_points

    def missing_one(family):
        return [point for point in original(family) if abs(point.gain - 6.0) > 1e-6]

    monkeypatch.setattr(single_entry, "boundary_points", missing_one)
    result = entry_stable_intervals(plant, [[1.0, 0.0, 0.0]], 0, 0)
    assert len(result.intervals) == 1
    low, high = result.intervals[0]
    assert abs(low) < 1e-9 and abs(high - 6.0) < 1e-6
    assert any(not crossing.exact for crossing in result.crossings)
