"""Exact propagation of linear loops, with and without actuator saturation.

Everything here works on a fixed time grid t_k = k·h. A continuous loop with a
constant forcing is propagated *exactly* at the grid points through the
zero-order-hold (ZOH) transition of the augmented state z = [x; 1]::

    z' = F z,   F = [[A_loop, b], [0, 0]]   ⇒   z[k+1] = exp(F h) z[k]

(Van Loan's block-exponential trick: one ``expm`` gives both Φ and the forced
part). A sampled loop uses its own matrices directly. No ODE solver is involved,
so each update costs a few small matrix products.

This module is private; :mod:`gainboard.core._responses` is its public face.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "matrix_exponential",
    "transition_matrices",
    "augmented_step",
    "propagate_affine",
    "propagate_many",
    "integral_of_quadratic",
    "SwitchingLoop",
]


def _pade_coefficients(degree: int) -> tuple[float, ...]:
    """Coefficients c_j = (2q−j)! q! / ((2q)! j! (q−j)!) of the [q/q] Padé approximant of e^x."""
    f = math.factorial
    return tuple(f(2 * degree - j) * f(degree) / (f(2 * degree) * f(j) * f(degree - j)) for j in range(degree + 1))


_PADE_13 = _pade_coefficients(13)
#: Largest 1-norm for which the degree-13 Padé approximant is accurate to double
#: precision without scaling (Higham, "The scaling and squaring method for the
#: matrix exponential revisited", SIAM J. Matrix Anal. Appl. 26(4), 2005, Table 2.3).
_PADE_13_NORM_LIMIT = 5.371920351148152
#: The same bounds θ_m of Higham 2005 (Table 2.3) for the lower degrees m = 3, 5, 7, 9:
#: below θ_m the [m/m] approximant has a backward error under the unit roundoff, so the
#: cheapest degree that covers ‖M‖₁ is as accurate as degree 13 and needs no squaring.
_LOW_DEGREES = tuple(
    (limit, degree, _pade_coefficients(degree))
    for limit, degree in ((1.495585217958292e-2, 3), (2.539398330063230e-1, 5),
                          (9.504178996162932e-1, 7), (2.097847961257068e0, 9))
)


def _low_degree_pade(A: np.ndarray, degree: int, c: tuple[float, ...]) -> np.ndarray:
    """[m/m] Padé approximant of e^A for m = 3, 5, 7 or 9 (Higham 2005, Algorithm 2.3)."""
    k = A.shape[0]
    A2 = A @ A
    powers = [A2]
    for _ in range(1, degree // 2):
        powers.append(powers[-1] @ A2)  # A⁴, A⁶, A⁸
    odd_sum = c[1] * np.eye(k)
    even = c[0] * np.eye(k)
    for j, power in enumerate(powers, start=1):
        odd_sum = odd_sum + c[2 * j + 1] * power
        even = even + c[2 * j] * power
    odd = A @ odd_sum
    return np.linalg.solve(even - odd, even + odd)


def matrix_exponential(M) -> np.ndarray:
    """e^M by scaling and squaring with Padé approximants (Higham 2005).

    Small matrices (‖M‖₁ ≤ 2.1, the usual case for one time step of a loop) use the
    lowest Padé degree of 3, 5, 7 or 9 whose bound θ_m covers ‖M‖₁; larger ones use
    degree 13 with scaling and squaring. Written on numpy's small-matrix products and
    one linear solve because ``scipy.linalg.expm`` on a multithreaded OpenBLAS can
    stall for milliseconds per call on a busy machine (thread hand-offs inside its
    compiled Padé step), and the app evaluates these exponentials on every slider move.

    Parameters
    ----------
    M : array_like, shape (k, k)

    Returns
    -------
    numpy.ndarray, shape (k, k)

    Examples
    --------
    >>> np.round(matrix_exponential([[0.0, 1.0], [0.0, 0.0]]), 12).tolist()
    [[1.0, 1.0], [0.0, 1.0]]
    """
    M = np.asarray(M, dtype=float)
    k = M.shape[0]
    size = float(np.abs(M).sum(axis=0).max()) if k else 0.0
    if not math.isfinite(size):
        return np.full((k, k), np.nan)
    for limit, degree, coefficients in _LOW_DEGREES:
        if size <= limit:
            return _low_degree_pade(M, degree, coefficients)
    squarings = max(0, math.ceil(math.log2(size / _PADE_13_NORM_LIMIT))) if size > _PADE_13_NORM_LIMIT else 0
    A = M / 2.0**squarings
    c = _PADE_13
    identity = np.eye(k)
    A2 = A @ A
    A4 = A2 @ A2
    A6 = A4 @ A2
    odd = A @ (A6 @ (c[13] * A6 + c[11] * A4 + c[9] * A2) + c[7] * A6 + c[5] * A4 + c[3] * A2 + c[1] * identity)
    even = A6 @ (c[12] * A6 + c[10] * A4 + c[8] * A2) + c[6] * A6 + c[4] * A4 + c[2] * A2 + c[0] * identity
    result = np.linalg.solve(even - odd, even + odd)
    for _ in range(squarings):
        result = result @ result
    return result


def transition_matrices(A, B, time_step: float) -> tuple[np.ndarray, np.ndarray]:
    """Zero-order-hold transition matrices Φ = e^{Ah} and Γ = ∫₀ʰ e^{Aτ} dτ B.

    One matrix exponential of the block matrix [[A, B], [0, 0]]·h, whose
    exponential is [[Φ, Γ], [0, I]] (Van Loan, "Computing integrals involving
    the matrix exponential", IEEE Trans. Automatic Control 23(3), 1978).

    Parameters
    ----------
    A : array_like, shape (n, n)
        Continuous-time state matrix (1/s).
    B : array_like, shape (n, k)
        Input matrix of the held inputs.
    time_step : float
        Hold interval h in seconds (> 0).

    Returns
    -------
    Phi : numpy.ndarray, shape (n, n)
    Gamma : numpy.ndarray, shape (n, k)

    Examples
    --------
    >>> Phi, Gamma = transition_matrices([[0.0, 1.0], [0.0, 0.0]], [[0.0], [1.0]], 0.5)
    >>> Phi.tolist(), Gamma.ravel().tolist()
    ([[1.0, 0.5], [0.0, 1.0]], [0.125, 0.5])
    """
    A = np.asarray(A, dtype=float)
    B = np.asarray(B, dtype=float).reshape(A.shape[0], -1)
    n, k = B.shape
    block = np.zeros((n + k, n + k))
    block[:n, :n] = A * time_step
    block[:n, n:] = B * time_step
    exponential = matrix_exponential(block)
    return exponential[:n, :n].copy(), exponential[:n, n:].copy()


def augmented_step(loop_matrix, forcing, time_step: float, sampled: bool) -> np.ndarray:
    """One-step map of z = [x; 1] for x' = A_loop x + b (or x[k+1] = A_loop x[k] + b).

    Parameters
    ----------
    loop_matrix : numpy.ndarray, shape (n, n)
        Closed-loop state matrix.
    forcing : numpy.ndarray, shape (n,)
        Constant forcing b (reference through the prefilter, disturbance, held inputs).
    time_step : float
        Grid spacing h in seconds (ignored for a sampled loop, whose step is one sample).
    sampled : bool
        True when ``loop_matrix`` already maps one sample to the next.

    Returns
    -------
    numpy.ndarray, shape (n + 1, n + 1)
        [[Φ, c], [0, 1]] with c the forced increment over one step.
    """
    n = loop_matrix.shape[0]
    if sampled:
        step = np.zeros((n + 1, n + 1))
        step[:n, :n] = loop_matrix
        step[:n, n] = forcing
        step[n, n] = 1.0
        return step
    generator = np.zeros((n + 1, n + 1))
    generator[:n, :n] = loop_matrix
    generator[:n, n] = forcing
    step = matrix_exponential(generator * time_step)
    # The last row of exp(F h) is exactly [0 … 0 1]; write it so to keep the
    # augmentation exact through the products in propagate_affine.
    step[n, :n] = 0.0
    step[n, n] = 1.0
    return step


def propagate_affine(step: np.ndarray, start, count: int) -> np.ndarray:
    """States z[0..count-1] of z[k+1] = S z[k] with z = [x; 1], by repeated doubling.

    Instead of ``count`` sequential products, the block Z[s:2s] = Z[0:s] Sˢᵀ is
    filled with one matrix product per doubling, so a 2000-point response costs
    11 products of (≤1000 × (n+1)) by ((n+1) × (n+1)) matrices.

    Parameters
    ----------
    step : numpy.ndarray, shape (n + 1, n + 1)
        Augmented one-step map from :func:`augmented_step`.
    start : array_like, shape (n,)
        Initial state x[0].
    count : int
        Number of grid points (≥ 1).

    Returns
    -------
    numpy.ndarray, shape (count, n)
        The states at the grid points (overflowing entries of an unstable loop
        become inf; the caller truncates at its blow-up threshold).
    """
    n = step.shape[0] - 1
    trajectory = np.empty((count, n + 1))
    trajectory[0, :n] = start
    trajectory[0, n] = 1.0
    filled = 1
    power = step
    with np.errstate(over="ignore", invalid="ignore"):
        while filled < count:
            take = min(filled, count - filled)
            trajectory[filled : filled + take] = trajectory[:take] @ power.T
            filled += take
            if filled < count:
                power = power @ power
    return trajectory[:, :n]


def propagate_many(step: np.ndarray, starts, count: int) -> np.ndarray:
    """Trajectories z_r[0..count-1] of z[k+1] = S z[k] for several starts at once, by repeated doubling.

    Several responses of one loop share the step map S (their constant forcings are
    extra augmented states), so one doubling chain serves them all: each doubling
    is a single product of (filled × r) rows by Sˢᵀ.

    Parameters
    ----------
    step : numpy.ndarray, shape (d, d)
        One-step map.
    starts : array_like, shape (r, d)
        Start of each trajectory.
    count : int
        Number of grid points (≥ 1).

    Returns
    -------
    numpy.ndarray, shape (count, r, d)
        Overflowing entries of an unstable loop become inf; callers cut at their blow-up threshold.
    """
    starts = np.asarray(starts, dtype=float)
    r, d = starts.shape
    trajectory = np.empty((count, r, d))
    trajectory[0] = starts
    filled = 1
    power = step
    with np.errstate(over="ignore", invalid="ignore"):
        while filled < count:
            take = min(filled, count - filled)
            np.matmul(trajectory[:take].reshape(take * r, d), power.T,
                      out=trajectory[filled : filled + take].reshape(take * r, d))
            filled += take
            if filled < count:
                power = power @ power
    return trajectory


def integral_of_quadratic(generator: np.ndarray, weight: np.ndarray, time_step: float) -> np.ndarray:
    """S = ∫₀ʰ e^{Fτ} W e^{Fᵀτ} dτ, exactly (block exponential plus doubling).

    With W = Σₖ z[k] z[k]ᵀ and u = G z on every step, the input energy over all
    steps is diag(G S Gᵀ): exact for a continuous loop, not a quadrature rule.

    exp([[F, W], [0, −Fᵀ]]τ) = [[e^{Fτ}, P], [0, e^{−Fᵀτ}]] with S(τ) = P e^{Fᵀτ}
    (Van Loan 1978, Theorem 1). e^{−Fᵀτ} grows for stable fast modes, so τ is
    first halved until ‖F‖τ ≤ 1 and then doubled back with
    S(2τ) = S(τ) + e^{Fτ} S(τ) e^{Fᵀτ}, which only involves decaying factors.

    Parameters
    ----------
    generator : numpy.ndarray, shape (k, k)
        F (1/s).
    weight : numpy.ndarray, shape (k, k)
        Symmetric W.
    time_step : float
        h in seconds.

    Returns
    -------
    numpy.ndarray, shape (k, k)
    """
    k = generator.shape[0]
    scale = float(np.max(np.abs(weight)))
    if scale == 0.0:
        return np.zeros((k, k))
    size = np.linalg.norm(generator, 1) * time_step
    halvings = max(0, math.ceil(math.log2(size))) if size > 1.0 else 0
    tau = time_step / 2.0**halvings
    block = np.zeros((2 * k, 2 * k))
    block[:k, :k] = generator * tau
    block[:k, k:] = weight / scale * tau
    block[k:, k:] = -generator.T * tau
    exponential = matrix_exponential(block)
    growth = exponential[:k, :k]
    integral = exponential[:k, k:] @ growth.T
    for _ in range(halvings):
        integral = integral + growth @ integral @ growth.T
        growth = growth @ growth
    integral = 0.5 * (integral + integral.T)
    return integral * scale


class SwitchingLoop:
    """A loop u = clip(−K x + u₀, low, high), simulated on a grid with the law checked at each point.

    At every grid point each input is classified from its linear law value:
    *free* (within its limits) or *pinned* at its low or high limit. Over the
    following step the pinned inputs are held at their limit, which is exact
    while they stay pinned, and the free inputs follow the linear law
    continuously (continuous plant: exact closed-loop transition of that mode)
    or are held (sampled plant). An input that leaves or returns to its range
    between grid points is noticed at the next grid point: the saturated
    simulation is sampled at the response time step.

    Transition matrices of each pattern of pinned inputs are built on first use
    and cached; a response usually visits two or three patterns.

    Parameters
    ----------
    A, B, K : numpy.ndarray
        Plant (n×n, n×m) and gain (m×n), continuous or sampled.
    law_offset : numpy.ndarray, shape (m,)
        Constant part u₀ of the law (N r for a reference step).
    forcing : numpy.ndarray, shape (n,)
        Constant forcing outside the inputs (E d for a disturbance step).
    low, high : numpy.ndarray, shape (m,)
        Actuator limits.
    time_step : float
        Grid spacing in seconds (the sample time for a sampled plant).
    sampled : bool
        Whether A, B are a sampled plant.
    """

    def __init__(self, A, B, K, law_offset, forcing, low, high, time_step, sampled):
        self.A, self.B, self.K = A, B, K
        self.law_offset = law_offset
        self.forcing = forcing
        self.low, self.high = low, high
        self.time_step = time_step
        self.sampled = sampled
        self._middle = 0.5 * (high + low)
        self._half = 0.5 * (high - low)
        self._steps: dict[tuple[int, ...], tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        self._law_rows = -np.asarray(K, dtype=float) / self._half[:, None]
        self._law_constant = (np.asarray(law_offset, dtype=float) - self._middle) / self._half

    # -- one pattern of pinned inputs ------------------------------------------------
    def mode_generator(self, pattern) -> tuple[np.ndarray, np.ndarray]:
        """F = [[A_mode, b_mode], [0, 0]] and G (applied u = G z) for a pattern.

        ``pattern[i]`` is −1 (pinned low), 0 (free) or +1 (pinned high).
        """
        n, m = self.B.shape
        pattern = np.asarray(pattern)
        free = pattern == 0
        pinned_value = np.where(pattern > 0, self.high, self.low)
        loop = self.A - self.B[:, free] @ self.K[free]
        forcing = (
            self.B[:, free] @ self.law_offset[free]
            + self.B[:, ~free] @ pinned_value[~free]
            + self.forcing
        )
        generator = np.zeros((n + 1, n + 1))
        generator[:n, :n] = loop
        generator[:n, n] = forcing
        applied = np.zeros((m, n + 1))
        applied[free, :n] = -self.K[free]
        applied[free, n] = self.law_offset[free]
        applied[~free, n] = pinned_value[~free]
        return generator, applied

    def _step_for(self, pattern: tuple[int, ...]):
        """(record matrix, record shift, augmented one-step map) of a pattern, built on first use."""
        cached = self._steps.get(pattern)
        if cached is not None:
            return cached
        n = self.A.shape[0]
        generator, _ = self.mode_generator(pattern)
        step = augmented_step(generator[:n, :n], generator[:n, n], self.time_step, self.sampled)
        Phi, increment = step[:n, :n], step[:n, n]
        # Carry the scaled law w = (u_law − middle)/half along with x so that one
        # product per step gives both the next state and the next classification.
        law_rows, law_constant = self._law_rows, self._law_constant
        m = self.K.shape[0]
        matrix = np.zeros((n + m, n + m))
        matrix[:n, :n] = Phi
        matrix[n:, :n] = law_rows @ Phi
        shift = np.concatenate([increment, law_rows @ increment + law_constant])
        self._steps[pattern] = (matrix, shift, step)
        return self._steps[pattern]

    @staticmethod
    def _classify(scaled: np.ndarray) -> np.ndarray:
        """−1 / 0 / +1 per input from the scaled law w: pinned low (w < −1), free, pinned high (w > 1)."""
        return (scaled > 1.0).astype(int) - (scaled < -1.0).astype(int)

    # -- simulation ---------------------------------------------------------------------
    #: Shortest run of steps propagated as one segment; shorter runs go step by step.
    _SHORTEST_SEGMENT = 8
    #: Steps taken one by one after a segment that ended within a few steps (a chattering input).
    _STEPWISE_RUN = 32

    def run(self, start, count: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Simulate ``count`` grid points from state ``start``.

        While the pattern of pinned inputs stays the same the loop is linear, so a
        stretch of steps is propagated at once by repeated doubling (a few matrix
        products instead of one Python step per grid point); the stretch is cut at
        the first grid point whose classification differs, and the simulation goes
        on from there with the new pattern. Where the pattern changes every few
        steps (an input chattering at its limit) it steps one grid point at a time.

        Returns
        -------
        states : numpy.ndarray, shape (count, n)
        law : numpy.ndarray, shape (count, m)
            Linear law value −K x + u₀ at each point (before clipping); the
            applied input is ``numpy.clip(law, low, high)``.
        patterns : numpy.ndarray of int, shape (count, m)
            −1 / 0 / +1 per input: pinned low, free, pinned high over the step
            that starts at each grid point (the classification the loop used).
        """
        n, m = self.B.shape
        record = np.empty((count, n + m))
        record[0, :n] = start
        record[0, n:] = self._law_rows @ np.asarray(start, dtype=float) + self._law_constant
        k = 0
        window = 4 * self._SHORTEST_SEGMENT
        with np.errstate(over="ignore", invalid="ignore"):
            while k < count - 1:
                length = min(window, count - 1 - k)
                if length < self._SHORTEST_SEGMENT:
                    k = self._run_stepwise(record, k, count - 1 - k)
                    break
                taken = self._run_segment(record, k, length)
                k += taken
                if taken < length:  # the pattern changed inside the stretch
                    window = max(4 * self._SHORTEST_SEGMENT, 2 * taken)
                    if taken < 4 and k < count - 1:
                        k = self._run_stepwise(record, k, min(self._STEPWISE_RUN, count - 1 - k))
                else:
                    window *= 2
        scaled = record[:, n:]
        patterns = self._classify(scaled)
        law = scaled * self._half + self._middle
        return record[:, :n].copy(), law, patterns

    def _run_segment(self, record: np.ndarray, k: int, length: int) -> int:
        """Propagate up to ``length`` steps from row k under row k's pattern; return the steps kept."""
        n = self.A.shape[0]
        current = record[k]
        pattern = self._classify(current[n:])
        _, _, step = self._step_for(tuple(pattern.tolist()))
        start = np.empty(n + 1)
        start[:n] = current[:n]
        start[n] = 1.0
        block = propagate_many(step, start[None, :], length + 1)[1:, 0, :n]
        scaled = block @ self._law_rows.T + self._law_constant
        # rows stay valid up to and including the first one whose classification differs
        differs = np.any(self._classify(scaled) != pattern, axis=1)
        taken = int(differs.argmax()) + 1 if differs.any() else length
        record[k + 1 : k + 1 + taken, :n] = block[:taken]
        record[k + 1 : k + 1 + taken, n:] = scaled[:taken]
        return taken

    def _run_stepwise(self, record: np.ndarray, k: int, steps: int) -> int:
        """Take ``steps`` single steps from row k (one small product each); return the new row index."""
        n = self.A.shape[0]
        m = self.K.shape[0]
        free = (0,) * m
        dot = np.dot
        step_for = self._step_for
        cached = self._steps
        free_matrix, free_shift, _ = step_for(free)
        # A plain loop: each step is one small matrix product and a few float
        # comparisons (about 2 µs), which beats any vectorised scheme while the
        # pattern of pinned inputs changes every few steps.
        for j in range(k, k + steps):
            current = record[j]
            scaled_law = current[n:].tolist()
            if max(scaled_law) > 1.0 or min(scaled_law) < -1.0:
                pattern = tuple(1 if w > 1.0 else (-1 if w < -1.0 else 0) for w in scaled_law)
                matrix, shift, _ = cached.get(pattern) or step_for(pattern)
            else:
                matrix, shift = free_matrix, free_shift
            following = record[j + 1]
            dot(matrix, current, out=following)
            following += shift
        return k + steps
