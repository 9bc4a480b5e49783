"""Frequency responses K (pI − A)⁻¹ B on a whole grid of points, without one LU per point.

Two forms, chosen by conditioning (:func:`sweep_response`):

* modal: A = V Λ V⁻¹ with a well-conditioned V gives K V diag(1/(p − λ)) V⁻¹ B, O(n·m·r) per
  point. Its error grows with cond(V), so it is used only when cond(V) is modest, and only to
  scan a grid (where a sign or a peak is); every reported number is refined on exact solves;
* Hessenberg, for every other A (defective or nearly so):

A frequency sweep of (pI − A)⁻¹B costs one dense LU factorisation, O(n³), per point p. With the
orthogonal Hessenberg form A = Q H Qᵀ (computed once), (pI − A)⁻¹B = Q (pI − H)⁻¹ QᵀB, and
pI − H is upper Hessenberg at every p: Gaussian elimination needs one row operation per column
(the only choice of pivot is between two neighbouring rows), O(n²) per point. The elimination
runs for a whole block of points at once (numpy over the points, a Python loop over the n
columns), and blocks are sized so that the triangular factors of a block stay within a fixed
memory budget, whatever n.

Partial pivoting on a Hessenberg matrix has a growth factor of at most n (Wilkinson), so the
solve is backward stable like the dense one; points on an eigenvalue of A give inf/nan, as a
dense solve of a singular matrix would fail.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

__all__: list[str] = []  # private: used by the loop margins

#: Largest condition number of the eigenvector matrix for which the modal form is used: the
#: modal values then carry a relative error of about cond(V)·eps ≤ 1e-10, enough to place grid brackets.
_MODAL_CONDITION_LIMIT = 1e6
#: Complex entries of the triangular factors held at once (32 MiB); sets the block of points.
_FACTOR_BUDGET = 2**21


@dataclass(frozen=True, eq=False)
class HessenbergResponse:
    """K (pI − A)⁻¹ B at many points p through one Hessenberg reduction of A.

    Attributes
    ----------
    hessenberg : ndarray, shape (n, n)
        H = Qᵀ A Q, upper Hessenberg.
    right : ndarray, shape (n, m)
        Qᵀ B.
    left : ndarray, shape (r, n)
        K Q.
    """

    hessenberg: np.ndarray
    right: np.ndarray
    left: np.ndarray

    @classmethod
    def of(cls, A: np.ndarray, B: np.ndarray, K: np.ndarray) -> "HessenbergResponse":
        """The reduction of (A, B, K): A (n, n), B (n, m), K (r, n)."""
        hessenberg, transform = scipy.linalg.hessenberg(np.asarray(A, dtype=float), calc_q=True)
        return cls(hessenberg, transform.T @ np.asarray(B, dtype=float), np.asarray(K, dtype=float) @ transform)

    def states(self, points: np.ndarray) -> np.ndarray:
        """(pI − H)⁻¹ QᵀB at every point, shape (P, n, m), complex: the state response in Hessenberg coordinates.

        Its norms equal those of (pI − A)⁻¹B (Q is orthogonal).
        """
        points = np.atleast_1d(np.asarray(points, dtype=complex))
        n, m = self.right.shape
        out = np.empty((points.size, n, m), dtype=complex)
        block = max(1, _FACTOR_BUDGET // max(n * n, 1))
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for start in range(0, points.size, block):
                out[start:start + block] = _hessenberg_solve(self.hessenberg, self.right, points[start:start + block])
        return out

    def transfer(self, points: np.ndarray) -> np.ndarray:
        """K (pI − A)⁻¹ B at every point, shape (P, r, m), complex."""
        states = self.states(points)
        with np.errstate(invalid="ignore", over="ignore"):  # a point on an eigenvalue stays non-finite
            return self.left @ states


@dataclass(frozen=True, eq=False)
class ModalResponse:
    """K (pI − A)⁻¹ B at many points from A = V Λ V⁻¹ (a well-conditioned V)."""

    poles: np.ndarray  # Λ, (n,)
    left: np.ndarray  # K V, (r, n)
    right: np.ndarray  # V⁻¹ B, (n, m)
    vectors: np.ndarray  # V, (n, n)

    def states(self, points: np.ndarray) -> np.ndarray:
        """(pI − A)⁻¹ B at every point, shape (P, n, m)."""
        points = np.atleast_1d(np.asarray(points, dtype=complex))
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            weights = 1.0 / (points[:, None] - self.poles[None, :])
            return self.vectors[None] @ (weights[:, :, None] * self.right[None])

    def transfer(self, points: np.ndarray) -> np.ndarray:
        """K (pI − A)⁻¹ B at every point, shape (P, r, m)."""
        points = np.atleast_1d(np.asarray(points, dtype=complex))
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            weights = 1.0 / (points[:, None] - self.poles[None, :])
            return (self.left[None] * weights[:, None, :]) @ self.right


def sweep_response(A: np.ndarray, B: np.ndarray, K: np.ndarray) -> ModalResponse | HessenbergResponse:
    """The cheapest accurate form for sweeping K (pI − A)⁻¹ B over many points.

    Modal when the eigenvector matrix of A is well conditioned (cond ≤ 1e6), Hessenberg otherwise.
    """
    A = np.asarray(A, dtype=float)
    poles, vectors = np.linalg.eig(A)
    singular = np.linalg.svd(vectors, compute_uv=False)
    if singular[-1] > 0 and singular[0] / singular[-1] <= _MODAL_CONDITION_LIMIT:
        vectors = vectors.astype(complex)
        return ModalResponse(poles.astype(complex), np.asarray(K, dtype=float) @ vectors,
                             np.linalg.solve(vectors, np.asarray(B, dtype=float)), vectors)
    return HessenbergResponse.of(A, B, K)


def _hessenberg_solve(H: np.ndarray, right: np.ndarray, points: np.ndarray) -> np.ndarray:
    """(pI − H) X = right for each point p, by elimination with pivoting between neighbouring rows.

    The working row is the current candidate for pivot row j (what is left of the rows above after
    elimination); the next row of pI − H only has entries from column j on. Whichever of the two
    has the larger entry in column j becomes row j of U; the other, minus a multiple of it, is the
    next working row.
    """
    n, m = right.shape
    count = points.size
    upper = np.zeros((count, n, n), dtype=complex)
    solved_right = np.empty((count, n, m), dtype=complex)
    negated = -H.astype(complex)
    working = np.broadcast_to(negated[0], (count, n)).copy()
    working[:, 0] += points
    working_right = np.broadcast_to(right[0].astype(complex), (count, m)).copy()
    for j in range(n - 1):
        # row j + 1 of pI − H is zero left of column j: only columns j.. take part
        following = np.broadcast_to(negated[j + 1, j:], (count, n - j)).copy()
        following[:, 1] += points
        following_right = np.broadcast_to(right[j + 1].astype(complex), (count, m))
        current = working[:, j:]
        swap = np.abs(negated[j + 1, j]) > np.abs(current[:, 0])
        if np.any(swap):
            pivot_row, other_row = current.copy(), following
            pivot_row[swap], other_row[swap] = following[swap], current[swap]
            pivot_right, other_right = working_right.copy(), np.array(following_right)
            pivot_right[swap], other_right[swap] = following_right[swap], working_right[swap]
        else:
            pivot_row, other_row, pivot_right, other_right = current, following, working_right, following_right
        with np.errstate(divide="ignore", invalid="ignore"):
            multiplier = other_row[:, 0] / pivot_row[:, 0]
        multiplier[~np.isfinite(multiplier)] = 0.0  # a zero column: the matrix is singular, U says so
        upper[:, j, j:] = pivot_row
        solved_right[:, j] = pivot_right
        working = np.zeros((count, n), dtype=complex)
        working[:, j + 1:] = other_row[:, 1:] - multiplier[:, None] * pivot_row[:, 1:]
        working_right = other_right - multiplier[:, None] * pivot_right
    upper[:, n - 1, n - 1] = working[:, n - 1]
    solved_right[:, n - 1] = working_right
    solution = np.empty((count, n, m), dtype=complex)
    for j in range(n - 1, -1, -1):
        known = (upper[:, j, None, j + 1:] @ solution[:, j + 1:])[:, 0]
        solution[:, j] = (solved_right[:, j] - known) / upper[:, j, j][:, None]
    return solution
