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
    "energy_projections",
    "projected_energies",
    "step_energies",
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

    Examples
    --------
    >>> propagate_many(np.array([[0.5, 1.0], [0.0, 1.0]]), [[1.0, 0.0], [0.0, 1.0]], 3)[:, :, 0].T.tolist()
    [[1.0, 0.5, 0.25], [0.0, 1.0, 1.5]]
    """
    starts = np.asarray(starts, dtype=float)
    r, d = starts.shape
    trajectory = np.empty((count, r, d))
    trajectory[0] = starts
    rows = trajectory.reshape(count * r, d)  # row k·r + j is z_j[k]
    filled = 1
    power = step
    with np.errstate(over="ignore", invalid="ignore"):
        while filled < count:
            take = min(filled, count - filled)
            np.matmul(rows[: take * r], power.T, out=rows[filled * r : (filled + take) * r])
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


#: Taylor terms of e^{Fτ} summed by :func:`energy_projections`.
_ENERGY_TERMS = 32
#: Growth bounds θ (‖(Fτ)^a‖₁ ≤ θ^a for the later terms) served by a stored factor of the
#: Taylor Gram matrix; a step whose bound exceeds the largest is halved until it does not.
#: With θ ≤ 2 the terms left out sum to at most 2³²/32! ≈ 2·10⁻²⁶ of the leading one.
_ENERGY_GROWTHS = (0.25, 0.5, 1.0, 2.0)
#: Most halvings of the step served by the projected form (2^k blocks of columns); beyond,
#: the weights are built by :func:`integral_of_quadratic`.
_ENERGY_MOST_HALVINGS = 4


def _taylor_product_factor(growth: float) -> np.ndarray:
    """Columns R with R Rᵀ ≈ H for Taylor vectors whose a-th term is at most growth^a.

    H_ab = ∫₀¹ s^{a+b} ds / (a! b!) = 1 / ((a + b + 1) a! b!) is the Gram matrix of the
    Taylor terms s^a/a! on [0, 1]. With D = diag(θ^a) the scaled matrix D H D has
    eigenvalues that fall off faster than geometrically; the directions below 10⁻¹⁶ of
    the largest (the rounding level of the eigen-decomposition itself) are left out,
    which keeps 5 to 9 of the 32, and R = D⁻¹ V Λ^{1/2}.
    """
    terms = _ENERGY_TERMS
    gram = np.array([[1.0 / ((a + b + 1) * math.factorial(a) * math.factorial(b)) for b in range(terms)]
                     for a in range(terms)])
    scale = growth ** np.arange(terms)
    values, vectors = np.linalg.eigh(scale[:, None] * gram * scale[None, :])
    values, vectors = values[::-1], vectors[:, ::-1]
    keep = values >= 1e-16 * values[0]
    return vectors[:, keep] * np.sqrt(values[keep]) / scale[:, None]


_TAYLOR_PRODUCT_FACTORS = {growth: _taylor_product_factor(growth) for growth in _ENERGY_GROWTHS}


def _power_growth(matrix: np.ndarray) -> float:
    """α with ‖M^a‖₁ ≤ α^a for every a ≥ 20: min(‖M‖₁, α₂ … α₅), α_p = max(‖M^p‖^{1/p}, ‖M^{p+1}‖^{1/(p+1)}).

    Al-Mohy & Higham, "A new scaling and squaring algorithm for the matrix
    exponential", SIAM J. Matrix Anal. Appl. 31(3), 2009, Theorem 4.2 (valid for
    a ≥ p(p − 1)): much closer to the spectral radius than ‖M‖₁ for a non-normal M,
    so a step is not cut into more pieces than the series needs.
    """
    norm = float(np.abs(matrix).sum(axis=0).max())
    # the powers pay off when they can spare a halving, or a few projection columns of a
    # long trajectory of a large state
    if norm <= _ENERGY_GROWTHS[0] or (norm <= _ENERGY_GROWTHS[-1] and matrix.shape[0] < 16):
        return norm
    # M², …, M⁶ into one block, whose 1-norms are then read in one pass
    powers = np.empty((5, *matrix.shape))
    np.matmul(matrix, matrix, out=powers[0])
    for j in range(1, 5):
        np.matmul(powers[j - 1], matrix, out=powers[j])
    norms = np.abs(powers, out=powers).sum(axis=1).max(axis=1).tolist()
    roots = {p: norms[p - 2] ** (1.0 / p) for p in range(2, 7)}
    return min(norm, *(max(roots[p], roots[p + 1]) for p in (2, 3, 4, 5)))


def _energy_generator(loop, forcings, applied, time_step):
    """(F̂, Ĝ, scales, halvings, θ): the generator and input map with the constant states rescaled.

    Powers of two bring each forcing column to the size of the loop (an exact rescaling
    z = S ẑ, only ever shrinking a column); the step is to be cut into 2^halvings
    pieces, after which the powers of F̂τ grow at most like θ^a. ``halvings`` is None
    when the generator is not finite.
    """
    n, r = forcings.shape
    d = n + r
    loop_size = float(np.abs(loop).sum(axis=0).max()) if n else 0.0
    scales = np.ones(d)
    smallest = _ENERGY_GROWTHS[0]
    for j, size in enumerate(np.abs(forcings).sum(axis=0).tolist()):
        if size > loop_size and size * time_step > smallest:
            scales[n + j] = 2.0 ** math.floor(math.log2(max(loop_size, smallest / time_step) / size))
    generator = np.zeros((d, d))
    generator[:n, :n] = loop
    generator[:n, n:] = forcings * scales[n:]
    with np.errstate(over="ignore", invalid="ignore"):
        growth = _power_growth(generator * time_step)
    if not math.isfinite(growth):
        return generator, applied * scales, scales, None, None
    largest = _ENERGY_GROWTHS[-1]
    halvings = max(0, math.ceil(math.log2(growth / largest))) if growth > largest else 0
    growth /= 2.0**halvings
    bound = next(theta for theta in _ENERGY_GROWTHS if growth <= theta)
    return generator, applied * scales, scales, halvings, bound


def energy_projections(loop, forcings, applied, time_step: float) -> np.ndarray | None:
    """Projections L_i (columns) with Q_i = L_i L_iᵀ = ∫₀ʰ e^{Fᵀτ} g_iᵀ g_i e^{Fτ} dτ.

    The loop is z' = F z with F = [[loop, forcings], [0, 0]] (state z = [x; e], e the
    constant states that carry the forcings) and the inputs are u = G z (``applied``).
    Over one step started at z[k] the energy of input i is z[k]ᵀ Q_i z[k] =
    ‖L_iᵀ z[k]‖²: summed over the steps, the exact input energy of a continuous loop.

    With c_a = (τFᵀ)^a g_iᵀ (a few matrix-vector products), e^{Fᵀs} g_iᵀ = Σ_a (s/τ)^a c_a / a!,
    so Q_i = τ C H Cᵀ with the fixed matrix H_ab = 1/((a+b+1) a! b!) and C = [c_0 … c_31]
    (the series summed far below rounding while the powers of Fτ grow at most like 2^a,
    see :func:`_power_growth`); H is factored once, L_i = √τ C R. Projecting the
    states first and squaring afterwards keeps the rounding error proportional to
    |u| ‖g‖ ‖z‖ rather than (‖g‖ ‖z‖)², where a large constant input nearly cancels the
    feedback term. A longer step is cut into 2^k pieces (columns e^{Fᵀjτ} L_i for
    j < 2^k). Past 2^4 pieces (a step far longer than the loop's time scales) the
    answer is None and :func:`step_energies` weighs the states with
    :func:`integral_of_quadratic` instead.

    Parameters
    ----------
    loop : numpy.ndarray, shape (n, n)
        Closed-loop state matrix (1/s).
    forcings : numpy.ndarray, shape (n, r)
        Constant forcing carried by each of the r constant states.
    applied : numpy.ndarray, shape (m, n + r)
        Rows g_i of the input map u = G z.
    time_step : float
        h in seconds.

    Returns
    -------
    numpy.ndarray, shape (n + r, m, q), or None
        L_i = result[:, i, :], in (input unit)·√s per state unit.
    """
    loop = np.asarray(loop, dtype=float)
    forcings = np.asarray(forcings, dtype=float).reshape(loop.shape[0], -1)
    applied = np.asarray(applied, dtype=float)
    generator, rows, scales, halvings, bound = _energy_generator(loop, forcings, applied, time_step)
    if halvings is None or halvings > _ENERGY_MOST_HALVINGS:
        return None
    d, m = generator.shape[0], rows.shape[0]
    tau = time_step / 2.0**halvings
    # Taylor vectors (τFᵀ)^a g_iᵀ of every input at once, block by block: columns a·m … a·m + m − 1
    # of ``terms`` hold term a, and the terms 2^j … 2^{j+1} − 1 are (τFᵀ)^{2^j} times the first 2^j
    terms = np.empty((d, _ENERGY_TERMS * m))
    terms[:, :m] = rows.T
    power = generator.T * tau
    filled = 1
    while filled < _ENERGY_TERMS:
        take = min(filled, _ENERGY_TERMS - filled)
        np.matmul(power, terms[:, : take * m], out=terms[:, filled * m : (filled + take) * m])
        filled += take
        if filled < _ENERGY_TERMS:
            power = power @ power
    factor = terms.reshape(d, _ENERGY_TERMS, m).transpose(0, 2, 1) @ _TAYLOR_PRODUCT_FACTORS[bound]  # (d, m, q)
    factor *= math.sqrt(tau)
    if halvings:
        growth = matrix_exponential(generator * tau)
        for _ in range(halvings):
            factor = np.concatenate([factor, (growth.T @ factor.reshape(d, -1)).reshape(factor.shape)], axis=2)
            growth = growth @ growth
    return factor / scales[:, None, None]


#: Rows projected at a time by :func:`projected_energies`: small enough that the scratch
#: block stays in cache and never needs fresh pages from the operating system.
_PROJECTION_ROWS = 512


def projected_energies(points, projections: np.ndarray, steps: int | None = None) -> np.ndarray:
    """Σₖ ‖L_iᵀ z[k]‖² over k < ``steps`` for each input i and each trajectory (see :func:`energy_projections`).

    Parameters
    ----------
    points : numpy.ndarray, shape (N, R, d)
        Augmented states of R trajectories side by side (as from :func:`propagate_many`);
        the first ``steps`` of each start a step.
    projections : numpy.ndarray, shape (d, m, q)
    steps : int, optional
        How many leading states of each trajectory count (default all N).

    Returns
    -------
    numpy.ndarray, shape (R, m)
        Energies in (input unit)²·s.
    """
    count, responses, d = points.shape
    steps = count if steps is None else steps
    m = projections.shape[1]
    columns = projections.reshape(d, -1)
    sums = np.zeros((responses, columns.shape[1]))
    # a block of time steps at a time through one scratch block (no fresh pages for a long run)
    span = max(1, _PROJECTION_ROWS // responses)
    block = np.empty((min(steps, span) * responses, columns.shape[1]))
    for low in range(0, steps, span):
        high = min(low + span, steps)
        rows = points[low:high].reshape(-1, d)
        projected = np.matmul(rows, columns, out=block[: rows.shape[0]]).reshape(high - low, responses, -1)
        sums += np.einsum("krj,krj->rj", projected, projected)
    return sums.reshape(responses, m, -1).sum(axis=2)


def step_energies(loop, forcings, applied, time_step: float, points) -> np.ndarray:
    """Σₖ ∫₀ʰ u_i(t_k + τ)² dτ of every input over steps started at the rows of ``points``.

    The loop is z' = F z with F = [[loop, forcings], [0, 0]] and u = G z (see
    :func:`energy_projections`, which does the work); exact for a continuous loop.

    Parameters
    ----------
    loop : numpy.ndarray, shape (n, n)
        Closed-loop state matrix (1/s).
    forcings : numpy.ndarray, shape (n, r)
        Constant forcing carried by each of the r constant states.
    applied : numpy.ndarray, shape (m, n + r)
        Rows g_i of the input map u = G z.
    time_step : float
        h in seconds.
    points : numpy.ndarray, shape (N, n + r)
        Augmented states at the starts of the steps.

    Returns
    -------
    numpy.ndarray, shape (m,)
        Energies in (input unit)²·s.

    Examples
    --------
    >>> # u = x with x' = −x from x = 1: ∫₀¹ e^{−2τ} dτ = (1 − e^{−2})/2
    >>> energy = step_energies(np.array([[-1.0]]), np.zeros((1, 0)), np.array([[1.0]]), 1.0, np.array([[1.0]]))
    >>> bool(abs(energy[0] - (1.0 - math.exp(-2.0)) / 2.0) < 1e-15)
    True
    """
    loop = np.asarray(loop, dtype=float)
    forcings = np.asarray(forcings, dtype=float).reshape(loop.shape[0], -1)
    applied = np.asarray(applied, dtype=float)
    points = np.asarray(points, dtype=float)
    m = applied.shape[0]
    if points.shape[0] == 0:
        return np.zeros(m)
    projections = energy_projections(loop, forcings, applied, time_step)
    if projections is not None:
        return projected_energies(points[:, None, :], projections)[0]
    generator, rows, scales, halvings, _ = _energy_generator(loop, forcings, applied, time_step)
    if halvings is None:
        return np.full(m, np.nan)
    # a step far longer than the loop's time scales: weights by block exponentials with doubling
    generator_t = generator.T
    weights = np.stack([integral_of_quadratic(generator_t, np.outer(row, row), time_step) for row in rows])
    weights = weights / np.multiply.outer(scales, scales)
    return np.einsum("ijk,jk->i", weights, points.T @ points)


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
    and cached; a response usually visits two or three patterns. The forcing enters
    a pattern's transition only through Ψ f (see below), so several loops of one
    design (the responses, which differ only in u₀ and the outside forcing) can share
    one ``transitions`` cache of (Φ, Ψ) per pattern.

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
    transitions : dict, optional
        Cache of (Φ, Ψ) per pattern, x[k+1] = Φ x[k] + Ψ f for a constant forcing f,
        to share between loops with the same A, B, K, limits and time step.
    """

    def __init__(self, A, B, K, law_offset, forcing, low, high, time_step, sampled, transitions=None):
        self.A, self.B, self.K = A, B, K
        self.law_offset = law_offset
        self.forcing = forcing
        self.low, self.high = low, high
        self.time_step = time_step
        self.sampled = sampled
        self._middle = 0.5 * (high + low)
        self._half = 0.5 * (high - low)
        self._steps: dict[tuple[int, ...], tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
        self._transitions = {} if transitions is None else transitions
        self._powers: dict[tuple[int, ...], list[np.ndarray]] = {}
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

    def _transition(self, pattern: tuple[int, ...]) -> tuple[np.ndarray, np.ndarray]:
        """(Φ, Ψ) of a pattern: x[k+1] = Φ x[k] + Ψ f over one step with the constant forcing f.

        Continuous: Φ = e^{A_mode h}, Ψ = ∫₀ʰ e^{A_mode τ} dτ, both from one exponential
        of [[A_mode, I], [0, 0]] h (Van Loan 1978). Sampled: Φ = A_mode, Ψ = I.
        """
        cached = self._transitions.get(pattern)
        if cached is None:
            n = self.A.shape[0]
            free = np.array(pattern) == 0
            loop = self.A - self.B[:, free] @ self.K[free]
            if self.sampled:
                cached = (loop, np.eye(n))
            else:
                block = np.zeros((2 * n, 2 * n))
                block[:n, :n] = loop * self.time_step
                block[:n, n:] = np.eye(n) * self.time_step
                exponential = matrix_exponential(block)
                cached = (exponential[:n, :n].copy(), exponential[:n, n:].copy())
            self._transitions[pattern] = cached
        return cached

    def _step_for(self, pattern: tuple[int, ...]):
        """(record matrix, record shift, augmented one-step map) of a pattern, built on first use."""
        cached = self._steps.get(pattern)
        if cached is not None:
            return cached
        n = self.A.shape[0]
        # constant forcing of the pattern: u₀ on the free inputs, the limits on the pinned ones
        held = np.where(np.array(pattern) > 0, self.high, np.where(np.array(pattern) < 0, self.low, self.law_offset))
        Phi, integral = self._transition(pattern)
        increment = integral @ (self.B @ held + self.forcing)
        step = np.zeros((n + 1, n + 1))
        step[:n, :n] = Phi
        step[:n, n] = increment
        step[n, n] = 1.0
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
        # A stretch is tried over at least as many steps as cost about as much as a few numpy
        # calls (all of them for a small loop): a stretch that ends early costs the rows
        # computed past its end, a short window costs a restart.
        cheap = max(4 * self._SHORTEST_SEGMENT, 120_000 // (n + 1) ** 2)
        window = cheap
        with np.errstate(over="ignore", invalid="ignore"):
            while k < count - 1:
                length = min(window, count - 1 - k)
                if length < self._SHORTEST_SEGMENT:
                    k = self._run_stepwise(record, k, count - 1 - k)
                    break
                taken = self._run_segment(record, k, length)
                k += taken
                if taken < length:  # the pattern changed inside the stretch
                    window = max(cheap, 2 * taken)
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
        key = tuple(pattern.tolist())
        _, _, step = self._step_for(key)
        # repeated doubling as in propagate_many, with the powers of the step kept per pattern
        powers = self._powers.setdefault(key, [step])
        states = np.empty((length + 1, n + 1))
        states[0, :n] = current[:n]
        states[0, n] = 1.0
        filled, level = 1, 0
        while filled <= length:
            take = min(filled, length + 1 - filled)
            if level == len(powers):
                powers.append(powers[-1] @ powers[-1])
            np.matmul(states[:take], powers[level].T, out=states[filled : filled + take])
            filled += take
            level += 1
        block = states[1:, :n]
        scaled = block @ self._law_rows.T + self._law_constant
        # rows stay valid up to and including the first one whose classification differs
        if len(key) == 1:
            w = scaled[:, 0]
            differs = (w > 1.0) | (w < -1.0) if key[0] == 0 else ~(w > 1.0) if key[0] > 0 else ~(w < -1.0)
        else:
            differs = np.any(self._classify(scaled) != pattern, axis=1)
        first_change = int(differs.argmax())
        taken = first_change + 1 if differs[first_change] else length
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
