"""Large plants: memory of the all-entry stable intervals stays bounded (issue 11 item 7).

The analysis hands matrices to LAPACK in blocks of bounded size; numpy solves each matrix of a
stack on its own, so blocking must not change a single number. Reference for the numbers: the
same computation in one block (the numbers of the unblocked analysis, which the other tests check
against Routh–Hurwitz and brute-force sweeps).
"""

import numpy as np
import pytest

import gainboard.core._single_entry as single_entry
import gainboard.core._single_entry_family as family_module
from gainboard.core import Plant, all_entry_stable_intervals


def _chain_plant(rng, carts):
    """Carts joined by springs and dampers, pushed at both ends (a demo scenario of our own)."""
    stiffness = np.zeros((carts, carts))
    damping = np.zeros((carts, carts))
    for j in range(carts - 1):
        for matrix, value in ((stiffness, rng.uniform(0.5, 4.0)), (damping, rng.uniform(0.05, 0.2))):
            matrix[j:j + 2, j:j + 2] += value * np.array([[1.0, -1.0], [-1.0, 1.0]])
    A = np.block([[np.zeros((carts, carts)), np.eye(carts)], [-stiffness, -damping]])
    B = np.zeros((2 * carts, 2))
    B[carts, 0] = 1.0
    B[-1, 1] = 1.0
    return Plant(A=A, B=B)


def test_all_entry_intervals_in_small_blocks_give_the_same_numbers_and_never_a_large_stack(monkeypatch, rng):
    plant = _chain_plant(rng, 4)
    n = plant.state_count
    K = rng.normal(size=(2, n)) * 0.3 + np.hstack([np.eye(2, 4) * 2, np.eye(2, 4) * 2])
    whole = all_entry_stable_intervals(plant, K)

    budget = 3 * (n + 1) ** 2  # about three bordered matrices per LAPACK call
    monkeypatch.setattr(family_module, "_BORDERED_BUDGET", budget)
    monkeypatch.setattr(single_entry, "_FAMILY_GROUP_ENTRIES", 2 * n * n)  # two entries' families at a time
    largest = []
    for name in ("eigvals", "solve"):
        original = getattr(np.linalg, name)

        def recording(matrices, *args, _original=original, **kwargs):
            matrices = np.asarray(matrices)
            if matrices.ndim == 3:
                largest.append(matrices.shape[0] * matrices.shape[1] * matrices.shape[2])
            return _original(matrices, *args, **kwargs)

        monkeypatch.setattr(np.linalg, name, recording)
    blocked = all_entry_stable_intervals(plant, K)
    monkeypatch.undo()

    # the stacks of the stable-interval analysis stay within twice the budget (a bordered pair R, Rᴴ)
    assert largest and max(largest) <= 2 * budget
    assert sorted(blocked) == sorted(whole)
    for entry, result in whole.items():
        other = blocked[entry]
        assert other.intervals == result.intervals
        assert [c.gain for c in other.crossings] == [c.gain for c in result.crossings]
        assert other.pieces == result.pieces
