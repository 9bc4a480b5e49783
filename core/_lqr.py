"""Linear-quadratic regulator (LQR) design with Bryson's-rule default weights.

The gain minimises the quadratic cost

    J = ∫ (xᵀQx + uᵀRu + 2xᵀNu) dt        (continuous, u = −Kx)
    J = Σ (xᵀQx + uᵀRu + 2xᵀNu)           (sampled)

through the algebraic Riccati equation, solved by scipy's Schur-method solvers
(:func:`scipy.linalg.solve_continuous_are`, :func:`scipy.linalg.solve_discrete_are`).
This module adds what those solvers leave to the caller: checking the weights
and the plant before solving (with messages that say what to change), default
weights from the plant's limits, the gain itself, and a quality figure (the
relative residual of the Riccati equation) for the solution found.

An LQR gain is only as good as the linear model: validate it on the real
system with safe limits and emergency stops, under local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ._arrays import read_only
from ._closed_loop import sort_poles
from ._errors import AnalysisError
from ._plant import Plant

__all__ = ["LqrResult", "bryson_weights", "design_lqr"]

_EPS = np.finfo(float).eps


@dataclass(frozen=True, eq=False)
class LqrResult:
    """Outcome of :func:`design_lqr`.

    Attributes
    ----------
    gain : numpy.ndarray, shape (m, n)
        The feedback gain K of u = −Kx, in input units per state unit.
    riccati_solution : numpy.ndarray, shape (n, n)
        The stabilising symmetric positive semidefinite solution P; xᵀPx is the
        optimal cost from the state x.
    closed_loop_poles : numpy.ndarray, shape (n,)
        Eigenvalues of A − BK (s-plane for continuous, z-plane for sampled plants),
        complex pairs kept as exact conjugates, sorted by real part.
    Q : numpy.ndarray, shape (n, n)
        The state weight used (symmetrised).
    R : numpy.ndarray, shape (m, m)
        The input weight used (symmetrised).
    N : numpy.ndarray, shape (n, m)
        The cross weight used (zeros when none was given).
    weights_source : str
        Where Q and R came from, e.g. ``"given"`` or a sentence describing the
        Bryson's-rule ranges that were used.
    riccati_residual : float
        ‖Riccati residual‖ / (sum of the norms of its terms), Frobenius norms; a
        value near machine precision (1e-16 … 1e-12) means the solution is
        trustworthy, larger values mean the problem is badly conditioned.
    """

    gain: np.ndarray
    riccati_solution: np.ndarray
    closed_loop_poles: np.ndarray
    Q: np.ndarray
    R: np.ndarray
    N: np.ndarray
    weights_source: str
    riccati_residual: float


def _positive_ranges(values, count: int, what: str, names) -> np.ndarray:
    """Check user-given ranges (one positive finite number per state or input)."""
    try:
        ranges = np.array(values, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise AnalysisError(f"{what} must be {count} positive numbers, one per entry, got {values!r}") from None
    if ranges.shape != (count,):
        raise AnalysisError(f"{what} must be {count} positive numbers (one per entry), but {ranges.size} were given")
    for name, value in zip(names, ranges):
        if not (math.isfinite(value) and value > 0):
            raise AnalysisError(
                f"{what}: the range of '{name}' is {float(value):g}; each range must be a positive finite number "
                "(the largest size that entry may reasonably reach)"
            )
    return ranges


def _with_unit(value: float, unit: str) -> str:
    return f"{value:g} {unit}".rstrip()


def _bryson(plant: Plant, state_ranges, input_ranges):
    """Bryson's-rule weights plus sentences saying where each range came from."""
    n, m = plant.state_count, plant.input_count
    if state_ranges is not None:
        x_max = _positive_ranges(state_ranges, n, "state ranges", plant.state_names)
        state_text = "given state ranges"
    else:
        x_max = np.ones(n)
        if plant.initial_state is None:
            state_text = "no initial state (range 1 used for every state)"
        else:
            magnitudes = np.abs(plant.initial_state)
            known = magnitudes > 0
            x_max[known] = magnitudes[known]
            listed = ", ".join(
                f"{name} {_with_unit(x, unit)}"
                for name, x, unit, is_known in zip(plant.state_names, x_max, plant.state_units, known)
                if is_known
            )
            unknown = [name for name, is_known in zip(plant.state_names, known) if not is_known]
            state_text = f"the initial state ({listed})" if listed else "the initial state"
            if unknown:
                state_text += f", range 1 used where it is zero ({', '.join(unknown)})"
    if input_ranges is not None:
        u_max = _positive_ranges(input_ranges, m, "input ranges", plant.input_names)
        input_text = "given input ranges"
    elif plant.input_limits is not None:
        u_max = np.array([max(abs(low), abs(high)) for low, high in plant.input_limits])
        listed = ", ".join(
            f"{name} {_with_unit(u, unit)}" for name, u, unit in zip(plant.input_names, u_max, plant.input_units)
        )
        input_text = f"input limits ({listed})"
    else:
        u_max = np.ones(m)
        input_text = "no input limits (range 1 used for every input)"
    Q = np.diag(1.0 / x_max**2)
    R = np.diag(1.0 / u_max**2)
    return Q, R, state_text, input_text


def bryson_weights(plant: Plant, *, state_ranges=None, input_ranges=None) -> tuple[np.ndarray, np.ndarray]:
    """Default LQR weights by Bryson's rule: Q = diag(1/x_maxᵢ²), R = diag(1/u_maxⱼ²).

    Each state and input is weighted by the inverse square of the largest value it
    may reasonably reach, so that every term of the cost is about 1 at its limit.

    Parameters
    ----------
    plant : Plant
        The plant (continuous or sampled).
    state_ranges : sequence of float, shape (n,), optional
        Largest acceptable |xᵢ| of each state, in state units. When omitted, the
        magnitude of the plant's initial state entry is used, and 1 for every state
        whose initial value is zero or not given (a neutral weight: adjust it).
    input_ranges : sequence of float, shape (m,), optional
        Largest acceptable |uⱼ| of each input, in input units. When omitted, the
        larger magnitude of the input's (low, high) limits is used, or 1 for a plant
        without input limits.

    Returns
    -------
    Q : numpy.ndarray, shape (n, n)
        Diagonal state weight, in 1/(state unit)².
    R : numpy.ndarray, shape (m, m)
        Diagonal input weight, in 1/(input unit)².

    Raises
    ------
    AnalysisError
        If a given range is not a positive finite number or has the wrong length.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]],
    ...               input_limits=((-2.0, 4.0),), initial_state=[0.5, 0.0])
    >>> Q, R = bryson_weights(plant)
    >>> np.diag(Q).tolist(), R.tolist()
    ([4.0, 1.0], [[0.0625]])
    """
    Q, R, _, _ = _bryson(plant, state_ranges, input_ranges)
    return Q, R


def _checked_square(value, size: int, key: str, meaning: str) -> np.ndarray:
    try:
        matrix = np.array(value, dtype=float)
    except (TypeError, ValueError):
        raise AnalysisError(f"{key} must be a {size}×{size} matrix of real numbers ({meaning}), got {value!r}") from None
    if matrix.ndim == 0 and size == 1:
        matrix = matrix.reshape(1, 1)
    if matrix.ndim != 2 or matrix.shape != (size, size):
        found = "×".join(str(s) for s in matrix.shape) or "a single number"
        raise AnalysisError(f"{key} is {found} but must be {size}×{size} ({meaning})")
    if not np.all(np.isfinite(matrix)):
        raise AnalysisError(f"{key} has a non-finite entry (inf or nan); every weight must be a finite number")
    scale = np.linalg.norm(matrix, 1)
    asymmetry = np.linalg.norm(matrix - matrix.T, 1)
    if asymmetry > 100 * size * _EPS * scale:
        i, j = np.unravel_index(np.argmax(np.abs(matrix - matrix.T)), matrix.shape)
        raise AnalysisError(
            f"{key} must be symmetric, but entry ({i + 1}, {j + 1}) is {matrix[i, j]:.6g} and entry "
            f"({j + 1}, {i + 1}) is {matrix[j, i]:.6g}; make them equal"
        )
    return (matrix + matrix.T) / 2


def _smallest_eigenvalue(symmetric: np.ndarray) -> float:
    return float(np.linalg.eigvalsh(symmetric)[0])


def _symmetric_square_root(symmetric: np.ndarray) -> np.ndarray:
    values, vectors = np.linalg.eigh(symmetric)
    return (vectors * np.sqrt(np.clip(values, 0.0, None))) @ vectors.T


def _describe_mode(value: complex, sampled: bool) -> str:
    variable = "z" if sampled else "s"
    if abs(value.imag) <= 1e-12 * max(1.0, abs(value)):
        return f"{variable} = {value.real:.6g}"
    return f"{variable} = {value.real:.6g} ± {abs(value.imag):.6g}j"


def _needs_stabilising(eigenvalue: complex, sampled: bool, tolerance: float) -> bool:
    if sampled:
        return abs(eigenvalue) >= 1.0 - tolerance
    return eigenvalue.real >= -tolerance


def _hidden_unstable_modes(A: np.ndarray, other: np.ndarray, sampled: bool, stacked_beside: bool) -> list[complex]:
    """Eigenvalues of A outside the stable region that fail the PBH rank test.

    With ``stacked_beside`` the test matrix is [A − λI, B] (stabilisability);
    otherwise it is [A − λI; H] (detectability). Each block is scaled to unit
    norm so the rank decision does not depend on the units of the model.
    """
    n = A.shape[0]
    a_norm = np.linalg.norm(A, 2)
    other_norm = np.linalg.norm(other, 2)
    eigenvalues = np.linalg.eigvals(A)
    # Sampled poles are compared with |z| = 1, continuous ones with Re s = 0 on the scale of A.
    boundary_tolerance = 1e3 * n * _EPS * (max(a_norm, 1.0) if sampled else a_norm)
    rank_tolerance = 1e3 * (n + other.shape[1 if stacked_beside else 0]) * _EPS
    hidden = []
    for value in eigenvalues:
        if not _needs_stabilising(value, sampled, boundary_tolerance):
            continue
        if value.imag < 0:  # its conjugate gives the same answer
            continue
        if other_norm == 0:
            hidden.append(value)
            continue
        shifted = (A - value * np.eye(n)) / max(a_norm, abs(value), np.finfo(float).tiny)
        scaled_other = other / other_norm
        test = np.hstack([shifted, scaled_other]) if stacked_beside else np.vstack([shifted, scaled_other])
        singular_values = np.linalg.svd(test, compute_uv=False)
        if singular_values[n - 1] <= rank_tolerance:
            hidden.append(value)
    return hidden


def _riccati_residual(A, B, Q, R, N, P, sampled: bool) -> float:
    if sampled:
        cross = A.T @ P @ B + N
        middle = R + B.T @ P @ B
        correction = cross @ np.linalg.solve(middle, cross.T)
        terms = (A.T @ P @ A, P, correction, Q)
        residual = terms[0] - terms[1] - terms[2] + terms[3]
    else:
        cross = P @ B + N
        correction = cross @ np.linalg.solve(R, cross.T)
        terms = (A.T @ P, P @ A, correction, Q)
        residual = terms[0] + terms[1] - terms[2] + terms[3]
    scale = sum(np.linalg.norm(term, "fro") for term in terms)
    if scale == 0:
        return 0.0
    return float(np.linalg.norm(residual, "fro") / scale)


def design_lqr(plant: Plant, Q=None, R=None, N=None, *, state_ranges=None, input_ranges=None) -> LqrResult:
    """Design the LQR gain K (u = −Kx) for a continuous or sampled plant.

    Continuous plants solve AᵀP + PA − (PB + N)R⁻¹(BᵀP + Nᵀ) + Q = 0 and use
    K = R⁻¹(BᵀP + Nᵀ). Sampled plants solve
    AᵀPA − P − (AᵀPB + N)(R + BᵀPB)⁻¹(BᵀPA + Nᵀ) + Q = 0 and use
    K = (R + BᵀPB)⁻¹(BᵀPA + Nᵀ).

    Parameters
    ----------
    plant : Plant
        The plant; ``plant.sample_time`` selects the continuous or sampled equation.
    Q : array_like, shape (n, n), optional
        Symmetric positive semidefinite state weight. Bryson's rule when omitted.
    R : array_like, shape (m, m), optional
        Symmetric positive definite input weight. Bryson's rule when omitted.
    N : array_like, shape (n, m), optional
        Cross weight of the term 2xᵀNu; zero when omitted. The combined weight
        [[Q, N], [Nᵀ, R]] must be positive semidefinite.
    state_ranges, input_ranges : sequence of float, optional
        Passed to :func:`bryson_weights` when Q or R is omitted.

    Returns
    -------
    LqrResult
        Gain, Riccati solution, closed-loop poles, the weights used and where they
        came from, and the relative residual of the Riccati equation.

    Raises
    ------
    AnalysisError
        If a weight has the wrong shape, is not symmetric, Q is not positive
        semidefinite, R is not positive definite, (A, B) is not stabilisable,
        (Q^{1/2}, A) is not detectable (an unstable mode carries no weight), or the
        solver cannot find a stabilising solution.

    Examples
    --------
    >>> double_integrator = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> result = design_lqr(double_integrator, Q=np.eye(2), R=[[1.0]])
    >>> np.round(result.gain, 6).tolist()
    [[1.0, 1.732051]]
    """
    A, B = np.array(plant.A), np.array(plant.B)
    n, m = plant.state_count, plant.input_count
    sampled = plant.is_sampled

    if Q is None or R is None:
        bryson_Q, bryson_R, state_text, input_text = _bryson(plant, state_ranges, input_ranges)
    if Q is None and R is None:
        weights_source = f"Bryson's rule from {input_text} and {state_text}"
    elif Q is None:
        weights_source = f"R given; Q by Bryson's rule from {state_text}"
    elif R is None:
        weights_source = f"Q given; R by Bryson's rule from {input_text}"
    else:
        weights_source = "given"
    Q = bryson_Q if Q is None else _checked_square(Q, n, "Q", "one row and column per state")
    R = bryson_R if R is None else _checked_square(R, m, "R", "one row and column per input")

    if N is None:
        N = np.zeros((n, m))
    else:
        try:
            N = np.array(N, dtype=float)
        except (TypeError, ValueError):
            raise AnalysisError(f"N must be an {n}×{m} matrix of real numbers (states × inputs), got {N!r}") from None
        if N.ndim == 1 and m == 1 and N.size == n:
            N = N.reshape(n, 1)
        if N.shape != (n, m):
            found = "×".join(str(s) for s in N.shape) or "a single number"
            raise AnalysisError(f"N is {found} but must be {n}×{m} (one row per state, one column per input)")
        if not np.all(np.isfinite(N)):
            raise AnalysisError("N has a non-finite entry (inf or nan); every weight must be a finite number")

    q_scale = np.linalg.norm(Q, 2)
    r_scale = np.linalg.norm(R, 2)
    smallest_r = _smallest_eigenvalue(R)
    if not smallest_r > 100 * m * _EPS * r_scale or smallest_r <= 0:
        raise AnalysisError(
            f"R must be positive definite; its smallest eigenvalue is {smallest_r:.6g}. Every input needs a "
            "positive cost (Bryson's rule: R = diag(1/u_max²))"
        )
    smallest_q = _smallest_eigenvalue(Q)
    if smallest_q < -100 * n * _EPS * q_scale:
        raise AnalysisError(
            f"Q must be positive semidefinite; its smallest eigenvalue is {smallest_q:.6g}. Use non-negative "
            "weights (Bryson's rule: Q = diag(1/x_max²))"
        )
    # With a cross weight the problem is equivalent to one with
    # Q̃ = Q − N R⁻¹ Nᵀ and Ã = A − B R⁻¹ Nᵀ and no cross term.
    R_inverse_Nt = np.linalg.solve(R, N.T)
    Q_reduced = Q - N @ R_inverse_Nt
    Q_reduced = (Q_reduced + Q_reduced.T) / 2
    A_reduced = A - B @ R_inverse_Nt
    if np.any(N):
        smallest = _smallest_eigenvalue(Q_reduced)
        if smallest < -100 * (n + m) * _EPS * (q_scale + np.linalg.norm(N, 2) ** 2 / smallest_r):
            raise AnalysisError(
                "the combined weight [[Q, N], [Nᵀ, R]] must be positive semidefinite, but Q − N R⁻¹ Nᵀ has "
                f"smallest eigenvalue {smallest:.6g}; reduce the cross weight N or raise Q"
            )

    unreachable = _hidden_unstable_modes(A, B, sampled, stacked_beside=True)
    if unreachable:
        modes = "; ".join(_describe_mode(v, sampled) for v in unreachable)
        raise AnalysisError(
            f"(A, B) is not stabilisable: the mode at {modes} is on or outside the stability boundary and no "
            "input can move it, so no gain can stabilise this plant; check B and the model"
        )
    unweighted = _hidden_unstable_modes(A_reduced, _symmetric_square_root(Q_reduced), sampled, stacked_beside=False)
    if unweighted:
        modes = "; ".join(_describe_mode(v, sampled) for v in unweighted)
        raise AnalysisError(
            f"(Q^(1/2), A) is not detectable: the mode at {modes} is on or outside the stability boundary but "
            "carries no weight in Q, so the optimal gain would leave it alone; give the states of that mode a "
            "positive weight in Q"
        )

    solver = scipy.linalg.solve_discrete_are if sampled else scipy.linalg.solve_continuous_are
    try:
        P = solver(A, B, Q, R, s=N)
    except (np.linalg.LinAlgError, ValueError) as error:
        raise AnalysisError(
            f"the Riccati equation has no stabilising solution ({error}); the plant is probably nearly "
            "unstabilisable or an unstable mode is nearly unweighted — check the model and raise Q"
        ) from None
    P = (P + P.T) / 2
    if sampled:
        K = np.linalg.solve(R + B.T @ P @ B, B.T @ P @ A + N.T)
    else:
        K = np.linalg.solve(R, B.T @ P + N.T)
    poles = sort_poles(np.linalg.eigvals(A - B @ K))
    closed_loop_scale = max(np.linalg.norm(A - B @ K, 2), np.finfo(float).tiny)
    if sampled:
        unstable = np.max(np.abs(poles)) >= 1.0 - 1e3 * n * _EPS
    else:
        unstable = np.max(poles.real) >= -1e3 * n * _EPS * closed_loop_scale
    if not np.all(np.isfinite(K)) or unstable:
        raise AnalysisError(
            "the Riccati solution found does not stabilise the loop (a closed-loop pole is on or outside the "
            "stability boundary); the plant is nearly unstabilisable or an unstable mode is nearly unweighted — "
            "check the model and raise Q"
        )
    residual = _riccati_residual(A, B, Q, R, N, P, sampled)
    return LqrResult(
        gain=read_only(K),
        riccati_solution=read_only(P),
        closed_loop_poles=read_only(poles),
        Q=read_only(Q),
        R=read_only(R),
        N=read_only(N),
        weights_source=weights_source,
        riccati_residual=residual,
    )
