"""Stability margins of the state-feedback loop, broken at the plant input.

With u = −Kx the loop seen by the actuators is L(s) = K (sI − A)⁻¹ B, an m×m
transfer matrix (sampled plants: L(z) with z = e^{jωT}). The closed loop is
stable while det(I + L) has no zeros on or outside the stability boundary.

Single-input loops (and each input in turn, with the other loops closed):

* gain margins are exact: the loop with gain factor α, u = −αKx, loses
  stability only where αL(jω) = −1, i.e. where L(jω) is real. Those frequencies
  are the boundary eigenvalues of a structured pencil for L(s) − L(−s)
  (sampled: L(z) − L(1/z)), and each gives the crossing factor α = −1/L(jω);
* the gain crossovers, |L(jω)| = 1, are the boundary eigenvalues of the
  Hamiltonian-like pencil for 1 − L(−s)L(s) (sampled: 1 − L(1/z)L(z));
* both root sets are refined with a bracketed root search, checked against the
  defining equation, and cross-checked with a dense logarithmic frequency grid
  (any sign change missed by the pencil is added).

Several inputs: the disk margin from the input sensitivity S = (I + L)⁻¹,
α_max = 1/‖S‖∞, with the peak of σ_max(S(jω)) found by a frequency grid, a local
refinement and the level-set (Hamiltonian) iteration that confirms no higher
peak exists.

Margins describe the linear model only. A design must still be validated on
the real system with safe limits and emergency stops, under local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.optimize

from ._errors import AnalysisError
from ._frequency_sweep import sweep_response
from ._plant import Plant
from ._single_entry import gain_factor_intervals
from ._stability import decide_stability

__all__ = ["SingleLoopMargins", "LoopMargins", "loop_margins", "frequency_response"]

_EPS = np.finfo(float).eps
#: Relative accuracy asked of every root and peak found here.
_ROOT_TOLERANCE = 8 * _EPS
#: Relative size of |L|² − 1 or Im L accepted as "on the crossing" after refinement.
_CHECK_TOLERANCE = 1e-6

_CAUTION = (
    "Margins describe the linear model only: validate the design on the real system with safe limits and "
    "emergency stops, under local codes, functional-safety standards and licensed practice."
)


@dataclass(frozen=True)
class SingleLoopMargins:
    """Margins of one actuator loop, the loop broken at that plant input.

    Attributes
    ----------
    input_index : int
        Zero-based index of the input whose loop is broken.
    input_name : str
        Name of that input.
    gain_margin_increase : float
        Factor (> 1) by which this loop's gain can grow before the closed loop
        becomes unstable; ``math.inf`` if no increase destabilises it.
    gain_margin_decrease : float
        Factor (< 1) to which the loop gain can shrink before instability; 0 if any
        positive factor below 1 keeps the loop stable.
    gain_margin_increase_db, gain_margin_decrease_db : float
        The same in decibels (20·log10): positive, and negative (−inf for 0).
    gain_margin_db_min : float
        The smaller of the two in magnitude, in dB (positive).
    phase_margin_deg : float
        Smallest phase change (lag or lead) at a gain crossover that destabilises
        the loop, in degrees; ``math.inf`` if |L| never equals 1.
    crossover_frequency : float or None
        Gain-crossover frequency (rad/s) where that phase margin occurs.
    delay_margin : float
        Smallest added time delay (s) that destabilises the loop; ``math.inf`` if
        there is no gain crossover at a nonzero frequency.
    delay_margin_samples : float or None
        For sampled plants, the delay margin in sample periods; ``None`` otherwise.
    phase_crossover_frequencies : tuple of float
        Frequencies (rad/s, ascending) where L(jω) is real and negative, i.e. where
        the phase is −180° (mod 360°); each gives a destabilising gain factor −1/L.
    gain_crossover_frequencies : tuple of float
        Frequencies (rad/s, ascending) where |L(jω)| = 1.
    """

    input_index: int
    input_name: str
    gain_margin_increase: float
    gain_margin_decrease: float
    gain_margin_increase_db: float
    gain_margin_decrease_db: float
    gain_margin_db_min: float
    phase_margin_deg: float
    crossover_frequency: float | None
    delay_margin: float
    delay_margin_samples: float | None
    phase_crossover_frequencies: tuple[float, ...]
    gain_crossover_frequencies: tuple[float, ...]


@dataclass(frozen=True)
class LoopMargins:
    """Stability margins of u = −Kx, the loop broken at the plant input.

    For a single-input plant the single-loop fields are filled (they equal
    ``loop_at_a_time[0]``); for several inputs they are ``None`` and the
    per-input figures are in ``loop_at_a_time`` while the disk margin covers
    simultaneous changes in all loops. Every field except ``stable_nominal``,
    ``sample_time``, ``input_count`` and ``note`` is ``None`` when the nominal
    closed loop is unstable (margins are then meaningless).

    Attributes
    ----------
    stable_nominal : bool
        Whether A − BK is stable (continuous: Re s < 0; sampled: |z| < 1).
    sample_time : float or None
        The plant's sample time (None for continuous plants).
    input_count : int
        Number of inputs m.
    gain_margin_increase, gain_margin_decrease, gain_margin_increase_db, gain_margin_decrease_db,
    gain_margin_db_min, phase_margin_deg, crossover_frequency, delay_margin, delay_margin_samples,
    phase_crossover_frequencies :
        As in :class:`SingleLoopMargins`, for a single-input plant.
    disk_margin : float or None
        α_max = 1/‖S‖∞ with S = (I + L)⁻¹ (input sensitivity; at most 1). The loop
        stays stable for simultaneous, independent input-channel factors
        1/(1 − δᵢ) with every complex |δᵢ| < α_max.
    disk_gain_range : tuple of (float, float) or None
        Gain factors guaranteed by that disk: (1/(1 + α), 1/(1 − α)), upper ``inf`` when α = 1.
    disk_phase_margin_deg : float or None
        Phase change guaranteed by the disk at unchanged gain: 2·arcsin(α/2), in degrees.
    peak_sensitivity : float or None
        ‖S‖∞, the peak over frequency of the largest singular value of S.
    peak_sensitivity_frequency : float or None
        Frequency (rad/s) of that peak (``inf`` if approached only as ω → ∞).
    loop_at_a_time : tuple of SingleLoopMargins
        One entry per input: that loop broken, the other loops closed.
    note : str
        Plain-language remarks, including the validation caution.
    """

    stable_nominal: bool
    sample_time: float | None
    input_count: int
    gain_margin_increase: float | None
    gain_margin_decrease: float | None
    gain_margin_increase_db: float | None
    gain_margin_decrease_db: float | None
    gain_margin_db_min: float | None
    phase_margin_deg: float | None
    crossover_frequency: float | None
    delay_margin: float | None
    delay_margin_samples: float | None
    phase_crossover_frequencies: tuple[float, ...] | None
    disk_margin: float | None
    disk_gain_range: tuple[float, float] | None
    disk_phase_margin_deg: float | None
    peak_sensitivity: float | None
    peak_sensitivity_frequency: float | None
    loop_at_a_time: tuple[SingleLoopMargins, ...]
    note: str


# ---------------------------------------------------------------------------
# evaluation of the loop


def _boundary_points(frequencies: np.ndarray, sample_time: float | None) -> np.ndarray:
    """s = jω for continuous loops, z = e^{jωT} for sampled ones."""
    frequencies = np.asarray(frequencies, dtype=float)
    if sample_time is None:
        return 1j * frequencies
    return np.exp(1j * frequencies * sample_time)


def _solve_resolvent(A: np.ndarray, B: np.ndarray, points: np.ndarray) -> np.ndarray:
    """(pI − A)⁻¹ B for every point p; shape (len(points), n, m). Singular points give nan."""
    n = A.shape[0]
    matrices = points[:, None, None] * np.eye(n) - A[None, :, :]
    right = np.broadcast_to(B.astype(complex), (points.size,) + B.shape)
    try:
        return np.linalg.solve(matrices, right)
    except np.linalg.LinAlgError:
        out = np.full((points.size,) + B.shape, np.nan + 0j)
        for i, matrix in enumerate(matrices):
            try:
                out[i] = np.linalg.solve(matrix, B)
            except np.linalg.LinAlgError:
                pass
        return out


def _scalar_loop(A, b, k, frequencies, sample_time):
    """L(jω) of one loop, with values at rounding level set to exactly 0 and poles to nan."""
    points = _boundary_points(np.atleast_1d(frequencies), sample_time)
    resolvent = _solve_resolvent(A, b.reshape(-1, 1), points)[:, :, 0]
    values = resolvent @ k
    # When K hardly sees the response to b, L is pure rounding noise: call it 0.
    noise = 1e2 * A.shape[0] * _EPS * np.linalg.norm(k) * np.linalg.norm(resolvent, axis=1)
    values = np.where(np.abs(values) <= noise, 0.0, values)
    return values


def frequency_response(plant: Plant, K, frequencies) -> np.ndarray:
    """The loop broken at the plant input, L = K (sI − A)⁻¹ B, at given frequencies.

    Parameters
    ----------
    plant : Plant
        Continuous (s = jω) or sampled (z = e^{jωT}) plant.
    K : array_like, shape (m, n)
        Feedback gain of u = −Kx.
    frequencies : array_like, shape (F,)
        Frequencies in rad/s (non-negative; for sampled plants up to π/T is the
        useful range).

    Returns
    -------
    numpy.ndarray, complex, shape (F, m, m)
        L at each frequency (use ``[:, 0, 0]`` for a single input).

    Raises
    ------
    AnalysisError
        If a frequency is negative or not finite, or falls on a pole of the plant
        on the stability boundary (L is infinite there).

    Examples
    --------
    >>> integrator = Plant(A=[[0.0]], B=[[1.0]])
    >>> frequency_response(integrator, [[2.0]], [1.0, 2.0])[:, 0, 0]
    array([0.-2.j, 0.-1.j])
    """
    gain = plant.check_gain(K)
    omega = np.atleast_1d(np.asarray(frequencies, dtype=float))
    if omega.ndim != 1 or not np.all(np.isfinite(omega)) or np.any(omega < 0):
        raise AnalysisError("frequencies must be a flat list of finite, non-negative numbers in rad/s")
    resolvent = _solve_resolvent(np.array(plant.A), np.array(plant.B), _boundary_points(omega, plant.sample_time))
    values = gain[None, :, :] @ resolvent
    bad = ~np.all(np.isfinite(values), axis=(1, 2))
    if np.any(bad):
        raise AnalysisError(
            f"the plant has a pole on the stability boundary at ω = {omega[bad][0]:.6g} rad/s, so the loop is "
            "infinite there; leave that frequency out"
        )
    return values


# ---------------------------------------------------------------------------
# root finding on the stability boundary


def _finite_pencil_eigenvalues(M0: np.ndarray, M1: np.ndarray) -> np.ndarray | None:
    """Finite generalised eigenvalues λ of M0 − λ M1; None if the pencil is singular."""
    pairs = scipy.linalg.eig(M0, M1, right=False, homogeneous_eigvals=True)
    alpha, beta = pairs[0], pairs[1]
    scale = max(np.linalg.norm(M0, 1), np.linalg.norm(M1, 1))
    tiny = 1e2 * M0.shape[0] * _EPS * scale
    if np.any((np.abs(alpha) <= tiny) & (np.abs(beta) <= tiny)):
        return None  # det(M0 − λM1) ≡ 0: the pencil says nothing
    finite = np.abs(beta) > tiny * 1e-3 * np.maximum(np.abs(alpha), 1.0)
    return alpha[finite] / beta[finite]


def _pencil_frequencies(eigenvalues, sample_time, scale) -> list[float]:
    """Frequencies ω ≥ 0 of pencil eigenvalues lying (nearly) on the stability boundary."""
    if eigenvalues is None:
        return []
    found = []
    for value in eigenvalues:
        if not np.isfinite(value):
            continue
        if sample_time is None:
            if abs(value.real) <= 1e-6 * max(abs(value), scale):
                found.append(abs(value.imag))
        elif abs(abs(value) - 1.0) <= 1e-6:
            found.append(abs(np.angle(value)) / sample_time)
    return found


def _merge(values, floor: float, relative=1e-7) -> list[float]:
    """Sorted values with near-duplicates removed; values below ``floor`` snap to 0."""
    merged: list[float] = []
    for value in sorted(0.0 if v <= floor else v for v in values):
        if merged and value - merged[-1] <= relative * value + floor:
            continue
        merged.append(value)
    return merged


def _crossing_frequencies(function, candidates, grid, values, accept, upper, floor) -> list[float]:
    """Roots of ``function`` (a real function of ω) from candidates and a grid scan.

    Candidates (from a pencil) are polished by a bracketed root search when a
    sign change is found nearby; sign changes of ``values`` (the function on ``grid``,
    computed once for every loop by the shared sweep) that no candidate explains are
    added; every root must pass ``accept`` (the check against the defining equation).
    """
    def polish(low, high):
        try:
            return scipy.optimize.brentq(lambda w: function(np.array([w]))[0], low, high, xtol=1e-300,
                                         rtol=_ROOT_TOLERANCE)
        except ValueError:  # the search met a pole of L (nan): the bracket holds a pole, not a root
            return None

    roots = []
    # the pencil gives each frequency twice (±ω, or ω and its mirror): polish each once
    for omega in _merge(candidates, floor, relative=1e-9):
        if omega > upper * (1 + 1e-9):
            continue
        omega = min(omega, upper)
        width = max(omega, floor) * 1e-6
        low, high = max(omega - width, 0.0), min(omega + width, upper)
        f_low, f_high = function(np.array([low, high]))
        if np.isfinite(f_low) and np.isfinite(f_high) and f_low * f_high < 0:
            omega = polish(low, high) or omega
        roots.append(omega)
    # only the few grid intervals with a sign change between finite values are looked at
    with np.errstate(invalid="ignore", over="ignore"):
        changes = np.flatnonzero(np.isfinite(values[:-1]) & np.isfinite(values[1:]) & (values[:-1] * values[1:] < 0))
    for i in changes.tolist():
        if any(grid[i] <= r <= grid[i + 1] for r in roots):
            continue
        root = polish(grid[i], grid[i + 1])
        if root is not None:
            roots.append(root)
    return [r for r in _merge(roots, floor) if accept(r)]


def _frequency_grid(pole_sets, sample_time: float | None) -> tuple[np.ndarray, float]:
    """A dense grid of frequencies covering the dynamics of every loop, and the largest useful frequency.

    ``pole_sets`` holds the poles of the plant, of the closed loop and of each loop broken at one
    input; their natural frequencies are on the grid, so a sharp resonance is never stepped over.
    """
    if sample_time is not None:
        nyquist = math.pi / sample_time
        grid = np.unique(np.concatenate([nyquist * np.geomspace(1e-6, 1.0, 800), np.linspace(0, nyquist, 400)]))
        return grid, nyquist
    poles = np.concatenate([np.asarray(p, dtype=complex) for p in pole_sets])
    magnitudes = np.abs(poles)
    magnitudes = magnitudes[magnitudes > 0]
    low, high = (magnitudes.min() / 1e3, magnitudes.max() * 1e3) if magnitudes.size else (1e-3, 1e3)
    grid = np.unique(np.concatenate([[0.0], np.geomspace(low, high, 1200), np.abs(poles.imag)]))
    return grid, math.inf


# ---------------------------------------------------------------------------
# single-loop margins


def _to_db(factor: float) -> float:
    if factor == 0:
        return -math.inf
    if math.isinf(factor):
        return math.inf
    return 20.0 * math.log10(factor)


def _wrap_degrees(angle: float) -> float:
    """Into (−180°, 180°]."""
    wrapped = math.fmod(angle + 180.0, 360.0)
    if wrapped <= 0:
        wrapped += 360.0
    return wrapped - 180.0


def _is_stable(matrix: np.ndarray, sample_time: float | None) -> bool:
    return decide_stability(np.linalg.eigvals(matrix), np.linalg.norm(matrix), matrix.shape[0], sample_time).stable


def _exact_gain_margins(closed, b, k, sample_time) -> tuple[float, float, list[float]]:
    """Gain margins from the exact stable range of the factor α in u = −α·k·x, and the phase crossovers.

    The range comes from the structured eigenvalue problem of the rank-one family
    A − α·b·k (:func:`gain_factor_intervals`), not from where a frequency sweep finds
    L(jω) real: an integrating loop (a type-2 loop above all) is real only in the limit
    ω → 0, where a sweep meets rounding and reports a huge false factor. The crossings
    with α > 0 are where α·L = −1: the phase crossover frequencies.
    """
    analysis = gain_factor_intervals(closed, b, k, sample_time is not None)
    around_one = [(low, high) for low, high in analysis.intervals if low < 1.0 < high]
    if around_one:
        low, high = around_one[0]
        # a crossing within rounding of α = 0 is the plant's own pole on the boundary: no positive factor
        increase, decrease = high, (low if low > analysis.gain_tolerance else 0.0)
    else:  # α = 1 sits on a crossing: no margin at all (the nominal check let it through by rounding)
        increase = decrease = 1.0
    frequencies = []
    for crossing in analysis.crossings:
        if crossing.gain <= analysis.gain_tolerance:
            continue  # α ≤ 0 is no gain change a loop can have; α → 0 of a plant pole on the boundary
        frequency = crossing.frequency if sample_time is None else crossing.frequency / sample_time
        frequencies.append(float(frequency))
    return float(increase), float(decrease), _merge(frequencies, 0.0)


def _single_loop(A, b, k, sample_time, index: int, name: str, grid, upper, closed_values) -> SingleLoopMargins:
    """Margins of the scalar loop L = k (sI − A)⁻¹ b; assumes A − b k stable.

    ``closed_values`` is g = k (pI − A + b k)⁻¹ b on ``grid`` (the shared sweep of the closed loop);
    L = g / (1 − g) there (Sherman–Morrison), so the grid costs nothing more per loop.
    """
    n = A.shape[0]
    closed = A - np.outer(b, k)
    # Frequencies below this are taken as 0 (rounding of a root at the origin).
    floor = 1e-9 * (grid[1] if grid[0] == 0 else grid[0])
    scale = np.linalg.norm(A, 2) + np.linalg.norm(b) * np.linalg.norm(k)
    identity, zeros = np.eye(n), np.zeros((n, n))
    column, row = b.reshape(n, 1), k.reshape(1, n)
    zero_column, zero_row = np.zeros((n, 1)), np.zeros((1, n))

    # Gain crossover: 1 − L(−s)L(s) = 0 (sampled: 1 − L(1/z)L(z) = 0) ⇔ |L| = 1 on the boundary.
    # Unknowns (x1, x2, u): x1 = (pI − A)⁻¹ b u, x2 the mirrored loop driven by k x1, k x2 = u.
    if sample_time is None:
        selector = np.zeros((2 * n + 1, 2 * n + 1))
        selector[: 2 * n, : 2 * n] = np.eye(2 * n)
        unit_M0 = np.block([[A, zeros, column], [-column @ row, -A, zero_column], [zero_row, row, -np.ones((1, 1))]])
        unit_M1 = selector
    else:
        unit_M0 = np.block([[A, zeros, column], [zeros, identity, zero_column], [zero_row, row, -np.ones((1, 1))]])
        unit_M1 = np.block([[identity, zeros, zero_column], [column @ row, A, zero_column],
                            [zero_row, zero_row, np.zeros((1, 1))]])

    loop = lambda omega: _scalar_loop(A, b, k, omega, sample_time)  # noqa: E731

    def magnitude_excess(omega):
        values = loop(omega)
        return np.where(np.isfinite(values), np.abs(values) ** 2 - 1.0, np.nan)

    def is_unit_crossing(omega):
        value = loop(omega)[0]
        return bool(np.isfinite(value) and abs(abs(value) ** 2 - 1.0) <= _CHECK_TOLERANCE * (1 + abs(value) ** 2))

    unit_candidates = _pencil_frequencies(_finite_pencil_eigenvalues(unit_M0, unit_M1), sample_time, scale)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        grid_loop = closed_values / (1.0 - closed_values)
        grid_excess = np.where(np.isfinite(grid_loop), np.abs(grid_loop) ** 2 - 1.0, np.nan)
    unit_frequencies = _crossing_frequencies(magnitude_excess, unit_candidates, grid, grid_excess, is_unit_crossing,
                                             upper, floor)

    increase, decrease, phase_crossovers = _exact_gain_margins(closed, b, k, sample_time)
    phase_margin, crossover, delay = math.inf, None, math.inf
    for omega in unit_frequencies:
        value = loop(omega)[0]
        angle = math.degrees(math.atan2(value.imag, value.real))
        margin = abs(_wrap_degrees(180.0 + angle))
        if margin < phase_margin:
            phase_margin, crossover = margin, omega
        if omega > 0:
            lag = math.radians((180.0 + angle) % 360.0)  # extra lag e^{−jωτ} that brings L to −1
            if lag > 0:
                delay = min(delay, lag / omega)
    return SingleLoopMargins(
        input_index=index,
        input_name=name,
        gain_margin_increase=float(increase),
        gain_margin_decrease=float(decrease),
        gain_margin_increase_db=_to_db(increase),
        gain_margin_decrease_db=_to_db(decrease),
        gain_margin_db_min=min(_to_db(increase), -_to_db(decrease)),
        phase_margin_deg=float(phase_margin),
        crossover_frequency=None if crossover is None else float(crossover),
        delay_margin=float(delay),
        delay_margin_samples=None if sample_time is None else float(delay / sample_time),
        phase_crossover_frequencies=tuple(float(w) for w in sorted(phase_crossovers)),
        gain_crossover_frequencies=tuple(float(w) for w in unit_frequencies),
    )


# ---------------------------------------------------------------------------
# peak of the input sensitivity


def _largest_singular_values(A, B, C, D, frequencies) -> np.ndarray:
    """σ_max(D + C (jωI − A)⁻¹ B) at each frequency (continuous time)."""
    resolvent = _solve_resolvent(A, B, 1j * np.asarray(frequencies, dtype=float))
    values = D[None, :, :] + C[None, :, :] @ resolvent
    return np.linalg.svd(values, compute_uv=False)[:, 0]


def _peak_gain(A, B, C, D, grid=None, values=None) -> tuple[float, float]:
    """‖G‖∞ of a stable continuous system and a frequency where it occurs (inf: at ω → ∞).

    A grid plus local refinement gives a lower bound γ; then the level-set test
    (Hamiltonian eigenvalues on the imaginary axis mark the frequencies where
    some singular value equals γ) either confirms no higher peak or points to
    the intervals where one lies, which raises γ — repeated until it settles.
    """
    eigenvalues = np.linalg.eigvals(A)
    magnitudes = np.abs(eigenvalues)
    low, high = magnitudes.min() / 1e3, magnitudes.max() * 1e3
    if grid is None:
        grid = np.unique(np.concatenate([[0.0], np.geomspace(low, high, 800), np.abs(eigenvalues.imag)]))
        values = _largest_singular_values(A, B, C, D, grid)
    at_infinity = np.linalg.svd(D, compute_uv=False)[0]
    best = int(np.argmax(values))
    peak, peak_frequency = float(values[best]), float(grid[best])
    if 0 < best < grid.size - 1:
        log_low, log_high = math.log(max(grid[best - 1], low / 10)), math.log(grid[best + 1])
        refined = scipy.optimize.minimize_scalar(
            lambda t: -_largest_singular_values(A, B, C, D, [math.exp(t)])[0],
            bounds=(log_low, log_high), method="bounded", options={"xatol": 1e-10},
        )
        if -refined.fun > peak:
            peak, peak_frequency = float(-refined.fun), float(math.exp(refined.x))
    if at_infinity >= peak:
        peak, peak_frequency = float(at_infinity), math.inf

    a_scale = np.linalg.norm(A, 2)
    for _ in range(50):
        level = peak * (1.0 + 2e-9)
        if level <= at_infinity:
            break
        weight = level**2 * np.eye(D.shape[1]) - D.T @ D
        solve = lambda right: np.linalg.solve(weight, right)  # noqa: E731
        top_left = A + B @ solve(D.T @ C)
        hamiltonian = np.block([
            [top_left, B @ solve(B.T)],
            [-C.T @ C - C.T @ D @ solve(D.T @ C), -top_left.T],
        ])
        roots = np.linalg.eigvals(hamiltonian)
        on_axis = roots[np.abs(roots.real) <= 1e-6 * (np.abs(roots) + a_scale)]
        frequencies = np.unique(np.abs(on_axis.imag))
        if frequencies.size == 0:
            break
        probes = np.concatenate([frequencies, (frequencies[:-1] + frequencies[1:]) / 2])
        probe_values = _largest_singular_values(A, B, C, D, probes)
        best = int(np.argmax(probe_values))
        if probe_values[best] <= peak * (1.0 + 1e-12):
            break  # no higher peak between the crossings: the level-set roots were rounding
        peak, peak_frequency = float(probe_values[best]), float(probes[best])
    return peak, peak_frequency


def _sensitivity_peak(A, B, K, sample_time, grid, closed_values) -> tuple[float, float]:
    """‖S‖∞ for S = (I + L)⁻¹ = (A − BK, B, −K, I), with its frequency in rad/s.

    ``closed_values`` is G = K (pI − A + BK)⁻¹ B on ``grid`` (the shared sweep): S = I − G there,
    which places the grid peak; the peak itself is refined and confirmed on exact solves.
    """
    m = B.shape[1]
    closed = A - B @ K
    sensitivity = np.eye(m)[None] - closed_values
    grid_values = np.abs(sensitivity[:, 0, 0]) if m == 1 else np.linalg.svd(sensitivity, compute_uv=False)[:, 0]
    keep = np.isfinite(grid_values)
    grid, grid_values = grid[keep], grid_values[keep]
    if sample_time is None:
        return _peak_gain(closed, B, -K, np.eye(m), grid, grid_values)
    # The bilinear map z = (1 + w)/(1 − w) takes the unit circle onto the imaginary
    # axis and keeps the peak gain: w = jν with ν = tan(ωT/2).
    n = A.shape[0]
    shifted = np.linalg.solve(np.eye(n) + closed, np.hstack([closed - np.eye(n), B]))
    A_w = shifted[:, :n]
    B_w = math.sqrt(2.0) * shifted[:, n:]
    C_w = math.sqrt(2.0) * np.linalg.solve((np.eye(n) + closed).T, -K.T).T
    D_w = np.eye(m) + K @ shifted[:, n:]
    # the same grid in the bilinear variable ν = tan(ωT/2) (the Nyquist point, ν = ∞, is D_w's own check)
    inside = grid * sample_time < math.pi * (1 - 1e-12)
    peak, nu = _peak_gain(A_w, B_w, C_w, D_w, np.tan(grid[inside] * sample_time / 2.0), grid_values[inside])
    frequency = math.pi / sample_time if math.isinf(nu) else 2.0 * math.atan(nu) / sample_time
    return peak, frequency


# ---------------------------------------------------------------------------


def loop_margins(plant: Plant, K) -> LoopMargins:
    """Gain, phase, delay and disk margins of u = −Kx, the loop broken at the plant input.

    Parameters
    ----------
    plant : Plant
        Continuous or sampled plant.
    K : array_like, shape (m, n)
        Feedback gain.

    Returns
    -------
    LoopMargins
        See the class; for an unstable nominal loop only ``stable_nominal`` and the
        note are meaningful.

    Raises
    ------
    GainError
        If K has the wrong shape or non-finite entries.

    Examples
    --------
    >>> first_order = Plant(A=[[-1.0]], B=[[1.0]])
    >>> margins = loop_margins(first_order, [[1.0]])
    >>> margins.gain_margin_increase, round(margins.phase_margin_deg, 6)
    (inf, 180.0)
    """
    gain = plant.check_gain(K)
    A, B = np.array(plant.A), np.array(plant.B)
    m = plant.input_count
    sample_time = plant.sample_time
    closed = A - B @ gain
    if not _is_stable(closed, sample_time):
        boundary = "|z| ≥ 1" if sample_time is not None else "Re s ≥ 0"
        return LoopMargins(
            stable_nominal=False, sample_time=sample_time, input_count=m,
            gain_margin_increase=None, gain_margin_decrease=None, gain_margin_increase_db=None,
            gain_margin_decrease_db=None, gain_margin_db_min=None, phase_margin_deg=None,
            crossover_frequency=None, delay_margin=None, delay_margin_samples=None,
            phase_crossover_frequencies=None, disk_margin=None, disk_gain_range=None,
            disk_phase_margin_deg=None, peak_sensitivity=None, peak_sensitivity_frequency=None,
            loop_at_a_time=(),
            note=(f"The closed loop with this K is not stable (a pole with {boundary}), so stability margins "
                  "are not meaningful; stabilise the loop first. " + _CAUTION),
        )

    # Break loop i only: the other inputs stay closed and become part of the plant.
    broken = [closed + np.outer(B[:, i], gain[i]) for i in range(m)]
    grid, upper = _frequency_grid([np.linalg.eigvals(matrix) for matrix in [A, closed] + broken[: m if m > 1 else 0]],
                                  sample_time)
    # One sweep of the stable closed loop, G = K (pI − A + BK)⁻¹ B, serves every loop and the
    # sensitivity: loop i broken is G_ii / (1 − G_ii), and S = I − G.
    closed_values = sweep_response(closed, B, gain).transfer(_boundary_points(grid, sample_time))
    loops = [
        _single_loop(broken[i], B[:, i].copy(), gain[i].copy(), sample_time, i, plant.input_names[i], grid, upper,
                     closed_values[:, i, i])
        for i in range(m)
    ]
    peak, peak_frequency = _sensitivity_peak(A, B, gain, sample_time, grid, closed_values)
    disk = min(1.0 / peak, 1.0)
    gain_range = (1.0 / (1.0 + disk), math.inf if disk >= 1.0 else 1.0 / (1.0 - disk))
    disk_phase = math.degrees(2.0 * math.asin(disk / 2.0))

    notes = []
    if m == 1:
        single = loops[0]
        if single.gain_margin_decrease == 0 and single.gain_margin_increase == math.inf:
            notes.append("Any positive gain factor keeps this loop stable.")
        notes.append(
            "Gain margins are exact factors on the whole gain row; phase and delay margins are read at the gain "
            "crossovers; the disk margin covers simultaneous gain and phase changes."
        )
    else:
        notes.append(
            "Loop-at-a-time margins break one input with the others closed and can be optimistic; the disk "
            "margin covers simultaneous changes in every input channel."
        )
    notes.append(_CAUTION)
    single_fields = {}
    if m == 1:
        single = loops[0]
        single_fields = dict(
            gain_margin_increase=single.gain_margin_increase,
            gain_margin_decrease=single.gain_margin_decrease,
            gain_margin_increase_db=single.gain_margin_increase_db,
            gain_margin_decrease_db=single.gain_margin_decrease_db,
            gain_margin_db_min=single.gain_margin_db_min,
            phase_margin_deg=single.phase_margin_deg,
            crossover_frequency=single.crossover_frequency,
            delay_margin=single.delay_margin,
            delay_margin_samples=single.delay_margin_samples,
            phase_crossover_frequencies=single.phase_crossover_frequencies,
        )
    else:
        single_fields = dict.fromkeys(
            ("gain_margin_increase", "gain_margin_decrease", "gain_margin_increase_db", "gain_margin_decrease_db",
             "gain_margin_db_min", "phase_margin_deg", "crossover_frequency", "delay_margin",
             "delay_margin_samples", "phase_crossover_frequencies")
        )
    return LoopMargins(
        stable_nominal=True,
        sample_time=sample_time,
        input_count=m,
        **single_fields,
        disk_margin=float(disk),
        disk_gain_range=gain_range,
        disk_phase_margin_deg=float(disk_phase),
        peak_sensitivity=float(peak),
        peak_sensitivity_frequency=float(peak_frequency),
        loop_at_a_time=tuple(loops),
        note=" ".join(notes),
    )
