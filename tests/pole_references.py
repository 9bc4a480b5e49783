"""The reference loop the app tests share, and the outside references they compare against.

The plant in tests/data/third_order_reference.toml is reference case 1 of
shared/reference-cases.md: Ogata, *Modern Control Engineering*, 5th ed., Example 10-1
(from memory) — with K = [199, 55, 8] the closed-loop poles are −2 ± 4j and −10.
"""

from pathlib import Path

import numpy as np
from scipy.optimize import linear_sum_assignment

from gainboard import core

REFERENCE_PLANT_FILE = Path(__file__).resolve().parent / "data" / "third_order_reference.toml"
REFERENCE_GAIN = [[199.0, 55.0, 8.0]]
REFERENCE_POLES = np.array([-2 + 4j, -2 - 4j, -10 + 0j])  # Ogata Example 10-1 (from memory)

# The same plant built in code, as the file tests use it: companion form of s³ + 6s² + 5s + 1.
# Names and units are invented.
NAMED_REFERENCE_PLANT = core.Plant(
    A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]],
    B=[[0.0], [0.0], [1.0]],
    C=[[1.0, 0.0, 0.0]],
    name="third-order test plant",
    state_names=("position", "velocity", "acceleration"),
    state_units=("m", "m/s", "m/s²"),
    input_names=("drive force",),
    input_units=("N",),
    output_names=("position",),
    output_units=("m",),
)


def matched_distance(found, expected) -> float:
    """Largest distance after pairing two pole lists one to one (optimal assignment, scipy)."""
    found, expected = np.asarray(found, complex), np.asarray(expected, complex)
    assert found.shape == expected.shape, f"{found} vs {expected}"
    cost = np.abs(found[:, None] - expected[None, :])
    rows, cols = linear_sum_assignment(cost)
    return float(cost[rows, cols].max())


def numpy_closed_loop_poles(plant, gain) -> np.ndarray:
    """Outside reference: numpy's eigenvalues of A − BK, computed without the core."""
    return np.linalg.eigvals(np.asarray(plant.A) - np.asarray(plant.B) @ np.asarray(gain, dtype=float))
