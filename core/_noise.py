"""Noise intensities of a plant: what a steady-state Kalman filter needs to know.

The plant with noise is

    continuous:  x' = A x + B u + w,        y = C x + D u + v
    sampled:     x[k+1] = A x[k] + B u[k] + w[k],   y[k] = C x[k] + D u[k] + v[k]

with zero-mean white noises w (process) and v (measurement), uncorrelated with
each other. For a continuous plant the numbers are *intensities* (power spectral
densities): E[w(t) w(τ)ᵀ] = W δ(t − τ), W in (state unit)²/s, and V in
(output unit)²·s. For a sampled plant they are *covariances* per sample:
E[w[k] w[k]ᵀ] = W in (state unit)², V in (output unit)².

Sampling a continuous plant through a zero-order hold also samples its noise
(:func:`sampled_noise_intensities`): the process noise accumulated over one
period, W_d = ∫₀ᵀ e^{Aτ} W e^{Aᵀτ} dτ (Van Loan's block exponential), and the
measurement noise averaged over one period, V_d = V / T (the sensor reading is
taken as the mean of y over the period, a common convention: Franklin, Powell &
Workman, *Digital Control of Dynamic Systems*, ch. 9, from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ._arrays import read_only
from ._errors import EstimatorError

__all__ = ["NoiseIntensities", "noise_intensities", "sampled_noise_intensities"]

_EPS = np.finfo(float).eps


def _symmetric(value, key: str, meaning: str) -> np.ndarray:
    """A finite real symmetric matrix from a matrix or a flat list of variances (a diagonal)."""
    if isinstance(value, (str, bytes, bool)):
        raise EstimatorError(f"{key} must be a matrix or a list of variances ({meaning}), got {value!r}")
    try:
        matrix = np.array(value, dtype=float)
    except (TypeError, ValueError):
        raise EstimatorError(
            f"{key} must be a square matrix or a flat list of variances ({meaning}), got {value!r}"
        ) from None
    if matrix.ndim == 0:
        matrix = matrix.reshape(1, 1)
    if matrix.ndim == 1:
        matrix = np.diag(matrix)
    if matrix.ndim != 2 or matrix.shape[0] != matrix.shape[1] or matrix.size == 0:
        found = "×".join(str(s) for s in matrix.shape)
        raise EstimatorError(f"{key} is {found} but must be square ({meaning}) or a flat list of variances")
    if not np.all(np.isfinite(matrix)):
        raise EstimatorError(f"{key} has a non-finite entry (inf or nan); every intensity must be a finite number")
    scale = float(np.linalg.norm(matrix, 1))
    asymmetry = np.abs(matrix - matrix.T)
    if np.max(asymmetry) > 100 * matrix.shape[0] * _EPS * scale:
        i, j = np.unravel_index(int(np.argmax(asymmetry)), matrix.shape)
        raise EstimatorError(
            f"{key} must be symmetric, but entry ({i + 1}, {j + 1}) is {matrix[i, j]:.6g} and entry "
            f"({j + 1}, {i + 1}) is {matrix[j, i]:.6g}; make them equal"
        )
    return (matrix + matrix.T) / 2


def _smallest_eigenvalue(matrix: np.ndarray) -> float:
    return float(np.linalg.eigvalsh(matrix)[0])


def _check_semidefinite(matrix: np.ndarray, key: str) -> None:
    size = matrix.shape[0]
    smallest = _smallest_eigenvalue(matrix)
    if smallest < -100 * size * _EPS * float(np.linalg.norm(matrix, 2)):
        raise EstimatorError(
            f"{key} must be positive semidefinite (a covariance), but its smallest eigenvalue is {smallest:.6g}; "
            "use non-negative variances and correlations that a real noise can have"
        )


def _check_definite(matrix: np.ndarray, key: str) -> None:
    size = matrix.shape[0]
    smallest = _smallest_eigenvalue(matrix)
    if not smallest > 100 * size * _EPS * float(np.linalg.norm(matrix, 2)):
        raise EstimatorError(
            f"{key} must be positive definite, but its smallest eigenvalue is {smallest:.6g}; every measured "
            "output needs some noise (a perfect sensor would make the filter gain infinite)"
        )


@dataclass(frozen=True, eq=False)
class NoiseIntensities:
    """Process- and measurement-noise intensities (continuous) or covariances (sampled).

    Attributes
    ----------
    process : numpy.ndarray, shape (n, n)
        W, symmetric positive semidefinite: noise on the state equation.
    measurement : numpy.ndarray, shape (p, p)
        V, symmetric positive definite: noise on the outputs.
    source : str
        Where the numbers came from, in words (e.g. "plant file", "given").
    """

    process: np.ndarray
    measurement: np.ndarray
    source: str = "given"

    @property
    def state_count(self) -> int:
        return self.process.shape[0]

    @property
    def output_count(self) -> int:
        return self.measurement.shape[0]


def noise_intensities(process, measurement, source: str = "given") -> NoiseIntensities:
    """Check noise intensities and return them as :class:`NoiseIntensities`.

    Parameters
    ----------
    process : array_like, shape (n, n) or (n,)
        Process noise W (a flat list means a diagonal of variances).
    measurement : array_like, shape (p, p) or (p,)
        Measurement noise V (a flat list means a diagonal).
    source : str
        Where the numbers came from, for reports.

    Returns
    -------
    NoiseIntensities

    Raises
    ------
    EstimatorError
        If a matrix is not square, not finite, not symmetric, W is not positive
        semidefinite or V is not positive definite.

    Examples
    --------
    >>> noise = noise_intensities([1.0, 0.0], [[0.01]])
    >>> noise.process.tolist(), noise.measurement.tolist()
    ([[1.0, 0.0], [0.0, 0.0]], [[0.01]])
    """
    W = _symmetric(process, "the process noise W", "one row and column per state")
    V = _symmetric(measurement, "the measurement noise V", "one row and column per output")
    _check_semidefinite(W, "the process noise W")
    _check_definite(V, "the measurement noise V")
    return NoiseIntensities(process=read_only(W), measurement=read_only(V), source=source)


def sampled_noise_intensities(noise: NoiseIntensities, A, sample_time: float) -> NoiseIntensities:
    """The covariances per sample of a continuous plant's noise, sampled with period T.

    W_d = ∫₀ᵀ e^{Aτ} W e^{Aᵀτ} dτ from the block exponential
    exp([[−A, W], [0, Aᵀ]] T) = [[·, F₁₂], [0, F₂₂]], W_d = F₂₂ᵀ F₁₂ (Van Loan,
    "Computing integrals involving the matrix exponential", IEEE TAC 23(3), 1978);
    V_d = V / T (the sensor averages over the period).

    Parameters
    ----------
    noise : NoiseIntensities
        Continuous intensities.
    A : array_like, shape (n, n)
        The continuous state matrix.
    sample_time : float
        T in seconds (> 0).

    Returns
    -------
    NoiseIntensities

    Examples
    --------
    >>> noise = noise_intensities([[2.0]], [[0.5]])
    >>> sampled = sampled_noise_intensities(noise, [[0.0]], 0.1)   # integrator: W_d = W·T
    >>> round(float(sampled.process[0, 0]), 12), round(float(sampled.measurement[0, 0]), 12)
    (0.2, 5.0)
    """
    A = np.asarray(A, dtype=float)
    n = A.shape[0]
    if noise.state_count != n:
        raise EstimatorError(f"the process noise W is {noise.state_count}×{noise.state_count} but A is {n}×{n}")
    block = np.zeros((2 * n, 2 * n))
    block[:n, :n] = -A
    block[:n, n:] = noise.process
    block[n:, n:] = A.T
    exponential = scipy.linalg.expm(block * sample_time)
    W = exponential[n:, n:].T @ exponential[:n, n:]
    W = (W + W.T) / 2
    # Rounding can leave tiny negative eigenvalues in a semidefinite W_d: clip them to the data's scale.
    values, vectors = np.linalg.eigh(W)
    W = (vectors * np.clip(values, 0.0, None)) @ vectors.T
    return NoiseIntensities(
        process=read_only((W + W.T) / 2),
        measurement=read_only(noise.measurement / sample_time),
        source=f"{noise.source}, sampled with T = {sample_time:g} s",
    )
