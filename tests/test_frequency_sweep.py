"""Frequency sweeps without one LU per point: Hessenberg and modal forms against dense solves.

Reference: numpy.linalg.solve of (pI − A) X = B at each point (LAPACK's dense LU with partial pivoting).
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core._frequency_sweep import HessenbergResponse, ModalResponse, sweep_response


def _dense(A, B, K, points):
    n = A.shape[0]
    return K @ np.linalg.solve(points[:, None, None] * np.eye(n) - A, np.broadcast_to(B.astype(complex), (points.size,) + B.shape))


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 12), m=st.integers(1, 3), sampled=st.booleans())
def test_hessenberg_sweep_equals_dense_solves(seed, n, m, sampled):
    rng = np.random.default_rng(seed)
    A, B, K = rng.normal(size=(n, n)), rng.normal(size=(n, m)), rng.normal(size=(m, n))
    omega = np.geomspace(1e-3, 1e3, 57)
    points = np.exp(1j * omega * 0.1) if sampled else 1j * omega
    reference = _dense(A, B, K, points)
    values = HessenbergResponse.of(A, B, K).transfer(points)
    # backward-stable solves: error of the order of the condition number times eps (Wilkinson, from memory)
    condition = np.linalg.cond(points[:, None, None] * np.eye(n) - A)
    bound = 1e3 * n * np.finfo(float).eps * condition[:, None, None] * np.linalg.norm(K) * np.linalg.norm(B)
    assert np.all(np.abs(values - reference) <= bound)


def test_hessenberg_sweep_works_in_blocks_with_the_same_numbers(monkeypatch, rng):
    import gainboard.core._frequency_sweep as sweep

    A, B, K = rng.normal(size=(9, 9)), rng.normal(size=(9, 2)), rng.normal(size=(2, 9))
    points = 1j * np.linspace(0.1, 10, 40)
    whole = HessenbergResponse.of(A, B, K).transfer(points)
    monkeypatch.setattr(sweep, "_FACTOR_BUDGET", 81 * 3)  # three points per block
    assert np.array_equal(HessenbergResponse.of(A, B, K).transfer(points), whole)


def test_sweep_on_an_eigenvalue_is_not_finite():
    # A = diag(−1, −2): the point p = −1 is a pole (numpy would refuse the singular solve)
    A = np.diag([-1.0, -2.0])
    values = HessenbergResponse.of(A, np.ones((2, 1)), np.ones((1, 2))).transfer(np.array([-1.0 + 0j, 1j]))
    assert not np.isfinite(values[0]).all()
    assert values[1, 0, 0] == pytest.approx(1 / (1j + 1) + 1 / (1j + 2), rel=1e-14)  # partial fractions, by hand


def test_well_conditioned_plants_use_the_modal_form_and_defective_ones_do_not(rng):
    A = rng.normal(size=(6, 6))
    assert isinstance(sweep_response(A - 3 * np.eye(6), np.ones((6, 1)), np.ones((1, 6))), ModalResponse)
    jordan = np.array([[-1.0, 1.0], [0.0, -1.0]])  # defective: its eigenvector matrix is singular
    assert isinstance(sweep_response(jordan, np.ones((2, 1)), np.ones((1, 2))), HessenbergResponse)
    points = 1j * np.geomspace(1e-2, 1e2, 30)
    modal = sweep_response(A - 3 * np.eye(6), np.ones((6, 1)), np.ones((1, 6))).transfer(points)
    assert np.allclose(modal, _dense(A - 3 * np.eye(6), np.ones((6, 1)), np.ones((1, 6)), points), rtol=1e-10,
                       atol=1e-12)
