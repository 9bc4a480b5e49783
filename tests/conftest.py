"""Shared pytest configuration.

Browser tests live in tests/browser/ and have their own conftest; the fixtures
here are small helpers used across the numeric tests.
"""

import numpy as np
import pytest


@pytest.fixture
def rng():
    """A seeded random generator; tests never touch numpy's global state."""
    return np.random.default_rng(20261201)
