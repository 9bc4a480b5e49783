"""Shared pytest configuration.

Browser tests live in tests/browser/ and have their own conftest; the fixtures
here are small helpers used across the numeric tests.
"""

import os

# Plants here are small: multi-threaded BLAS only adds thread start-up cost (measured: a 4×4 expm
# took ~25 ms with threads under load, ~0.1 ms without). Set before numpy loads OpenBLAS.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
import pytest


@pytest.fixture
def rng():
    """A seeded random generator; tests never touch numpy's global state."""
    return np.random.default_rng(20261201)
