"""The one stability decision of gainboard: stable, on the boundary, or unstable.

Every place that judges a loop (the pole table, ``evaluate``, ``sweep``, the loop margins,
the workbench header, the robustness and Monte Carlo code) asks this module, so two views
of one design can never disagree about it.

The rule, and why
-----------------
The poles are the computed eigenvalues λ̂ of the closed-loop matrix M (A − BK, or any state
matrix). The QR algorithm is backward stable: λ̂ are the exact eigenvalues of M + E with
‖E‖ ≤ p(n)·eps·‖M‖ for a modest p(n) of order n (Golub & Van Loan, *Matrix Computations*,
4th ed., §7.5.6), and a simple pole with condition number κ moves by at most about
κ·‖E‖. So the distance of a computed pole from the boundary is known only to within

    tolerance = 100 · n · eps · ‖M‖_F

which allows p(n) = n and pole condition numbers up to about 100 (a companion matrix with
well separated roots stays below that); ‖M‖_F is the Frobenius norm (or an upper bound on it,
which only widens the band). With the stability margin

    margin = −max Re s        (continuous time: the boundary is the imaginary axis)
    margin = 1 − max |z|      (sampled time: the boundary is the unit circle)

the loop is *stable* when margin > tolerance, *unstable* when margin < −tolerance and *on the
boundary* otherwise: a pole that close to the boundary cannot be told apart from one on it,
and it is not called stable. For sampled loops the norm is at least max|z| ≈ 1 near the unit
circle, so the band never shrinks below 100·n·eps there.

Poles of a defective cluster on the boundary (a Jordan block of size k) move by about
‖E‖^(1/k) rather than κ·‖E‖; the band above does not cover that, which is why the pole
report also carries each pole's error estimate and the eigenvector condition number.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "STABLE",
    "ON_THE_BOUNDARY",
    "UNSTABLE",
    "StabilityDecision",
    "boundary_tolerance",
    "stability_margin",
    "decide_stability",
    "decide_pole_stability",
    "decide_stability_of_stack",
]

_EPS = np.finfo(float).eps
#: The factor c of c · n · eps · ‖M‖_F (see the module notes for its derivation).
_BAND_FACTOR = 100.0

STABLE = "stable"
ON_THE_BOUNDARY = "on the boundary"
UNSTABLE = "unstable"


def boundary_tolerance(norm, size: int):
    """Half-width of the band around the stability boundary that rounding cannot resolve.

    Parameters
    ----------
    norm : float or ndarray
        Frobenius norm of the state matrix (or an upper bound on it); arrays give one band each.
    size : int
        Number of states n.

    Returns
    -------
    float or ndarray
        100 · n · eps · max(norm, eps).

    Examples
    --------
    >>> boundary_tolerance(1.0, 2) == 200 * 2.0 ** -52
    True
    """
    band = _BAND_FACTOR * max(int(size), 1) * _EPS * np.maximum(norm, _EPS)
    return float(band) if np.ndim(band) == 0 else band


def stability_margin(poles, sample_time: float | None):
    """−max Re s (continuous) or 1 − max |z| (sampled) over the last axis of ``poles``."""
    poles = np.asarray(poles, dtype=complex)
    if poles.shape[-1] == 0:
        return np.full(poles.shape[:-1], np.inf) if poles.ndim > 1 else float("inf")
    margin = -poles.real.max(axis=-1) if sample_time is None else 1.0 - np.abs(poles).max(axis=-1)
    return float(margin) if np.ndim(margin) == 0 else margin


def _verdict_codes(margin, tolerance) -> np.ndarray:
    """1 stable, 0 on the boundary, −1 unstable (int8, broadcast over margin and tolerance)."""
    margin, tolerance = np.asarray(margin, dtype=float), np.asarray(tolerance, dtype=float)
    return np.where(margin > tolerance, 1, np.where(margin < -tolerance, -1, 0)).astype(np.int8)


_NAMES = {1: STABLE, 0: ON_THE_BOUNDARY, -1: UNSTABLE}


@dataclass(frozen=True)
class StabilityDecision:
    """The verdict on one loop, with the numbers it rests on.

    Attributes
    ----------
    verdict : str
        ``"stable"``, ``"on the boundary"`` or ``"unstable"``.
    margin : float
        −max Re s (continuous) or 1 − max|z| (sampled).
    tolerance : float
        The band 100 · n · eps · ‖M‖_F around the boundary (see the module notes).
    """

    verdict: str
    margin: float
    tolerance: float

    @property
    def stable(self) -> bool:
        """True only for ``"stable"``: a loop on the boundary is not stable."""
        return self.verdict == STABLE

    @property
    def on_boundary(self) -> bool:
        return self.verdict == ON_THE_BOUNDARY


def decide_stability(poles, matrix_norm: float, size: int, sample_time: float | None) -> StabilityDecision:
    """Judge one loop from its poles and the norm of its state matrix.

    Parameters
    ----------
    poles : array_like of complex, shape (n,)
        Computed eigenvalues of the state matrix (s, or z when sampled).
    matrix_norm : float
        Frobenius norm of the state matrix (or an upper bound).
    size : int
        Number of states n.
    sample_time : float or None
        None for continuous time.

    Returns
    -------
    StabilityDecision

    Examples
    --------
    >>> decide_stability([2j, -2j, -1.0], 3.0, 3, None).verdict
    'on the boundary'
    >>> decide_stability([-1.0, -2.0], 3.0, 2, None).verdict
    'stable'
    """
    margin = stability_margin(poles, sample_time)
    tolerance = boundary_tolerance(matrix_norm, size)
    return StabilityDecision(_NAMES[int(_verdict_codes(margin, tolerance))], float(margin), float(tolerance))


def decide_pole_stability(pole: complex, tolerance: float, sample_time: float | None) -> str:
    """The verdict on one pole with the band ``tolerance`` of its loop (see :func:`decide_stability`)."""
    return _NAMES[int(_verdict_codes(stability_margin([pole], sample_time), tolerance))]


def decide_stability_of_stack(poles: np.ndarray, matrices: np.ndarray, sample_time: float | None):
    """The same decision for a stack of loops at once.

    Parameters
    ----------
    poles : ndarray, shape (N, n), complex
        Eigenvalues of each matrix.
    matrices : ndarray, shape (N, n, n)
        The state matrices (their Frobenius norms set each band).
    sample_time : float or None

    Returns
    -------
    margin : ndarray, shape (N,)
    verdict : ndarray of int8, shape (N,)
        1 stable, 0 on the boundary, −1 unstable.
    """
    margin = stability_margin(poles, sample_time)
    tolerance = boundary_tolerance(np.linalg.norm(matrices, axis=(-2, -1)), matrices.shape[-1])
    return np.asarray(margin), _verdict_codes(margin, tolerance)
