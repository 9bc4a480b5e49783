"""Closed-loop poles and what they mean: damping, natural frequency, time constants.

Poles are the eigenvalues of the closed-loop matrix A − BK (u = −Kx). Continuous
plants are stable when every pole has a negative real part; sampled plants when
every pole lies strictly inside the unit circle, and a sampled pole z is read
through its equivalent continuous pole s = ln(z)/T.

Every set of poles leaving this module is in one canonical order with complex
poles in exact conjugate pairs (see :func:`sort_poles`), so two reports of the
same design compare entry by entry.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.optimize
from scipy.linalg import lapack as _lapack

from ._arrays import read_only
from ._errors import AnalysisError
from ._stability import STABLE, boundary_tolerance, decide_pole_stability, decide_stability

__all__ = [
    "sort_poles",
    "PoleDescription",
    "describe_poles",
    "closed_loop_matrix",
    "closed_loop_poles",
    "ClosedLoopReport",
    "analyze_state_matrix",
    "analyze_closed_loop",
    "analyze_open_loop",
    "match_poles",
]

_EPS = np.finfo(float).eps


def _as_pole_array(poles, what: str = "poles", error: type[Exception] = AnalysisError) -> np.ndarray:
    """Turn user data into a flat complex array, or raise ``error`` saying why not."""
    if isinstance(poles, (str, bytes)):
        raise error(f"{what} must be a list of numbers, but the string {poles!r} was given")
    try:
        values = np.asarray(poles, dtype=complex)
    except (TypeError, ValueError):
        raise error(f"{what} must be a flat list of (complex) numbers, got {poles!r}") from None
    if values.ndim == 0:
        values = values.reshape(1)
    if values.ndim != 1:
        raise error(f"{what} must be a flat list of numbers, but an array of shape {values.shape} was given")
    return values.copy()


def _default_conjugate_tolerance(values: np.ndarray) -> float:
    """Imaginary parts (and pair mismatches) below this are rounding noise.

    100 · count · eps · max|p|: the eigenvalues of a real matrix are computed with
    errors of a few eps times the matrix norm, which is at least max|p|.
    """
    if values.size == 0:
        return 0.0
    return 100.0 * values.size * _EPS * float(np.max(np.abs(values)))


def _pair_conjugates(values: np.ndarray, tolerance: float) -> tuple[np.ndarray, np.ndarray]:
    """Make near-real poles real and near-conjugate pairs exact.

    Returns the cleaned values (same order as given) and the indices of complex
    poles that found no conjugate partner.
    """
    cleaned = values.astype(complex, copy=True)
    imag = cleaned.imag
    realish = np.abs(imag) <= tolerance
    cleaned[realish] = cleaned[realish].real
    upper = np.flatnonzero(imag > tolerance)
    lower = np.flatnonzero(imag < -tolerance)
    if upper.size == lower.size and (
        # LAPACK returns a real matrix's complex poles as exact conjugates, each pair adjacent
        (np.array_equal(lower, upper + 1) and np.array_equal(cleaned[lower], np.conj(cleaned[upper])))
        or np.array_equal(np.sort_complex(cleaned[upper]), np.sort_complex(np.conj(cleaned[lower])))
    ):
        # Already exact pairs: every pair has cost 0, so the assignment below would pair
        # them and rebuild each one unchanged.
        return cleaned, np.zeros(0, dtype=int)
    paired_upper: set[int] = set()
    paired_lower: set[int] = set()
    if upper.size and lower.size:
        # optimal assignment, so that repeated pairs cannot steal each other's partner
        cost = np.abs(cleaned[upper][:, None] - np.conj(cleaned[lower])[None, :])
        rows, cols = scipy.optimize.linear_sum_assignment(cost)
        for row, col in zip(rows, cols):
            if cost[row, col] <= tolerance:
                i, j = upper[row], lower[col]
                real = 0.5 * (cleaned[i].real + cleaned[j].real)
                imag_part = 0.5 * (cleaned[i].imag - cleaned[j].imag)
                cleaned[i] = complex(real, imag_part)
                cleaned[j] = complex(real, -imag_part)
                paired_upper.add(int(i))
                paired_lower.add(int(j))
    unpaired = np.array(
        sorted([int(i) for i in upper if int(i) not in paired_upper] + [int(j) for j in lower if int(j) not in paired_lower]),
        dtype=int,
    )
    return cleaned, unpaired


def _canonical_order(values: np.ndarray, tolerance: float = 0.0) -> np.ndarray:
    """Indices sorting poles by real part, then |imaginary part|, positive imaginary first.

    Real parts within ``tolerance`` of their neighbour in the sorted list count as
    equal, so a rounding-level difference (−1 versus −1.0000000000000004) cannot
    reorder a real pole and a complex pair with the same real part.
    """
    by_real = np.argsort(values.real, kind="stable")
    ordered = values[by_real]
    # group number of each sorted pole: a new group starts wherever the gap exceeds the tolerance
    real = ordered.real
    group = np.concatenate(([0], np.cumsum(real[1:] - real[:-1] > tolerance)))
    # lexsort is stable, so exact ties keep their real-part order
    return by_real[np.lexsort((-ordered.imag, np.abs(ordered.imag), group))]


def sort_poles(poles, *, tolerance: float | None = None) -> np.ndarray:
    """Return poles in canonical order with conjugate pairs made exact.

    Poles whose imaginary part is within ``tolerance`` of zero become real;
    complex poles are paired with their nearest conjugate partner by optimal
    assignment, and each pair is replaced by the exact pair built from the
    averages (mean real part, mean |imaginary part|). Complex poles with no
    partner within ``tolerance`` are kept as they are. The order is by real
    part (most negative first), then by |imaginary part|, with the positive
    imaginary member of a pair first, so a pair is always adjacent.

    Parameters
    ----------
    poles : array_like of complex, shape (k,)
        Poles (s values for continuous plants, z values for sampled plants).
    tolerance : float, optional
        Absolute tolerance for "real" and "conjugate"; by default
        100 · k · eps · max|p| (rounding noise of an eigenvalue computation).

    Returns
    -------
    numpy.ndarray of complex, shape (k,)
        A new array; the input is not modified.

    Raises
    ------
    AnalysisError
        If the poles are not a flat list of finite numbers.

    Examples
    --------
    >>> sort_poles([-1 - 2j, -3, -1 + 2.0000000000000004j]).tolist()
    [(-3+0j), (-1+2j), (-1-2j)]
    """
    values = _as_pole_array(poles)
    if not np.all(np.isfinite(values)):
        raise AnalysisError(f"poles must be finite numbers, got {values.tolist()!r}")
    tol = _default_conjugate_tolerance(values) if tolerance is None else float(tolerance)
    if not (tol >= 0.0):
        raise AnalysisError(f"the tolerance must be a non-negative number, got {tolerance!r}")
    cleaned, _ = _pair_conjugates(values, tol)
    return cleaned[_canonical_order(cleaned, tol)]


def _sorted_with_order(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cleaned poles in canonical order, and the permutation used (for aligned data)."""
    tolerance = _default_conjugate_tolerance(values)
    cleaned, _ = _pair_conjugates(values, tolerance)
    order = _canonical_order(cleaned, tolerance)
    return cleaned[order], order


@dataclass(frozen=True)
class PoleDescription:
    """What one pole means for the response.

    Attributes
    ----------
    value : complex
        The pole (s in rad/s for continuous plants, z for sampled plants).
    damping_ratio : float
        ζ = −Re(s)/|s| of the (equivalent continuous) pole s: 1 for a decaying real
        pole, −1 for a growing real pole, 0 on the imaginary axis. A pole at s = 0
        neither decays nor grows and is given ζ = 0 (marginal).
    natural_frequency : float
        ωn = |s| in rad/s.
    damped_frequency : float
        |Im(s)| in rad/s, the frequency of the oscillation this pole contributes.
    time_constant : float
        −1/Re(s) in seconds: the time for this mode to decay by a factor e;
        ``inf`` when the pole does not decay (Re(s) ≥ 0, or |z| ≥ 1).
    stable : bool
        True when ``verdict`` is ``"stable"``: Re(s) < 0 (continuous) or |z| < 1 (sampled)
        by more than the loop's rounding band (:func:`gainboard.core.decide_stability`).
    equivalent_continuous : complex
        For sampled plants the equivalent continuous pole s = ln(z)/T (principal
        logarithm, so |Im s| ≤ π/T); for continuous plants the pole itself.
        A real negative z alternates sign every sample: it is read as
        s = ln|z|/T + jπ/T, an oscillation at the Nyquist frequency π/T. z = 0
        (deadbeat) has s = −∞: time constant 0, damping ratio 1, natural
        frequency ∞.
    verdict : str
        ``"stable"``, ``"on the boundary"`` (within the rounding band of the boundary)
        or ``"unstable"``.
    """

    value: complex
    damping_ratio: float
    natural_frequency: float
    damped_frequency: float
    time_constant: float
    stable: bool
    equivalent_continuous: complex
    verdict: str = STABLE


def _check_sample_time(sample_time) -> float | None:
    if sample_time is None:
        return None
    if isinstance(sample_time, bool) or not isinstance(sample_time, (int, float, np.integer, np.floating)):
        raise AnalysisError(f"sample_time must be a number of seconds or None, got {sample_time!r}")
    value = float(sample_time)
    if not (math.isfinite(value) and value > 0.0):
        raise AnalysisError(f"sample_time must be a positive finite number of seconds, got {sample_time!r}")
    return value


def _describe_continuous(s: complex) -> tuple[float, float, float, float]:
    """(damping ratio, natural frequency, damped frequency, time constant) of s."""
    natural = abs(s)
    if natural == 0.0:
        return 0.0, 0.0, 0.0, math.inf
    damping = -s.real / natural
    time_constant = -1.0 / s.real if s.real < 0.0 else math.inf
    return damping, natural, abs(s.imag), time_constant


def _describe_one(pole: complex, sample_time: float | None, tolerance: float) -> PoleDescription:
    """Describe one pole; ``tolerance`` is its loop's rounding band around the boundary."""
    verdict = decide_pole_stability(pole, tolerance, sample_time)
    stable = verdict == STABLE
    if sample_time is None:
        damping, natural, damped, tau = _describe_continuous(pole)
        if not stable:
            tau = math.inf  # a pole within rounding of the axis does not decay
        return PoleDescription(pole, damping, natural, damped, tau, stable, pole, verdict)
    if pole == 0:
        # deadbeat: the mode is gone after one sample
        return PoleDescription(pole, 1.0, math.inf, 0.0, 0.0, True, complex(-math.inf, 0.0), verdict)
    angle = math.pi if (pole.imag == 0.0 and pole.real < 0.0) else math.atan2(pole.imag, pole.real)
    s = complex(math.log(abs(pole)), angle) / sample_time
    damping, natural, damped, tau = _describe_continuous(s)
    if not stable:
        tau = math.inf  # |z| = 1 may give Re(s) = -tiny by rounding of log; it does not decay
    return PoleDescription(pole, damping, natural, damped, tau, stable, s, verdict)


def describe_poles(poles, sample_time: float | None = None,
                   matrix_norm: float | None = None) -> tuple[PoleDescription, ...]:
    """Describe each pole by damping ratio, natural frequency and time constant.

    Parameters
    ----------
    poles : array_like of complex, shape (k,)
        Continuous poles s (rad/s) or, when ``sample_time`` is given, sampled poles z.
        The order is kept.
    sample_time : float, optional
        Sampling period T in seconds for sampled poles; ``None`` for continuous poles.
    matrix_norm : float, optional
        Frobenius norm of the state matrix the poles belong to, which sets the rounding
        band of the verdicts; by default its lower bound (Σ|p|²)^½ (Schur's inequality).

    Returns
    -------
    tuple of PoleDescription, length k

    Examples
    --------
    >>> d = describe_poles([-3 + 4j])[0]
    >>> round(d.damping_ratio, 12), round(d.natural_frequency, 12), round(d.time_constant, 12)
    (0.6, 5.0, 0.333333333333)
    """
    values = _as_pole_array(poles)
    if not np.all(np.isfinite(values)):
        raise AnalysisError(f"poles must be finite numbers, got {values.tolist()!r}")
    T = _check_sample_time(sample_time)
    norm = float(np.linalg.norm(values)) if matrix_norm is None else float(matrix_norm)
    tolerance = boundary_tolerance(norm, values.size)
    return tuple(_describe_one(complex(p), T, tolerance) for p in values)


def _unit_columns(vectors: np.ndarray) -> np.ndarray:
    norms = np.linalg.norm(vectors, axis=0)
    return vectors / np.where(norms > 0.0, norms, 1.0)


def _wilkinson_condition(left: np.ndarray, right: np.ndarray) -> np.ndarray:
    """1/|yᴴx| for unit left and right eigenvectors (Wilkinson's eigenvalue condition number)."""
    overlap = np.abs(np.sum(np.conj(left) * right, axis=0))
    with np.errstate(divide="ignore"):
        return np.where(overlap > 0.0, 1.0 / np.maximum(overlap, np.finfo(float).tiny), math.inf)


def _eigenvector_condition(vectors: np.ndarray) -> float:
    """2-norm condition number of an eigenvector matrix; inf when numerically singular."""
    if vectors.size == 0:
        return 1.0
    singular = np.linalg.svd(vectors, compute_uv=False)
    # the rank rule of gainboard.core.rank_tolerance (max(shape) · eps · ‖V‖₂), written out
    # here because _structure imports this module
    if singular[-1] <= vectors.shape[0] * _EPS * singular[0]:
        return math.inf
    return float(singular[0] / singular[-1])


# ---------------------------------------------------------------------------
# One eigendecomposition shared by the pole report and the pole sensitivities
# ---------------------------------------------------------------------------
# The LAPACK routines below are the ones scipy.linalg.matrix_balance and scipy.linalg.eig
# call, with the same arguments and the same workspace size, so the numbers are the same;
# calling them directly skips per-call checks that cost more than the work itself for
# the small matrices of an interactive update (tests compare with the scipy functions).
_EIG_WORKSPACE: dict[int, int] = {}


def _balance(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Permute and scale like LAPACK gebal: (D⁻¹P ᵀMPD, scaling d, inverse permutation).

    The similarity is T = diag(d)[inverse, :] (as :func:`scipy.linalg.matrix_balance`
    returns it), so T·v = (d·v)[inverse] and T⁻ᵀ·v = (v/d)[inverse] for a vector v.
    """
    balanced, lo, hi, pivots, info = _lapack.dgebal(matrix, scale=1, permute=1)
    if info < 0:  # cannot happen for a finite square matrix
        raise AnalysisError(f"balancing the state matrix failed (LAPACK gebal argument {-info})")
    n = matrix.shape[0]
    scaling = np.ones(n)
    scaling[lo : hi + 1] = pivots[lo : hi + 1]
    # gebal records its row/column swaps 1-based, the last ones first: replay them
    swaps = pivots.astype(int) - 1
    permutation = np.arange(n)
    for offset, target in enumerate(swaps[hi + 1 :][::-1], 1):
        if n - offset != target:
            permutation[[target, n - offset]] = permutation[[n - offset, target]]
    for position, target in enumerate(swaps[:lo]):
        if position != target:
            permutation[[target, position]] = permutation[[position, target]]
    inverse = np.empty_like(permutation)
    inverse[permutation] = np.arange(n)
    return balanced, scaling, inverse


def _complex_vectors(eigenvalues: np.ndarray, packed: np.ndarray) -> np.ndarray:
    """Complex eigenvectors from LAPACK's real storage (column pair re, im for a conjugate pair)."""
    vectors = packed.astype(complex)
    first = eigenvalues.imag > 0
    first[:-1] |= eigenvalues.imag[1:] < 0
    first = np.flatnonzero(first)
    if (first[1:] - first[:-1] > 1).all():  # separate pairs (always, for LAPACK's output): all at once
        vectors.imag[:, first] = packed[:, first + 1]
        vectors[:, first + 1] = np.conj(vectors[:, first])
        return vectors
    for k in first:  # scipy's pair-by-pair rule, for overlapping flags
        vectors.imag[:, k] = packed[:, k + 1]
        np.conj(vectors[:, k], vectors[:, k + 1])
    return vectors


def _eigen_with_vectors(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Eigenvalues, left and right eigenvectors (LAPACK geev, as scipy.linalg.eig returns them)."""
    n = matrix.shape[0]
    workspace = _EIG_WORKSPACE.get(n)
    if workspace is None:
        size, info = _lapack.dgeev_lwork(n, compute_vl=1, compute_vr=1)
        workspace = _EIG_WORKSPACE.setdefault(n, int(size.real) if info == 0 else max(4 * n, 1))
    real, imaginary, left, right, info = _lapack.dgeev(matrix, compute_vl=1, compute_vr=1, lwork=workspace)
    if info != 0:
        raise AnalysisError(
            f"the eigenvalue computation of the {n}×{n} state matrix did not converge (LAPACK geev info {info}); "
            "check the plant and the gain for extreme values"
        )
    eigenvalues = real + 1j * imaginary
    if (imaginary != 0.0).any():
        left = _complex_vectors(eigenvalues, left)
        right = _complex_vectors(eigenvalues, right)
    return eigenvalues, left, right


@dataclass(frozen=True, eq=False)
class _Eigensystem:
    """Eigenvalues of a real matrix with unit left and right eigenvectors, from one balanced solve.

    ``eigenvalues``, the columns of ``left``/``right`` and ``error_estimates`` are in
    the solver's order (not canonical); ``condition_numbers`` are Wilkinson's 1/|yᴴx|.
    """

    matrix: np.ndarray  # (n, n), real
    eigenvalues: np.ndarray  # (n,), complex
    left: np.ndarray  # (n, n), unit columns y
    right: np.ndarray  # (n, n), unit columns x
    condition_numbers: np.ndarray  # (n,)
    error_estimates: np.ndarray  # (n,)


def _checked_state_matrix(matrix) -> np.ndarray:
    try:
        M = np.array(matrix, dtype=float)
    except (TypeError, ValueError):
        raise AnalysisError(f"the state matrix must be a real square matrix of numbers, got {matrix!r}") from None
    if M.ndim != 2 or M.shape[0] != M.shape[1] or M.shape[0] == 0:
        raise AnalysisError(f"the state matrix must be square (n×n), but its shape is {M.shape}")
    if not np.isfinite(M).all():
        raise AnalysisError("the state matrix has a non-finite entry (inf or nan); check the plant and the gain")
    return M


def _eigensystem(matrix) -> _Eigensystem:
    """Eigenvalues, unit eigenvectors, condition numbers and rounding-error estimates of a matrix.

    One balanced eigendecomposition serves both the pole report and the pole
    sensitivities of the same closed loop.
    """
    M = _checked_state_matrix(matrix)
    n = M.shape[0]
    # LAPACK's eigensolver balances the matrix (permutation and power-of-two scaling,
    # D⁻¹MD) before the QR iteration, so its rounding error is n·eps·‖D⁻¹MD‖ in
    # balanced coordinates; the same balancing here makes the error estimate honest
    # without being needlessly pessimistic for badly scaled matrices.
    balanced, scaling, inverse = _balance(M)
    eigenvalues, left_b, right_b = _eigen_with_vectors(balanced)
    largest_singular_value = float(np.linalg.svd(balanced, compute_uv=False)[0])  # ‖D⁻¹MD‖₂
    estimates = _wilkinson_condition(left_b, right_b) * n * _EPS * largest_singular_value
    # back to the original coordinates: x = T·x_b and y = T⁻ᵀ·y_b for the similarity T of _balance
    right = _unit_columns((scaling[:, None] * right_b)[inverse])
    left = _unit_columns(((1.0 / scaling)[:, None] * left_b)[inverse])
    return _Eigensystem(M, eigenvalues.astype(complex, copy=False), left, right,
                        _wilkinson_condition(left, right), estimates)


@dataclass(frozen=True, eq=False)
class ClosedLoopReport:
    """Poles of a closed-loop (or open-loop) matrix and what they mean.

    Attributes
    ----------
    poles : numpy.ndarray of complex, shape (n,)
        Eigenvalues in canonical order (:func:`sort_poles`).
    descriptions : tuple of PoleDescription, length n
        One per pole, same order.
    stable : bool
        True when ``verdict`` is ``"stable"``.
    verdict : str
        ``"stable"``, ``"on the boundary"`` or ``"unstable"``: the one stability decision
        (:func:`gainboard.core.decide_stability`): stable when ``stability_margin`` exceeds
        ``boundary_tolerance``, unstable below minus it, otherwise on the boundary.
    boundary_tolerance : float
        100 · n · eps · ‖M‖_F, the band around the boundary that rounding cannot resolve.
    stability_margin : float
        Continuous: −max Re(s) (1/s); sampled: 1 − max|z|. Positive means stable;
        the larger, the further the slowest pole is from the stability boundary.
    slowest_time_constant : float
        Largest time constant in seconds (``inf`` if any pole does not decay):
        about 5× this is a sensible simulation horizon.
    fastest_time_constant : float
        Smallest time constant in seconds (0 for a deadbeat pole z = 0): a
        simulation step well below it resolves every mode.
    eigenvector_condition : float
        2-norm condition number of the matrix of unit eigenvectors: 1 for a normal
        matrix, large when the poles are sensitive to changes in the plant or K;
        ``inf`` when the eigenvectors are numerically dependent (a defective matrix,
        e.g. a repeated pole forming a Jordan block).
    pole_condition_numbers : numpy.ndarray of float, shape (n,)
        Condition number of each pole, 1/|yᴴx| for unit left and right
        eigenvectors y, x (Wilkinson): a perturbation E of the matrix moves that
        pole by about this number times ‖E‖₂. Same order as ``poles``.
    pole_error_estimates : numpy.ndarray of float, shape (n,)
        First-order estimate of the rounding error of each computed pole: its
        condition number × n · eps · ‖D⁻¹MD‖₂, both taken for the balanced matrix
        D⁻¹MD that the eigensolver actually works on (its backward error is a
        modest multiple of eps · ‖D⁻¹MD‖). Meaningful while it is small compared
        with the distance to the nearest other pole; for a defective cluster of
        size k the true error grows like (n · eps · ‖D⁻¹MD‖₂)^(1/k) instead.
    sample_time : float or None
        Sampling period of the poles (None: continuous).
    """

    poles: np.ndarray
    descriptions: tuple[PoleDescription, ...]
    stable: bool
    stability_margin: float
    slowest_time_constant: float
    fastest_time_constant: float
    eigenvector_condition: float
    pole_condition_numbers: np.ndarray
    pole_error_estimates: np.ndarray
    sample_time: float | None
    verdict: str = STABLE
    boundary_tolerance: float = 0.0

    @property
    def on_boundary(self) -> bool:
        """True when a pole lies within rounding of the stability boundary (not stable)."""
        return self.verdict == "on the boundary"


def analyze_state_matrix(matrix, sample_time: float | None = None) -> ClosedLoopReport:
    """Poles, their meaning and their sensitivity for any state matrix.

    Used for A − BK, for the open-loop A, and for augmented matrices (e.g. with
    integral action).

    Parameters
    ----------
    matrix : array_like, shape (n, n)
        Real state matrix.
    sample_time : float, optional
        Sampling period in seconds when the matrix is a sampled-time state matrix.

    Returns
    -------
    ClosedLoopReport

    Raises
    ------
    AnalysisError
        If the matrix is not square, real and finite.

    Examples
    --------
    >>> report = analyze_state_matrix([[0.0, 1.0], [-2.0, -3.0]])
    >>> report.poles.tolist(), report.stable, round(report.stability_margin, 12)
    ([(-2+0j), (-1+0j)], True, 1.0)
    """
    T = _check_sample_time(sample_time)
    return _report_from_eigensystem(_eigensystem(matrix), T)


def _report_from_eigensystem(system: _Eigensystem, sample_time: float | None) -> ClosedLoopReport:
    """The report of :func:`analyze_state_matrix` from an eigendecomposition (sample time checked)."""
    poles, order = _sorted_with_order(system.eigenvalues)
    decision = decide_stability(poles, float(np.linalg.norm(system.matrix)), poles.size, sample_time)
    descriptions = tuple(_describe_one(complex(p), sample_time, decision.tolerance) for p in poles)
    taus = [d.time_constant for d in descriptions]
    return ClosedLoopReport(
        poles=read_only(poles),
        descriptions=descriptions,
        stable=decision.stable,
        stability_margin=decision.margin,
        slowest_time_constant=float(max(taus)),
        fastest_time_constant=float(min(taus)),
        eigenvector_condition=_eigenvector_condition(system.right),
        pole_condition_numbers=read_only(system.condition_numbers[order]),
        pole_error_estimates=read_only(system.error_estimates[order]),
        sample_time=sample_time,
        verdict=decision.verdict,
        boundary_tolerance=decision.tolerance,
    )


def closed_loop_matrix(plant, gain) -> np.ndarray:
    """The closed-loop state matrix A − BK for u = −Kx.

    Parameters
    ----------
    plant : Plant
    gain : array_like, shape (m, n)
        Feedback gain (a flat list of n numbers is accepted for one input).

    Returns
    -------
    numpy.ndarray, shape (n, n)

    Raises
    ------
    GainError
        If K is not a finite m×n matrix.
    """
    K = plant.check_gain(gain)
    return plant.A - plant.B @ K


def closed_loop_poles(plant, gain) -> np.ndarray:
    """Eigenvalues of A − BK in canonical order (see :func:`sort_poles`).

    Parameters
    ----------
    plant : Plant
    gain : array_like, shape (m, n)

    Returns
    -------
    numpy.ndarray of complex, shape (n,)
        s values (rad/s) for continuous plants, z values for sampled plants.

    Raises
    ------
    GainError
        If K is not a finite m×n matrix.

    Examples
    --------
    >>> from gainboard.core import Plant
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> closed_loop_poles(plant, [[2.0, 3.0]]).tolist()
    [(-2+0j), (-1+0j)]
    """
    return sort_poles(np.linalg.eigvals(closed_loop_matrix(plant, gain)))


def analyze_closed_loop(plant, gain) -> ClosedLoopReport:
    """Report on the closed loop A − BK of a plant: poles, stability, time scales.

    Parameters
    ----------
    plant : Plant
    gain : array_like, shape (m, n)

    Returns
    -------
    ClosedLoopReport
        With ``sample_time`` taken from the plant.

    Raises
    ------
    GainError
        If K is not a finite m×n matrix.
    """
    return analyze_state_matrix(closed_loop_matrix(plant, gain), plant.sample_time)


def analyze_open_loop(plant) -> ClosedLoopReport:
    """The same report for the plant without feedback (K = 0)."""
    return analyze_state_matrix(plant.A, plant.sample_time)


def _matching_indices(requested: np.ndarray, achieved: np.ndarray) -> np.ndarray:
    """For each requested pole, the index of its partner in ``achieved`` (optimal assignment)."""
    cost = np.abs(requested[:, None] - achieved[None, :])
    rows, cols = scipy.optimize.linear_sum_assignment(cost)
    index = np.empty(requested.size, dtype=int)
    index[rows] = cols
    return index


def match_poles(requested, achieved) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pair requested poles with achieved poles one to one.

    The pairing minimises the sum of |requested − achieved| over all pairings
    (optimal assignment, Kuhn's Hungarian problem, solved by
    :func:`scipy.optimize.linear_sum_assignment`). Unlike nearest-neighbour
    matching it never pairs two requested poles with the same achieved pole, so
    repeated poles are handled.

    Parameters
    ----------
    requested, achieved : array_like of complex, shape (k,)

    Returns
    -------
    requested_sorted : numpy.ndarray of complex, shape (k,)
        ``requested`` in canonical order (:func:`sort_poles`).
    achieved_matched : numpy.ndarray of complex, shape (k,)
        The achieved pole paired with each entry of ``requested_sorted`` (values unchanged).
    errors : numpy.ndarray of float, shape (k,)
        |requested_sorted − achieved_matched|.

    Raises
    ------
    AnalysisError
        If the two lists differ in length or contain non-finite values.

    Examples
    --------
    >>> r, a, e = match_poles([-1, -2], [-2.1, -0.9])
    >>> a.real.tolist(), e.round(6).tolist()
    ([-2.1, -0.9], [0.1, 0.1])
    """
    wanted = sort_poles(_as_pole_array(requested, "requested poles"))
    got = _as_pole_array(achieved, "achieved poles")
    if wanted.size != got.size:
        raise AnalysisError(
            f"cannot pair {wanted.size} requested poles with {got.size} achieved poles; both lists need the same length"
        )
    if not np.all(np.isfinite(got)):
        raise AnalysisError(f"achieved poles must be finite numbers, got {got.tolist()!r}")
    matched = got[_matching_indices(wanted, got)]
    return wanted, matched, np.abs(wanted - matched)
